//! Inference methods against independent numpy/statsmodels computations, written by
//! tests/reference/inference/make_fixtures.py into tests/reference/inference/fixtures/inference.json
//! (library versions recorded in the file):
//! - wild cluster bootstrap-t: brute-force enumeration of every Rademacher / Webb weight vector
//!   with a fresh numpy least-squares refit and a row-by-row CR1 error per vector (Cameron,
//!   Gelbach & Miller 2008; Webb 2023); CR1 error of the data from statsmodels.
//! - Gelbach (2016): Γ from numpy lstsq, full-model covariances from statsmodels.
//! - Oster (2019): inputs from raw data with numpy, δ from the (recalled) closed form, β* from
//!   numpy.roots.

use faer::Mat;
use serde::Deserialize;
use specgrid_ols::inference::{
    gelbach, oster, wild_cluster_test, BootstrapWeights, ControlBlock, OsterInputs,
    WildClusterOptions,
};
use specgrid_ols::{
    fit_independent, ClusterIds, Covariance, Design, FitOptions, ModelSpec, SharedFactor,
};
use std::path::PathBuf;

#[derive(Deserialize)]
struct Fixture {
    source: String,
    wild_cluster: Vec<WildCase>,
    gelbach: GelbachCase,
    oster: OsterCase,
}

#[derive(Deserialize)]
struct WildCase {
    case: String,
    weights: String,
    x: Vec<Vec<f64>>,
    y: Vec<f64>,
    codes: Vec<u32>,
    clusters: usize,
    focus: usize,
    estimate: f64,
    cr1_std_error_statsmodels: f64,
    tests: Vec<WildTest>,
}

#[derive(Deserialize)]
struct WildTest {
    null_value: f64,
    p_value: f64,
    t_stat: f64,
    draws: usize,
}

#[derive(Deserialize)]
struct GelbachCase {
    x: Vec<Vec<f64>>,
    y: Vec<f64>,
    codes: Vec<u32>,
    clusters: usize,
    base: Vec<usize>,
    focus: usize,
    blocks: Vec<GelbachBlock>,
    base_estimate: f64,
    full_estimate: f64,
    total_change: f64,
    covariances: std::collections::BTreeMap<String, GelbachCov>,
}

#[derive(Deserialize)]
struct GelbachBlock {
    name: String,
    columns: Vec<usize>,
}

#[derive(Deserialize)]
struct GelbachCov {
    blocks: Vec<GelbachContribution>,
    total_std_error: f64,
}

#[derive(Deserialize)]
struct GelbachContribution {
    contribution: f64,
    std_error: f64,
}

#[derive(Deserialize)]
struct OsterCase {
    x: Vec<Vec<f64>>,
    y: Vec<f64>,
    short_columns: Vec<usize>,
    long_columns: Vec<usize>,
    focus: usize,
    short_estimate: f64,
    short_r2: f64,
    long_estimate: f64,
    long_r2: f64,
    var_y: f64,
    var_x: f64,
    var_x_resid: f64,
    r_max: f64,
    delta_for_zero: f64,
    beta_star_roots: Vec<f64>,
    beta_star_approx: f64,
}

fn fixture() -> Fixture {
    let path = PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("../../tests/reference/inference/fixtures/inference.json");
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{path:?}: {e}"));
    let f: Fixture = serde_json::from_str(&text).unwrap();
    assert!(f.source.ends_with("make_fixtures.py"));
    f
}

fn design(x: &[Vec<f64>], y: &[f64], codes: Option<(&[u32], usize)>) -> Design {
    let n = y.len();
    Design {
        x: Mat::from_fn(n, x.len(), |i, j| x[j][i]),
        y: Mat::from_fn(n, 1, |i, _| y[i]),
        x_names: (0..x.len()).map(|j| format!("x{j}")).collect(),
        y_names: vec!["y".into()],
        clusters: codes
            .map(|(c, g)| ClusterIds {
                name: "orchard".into(),
                codes: c.to_vec(),
                count: g,
            })
            .into_iter()
            .collect(),
    }
}

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / a.abs().max(b.abs()).max(1e-300)
}

