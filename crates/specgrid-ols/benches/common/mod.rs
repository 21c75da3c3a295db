//! Model grids shared by the engine benchmarks (seeded, invented).

// Not every bench uses every helper.
#![allow(dead_code)]

use faer::Mat;
use rand::Rng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use specgrid_ols::{Design, ModelError, ModelFit, ModelSpec};

/// An invented design of n rows: an intercept and p − 1 regressors correlated through one
/// common factor, and one outcome whose noise grows with the first regressor.
pub fn plain_design(n: usize, p: usize, rng: &mut ChaCha8Rng) -> Design {
    let mut normal = || -> f64 { StandardNormal.sample(rng) };
    let common: Vec<f64> = (0..n).map(|_| normal()).collect();
    let x = Mat::from_fn(n, p, |i, j| {
        if j == 0 {
            1.0
        } else {
            0.4 * common[i] + normal() * (1.0 + j as f64 / 10.0)
        }
    });
    let y = Mat::from_fn(n, 1, |i, _| {
        let signal: f64 = (1..p.min(8)).map(|j| x[(i, j)] / j as f64).sum();
        1.0 + signal + (1.0 + x[(i, 1)].abs()) * normal()
    });
    Design {
        x,
        y,
        x_names: (0..p).map(|j| format!("x{j}")).collect(),
        y_names: vec!["y".into()],
        clusters: vec![],
    }
}

/// Largest relative difference of the standard errors between two sets of fits of the same
/// models (every fit must have succeeded).
pub fn worst_se_difference(
    a: &[Result<ModelFit, ModelError>],
    b: &[Result<ModelFit, ModelError>],
) -> f64 {
    let mut worst: f64 = 0.0;
    for (x, y) in a.iter().zip(b) {
        let (x, y) = (x.as_ref().expect("fit"), y.as_ref().expect("fit"));
        for (cx, cy) in x.coefficients.iter().zip(&y.coefficients) {
            for (ix, iy) in cx.inference.iter().zip(&cy.inference) {
                let (s, t) = (ix.std_error, iy.std_error);
                worst = worst.max((s - t).abs() / s.abs().max(t.abs()));
            }
        }
    }
    worst
}

/// `count` models on outcome 0: the intercept (column 0) and distinct random columns from
/// 1..p up to a random size in `sizes`, tracking the first non-intercept column.
pub fn random_models(
    count: usize,
    p: usize,
    sizes: std::ops::RangeInclusive<usize>,
    rng: &mut ChaCha8Rng,
) -> Vec<ModelSpec> {
    (0..count)
        .map(|_| {
            let k = rng.random_range(sizes.clone()).min(p);
            let mut cols = vec![0];
            while cols.len() < k {
                let c = rng.random_range(1..p);
                if !cols.contains(&c) {
                    cols.push(c);
                }
            }
            let tracked = vec![cols[1]];
            ModelSpec {
                columns: cols,
                outcome: 0,
                tracked,
            }
        })
        .collect()
}
