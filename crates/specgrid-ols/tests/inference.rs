//! Outcome-only refits, the joint test over the curve (Simonsohn, Simmons & Nelson 2020) and
//! the wild cluster bootstrap's handling of cluster codes.
//! Refits are checked against fresh, independent fits of the same models on the same new
//! outcomes (`fit_independent`, itself checked against statsmodels and NIST StRD elsewhere).
//! Designs are seeded and invented; they are inputs only, never check values.

mod support;

use faer::Mat;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use specgrid_ols::inference::{
    joint_curve_test, wild_cluster_test, CurveModel, JointOptions, OutcomeRefit, WildClusterOptions,
};
use specgrid_ols::{fit_independent, Covariance, Design, FitOptions, ModelSpec, SharedFactor};
use statrs::distribution::{ContinuousCDF, Normal};
use support::{close, random_design, random_models};

fn classical() -> FitOptions {
    FitOptions {
        covariances: vec![Covariance::Classical],
        ..FitOptions::default()
    }
}

fn new_outcomes(seed: u64, n: usize, d: usize, design: &Design) -> Mat<f64> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    Mat::from_fn(n, d, |i, j| {
        let e: f64 = StandardNormal.sample(&mut rng);
        // Partly explained by the regressors, so coefficients are not all near zero.
        design.x[(i, 1)] * (j as f64 - 1.0) + 0.3 * design.x[(i, 2)] + e * (1.0 + j as f64)
    })
}

#[test]
fn refits_equal_fresh_independent_fits() {
    // Union with a full indicator set next to the constant: the union R is rank deficient and
    // some models drop a column; the refit must follow the same drops.
    let design = random_design(41, 300, 4, 3, 12, 5);
    let mut models = random_models(42, &design, 40, 4, 3);
    // One model with every column (drops the last indicator).
    models.push(ModelSpec {
        columns: (0..design.x.ncols()).collect(),
        outcome: 0,
        tracked: vec![1],
    });
    let factor = SharedFactor::new_for_refits(&design).unwrap();
    let refit = OutcomeRefit::new(&factor, &models, &classical()).unwrap();
    let ys = new_outcomes(43, design.x.nrows(), 3, &design);
    let batches = refit.fit_outcomes(ys.as_ref());
    let mut checked = 0;
    for (model, batch) in models.iter().zip(&batches) {
        let batch = batch.as_ref().expect("every random model fits");
        for d in 0..ys.ncols() {
            let one = Design {
                y: Mat::from_fn(ys.nrows(), 1, |i, _| ys[(i, d)]),
                y_names: vec!["new".into()],
                ..design.clone()
            };
            let spec = ModelSpec {
                outcome: 0,
                tracked: vec![],
                ..model.clone()
            };
            let fresh = fit_independent(&one, &spec, &classical()).unwrap();
            let kept: Vec<usize> = fresh.all_estimates.iter().map(|&(c, _)| c).collect();
            assert_eq!(kept, batch.kept);
            let rss_fresh = fresh.resid_sd.powi(2) * fresh.df_resid as f64;
            assert!(
                close(batch.rss[d], rss_fresh, 1e-10),
                "{} vs {rss_fresh}",
                batch.rss[d]
            );
            for (q, coef) in fresh.coefficients.iter().enumerate() {
                let se = coef.inference[0].std_error;
                // Coefficients to 1e-10 of the larger of |b| and its standard error.
                let yard = coef.estimate.abs().max(se);
                assert!((batch.coef[(q, d)] - coef.estimate).abs() <= 1e-10 * yard);
                assert!(close(batch.classical_se(q, d), se, 1e-10));
            }
            checked += 1;
        }
    }
    assert_eq!(checked, models.len() * 3);
}

