//! The moment route (per-cluster Gram matrices and fourth moments of the centred union)
//! against the batched row pass. The row pass itself is checked against statsmodels, NIST and
//! handbook formulas in reference.rs, nist.rs and formulas.rs; here the two routes must agree
//! to relative 1e-8 on every SE, covariance entry and Breusch–Pagan number (the accuracy the
//! engine promises; common practice for comparing two double-precision algorithms).
//! Designs are seeded inventions (inputs only, never check values).

mod support;

use faer::Mat;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use specgrid_ols::{
    ClusterIds, Covariance, CovarianceRoute, Design, FitOptions, ModelFit, ModelSpec, RowWeights,
    SharedFactor, WeightKind,
};
use support::{
    compare_fits, random_design, random_models, with_village_effects, without_intercept,
};

const REL: f64 = 1e-8;

/// Every covariance choice the moment route serves (HC2/HC3 need leverages: row pass).
fn moment_choices() -> FitOptions {
    let mut opts = support::all_covariances();
    opts.covariances
        .retain(|c| !matches!(c, Covariance::Hc2 | Covariance::Hc3));
    opts
}

type Fits = Vec<Result<ModelFit, specgrid_ols::ModelError>>;

/// Fits by one route on a fresh factor; returns the fits and the factor's counts.
fn fit_by(
    factor: impl Fn() -> SharedFactor<'static>,
    route: CovarianceRoute,
    models: &[ModelSpec],
    opts: &FitOptions,
) -> (Fits, specgrid_ols::MomentStats) {
    let mut f = factor();
    f.set_covariance_route(route);
    let fits = f.fit_many(models, opts);
    (fits, f.moment_stats())
}

/// Both routes agree; returns (models by moments, fallbacks).
fn check_routes(
    design: &'static Design,
    models: &[ModelSpec],
    opts: &FitOptions,
) -> (usize, usize) {
    let make = || SharedFactor::new(design).unwrap();
    let (direct, d_stats) = fit_by(make, CovarianceRoute::Direct, models, opts);
    let (moment, m_stats) = fit_by(make, CovarianceRoute::Moments, models, opts);
    assert_eq!(
        d_stats.by_moments + d_stats.fallbacks,
        0,
        "direct route used moments"
    );
    compare_all(&direct, &moment);
    (m_stats.by_moments, m_stats.fallbacks)
}

/// The shared field-by-field comparison, except that p-values are judged with their own
/// condition number: a relative change ε in a standard error moves a tail probability by
/// about t²·ε (d ln p/d ln t ≈ −t² far in the tail; common practice), so p-values are compared
/// at REL·max(1, t²) and then blanked for `compare_fits`.
fn compare_route_fits(a: &ModelFit, b: &ModelFit) -> Result<(), String> {
    let (mut a, mut b) = (a.clone(), b.clone());
    for (ca, cb) in a.coefficients.iter_mut().zip(b.coefficients.iter_mut()) {
        for (x, y) in ca.inference.iter_mut().zip(cb.inference.iter_mut()) {
            let rel = REL * x.t_stat.powi(2).max(1.0);
            if !support::close(x.p_value, y.p_value, rel) {
                return Err(format!(
                    "column {} {:?} p: {:e} vs {:e}",
                    ca.column, x.covariance, x.p_value, y.p_value
                ));
            }
            (x.p_value, y.p_value) = (0.0, 0.0);
        }
    }
    // A chi-square tail moves by about (statistic/2)·ε for a relative change ε (same reasoning);
    // a statistic below its degrees of freedom is judged on the scale of those (far inside the
    // null distribution its last digits carry no information; the moment route's guard uses
    // the same scale, see docs/methods.md).
    if let (Some(x), Some(y)) = (a.breusch_pagan.as_mut(), b.breusch_pagan.as_mut()) {
        let scale = x.statistic.max(x.df);
        if (x.statistic - y.statistic).abs() > REL * scale {
            return Err(format!(
                "BP statistic: {:e} vs {:e}",
                x.statistic, y.statistic
            ));
        }
        let rel = REL * scale.max(1.0);
        if !support::close(x.p_value, y.p_value, rel) {
            return Err(format!("BP p: {:e} vs {:e}", x.p_value, y.p_value));
        }
        (x.p_value, y.p_value) = (0.0, 0.0);
        (x.statistic, y.statistic) = (0.0, 0.0);
    }
    compare_fits(&a, &b, REL)
}

