//! Seeded synthetic designs for the property and formula tests (and the benchmark). Invented
//! numbers: they are inputs only, never check values.
#![allow(dead_code)]

use faer::Mat;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use specgrid_ols::{
    absorb, AbsorbOptions, AbsorbedDesign, ClusterIds, Covariance, Design, FitOptions, ModelFit,
    ModelSpec, RowWeights,
};

/// A design with an intercept, `cont` continuous regressors, a `levels`-level factor as
/// `levels` indicator columns (a full set, so with the intercept one is redundant), two outcomes
/// with heteroskedastic, cluster-correlated errors, and two crossed clustering dimensions.
pub fn random_design(
    seed: u64,
    n: usize,
    cont: usize,
    levels: usize,
    g1: usize,
    g2: usize,
) -> Design {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut normal = || -> f64 { StandardNormal.sample(&mut rng) };
    let p = 1 + cont + levels;
    let mut x = Mat::<f64>::zeros(n, p);
    let c1: Vec<u32> = (0..n).map(|i| ((i * 7 + i / 3) % g1) as u32).collect();
    let c2: Vec<u32> = (0..n).map(|i| ((i * 5 + i / 7) % g2) as u32).collect();
    let shock1: Vec<f64> = (0..g1).map(|_| normal()).collect();
    let shock2: Vec<f64> = (0..g2).map(|_| normal()).collect();
    for i in 0..n {
        x[(i, 0)] = 1.0;
        for j in 0..cont {
            // Different scales and means per column, mildly correlated with the first.
            let base = normal();
            x[(i, 1 + j)] = (j as f64 + 1.0) * (base + 0.3 * x[(i, 1)]) + 2.0 * j as f64;
        }
        let level = (i * 13 + i / 5) % levels;
        x[(i, 1 + cont + level)] = 1.0;
    }
    let mut y = Mat::<f64>::zeros(n, 2);
    for i in 0..n {
        let mut mean = 1.0;
        for j in 0..cont {
            mean += 0.5 / (j as f64 + 1.0) * x[(i, 1 + j)];
        }
        let spread = 1.0 + x[(i, 1)].abs();
        let e = spread * normal() + 0.5 * shock1[c1[i] as usize] + 0.5 * shock2[c2[i] as usize];
        y[(i, 0)] = mean + e;
        y[(i, 1)] = (mean + e).abs().ln_1p() + 0.1 * normal();
    }
    let mut x_names = vec!["one".to_string()];
    x_names.extend((0..cont).map(|j| format!("x{}", j + 1)));
    x_names.extend((0..levels).map(|l| format!("level{}", l + 1)));
    Design {
        x,
        y,
        x_names,
        y_names: vec!["y".into(), "log1p_y".into()],
        clusters: vec![
            ClusterIds {
                name: "orchard".into(),
                codes: c1,
                count: g1,
            },
            ClusterIds {
                name: "adviser".into(),
                codes: c2,
                count: g2,
            },
        ],
    }
}

/// Random models: the intercept (usually), a random subset of the other columns in random
/// order (never all indicators, so nothing is dropped unless `allow_all_levels`), a random
/// outcome and zero to two tracked columns.
pub fn random_models(
    seed: u64,
    design: &Design,
    count: usize,
    cont: usize,
    levels: usize,
) -> Vec<ModelSpec> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let p = design.x.ncols();
    (0..count)
        .map(|_| {
            let mut cols: Vec<usize> = Vec::new();
            if rng.random_bool(0.9) {
                cols.push(0);
            }
            for j in 1..=cont {
                if rng.random_bool(0.6) {
                    cols.push(j);
                }
            }
            for l in 0..levels - 1 {
                if rng.random_bool(0.5) {
                    cols.push(1 + cont + l);
                }
            }
            if cols.len() < 2 {
                cols.push(1);
                cols.dedup();
                if cols.len() < 2 {
                    cols.push(2);
                }
            }
            // Shuffle (Fisher–Yates) so the model order differs from union order.
            for i in (1..cols.len()).rev() {
                let j = rng.random_range(0..=i);
                cols.swap(i, j);
            }
            let tracked = match rng.random_range(0..3) {
                0 => vec![],
                1 => vec![cols[rng.random_range(0..cols.len())]],
                _ => {
                    let a = cols[0];
                    let b = cols[cols.len() - 1];
                    vec![b, a]
                }
            };
            debug_assert!(cols.iter().all(|&c| c < p));
            ModelSpec {
                columns: cols,
                outcome: rng.random_range(0..2),
                tracked,
            }
        })
        .collect()
}

/// |a − b| ≤ rel·max(|a|, |b|) (+ a tiny absolute floor for exact zeros).
pub fn close(a: f64, b: f64, rel: f64) -> bool {
    if a.is_nan() && b.is_nan() {
        return true;
    }
    (a - b).abs() <= rel * a.abs().max(b.abs()) + 1e-300
}