#[test]
fn refits_do_not_depend_on_thread_count() {
    let design = random_design(7, 500, 5, 4, 20, 9);
    let models = random_models(8, &design, 60, 5, 4);
    let factor = SharedFactor::new_for_refits(&design).unwrap();
    let ys = new_outcomes(9, design.x.nrows(), 7, &design);
    let run = |threads: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| {
            let refit = OutcomeRefit::new(&factor, &models, &classical()).unwrap();
            refit
                .fit_outcomes(ys.as_ref())
                .into_iter()
                .map(|b| {
                    let b = b.unwrap();
                    (b.coef, b.rss)
                })
                .collect::<Vec<_>>()
        })
    };
    assert_eq!(run(1), run(2));
}

#[test]
fn refits_need_the_kept_basis() {
    let design = random_design(1, 50, 2, 2, 5, 5);
    let factor = SharedFactor::new(&design).unwrap();
    let models = random_models(2, &design, 3, 2, 2);
    assert!(OutcomeRefit::new(&factor, &models, &classical()).is_err());
}

/// A small curve: y = β·x + controls + noise, with the focus x in every model and 0–3 of
/// three controls (8 models over all subsets, each with an intercept). `confounding` scales how
/// strongly two of the controls move with the focus (0: every model estimates the same β).
fn curve_design(seed: u64, n: usize, beta: f64, confounding: f64) -> (Design, Vec<CurveModel>) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut normal = || -> f64 { StandardNormal.sample(&mut rng) };
    let x = Mat::from_fn(n, 5, |_, j| if j == 0 { 1.0 } else { normal() });
    let mut x = x;
    for i in 0..n {
        // Controls correlated with the focus (column 1).
        x[(i, 2)] += 0.5 * confounding * x[(i, 1)];
        x[(i, 3)] -= 0.3 * confounding * x[(i, 1)];
    }
    let y = Mat::from_fn(n, 1, |i, _| {
        1.0 + beta * x[(i, 1)] + 0.4 * x[(i, 2)] - 0.2 * x[(i, 3)] + 0.3 * x[(i, 4)]
    });
    let mut y = y;
    for i in 0..n {
        y[(i, 0)] += normal() * (1.0 + 0.5 * x[(i, 4)].abs());
    }
    let design = Design {
        x,
        y,
        x_names: ["one", "focus", "c1", "c2", "c3"]
            .map(String::from)
            .to_vec(),
        y_names: vec!["y".into()],
        clusters: vec![],
    };
    let models = (0..8u32)
        .map(|mask| {
            let mut columns = vec![0, 1];
            columns.extend(
                (0..3)
                    .filter(|b| mask & (1 << b) != 0)
                    .map(|b| 2 + b as usize),
            );
            CurveModel::tracking(columns, 0, 1)
        })
        .collect();
    (design, models)
}

#[test]
fn joint_test_observed_statistics_by_hand_and_strong_effect() {
    // Hand-checkable: with a strong effect the observed statistics are those of the individual
    // fits, and no null draw reaches the observed |median| or |Stouffer z|, so those p-values are
    // exactly 1/(1 + B) (the (1 + count)/(1 + B) convention, Davison & Hinkley 1997, eq. 4.11).
    // The share cannot go that low here: with 8 highly correlated models, a null draw has all
    // 8 significant in one direction with probability near 2.5%, tying the observed share of 1.
    let (design, models) = curve_design(5, 200, 1.0, 1.0);
    let factor = SharedFactor::new_for_refits(&design).unwrap();
    let opts = JointOptions {
        draws: 99,
        ..JointOptions::default()
    };
    let test = joint_curve_test(&factor, &models, &classical(), &opts).unwrap();
    assert_eq!(test.draws, 99);
    assert_eq!(test.models_used, 8);
    for p in [test.p_median, test.p_stouffer] {
        assert!((p - 0.01).abs() < 1e-15, "{test:?}");
    }
    assert!(test.p_share <= 0.1, "{test:?}");
    // The null range of the median sits around zero and excludes the observed median.
    assert!(
        test.null_low.median < 0.0 && 0.0 < test.null_high.median,
        "{test:?}"
    );
    assert!(test.null_high.median < test.observed.median);
    // Observed statistics from the independent fits: median of the 8 estimates (mean of the
    // 4th and 5th), all significant and positive, Stouffer Σz/√8 with z = Φ⁻¹(1 − p/2).
    let normal = Normal::standard();
    let mut est = Vec::new();
    let mut zsum = 0.0;
    for m in &models {
        let fit = fit_independent(&design, &m.spec, &classical()).unwrap();
        let c = &fit.coefficients[0];
        est.push(c.estimate);
        zsum += c.estimate.signum() * -normal.inverse_cdf(c.inference[0].p_value / 2.0);
        assert!(c.inference[0].p_value < 0.05);
    }
    est.sort_by(f64::total_cmp);
    let median = 0.5 * (est[3] + est[4]);
    assert!(close(test.observed.median, median, 1e-10));
    assert_eq!(test.observed.share_significant, 1.0);
    assert!(close(test.observed.stouffer_z, zsum / 8f64.sqrt(), 1e-8));
    assert_eq!(test.dominant_sign, 1.0);
}