fn compare_all(direct: &Fits, moment: &Fits) {
    assert_eq!(direct.len(), moment.len());
    let mut compared = 0;
    for (i, (a, b)) in direct.iter().zip(moment).enumerate() {
        match (a, b) {
            (Ok(a), Ok(b)) => {
                compare_route_fits(a, b).unwrap_or_else(|e| panic!("model {i}: {e}"));
                compared += 1;
            }
            (Err(x), Err(y)) => assert_eq!(x, y, "model {i}"),
            _ => panic!("model {i}: one route failed: {a:?} vs {b:?}"),
        }
    }
    assert!(compared > 0, "no model was compared");
}

fn leak(d: Design) -> &'static Design {
    Box::leak(Box::new(d))
}

#[test]
fn well_conditioned_all_choices_agree() {
    let design = leak(random_design(11, 3000, 5, 4, 40, 30));
    let models = random_models(12, design, 150, 5, 4);
    let (by_moments, fallbacks) = check_routes(design, &models, &moment_choices());
    assert!(by_moments > 140, "moments used for {by_moments} models");
    assert_eq!(fallbacks, 0);
}

/// Two continuous regressors with huge offsets and an outcome in the same range; `noise`
/// sets how tightly the outcome follows them (R² ≈ 1 − noise²/signal²).
fn offset_design(seed: u64, n: usize, offset: f64, noise: f64) -> Design {
    spread_design(seed, n, offset, 1.0, noise)
}

/// As [`offset_design`] with the variation around the offset multiplied by `scale`.
fn spread_design(seed: u64, n: usize, offset: f64, scale: f64, noise: f64) -> Design {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut normal = || -> f64 { StandardNormal.sample(&mut rng) };
    let mut x = Mat::<f64>::zeros(n, 4);
    let mut y = Mat::<f64>::zeros(n, 1);
    for i in 0..n {
        let (u, v) = (normal(), normal());
        x[(i, 0)] = 1.0;
        x[(i, 1)] = offset + scale * u;
        x[(i, 2)] = offset + scale * (0.5 * u + v);
        x[(i, 3)] = u * u;
        let spread = 1.0 + 0.5 * u.abs();
        y[(i, 0)] = offset + scale * (2.0 * u - v + 0.3 * u * u + noise * spread * normal());
    }
    Design {
        x,
        y,
        x_names: vec![
            "one".into(),
            "height".into(),
            "girth".into(),
            "height_sq".into(),
        ],
        y_names: vec!["yield".into()],
        clusters: vec![
            ClusterIds {
                name: "orchard".into(),
                codes: (0..n).map(|i| ((i * 7 + i / 11) % 37) as u32).collect(),
                count: 37,
            },
            ClusterIds {
                name: "adviser".into(),
                codes: (0..n).map(|i| ((i * 3 + i / 5) % 23) as u32).collect(),
                count: 23,
            },
        ],
    }
}

fn offset_models() -> Vec<ModelSpec> {
    let spec = |columns: Vec<usize>, tracked: Vec<usize>| ModelSpec {
        columns,
        outcome: 0,
        tracked,
    };
    vec![
        spec(vec![0, 1, 2, 3], vec![]),
        spec(vec![0, 1, 2], vec![1]),
        spec(vec![0, 2, 3], vec![2, 3]),
        spec(vec![0, 1], vec![]),
    ]
}

#[test]
fn nearly_exact_fit_agrees() {
    // R² ≈ 0.99999: residual sd about 1/300 of the outcome's.
    let design = leak(offset_design(21, 4000, 0.0, 0.007));
    let (by_moments, _) = check_routes(design, &offset_models(), &moment_choices());
    assert!(by_moments > 0);
}

#[test]
fn huge_offsets_agree() {
    // Columns and outcome at 1e9 + O(1000) (a spread of 1e-6 relative; at O(1) the engine
    // refuses such models as too ill-conditioned): centring removes the offsets. Slopes only:
    // the row pass itself loses digits on an intercept 1e9 away from the data (its influence
    // wᵢ = a₀ + a₁xᵢ cancels), see intercept_far_from_the_data_matches_the_shifted_fit.
    let design = leak(spread_design(22, 4000, 1e9, 1e3, 1.0));
    let models: Vec<ModelSpec> = offset_models()
        .into_iter()
        .map(|mut m| {
            m.tracked = m.columns.iter().copied().filter(|&c| c != 0).collect();
            m
        })
        .collect();
    let (by_moments, fallbacks) = check_routes(design, &models, &moment_choices());
    assert!(by_moments > 0);
    let ok = SharedFactor::new(design)
        .unwrap()
        .fit_many(&models, &moment_choices())
        .iter()
        .filter(|f| f.is_ok())
        .count();
    assert_eq!(by_moments + fallbacks, ok);
}