#[test]
fn wild_cluster_matches_brute_force_enumeration() {
    for case in fixture().wild_cluster {
        let d = design(&case.x, &case.y, Some((&case.codes, case.clusters)));
        let model = ModelSpec {
            columns: (0..case.x.len()).collect(),
            outcome: 0,
            tracked: vec![case.focus],
        };
        let weights = match case.weights.as_str() {
            "rademacher" => BootstrapWeights::Rademacher,
            _ => BootstrapWeights::Webb,
        };
        for t in &case.tests {
            let opts = WildClusterOptions {
                weights,
                draws: 9_999,
                ..WildClusterOptions::default()
            };
            let r = wild_cluster_test(&d, &model, case.focus, 0, t.null_value, &opts).unwrap();
            assert!(r.enumerated, "{}", case.case);
            assert_eq!(r.draws, t.draws, "{}", case.case);
            assert!(rel(r.estimate, case.estimate) < 1e-10, "{}", case.case);
            assert!(
                rel(r.cr1_std_error, case.cr1_std_error_statsmodels) < 1e-9,
                "{}",
                case.case
            );
            assert!(rel(r.t_stat, t.t_stat) < 1e-9, "{}", case.case);
            // p-values are counts over the same enumerated vectors: equal exactly.
            assert_eq!(r.p_value, t.p_value, "{} at {}", case.case, t.null_value);
        }
        // The engine's own one-way cluster error agrees (same CR1 convention).
        let fit = fit_independent(
            &d,
            &model,
            &FitOptions {
                covariances: vec![Covariance::Cluster { dim: 0 }],
                ..FitOptions::default()
            },
        )
        .unwrap();
        assert!(
            rel(
                fit.coefficients[0].inference[0].std_error,
                case.cr1_std_error_statsmodels
            ) < 1e-9
        );
    }
}

#[test]
fn wild_cluster_confidence_set_ends_are_where_the_test_turns() {
    // Test inversion: just inside an end the test does not reject at 5%, just outside it does.
    let case = &fixture().wild_cluster[0];
    let d = design(&case.x, &case.y, Some((&case.codes, case.clusters)));
    let model = ModelSpec {
        columns: (0..case.x.len()).collect(),
        outcome: 0,
        tracked: vec![case.focus],
    };
    let opts = WildClusterOptions::default();
    let r = wild_cluster_test(&d, &model, case.focus, 0, 0.0, &opts).unwrap();
    let (lo, hi) = (r.ci_low.unwrap(), r.ci_high.unwrap());
    assert!(lo < r.estimate && r.estimate < hi);
    let eps = 1e-6 * r.cr1_std_error;
    let p = |b: f64| {
        wild_cluster_test(&d, &model, case.focus, 0, b, &opts)
            .unwrap()
            .p_value
    };
    assert!(p(lo + eps) > 0.05 && p(hi - eps) > 0.05);
    assert!(p(lo - eps) <= 0.05 && p(hi + eps) <= 0.05);
}