#[test]
fn joint_test_p_values_are_roughly_uniform_under_the_null() {
    // 60 seeded data sets with no effect and no confounding (so that no specification has an
    // omitted-variable bias, and the null holds for every model), 99 draws each: under a true null the p-values are
    // (approximately, discretely) uniform. Bounds: mean within 0.5 ± 0.11 (about 3 standard
    // errors of the mean of 60 uniforms, 0.037) and at most 14 of 60 at or below 0.1 (expected
    // 6; binomial(60, 0.1) tail P(X ≥ 14) ≈ 0.002). The share statistic is discrete with a
    // mass at 0 (no significant model gives p = 1), so its p-values are conservative: only the
    // lower bound on the mean and the bound on small p-values apply to it.
    let (mut mean, mut low) = ([0.0; 3], [0; 3]);
    let reps: u64 = 60;
    for seed in 0..reps {
        let (design, models) = curve_design(1000 + seed, 120, 0.0, 0.0);
        let factor = SharedFactor::new_for_refits(&design).unwrap();
        let opts = JointOptions {
            draws: 99,
            seed: seed * 31 + 7,
            ..JointOptions::default()
        };
        let t = joint_curve_test(&factor, &models, &classical(), &opts).unwrap();
        for (k, p) in [t.p_median, t.p_share, t.p_stouffer]
            .into_iter()
            .enumerate()
        {
            mean[k] += p / reps as f64;
            low[k] += usize::from(p <= 0.1);
        }
    }
    for k in 0..3 {
        assert!(mean[k] > 0.39, "mean p {k}: {mean:?}");
        if k != 1 {
            assert!(mean[k] < 0.61, "mean p {k}: {mean:?}");
        }
        assert!(low[k] <= 14, "p ≤ 0.1 count {k}: {low:?} (means {mean:?})");
    }
    eprintln!("null p-values: means {mean:?}, counts ≤ 0.1 {low:?}");
}

#[test]
fn joint_test_refuses_a_focus_outside_the_model() {
    let (design, mut models) = curve_design(3, 50, 0.5, 1.0);
    models[2].focus = 4;
    models[2].spec.columns = vec![0, 1];
    let factor = SharedFactor::new_for_refits(&design).unwrap();
    let err = joint_curve_test(&factor, &models, &classical(), &JointOptions::default());
    assert!(err.is_err());
}

