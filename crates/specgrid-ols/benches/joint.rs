//! The joint curve test (outcome-only refits on the shared factor) against the naive route it
//! replaces: one fresh grid fit (factorisation + every model) per bootstrap draw.
//!
//! Seeded invented design (tests/support's generator): n rows, an intercept, 25 continuous
//! regressors and a 4-level factor (30 union columns, one redundant indicator), two outcomes;
//! `models` curve models, each with the intercept, the focus (column 1) and 3–13 other columns,
//! outcome 0, classical errors. Measured in the same process: the fastest of `reps` fresh grid
//! fits (SharedFactor::new + fit_many), scaled ×draws (the naive route: refit the grid per
//! draw), and one joint test with `draws` draws on top of the curve's own fit.
//! Sizes from the environment: SPECGRID_BENCH_N (10000), SPECGRID_BENCH_MODELS (1000),
//! SPECGRID_BENCH_DRAWS (500), SPECGRID_BENCH_REPS (3).
//!
//! Run: cargo bench -p specgrid-ols --bench joint

#[path = "../tests/support/mod.rs"]
mod support;

use std::time::Instant;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use specgrid_ols::inference::{joint_curve_test_from_fits, CurveModel, JointOptions};
use specgrid_ols::{Covariance, FitOptions, ModelSpec, SharedFactor};

fn size(name: &str, default: usize) -> usize {
    std::env::var(name)
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

fn curve_models(count: usize, p: usize, seed: u64) -> Vec<CurveModel> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    (0..count)
        .map(|_| {
            let extra = rng.random_range(3..=13usize);
            let mut columns = vec![0, 1];
            while columns.len() < 2 + extra {
                let c = rng.random_range(2..p);
                if !columns.contains(&c) {
                    columns.push(c);
                }
            }
            CurveModel::tracking(columns, 0, 1)
        })
        .collect()
}

fn main() {
    let n = size("SPECGRID_BENCH_N", 10_000);
    let count = size("SPECGRID_BENCH_MODELS", 1_000);
    let draws = size("SPECGRID_BENCH_DRAWS", 500);
    let reps = size("SPECGRID_BENCH_REPS", 3).max(1);
    let design = support::random_design(2026, n, 25, 4, 200, 40);
    let p = design.x.ncols();
    let models = curve_models(count, p, 2027);
    let specs: Vec<ModelSpec> = models.iter().map(|m| m.spec.clone()).collect();
    let opts = FitOptions {
        covariances: vec![Covariance::Classical],
        ..FitOptions::default()
    };
    println!(
        "design n = {n}, p = {p}; {count} curve models of 5–15 columns, classical errors; {draws} draws; {} rayon threads",
        rayon::current_num_threads()
    );
    let mut t_grid = f64::INFINITY;
    for rep in 0..reps {
        let t0 = Instant::now();
        let factor = SharedFactor::new(&design).expect("valid design");
        let fits = factor.fit_many(&specs, &opts);
        let t = t0.elapsed().as_secs_f64();
        assert!(fits.iter().all(Result::is_ok));
        println!("  fresh grid fit {}: {t:.3} s", rep + 1);
        t_grid = t_grid.min(t);
    }
    // The curve's own fit comes first in a real run; the joint test then reuses its factor
    // (kept basis) and its fits.
    let t0 = Instant::now();
    let factor = SharedFactor::new_for_refits(&design).expect("valid design");
    let fits = factor.fit_many(&specs, &opts);
    let t_curve = t0.elapsed().as_secs_f64();
    let test = joint_curve_test_from_fits(
        &factor,
        &models,
        &fits,
        &JointOptions {
            draws,
            ..JointOptions::default()
        },
    )
    .expect("joint test");
    let t_joint = t0.elapsed().as_secs_f64() - t_curve;
    println!("curve fit with the kept basis: {t_curve:.3} s");
    assert_eq!(test.models_used, count);
    assert_eq!(test.draws, draws);
    let naive = t_grid * draws as f64;
    println!(
        "joint test: {t_joint:.2} s for {draws} draws × {count} models (p-values: median {:.3}, share {:.3}, Stouffer {:.3})",
        test.p_median, test.p_share, test.p_stouffer
    );
    println!("one fresh grid fit: {t_grid:.3} s; × {draws} draws = {naive:.1} s");
    println!("ratio (naive / joint): {:.1}x", naive / t_joint);
}