#[test]
fn intercept_far_from_the_data_matches_the_shifted_fit() {
    // Independent reference: with x' = x − c (exact here: c = 1e9 and x within a factor 2 of
    // it, Sterbenz's lemma), b₀ = b₀' − c·b₁', so V₀₀ = V'₀₀ − 2c·V'₀₁ + c²·V'₁₁ for any
    // sandwich covariance (linear map of the coefficients; common practice). The shifted fit
    // has no offset to cancel.
    let design = leak(spread_design(23, 4000, 1e9, 1e3, 1.0));
    let c = 1e9;
    let mut shifted = design.clone();
    for i in 0..shifted.x.nrows() {
        shifted.x[(i, 1)] -= c;
    }
    let model = ModelSpec {
        columns: vec![0, 1],
        outcome: 0,
        tracked: vec![0, 1],
    };
    let opts = moment_choices();
    let reference = SharedFactor::new(&shifted)
        .unwrap()
        .fit(&model, &opts)
        .unwrap();
    for route in [CovarianceRoute::Moments, CovarianceRoute::Direct] {
        let mut f = SharedFactor::new(design).unwrap();
        f.set_covariance_route(route);
        let fit = f.fit(&model, &opts).unwrap();
        for (ci, cov) in opts.covariances.iter().enumerate() {
            let v = &reference.tracked_covariance[ci];
            let expected = [v[0] - 2.0 * c * v[1] + c * c * v[3], v[1] - c * v[3], v[3]];
            let w = &fit.tracked_covariance[ci];
            let got = [w[0], w[1], w[3]];
            for (g, e) in got.iter().zip(&expected) {
                eprintln!(
                    "{route:?} {cov:?}: {g:e} vs shifted {e:e} rel {:e}",
                    (g - e).abs() / e.abs()
                );
            }
            if route == CovarianceRoute::Moments {
                assert_eq!(f.moment_stats().by_moments, 1);
                for (g, e) in got.iter().zip(&expected) {
                    assert!(
                        support::close(*g, *e, REL),
                        "{cov:?}: intercept variance {g:e}, shifted reference {e:e}"
                    );
                }
            }
        }
    }
}

#[test]
fn model_without_intercept_agrees() {
    let design = leak(random_design(31, 2500, 4, 3, 25, 20));
    let models = vec![
        ModelSpec {
            columns: vec![1, 2, 3],
            outcome: 0,
            tracked: vec![],
        },
        ModelSpec {
            columns: vec![2, 4, 5],
            outcome: 1,
            tracked: vec![2],
        },
        // A full indicator set spans the constant without an explicit intercept.
        ModelSpec {
            columns: vec![1, 5, 6, 7],
            outcome: 0,
            tracked: vec![1],
        },
    ];
    let (by_moments, fallbacks) = check_routes(design, &models, &moment_choices());
    assert_eq!(by_moments + fallbacks, models.len());
    assert!(by_moments > 0);
}

#[test]
fn bound_sends_an_exact_fit_to_the_row_pass() {
    // Residuals about 1e-4 of the outcome: the moment sums lose about the square of that ratio
    // (e = c̃'z̃ cancels inside a sum of fourth powers), the row pass only the ratio itself; the
    // bound must send the exact model to the row pass, with the same numbers as Direct.
    let design = leak(offset_design(41, 3000, 0.0, 1e-4));
    let (by_moments, fallbacks) = check_routes(design, &offset_models(), &moment_choices());
    assert!(fallbacks > 0, "no fallback ({by_moments} by moments)");
}

fn absorbed_check(weights: Option<RowWeights>) {
    absorbed_check_with(weights, moment_choices(), true);
}

/// Absorbed design (optionally weighted) fitted by both routes with `opts`; `expect_moments`
/// says whether most models must have been served by moments.
fn absorbed_check_with(weights: Option<RowWeights>, opts: FitOptions, expect_moments: bool) {
    let base = random_design(51, 3000, 4, 3, 30, 20);
    let prepared = with_village_effects(&base, weights.as_ref());
    let prepared: &'static _ = Box::leak(Box::new(prepared));
    // The intercept is absorbed; keep the rest.
    let models = without_intercept(random_models(52, &base, 80, 4, 3));
    let make = || SharedFactor::absorbed(prepared).unwrap();
    let (direct, _) = fit_by(make, CovarianceRoute::Direct, &models, &opts);
    let (moment, stats) = fit_by(make, CovarianceRoute::Moments, &models, &opts);
    compare_all(&direct, &moment);
    if expect_moments {
        assert!(stats.by_moments > models.len() / 2, "{stats:?}");
    } else {
        assert_eq!(stats.by_moments, 0, "{stats:?}");
    }
}