#[test]
fn gelbach_matches_numpy_and_statsmodels() {
    let case = fixture().gelbach;
    let d = design(&case.x, &case.y, Some((&case.codes, case.clusters)));
    let factor = SharedFactor::new_for_refits(&d).unwrap();
    let base = ModelSpec {
        columns: case.base.clone(),
        outcome: 0,
        tracked: vec![case.focus],
    };
    let blocks: Vec<ControlBlock> = case
        .blocks
        .iter()
        .map(|b| ControlBlock {
            name: b.name.clone(),
            columns: b.columns.clone(),
        })
        .collect();
    for (name, cov) in [
        ("classical", Covariance::Classical),
        ("hc1", Covariance::Hc1),
        ("cluster", Covariance::Cluster { dim: 0 }),
    ] {
        let r = gelbach(
            &factor,
            &base,
            case.focus,
            &blocks,
            cov,
            &FitOptions::default(),
        )
        .unwrap();
        let want = &case.covariances[name];
        assert!(rel(r.base_estimate, case.base_estimate) < 1e-10);
        assert!(rel(r.full_estimate, case.full_estimate) < 1e-10);
        assert!(rel(r.total_change, case.total_change) < 1e-10);
        // The contributions sum to the engine's own change between the two fits to 1e-10.
        assert!((r.total_change - (r.base_estimate - r.full_estimate)).abs() < 1e-10);
        for (got, exp) in r.blocks.iter().zip(&want.blocks) {
            assert!(rel(got.contribution, exp.contribution) < 1e-9, "{name}");
            assert!(rel(got.std_error, exp.std_error) < 1e-8, "{name}");
        }
        assert!(
            rel(r.total_std_error, want.total_std_error) < 1e-8,
            "{name}"
        );
    }
}

#[test]
fn gelbach_refuses_a_column_in_two_places() {
    let case = fixture().gelbach;
    let d = design(&case.x, &case.y, None);
    let factor = SharedFactor::new_for_refits(&d).unwrap();
    let base = ModelSpec {
        columns: case.base.clone(),
        outcome: 0,
        tracked: vec![],
    };
    let blocks = [ControlBlock {
        name: "again".into(),
        columns: vec![case.base[2]],
    }];
    let r = gelbach(
        &factor,
        &base,
        case.focus,
        &blocks,
        Covariance::Classical,
        &FitOptions::default(),
    );
    assert!(r.is_err());
}

#[test]
fn oster_matches_numpy_from_raw_data() {
    let case = fixture().oster;
    let d = design(&case.x, &case.y, None);
    let factor = SharedFactor::new(&d).unwrap();
    let opts = FitOptions::default();
    let fit = |cols: &[usize]| {
        factor
            .fit(
                &ModelSpec {
                    columns: cols.to_vec(),
                    outcome: 0,
                    tracked: vec![case.focus],
                },
                &opts,
            )
            .unwrap()
    };
    let (short, long) = (fit(&case.short_columns), fit(&case.long_columns));
    let n = case.y.len() as f64;
    let var = |v: &[f64]| {
        let m = v.iter().sum::<f64>() / n;
        v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / n
    };
    let mut inputs = OsterInputs::from_fits(
        &short,
        &long,
        case.focus,
        var(&case.y),
        var(&case.x[case.focus]),
    )
    .unwrap();
    assert!(rel(inputs.short_estimate, case.short_estimate) < 1e-10);
    assert!(rel(inputs.short_r2, case.short_r2) < 1e-10);
    assert!(rel(inputs.long_estimate, case.long_estimate) < 1e-10);
    assert!(rel(inputs.long_r2, case.long_r2) < 1e-10);
    assert!(rel(inputs.var_y, case.var_y) < 1e-12);
    assert!(rel(inputs.var_x, case.var_x) < 1e-12);
    assert!(rel(inputs.var_x_resid, case.var_x_resid) < 1e-9);
    let r = oster(&inputs).unwrap();
    // Default R_max = 1.3 × long R² (Oster 2019's suggestion), as the fixture used.
    assert!(rel(r.r_max, case.r_max) < 1e-10);
    assert!(rel(r.delta_for_zero, case.delta_for_zero) < 1e-8);
    assert!(rel(r.beta_star_approx, case.beta_star_approx) < 1e-8);
    assert_eq!(r.beta_star_roots.len(), case.beta_star_roots.len());
    for (a, b) in r.beta_star_roots.iter().zip(&case.beta_star_roots) {
        assert!(rel(*a, *b) < 1e-8, "{a} vs {b}");
    }
    inputs.r_max = Some(case.r_max);
    assert_eq!(oster(&inputs).unwrap().r_max, case.r_max);
}