/// Compares two fits field by field; returns the first difference found.
pub fn compare_fits(a: &ModelFit, b: &ModelFit, rel: f64) -> Result<(), String> {
    let scalar = |what: &str, x: f64, y: f64| -> Result<(), String> {
        if close(x, y, rel) {
            Ok(())
        } else {
            Err(format!("{what}: {x:e} vs {y:e}"))
        }
    };
    if a.n_obs != b.n_obs || a.n_params != b.n_params || a.dropped != b.dropped {
        return Err(format!(
            "shape: n {} vs {}, k {} vs {}, dropped {:?} vs {:?}",
            a.n_obs, b.n_obs, a.n_params, b.n_params, a.dropped, b.dropped
        ));
    }
    scalar("resid_sd", a.resid_sd, b.resid_sd)?;
    scalar("r_squared", a.r_squared, b.r_squared)?;
    scalar("adj_r_squared", a.adj_r_squared, b.adj_r_squared)?;
    for (x, y) in a.all_estimates.iter().zip(&b.all_estimates) {
        if x.0 != y.0 {
            return Err("estimate columns differ".into());
        }
        scalar(&format!("estimate {}", x.0), x.1, y.1)?;
    }
    for (x, y) in a.coefficients.iter().zip(&b.coefficients) {
        for (i, j) in x.inference.iter().zip(&y.inference) {
            let what = |f: &str| format!("column {} {:?} {f}", x.column, i.covariance);
            scalar(&what("SE"), i.std_error, j.std_error)?;
            scalar(&what("t"), i.t_stat, j.t_stat)?;
            scalar(&what("df"), i.df, j.df)?;
            scalar(&what("p"), i.p_value, j.p_value)?;
            scalar(&what("CI low"), i.ci_low, j.ci_low)?;
            scalar(&what("CI high"), i.ci_high, j.ci_high)?;
        }
    }
    if a.tracked_covariance.len() != b.tracked_covariance.len() {
        return Err("tracked_covariance: different number of choices".into());
    }
    let t = a.coefficients.len();
    for (ci, (x, y)) in a
        .tracked_covariance
        .iter()
        .zip(&b.tracked_covariance)
        .enumerate()
    {
        if x.len() != t * t || y.len() != t * t {
            return Err(format!("tracked_covariance {ci}: not {t} × {t}"));
        }
        for i in 0..t {
            for j in 0..t {
                // Off-diagonals can be near zero: judge them on the scale sqrt(V_ii·V_jj).
                let scale = (x[i * t + i] * x[j * t + j]).abs().sqrt();
                let (u, v) = (x[i * t + j], y[i * t + j]);
                if (u - v).abs() > rel * scale.max(u.abs()).max(v.abs()) + 1e-300
                    && !(u.is_nan() && v.is_nan())
                {
                    return Err(format!("tracked_covariance {ci} [{i},{j}]: {u:e} vs {v:e}"));
                }
            }
        }
    }
    match (&a.breusch_pagan, &b.breusch_pagan) {
        (Some(x), Some(y)) => {
            scalar("BP statistic", x.statistic, y.statistic)?;
            scalar("BP p", x.p_value, y.p_value)?;
            scalar("BP df", x.df, y.df)?;
        }
        (None, None) => {}
        _ => return Err("Breusch–Pagan present on one side only".into()),
    }
    Ok(())
}

/// Every covariance choice, two-way included.
pub fn all_covariances() -> FitOptions {
    use specgrid_ols::Covariance::*;
    FitOptions {
        covariances: vec![
            Classical,
            Hc0,
            Hc1,
            Hc2,
            Hc3,
            Cluster { dim: 0 },
            Cluster { dim: 1 },
            TwoWayCluster {
                first: 0,
                second: 1,
            },
        ],
        ..FitOptions::default()
    }
}

/// The engine's covariance choice for a statsmodels fixture entry (`kind`, clustering dims), as
/// tests/reference/statsmodels/make_fixtures*.py name them.
pub fn fixture_covariance(kind: &str, dims: &[usize]) -> Covariance {
    match (kind, dims) {
        ("classical", []) => Covariance::Classical,
        ("hc0", []) => Covariance::Hc0,
        ("hc1", []) => Covariance::Hc1,
        ("hc2", []) => Covariance::Hc2,
        ("hc3", []) => Covariance::Hc3,
        ("cluster", [d]) => Covariance::Cluster { dim: *d },
        ("two_way_cluster", [a, b]) => Covariance::TwoWayCluster {
            first: *a,
            second: *b,
        },
        (kind, dims) => panic!("fixture covariance {kind} {dims:?} has no engine counterpart"),
    }
}

/// `base` with 60 village effects absorbed (codes (11i + i/7) mod 60) and optional `weights`.
pub fn with_village_effects(base: &Design, weights: Option<&RowWeights>) -> AbsorbedDesign {
    let n = base.x.nrows();
    let effect = ClusterIds {
        name: "village".into(),
        codes: (0..n).map(|i| ((i * 11 + i / 7) % 60) as u32).collect(),
        count: 60,
    };
    absorb(base, &[effect], weights, &AbsorbOptions::default()).unwrap()
}

/// `models` without the intercept (column 0), which absorbed effects span; models left with no
/// column are dropped.
pub fn without_intercept(models: Vec<ModelSpec>) -> Vec<ModelSpec> {
    models
        .into_iter()
        .map(|mut m| {
            m.columns.retain(|&c| c != 0);
            m.tracked.retain(|&c| c != 0);
            m
        })
        .filter(|m| !m.columns.is_empty())
        .collect()
}