#[test]
fn joint_test_with_cluster_weights_repeats_and_ignores_thread_count() {
    // Same seed → same numbers, whatever the pool size (draws are split in fixed batches and
    // each draw has its own ChaCha20 stream).
    // Focus: the first level indicator (column 5), which has no effect on the outcomes, so the
    // p-values are not all at their floor 1/(1 + B) and a new seed must move them.
    let design = random_design(21, 400, 4, 3, 15, 6);
    let models: Vec<CurveModel> = random_models(22, &design, 40, 4, 3)
        .into_iter()
        .filter(|m| m.columns.contains(&5))
        .map(|m| CurveModel::tracking(m.columns, m.outcome, 5))
        .collect();
    assert!(models.len() >= 10);
    let factor = SharedFactor::new_for_refits(&design).unwrap();
    let opts = JointOptions {
        draws: 120,
        cluster_dim: Some(0),
        ..JointOptions::default()
    };
    let run = |threads: usize| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap()
            .install(|| joint_curve_test(&factor, &models, &classical(), &opts).unwrap())
    };
    let (one, two) = (run(1), run(2));
    assert_eq!(one, two);
    assert_eq!(one.draws, 120);
    // A different seed gives other draws (the observed statistics stay).
    let other = joint_curve_test(
        &factor,
        &models,
        &classical(),
        &JointOptions {
            seed: 5,
            ..opts.clone()
        },
    )
    .unwrap();
    assert_eq!(other.observed, one.observed);
    assert!(
        (other.p_median, other.p_share, other.p_stouffer)
            != (one.p_median, one.p_share, one.p_stouffer)
    );
}

#[test]
fn wild_cluster_ignores_empty_cluster_codes() {
    // Codes 0..6 versus the same clusters numbered 0, 2, …, 10 out of a range of 12: the empty
    // codes must not enter the enumeration (2^6 vectors, not 2^12) nor change the p-value.
    let design = random_design(31, 120, 2, 2, 6, 4);
    let model = ModelSpec {
        columns: vec![0, 1, 2],
        outcome: 0,
        tracked: vec![1],
    };
    let opts = WildClusterOptions::default();
    let compact = wild_cluster_test(&design, &model, 1, 0, 0.0, &opts).unwrap();
    let mut sparse = design.clone();
    sparse.clusters[0].codes.iter_mut().for_each(|c| *c *= 2);
    sparse.clusters[0].count = 12;
    let spread = wild_cluster_test(&sparse, &model, 1, 0, 0.0, &opts).unwrap();
    assert_eq!(compact.draws, 64);
    assert_eq!(spread.draws, 64);
    assert_eq!(compact.p_value, spread.p_value);
    assert_eq!(compact.clusters, 6);
}

#[test]
fn joint_test_leaves_out_a_model_whose_untracked_focus_was_dropped() {
    // Column 5 is an exact copy of the focus; a model that lists it before the focus and does
    // not track the focus keeps the copy and drops the focus: it must be left out, not panic.
    let (mut design, mut models) = curve_design(9, 80, 0.5, 1.0);
    let n = design.x.nrows();
    design.x = Mat::from_fn(n, 6, |i, j| design.x[(i, j.min(4))]);
    for i in 0..n {
        design.x[(i, 5)] = design.x[(i, 1)];
    }
    design.x_names.push("focus_copy".into());
    models.push(CurveModel {
        spec: ModelSpec {
            columns: vec![0, 5, 1],
            outcome: 0,
            tracked: vec![],
        },
        focus: 1,
    });
    let factor = SharedFactor::new_for_refits(&design).unwrap();
    let opts = JointOptions {
        draws: 20,
        ..JointOptions::default()
    };
    let t = joint_curve_test(&factor, &models, &classical(), &opts).unwrap();
    assert_eq!(t.models_left_out, vec![8]);
    assert_eq!(t.models_used, 8);
}

