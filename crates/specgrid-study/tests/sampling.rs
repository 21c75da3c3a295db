//! Seeded random samples of the grid: deterministic, the right size, never a skipped model,
//! and uniform (checked against binomial expectations, common practice for testing samplers).

mod common;

use std::collections::HashSet;

use common::{optional_blocks, study, HEADER};
use specgrid_study::plan;

fn blocks_study(blocks: usize, grid: &str, seed: u64) -> String {
    format!(
        "{}[outcome]\ncolumn = \"y\"\n[focus]\ncolumn = \"x\"\n{}[grid]\n{grid}\n",
        HEADER.replace("seed = 7", &format!("seed = {seed}")),
        optional_blocks(blocks)
    )
}

#[test]
fn the_same_seed_draws_the_same_models_in_grid_order() {
    let text = blocks_study(10, "sample = 50\nskip = [{ b0 = \"in\", b1 = \"in\" }]", 11);
    let a = plan(&study(&text)).unwrap();
    let b = plan(&study(&text)).unwrap();
    let ids = |p: &specgrid_study::Plan| p.models.iter().map(|m| m.id.clone()).collect::<Vec<_>>();
    assert_eq!(ids(&a), ids(&b));
    assert_eq!(a.models.len(), 50);
    assert_eq!(a.random_sample, Some(50));
    assert_eq!(a.size_after_exclusions, 1024 - 256);
    // Deterministic order: increasing grid position, i.e. choice vectors in lexicographic order.
    let choices: Vec<_> = a.models.iter().map(|m| m.choices.clone()).collect();
    let mut sorted = choices.clone();
    sorted.sort();
    sorted.dedup();
    assert_eq!(choices, sorted, "sorted and without repeats");
    for m in &a.models {
        assert!(
            !(m.choices[2] == 1 && m.choices[3] == 1),
            "a skipped model was drawn"
        );
    }
    let other = plan(&study(&blocks_study(
        10,
        "sample = 50\nskip = [{ b0 = \"in\", b1 = \"in\" }]",
        12,
    )))
    .unwrap();
    assert_ne!(ids(&a), ids(&other), "another seed draws another sample");
}

#[test]
fn a_sample_at_least_the_grid_size_takes_the_whole_grid() {
    let p = plan(&study(&blocks_study(3, "sample = 100", 1))).unwrap();
    assert_eq!(p.models.len(), 8);
    assert_eq!(p.random_sample, None);
}

#[test]
fn draws_from_a_small_grid_are_uniform() {
    // 16 models, 4 drawn, 2000 seeds: each model is drawn Binomial(2000, 1/4) times,
    // mean 500, sd ≈ 19.4; allow 5 sd.
    let mut counts = [0u32; 16];
    for seed in 0..2000u64 {
        let p = plan(&study(&blocks_study(4, "sample = 4", seed))).unwrap();
        assert_eq!(p.models.len(), 4);
        for m in &p.models {
            let index = m.choices[2..6].iter().fold(0, |acc, &c| acc * 2 + c);
            counts[index] += 1;
        }
    }
    for (i, &c) in counts.iter().enumerate() {
        assert!(
            (c as f64 - 500.0).abs() < 5.0 * 19.4,
            "model {i} drawn {c} times"
        );
    }
}

#[test]
fn draws_from_a_huge_grid_avoid_skips_and_are_uniform_on_what_is_kept() {
    // 2^40 models; rule b0=in & b1=in skips a quarter. Among kept models, (b0, b1) is
    // (out,out), (out,in) or (in,out) with equal chance, so b0 = in has probability 1/3.
    // 3000 draws: mean 1000, sd = sqrt(3000 · 1/3 · 2/3) ≈ 25.8; allow 5 sd.
    let text = blocks_study(
        40,
        "sample = 3000\nlimit = 3000\nskip = [{ b0 = \"in\", b1 = \"in\" }]",
        5,
    );
    let p = plan(&study(&text)).unwrap();
    assert_eq!(p.size_before_exclusions, 1u128 << 40);
    assert_eq!(p.size_after_exclusions, 3 * (1u128 << 38));
    assert_eq!(p.models.len(), 3000);
    let ids: HashSet<&str> = p.models.iter().map(|m| m.id.as_str()).collect();
    assert_eq!(ids.len(), 3000, "no model drawn twice");
    let b0_in = p.models.iter().filter(|m| m.choices[2] == 1).count() as f64;
    assert!(p
        .models
        .iter()
        .all(|m| !(m.choices[2] == 1 && m.choices[3] == 1)));
    assert!((b0_in - 1000.0).abs() < 5.0 * 25.8, "b0 in {b0_in} times");
    // A free block is in half the time: mean 1500, sd ≈ 27.4.
    let b20_in = p.models.iter().filter(|m| m.choices[22] == 1).count() as f64;
    assert!(
        (b20_in - 1500.0).abs() < 5.0 * 27.4,
        "b20 in {b20_in} times"
    );
}

#[test]
fn a_sample_past_the_limit_is_refused() {
    let problems = plan(&study(&blocks_study(20, "sample = 500\nlimit = 100", 1))).unwrap_err();
    assert!(
        problems[0].message.contains("more than the limit of 100"),
        "{}",
        problems[0]
    );
    assert!(problems[0]
        .hint
        .as_deref()
        .unwrap()
        .contains("lower `sample`"));
}

#[test]
fn sampling_a_huge_grid_that_skip_rules_nearly_empty_still_works() {
    // 2^40 models; twelve rules skip every model with any of b0..b11 in, keeping 2^28
    // (a share of 2^-12): draws come from the kept part directly, not by trial and error.
    let rules: Vec<String> = (0..12).map(|i| format!("{{ b{i} = \"in\" }}")).collect();
    let text = blocks_study(
        40,
        &format!("sample = 10\nskip = [{}]", rules.join(", ")),
        1,
    );
    let p = plan(&study(&text)).unwrap();
    assert_eq!(p.size_after_exclusions, 1u128 << 28);
    assert_eq!(p.models.len(), 10);
    for m in &p.models {
        assert!(
            m.choices[2..14].iter().all(|&c| c == 0),
            "a skipped model was drawn"
        );
    }
}

#[test]
fn a_huge_grid_that_skip_rules_shrink_below_the_limit_is_planned_in_full() {
    // 2^60 models; fifty rules skip any model with one of b0..b49 in: 2^10 = 1024 remain,
    // under the default limit, so all are planned without walking the 2^60 grid.
    let rules: Vec<String> = (0..50).map(|i| format!("{{ b{i} = \"in\" }}")).collect();
    let text = blocks_study(60, &format!("skip = [{}]", rules.join(", ")), 1);
    let p = plan(&study(&text)).unwrap();
    assert_eq!(p.size_before_exclusions, 1u128 << 60);
    assert_eq!(p.size_after_exclusions, 1024);
    assert_eq!(p.models.len(), 1024);
    let ids: HashSet<&str> = p.models.iter().map(|m| m.id.as_str()).collect();
    assert_eq!(ids.len(), 1024);
}
