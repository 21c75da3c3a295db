//! The pass over rows with dense products over every union column against loops over each
//! model's own columns (`RowProducts`), same grid, same process, alternating runs.
//!
//! Seeded invented design (an orchard table): n rows, p union columns (an intercept and
//! p − 1 correlated regressors), one outcome; for each model size k, `models` random models of
//! exactly k columns (intercept always in), one tracked coefficient. Two sets of choices:
//! classical + HC1 (influence columns, no leverage) and HC3 (leverage too). Covariance sums
//! always by the row pass (`CovarianceRoute::Direct`). For each case the bench prints the
//! time per model of each way, their ratio, and the ratio of counted multiply-adds (dense over
//! own) that the automatic choice compares with its constant (`OWN_COLUMN_COST` in
//! src/row_pass.rs): the own columns should win wherever that ratio exceeds the constant.
//!
//! Sizes: SPECGRID_BENCH_NS (150,2000,20000), SPECGRID_BENCH_P (61), SPECGRID_BENCH_KS
//! (4,8,16,30,60), SPECGRID_BENCH_WORK (multiply-adds per case, default 4e9 dense).
//!
//! Run: cargo bench -p specgrid-ols --bench row_products

use std::time::Instant;

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use specgrid_ols::{
    Covariance, CovarianceRoute, Design, FitOptions, ModelError, ModelFit, ModelSpec, RowProducts,
    SharedFactor,
};

mod common;

fn list(name: &str, default: &[usize]) -> Vec<usize> {
    std::env::var(name)
        .ok()
        .map(|v| v.split(',').filter_map(|s| s.trim().parse().ok()).collect())
        .unwrap_or_else(|| default.to_vec())
}

type Fits = Vec<Result<ModelFit, ModelError>>;

/// Seconds for one call of `fit_many` with `products`, and its fits.
fn timed(
    design: &Design,
    products: RowProducts,
    models: &[ModelSpec],
    opts: &FitOptions,
) -> (f64, Fits) {
    let mut factor = SharedFactor::new(design).expect("factor");
    factor.set_covariance_route(CovarianceRoute::Direct);
    factor.set_row_products(products);
    let start = Instant::now();
    let fits = factor.fit_many(models, opts);
    (start.elapsed().as_secs_f64(), fits)
}

/// Multiply-adds per row of the two ways for models of k columns out of p, one influence
/// column each (the formula of `Products::choose`).
fn counted_ratio(p: usize, k: usize, leverage: bool) -> f64 {
    let lev_dense = if leverage { k } else { 0 };
    let lev_own = if leverage { k * (k + 1) / 2 } else { 0 };
    (p * (3 + lev_dense)) as f64 / (3 * k + lev_own) as f64
}

fn main() {
    let ns = list("SPECGRID_BENCH_NS", &[150, 2_000, 20_000]);
    let p = list("SPECGRID_BENCH_P", &[61])[0];
    let ks = list("SPECGRID_BENCH_KS", &[4, 8, 16, 30, 60]);
    let work = list("SPECGRID_BENCH_WORK", &[4_000_000_000])[0] as f64;
    let choices = [
        (
            "classical+HC1",
            vec![Covariance::Classical, Covariance::Hc1],
        ),
        ("HC3", vec![Covariance::Hc3]),
    ];
    println!("row pass products: dense over {p} union columns against each model's own columns");
    println!(
        "{:>7} {:>3} {:>14} {:>8} {:>11} {:>11} {:>9} {:>10} {:>9}",
        "rows", "k", "choices", "models", "dense µs", "own µs", "own/dense", "counted", "max diff"
    );
    let mut rng = ChaCha8Rng::seed_from_u64(20261202);
    for &n in &ns {
        let design = common::plain_design(n, p, &mut rng);
        for &k in ks.iter().filter(|&&k| k <= p && k < n) {
            for (label, covariances) in &choices {
                let leverage = matches!(covariances[0], Covariance::Hc3);
                let per_model = n as f64 * (p * (3 + if leverage { k } else { 0 })) as f64;
                let count = ((work / per_model) as usize).clamp(50, 200_000);
                let models = common::random_models(count, p, k..=k, &mut rng);
                let opts = FitOptions {
                    covariances: covariances.clone(),
                    ..FitOptions::default()
                };
                // Alternate the two ways twice and keep each one's faster run.
                let (mut dense, mut own) = (f64::INFINITY, f64::INFINITY);
                let mut diff: f64 = 0.0;
                for _ in 0..2 {
                    let (td, fd) = timed(&design, RowProducts::Dense, &models, &opts);
                    let (to, fo) = timed(&design, RowProducts::OwnColumns, &models, &opts);
                    dense = dense.min(td);
                    own = own.min(to);
                    diff = diff.max(common::worst_se_difference(&fd, &fo));
                }
                assert!(diff < 1e-8, "the two ways disagree: {diff:.1e}");
                println!(
                    "{n:>7} {k:>3} {label:>14} {count:>8} {:>11.2} {:>11.2} {:>9.2} {:>10.1} {diff:>9.1e}",
                    dense / count as f64 * 1e6,
                    own / count as f64 * 1e6,
                    own / dense,
                    counted_ratio(p, k, leverage),
                );
            }
        }
    }
}