#[test]
fn joint_test_across_parts_pools_models_and_shares_the_draws() {
    // The same curve handed over as two parts on the same rows (keys = row numbers) must give
    // exactly the single-design test: one weight vector per draw serves both parts, and the
    // statistics pool every model. Exact equality, since the arithmetic is the same.
    use specgrid_ols::inference::{joint_curve_test_across, joint_curve_test_from_fits, CurvePart};
    let (design, models) = curve_design(11, 150, 0.3, 0.5);
    let factor = SharedFactor::new_for_refits(&design).unwrap();
    let specs: Vec<ModelSpec> = models.iter().map(|m| m.spec.clone()).collect();
    let fits = factor.fit_many(&specs, &classical());
    let opts = JointOptions {
        draws: 120,
        ..JointOptions::default()
    };
    let whole = joint_curve_test_from_fits(&factor, &models, &fits, &opts).unwrap();
    let keys: Vec<u32> = (0..150).collect();
    let parts = [
        CurvePart {
            factor: &factor,
            models: &models[..3],
            fits: &fits[..3],
            keys: &keys,
            scales: &[],
        },
        CurvePart {
            factor: &factor,
            models: &models[3..],
            fits: &fits[3..],
            keys: &keys,
            scales: &[],
        },
    ];
    let split = joint_curve_test_across(&parts, 150, &opts).unwrap();
    assert_eq!(whole, split);
    // A common positive factor scales the median and its null range and leaves the p-values
    // (which compare like with like) unchanged.
    let twice = vec![2.0; models.len()];
    let scaled = joint_curve_test_across(
        &[CurvePart {
            factor: &factor,
            models: &models,
            fits: &fits,
            keys: &keys,
            scales: &twice,
        }],
        150,
        &opts,
    )
    .unwrap();
    assert_eq!(scaled.observed.median, 2.0 * whole.observed.median);
    assert_eq!(scaled.null_high.median, 2.0 * whole.null_high.median);
    assert_eq!(
        (scaled.p_median, scaled.p_share, scaled.p_stouffer),
        (whole.p_median, whole.p_share, whole.p_stouffer)
    );
    // A key outside the key count is refused, not read out of bounds.
    let bad = [CurvePart {
        keys: &keys,
        ..parts[0]
    }];
    assert!(joint_curve_test_across(&bad, 100, &opts).is_err());
}

#[test]
fn union_fit_ignores_the_noise_direction_of_a_collinear_union_column() {
    // A standardized copy of x next to x and the constant makes the union rank deficient (as
    // a study with both the level and the standardized focus form does). The Householder
    // reflector at that column is built from rounding noise; it must not enter the union's
    // fitted values, or the joint test's null residuals vanish. Reference: the residual sum of
    // squares of y on the independent columns by `fit_independent`.
    let n = 400;
    let base = random_design(77, n, 3, 1, 4, 3);
    let x: Vec<f64> = (0..n).map(|i| base.x[(i, 1)]).collect();
    let mean = x.iter().sum::<f64>() / n as f64;
    let sd = (x.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1) as f64).sqrt();
    let design = Design {
        x: Mat::from_fn(n, 4, |i, j| match j {
            0 => base.x[(i, 0)],
            1 => x[i],
            2 => (x[i] - mean) / sd,
            _ => base.x[(i, 2)],
        }),
        y: Mat::from_fn(n, 1, |i, _| base.y[(i, 0)]),
        x_names: vec!["1".into(), "x".into(), "z".into(), "w".into()],
        y_names: vec!["y".into()],
        clusters: vec![],
    };
    let factor = SharedFactor::new_for_refits(&design).unwrap();
    let models = vec![
        CurveModel::tracking(vec![0, 1, 3], 0, 1),
        CurveModel::tracking(vec![0, 2, 3], 0, 2),
    ];
    let specs: Vec<ModelSpec> = models.iter().map(|m| m.spec.clone()).collect();
    let fits = factor.fit_many(&specs, &classical());
    let refit = OutcomeRefit::from_fits(&factor, &fits).unwrap();
    let fitted = refit.union_fitted(design.y.as_ref());
    let rss: f64 = (0..n)
        .map(|i| (design.y[(i, 0)] - fitted[(i, 0)]).powi(2))
        .sum();
    let reference = fit_independent(
        &design,
        &ModelSpec {
            columns: vec![0, 1, 3],
            outcome: 0,
            tracked: vec![1],
        },
        &classical(),
    )
    .unwrap();
    let reference_rss = reference.resid_sd.powi(2) * reference.df_resid as f64;
    assert!(close(rss, reference_rss, 1e-10), "{rss} vs {reference_rss}");
    // And the null draws move the curve.
    let test = joint_curve_test(&factor, &models, &classical(), &JointOptions::default()).unwrap();
    assert!(
        test.null_high.median - test.null_low.median > 1e-6,
        "{test:?}"
    );
}