fn frequency_weights() -> RowWeights {
    RowWeights {
        name: "trees_counted".into(),
        kind: WeightKind::Frequency,
        values: (0..3000).map(|i| (1 + (i * 13) % 5) as f64).collect(),
    }
}

#[test]
fn frequency_weights_cluster_choices_use_moments() {
    // Cluster sums of the transformed rows need no per-row factor: served by moments.
    let mut opts = moment_choices();
    opts.covariances
        .retain(|c| !matches!(c, Covariance::Hc0 | Covariance::Hc1));
    absorbed_check_with(Some(frequency_weights()), opts, true);
}

#[test]
fn frequency_weights_with_hc_stay_on_the_row_pass() {
    // Each row's HC term carries 1/f: not a moment of the transformed rows.
    absorbed_check_with(Some(frequency_weights()), moment_choices(), false);
}

#[test]
fn absorbed_design_agrees() {
    absorbed_check(None);
}

#[test]
fn analytic_weights_agree() {
    let values: Vec<f64> = (0..3000)
        .map(|i| 0.5 + ((i * 37) % 17) as f64 / 8.0)
        .collect();
    absorbed_check(Some(RowWeights {
        name: "plot_area".into(),
        kind: WeightKind::Analytic,
        values,
    }));
}

#[test]
fn auto_route_follows_the_announced_grid() {
    let design = leak(random_design(61, 20_000, 5, 4, 40, 30));
    let models = random_models(62, design, 4, 5, 4);
    // The wide-data scenario's choices (issue 6): HC1 and one-way cluster-robust.
    let opts = FitOptions {
        covariances: vec![Covariance::Hc1, Covariance::Cluster { dim: 0 }],
        ..FitOptions::default()
    };
    // Four models on 20,000 rows: one build costs more than four row passes.
    let small = SharedFactor::new(design).unwrap();
    small.fit_many(&models, &opts);
    assert_eq!(small.moment_stats().by_moments, 0);
    // The same chunk of a grid announced at a million models: the build pays.
    let mut large = SharedFactor::new(design).unwrap();
    large.expect_models(1_000_000);
    let fits = large.fit_many(&models, &opts);
    assert_eq!(large.moment_stats().by_moments, models.len());
    let (direct, _) = fit_by(
        || SharedFactor::new(design).unwrap(),
        CovarianceRoute::Direct,
        &models,
        &opts,
    );
    compare_all(&direct, &fits);
}

#[test]
fn hc2_requests_stay_on_the_row_pass() {
    let design = leak(random_design(71, 1500, 3, 3, 20, 10));
    let models = random_models(72, design, 10, 3, 3);
    let mut opts = moment_choices();
    opts.covariances.push(Covariance::Hc2);
    let mut f = SharedFactor::new(design).unwrap();
    f.set_covariance_route(CovarianceRoute::Moments);
    f.fit_many(&models, &opts);
    assert_eq!(f.moment_stats().by_moments, 0);
}

#[test]
fn thread_count_does_not_change_the_numbers() {
    let design = leak(random_design(81, 70_000, 5, 4, 50, 30));
    let models = random_models(82, design, 40, 5, 4);
    let opts = moment_choices();
    let run = |threads: usize| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap()
            .install(|| {
                let mut f = SharedFactor::new(design).unwrap();
                f.set_covariance_route(CovarianceRoute::Moments);
                let fits = f.fit_many(&models, &opts);
                assert_eq!(f.moment_stats().by_moments, models.len());
                fits
            })
    };
    let (one, two) = (run(1), run(2));
    assert_eq!(one, two, "1 and 2 threads differ");
}

#[test]
fn chunks_share_the_moments_and_match_one_call() {
    // The binary fits a design's models in chunks: later chunks reuse the cached moments and
    // every model gets the numbers a single call gives (the moment sums of a model do not
    // depend on which other models share its call).
    let design = leak(random_design(91, 5000, 5, 4, 40, 30));
    let models = random_models(92, design, 60, 5, 4);
    let opts = moment_choices();
    let mut whole = SharedFactor::new(design).unwrap();
    whole.set_covariance_route(CovarianceRoute::Moments);
    let one_call = whole.fit_many(&models, &opts);
    let mut chunked = SharedFactor::new(design).unwrap();
    chunked.set_covariance_route(CovarianceRoute::Moments);
    let mut pieces = Vec::new();
    for chunk in models.chunks(17) {
        pieces.extend(chunked.fit_many(chunk, &opts));
    }
    assert_eq!(one_call, pieces);
    assert_eq!(chunked.moment_stats(), whole.moment_stats());
    assert_eq!(
        chunked.moment_stats().by_moments + chunked.moment_stats().fallbacks,
        one_call.iter().filter(|f| f.is_ok()).count()
    );
}
