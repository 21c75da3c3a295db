//! Moment route against the batched row pass, same grid, same process, same thread pool.
//!
//! Seeded invented design (a cooperative's orchard table): n rows, p union columns (an intercept
//! and p − 1 correlated regressors), one outcome, one clustering code with G levels; `models`
//! random models of 5–20 columns (intercept always in), HC1 and one-way cluster-robust errors,
//! one tracked coefficient each. For each n in SPECGRID_BENCH_NS:
//! - moment route: a first call on one model (the one-off build of the moments plus that
//!   model), then the whole grid on the same factor (moments cached): marginal cost per model
//!   = grid time / models, fixed cost = first call − one marginal;
//! - row pass: the first `direct` models (all when SPECGRID_BENCH_DIRECT ≥ models), marginal
//!   cost per model = time / direct;
//! - both routes must agree on the compared models (relative 1e-8 on SEs).
//!
//! Sizes: SPECGRID_BENCH_NS (100000,1000000), SPECGRID_BENCH_P (40), SPECGRID_BENCH_MODELS
//! (2000), SPECGRID_BENCH_DIRECT (400), SPECGRID_BENCH_G (150).
//!
//! Run: cargo bench -p specgrid-ols --bench moments

use std::time::Instant;

use faer::Mat;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use specgrid_ols::{ClusterIds, Covariance, CovarianceRoute, Design, FitOptions, SharedFactor};

mod common;

fn env(name: &str, default: usize) -> usize {
    std::env::var(name)
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

fn design(n: usize, p: usize, g: usize, rng: &mut ChaCha8Rng) -> Design {
    let mut normal = || -> f64 { StandardNormal.sample(rng) };
    let shock: Vec<f64> = (0..g).map(|_| normal()).collect();
    let codes: Vec<u32> = (0..n).map(|i| ((i * 7919 + i / 13) % g) as u32).collect();
    let common: Vec<f64> = (0..n).map(|_| normal()).collect();
    let x = Mat::from_fn(n, p, |i, j| {
        if j == 0 {
            1.0
        } else {
            10.0 * j as f64 + 0.4 * common[i] + normal() * (1.0 + j as f64 / 10.0)
        }
    });
    let y = Mat::from_fn(n, 1, |i, _| {
        let signal: f64 = (1..p.min(8)).map(|j| x[(i, j)] / j as f64).sum();
        1.0 + signal + (1.0 + x[(i, 1)].abs() / 10.0) * normal() + shock[codes[i] as usize]
    });
    Design {
        x,
        y,
        x_names: (0..p).map(|j| format!("x{j}")).collect(),
        y_names: vec!["harvest".into()],
        clusters: vec![ClusterIds {
            name: "village".into(),
            codes,
            count: g,
        }],
    }
}

fn main() {
    let ns: Vec<usize> = std::env::var("SPECGRID_BENCH_NS")
        .unwrap_or_else(|_| "100000,1000000".into())
        .split(',')
        .filter_map(|v| v.trim().parse().ok())
        .collect();
    let p = env("SPECGRID_BENCH_P", 40).max(21);
    let count = env("SPECGRID_BENCH_MODELS", 2_000).max(1);
    let direct = env("SPECGRID_BENCH_DIRECT", 400).clamp(1, count);
    let g = env("SPECGRID_BENCH_G", 150).max(2);
    let opts = FitOptions {
        covariances: vec![Covariance::Hc1, Covariance::Cluster { dim: 0 }],
        ..FitOptions::default()
    };
    println!(
        "p = {p}, {count} models of 5–20 columns, HC1 + cluster-robust on {g} clusters, one tracked coefficient; {} rayon threads",
        rayon::current_num_threads()
    );
    println!(
        "{:>9} | {:>10} {:>14} | {:>14} | {:>8} | {:>9}",
        "rows", "fixed (s)", "moment ms/mdl", "direct ms/mdl", "ratio", "fallbacks"
    );
    let mut rows = Vec::new();
    for &n in &ns {
        let mut rng = ChaCha8Rng::seed_from_u64(2026);
        let design = design(n, p, g, &mut rng);
        let models = common::random_models(count, p, 5..=20, &mut rng);

        let mut factor = SharedFactor::new(&design).expect("valid design");
        factor.set_covariance_route(CovarianceRoute::Moments);
        let t0 = Instant::now();
        factor.fit_many(&models[..1], &opts);
        let first = t0.elapsed().as_secs_f64();
        let t1 = Instant::now();
        let by_moments = factor.fit_many(&models, &opts);
        let grid = t1.elapsed().as_secs_f64();
        let marginal_m = grid / count as f64;
        let fixed = first - marginal_m;
        let stats = factor.moment_stats();

        let mut plain = SharedFactor::new(&design).expect("valid design");
        plain.set_covariance_route(CovarianceRoute::Direct);
        let t2 = Instant::now();
        let by_rows = plain.fit_many(&models[..direct], &opts);
        let marginal_d = t2.elapsed().as_secs_f64() / direct as f64;
        let worst = common::worst_se_difference(&by_moments[..direct], &by_rows);
        println!(
            "{n:>9} | {fixed:>10.3} {:>14.4} | {:>14.3} | {:>7.0}x | {:>9}",
            marginal_m * 1e3,
            marginal_d * 1e3,
            marginal_d / marginal_m,
            stats.fallbacks
        );
        println!(
            "          grid of {count}: moments {:.2} s (fixed included), row pass {:.2} s ({} models timed, scaled); worst SE difference {worst:.1e}",
            fixed + grid,
            marginal_d * count as f64,
            direct
        );
        assert!(worst <= 1e-8, "routes disagree: {worst:e}");
        rows.push((n, fixed, marginal_m, marginal_d));
    }
    if let (Some(a), Some(b)) = (rows.first(), rows.last()) {
        if b.0 > a.0 {
            println!(
                "rows ×{:.0}: moment marginal cost ×{:.2}, row-pass marginal cost ×{:.2}, fixed cost ×{:.2}",
                b.0 as f64 / a.0 as f64,
                b.2 / a.2,
                b.3 / a.3,
                b.1 / a.1
            );
        }
    }
}
