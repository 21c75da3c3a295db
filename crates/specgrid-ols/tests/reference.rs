//! The engine against an outside reference library: statsmodels 0.15 OLS (PyPI), on seeded
//! synthetic designs written by tests/reference/statsmodels/make_fixtures.py into
//! tests/reference/statsmodels/fixtures/*.json (library versions are recorded in each file, and
//! tests/reference/statsmodels/check_live.sh regenerates them against live PyPI packages).
//!
//! Every check below compares at relative 1e-8 unless said otherwise. Conventions mapped between
//! the two sides (see ../shared/design/engine-notes.md; checked in make_fixtures.py):
//! - statsmodels' `bse` under cov_type nonrobust / HC0..HC3 / cluster (1-D groups) / cluster
//!   (n × 2 groups) ↔ our Classical / Hc0..Hc3 / Cluster / TwoWayCluster standard errors.
//! - p-values: statsmodels was fitted with `use_t=True`, which gives Student t with df n − k for
//!   classical and HC, G − 1 one-way clustered and min(G_A, G_B) − 1 two-way (its
//!   `df_resid_inference`). These are exactly the engine's documented reference distributions, so
//!   p-values, t statistics and 95% intervals are compared directly.
//! - `scale` is σ² = RSS/(n − k) ↔ our `resid_sd`² (compared as sqrt(scale) ↔ resid_sd).
//! - statsmodels gets the redundant-indicator design with the collinear column already removed;
//!   the engine gets the full design and must drop the same column and report it.

use serde::Deserialize;
use specgrid_ols::{
    fit_independent, ClusterIds, Covariance, Design, FitOptions, ModelError, ModelFit, ModelSpec,
    SharedFactor,
};
use std::path::PathBuf;

/// Relative tolerance of every comparison against statsmodels.
const RTOL: f64 = 1e-8;

#[derive(Deserialize)]
struct Fixture {
    source: String,
    versions: std::collections::BTreeMap<String, String>,
    case: String,
    confidence_level: f64,
    n: usize,
    x_names: Vec<String>,
    y_names: Vec<String>,
    /// Column-major.
    x: Vec<Vec<f64>>,
    y: Vec<Vec<f64>>,
    clusters: Vec<FixtureCluster>,
    models: Vec<FixtureModel>,
}

#[derive(Deserialize)]
struct FixtureCluster {
    name: String,
    count: usize,
    codes: Vec<u32>,
}

#[derive(Deserialize)]
struct FixtureModel {
    label: String,
    /// Union columns the engine gets, in model order.
    columns: Vec<usize>,
    outcome: usize,
    /// Union columns statsmodels got (the engine's kept columns), in model order.
    statsmodels_columns: Vec<usize>,
    expected_dropped: Vec<usize>,
    nobs: f64,
    df_resid: f64,
    /// Aligned with `statsmodels_columns`.
    params: Vec<f64>,
    rsquared: f64,
    rsquared_adj: f64,
    resid_sd: f64,
    covariances: Vec<FixtureCovariance>,
    breusch_pagan: Option<FixtureBreuschPagan>,
}

#[derive(Deserialize)]
struct FixtureCovariance {
    kind: String,
    dims: Vec<usize>,
    df: f64,
    bse: Vec<f64>,
    tvalues: Vec<f64>,
    pvalues: Vec<f64>,
    ci_low: Vec<f64>,
    ci_high: Vec<f64>,
}

#[derive(Deserialize)]
struct FixtureBreuschPagan {
    lm: f64,
    p_value: f64,
    df: f64,
}

fn fixture_dir() -> PathBuf {
    PathBuf::from(
        std::env::var("CARGO_MANIFEST_DIR")
            .unwrap_or_else(|_| env!("CARGO_MANIFEST_DIR").to_string()),
    )
    .join("../../tests/reference/statsmodels/fixtures")
}

fn load(case: &str) -> Fixture {
    let path = fixture_dir().join(format!("{case}.json"));
    let text = std::fs::read_to_string(&path)
        .unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()));
    let fixture: Fixture = serde_json::from_str(&text)
        .unwrap_or_else(|e| panic!("cannot parse {}: {e}", path.display()));
    assert_eq!(fixture.case, case, "{}: case name", path.display());
    assert!(
        fixture.source.contains("statsmodels"),
        "{}: unexpected source {}",
        path.display(),
        fixture.source
    );
    assert!(fixture.versions.contains_key("statsmodels"));
    fixture
}

fn design(f: &Fixture) -> Design {
    let n = f.n;
    assert!(f.x.iter().chain(&f.y).all(|c| c.len() == n));
    Design {
        x: faer::Mat::from_fn(n, f.x.len(), |i, j| f.x[j][i]),
        y: faer::Mat::from_fn(n, f.y.len(), |i, j| f.y[j][i]),
        x_names: f.x_names.clone(),
        y_names: f.y_names.clone(),
        clusters: f
            .clusters
            .iter()
            .map(|c| ClusterIds {
                name: c.name.clone(),
                codes: c.codes.clone(),
                count: c.count,
            })
            .collect(),
    }
}

/// The engine's covariance choice for one fixture entry.
fn covariance(c: &FixtureCovariance) -> Covariance {
    match (c.kind.as_str(), c.dims.as_slice()) {
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

/// Every covariance choice any model of the fixture was given by statsmodels, in first-seen order.
fn options(f: &Fixture) -> FitOptions {
    let mut covariances = Vec::new();
    for c in f.models.iter().flat_map(|m| &m.covariances) {
        let cov = covariance(c);
        if !covariances.contains(&cov) {
            covariances.push(cov);
        }
    }
    FitOptions {
        covariances,
        confidence_level: f.confidence_level,
        ..FitOptions::default()
    }
}

/// Every kept column tracked, so every coefficient statsmodels reports is compared.
fn spec(m: &FixtureModel) -> ModelSpec {
    ModelSpec {
        columns: m.columns.clone(),
        outcome: m.outcome,
        tracked: m.statsmodels_columns.clone(),
    }
}

/// Collects every mismatch of one case so a failure lists all of them, not just the first.
#[derive(Default)]
struct Checker {
    failures: Vec<String>,
    /// Largest relative difference seen among the passing and failing `close` checks.
    worst: f64,
}

impl Checker {
    fn close(&mut self, what: String, ours: f64, reference: f64, rtol: f64) {
        let scale = ours.abs().max(reference.abs());
        // Written so that a NaN on either side fails.
        let agrees = (ours - reference).abs() <= rtol * scale;
        if scale > 0.0 {
            self.worst = self.worst.max((ours - reference).abs() / scale);
        }
        if !agrees {
            let rel = (ours - reference).abs() / scale;
            self.failures.push(format!(
                "{what}: engine {ours:.17e}, statsmodels {reference:.17e} (relative {rel:.1e})"
            ));
        }
    }

    /// An interval end can sit near zero, so it is compared relative to the interval's own size:
    /// the error of an end is the error of the estimate plus that of critical value × SE.
    fn close_scaled(&mut self, what: String, ours: f64, reference: f64, scale: f64) {
        let agrees = (ours - reference).abs() <= RTOL * scale.max(reference.abs());
        if !agrees {
            self.failures.push(format!(
                "{what}: engine {ours:.17e}, statsmodels {reference:.17e} (scale {scale:.3e})"
            ));
        }
    }

    fn equal<T: PartialEq + std::fmt::Debug>(&mut self, what: String, ours: T, reference: T) {
        if ours != reference {
            self.failures.push(format!(
                "{what}: engine {ours:?}, statsmodels {reference:?}"
            ));
        }
    }
}

/// Compares one engine fit with statsmodels' numbers for the same model.
fn check_model(c: &mut Checker, f: &Fixture, opts: &FitOptions, m: &FixtureModel, fit: &ModelFit) {
    let at = |what: &str| format!("{} / {}: {what}", f.case, m.label);
    let k = m.params.len();
    // Source: statsmodels OLS nobs, df_resid, params via make_fixtures.py.
    c.equal(at("n_obs"), fit.n_obs as f64, m.nobs);
    c.equal(at("df_resid"), fit.df_resid as f64, m.df_resid);
    c.equal(at("n_params"), fit.n_params, k);
    c.equal(
        at("dropped"),
        fit.dropped.clone(),
        m.expected_dropped.clone(),
    );
    let kept: Vec<usize> = fit.all_estimates.iter().map(|(col, _)| *col).collect();
    c.equal(at("kept columns"), kept, m.statsmodels_columns.clone());
    for ((col, est), reference) in fit.all_estimates.iter().zip(&m.params) {
        c.close(at(&format!("all_estimates[{col}]")), *est, *reference, RTOL);
    }
    // Source: statsmodels OLS rsquared, rsquared_adj (uncentred without a constant), sqrt(scale).
    c.close(at("R²"), fit.r_squared, m.rsquared, RTOL);
    c.close(at("adjusted R²"), fit.adj_r_squared, m.rsquared_adj, RTOL);
    c.close(at("residual SD"), fit.resid_sd, m.resid_sd, RTOL);

    // Source: statsmodels.stats.diagnostic.het_breuschpagan(resid, exog, robust=True), Koenker's
    // studentized LM = n·R² of e² on the regressors, chi-square with (regressors − 1) df.
    // statsmodels' df assumes a constant, so the fixture carries it only for models with one.
    if let Some(bp) = &m.breusch_pagan {
        match &fit.breusch_pagan {
            Some(ours) => {
                c.close(at("Breusch–Pagan LM"), ours.statistic, bp.lm, RTOL);
                c.equal(at("Breusch–Pagan df"), ours.df, bp.df);
                c.close(at("Breusch–Pagan p"), ours.p_value, bp.p_value, RTOL);
            }
            None => c.failures.push(at("Breusch–Pagan missing")),
        }
    }

    c.equal(at("coefficient count"), fit.coefficients.len(), k);
    for (i, coef) in fit.coefficients.iter().enumerate().take(k) {
        let name = &f.x_names[m.statsmodels_columns[i]];
        c.equal(
            at(&format!("coefficient {i} column")),
            coef.column,
            m.statsmodels_columns[i],
        );
        // Source: statsmodels OLS params.
        c.close(
            at(&format!("{name} estimate")),
            coef.estimate,
            m.params[i],
            RTOL,
        );
        c.equal(
            at(&format!("{name} inference count")),
            coef.inference.len(),
            opts.covariances.len(),
        );
        for reference in &m.covariances {
            let cov = covariance(reference);
            let Some(pos) = opts.covariances.iter().position(|x| *x == cov) else {
                unreachable!("options() holds every fixture covariance")
            };
            let Some(inf) = coef.inference.get(pos) else {
                continue; // already reported as an inference-count mismatch
            };
            let w = |what: &str| at(&format!("{name} {:?} {what}", cov));
            c.equal(w("covariance"), inf.covariance, cov);
            // Source: statsmodels OLS bse under the matching cov_type.
            c.close(w("SE"), inf.std_error, reference.bse[i], RTOL);
            // Source: statsmodels tvalues and df_resid_inference (use_t=True).
            c.close(w("t"), inf.t_stat, reference.tvalues[i], RTOL);
            c.equal(w("df"), inf.df, reference.df);
            // Source: statsmodels pvalues (use_t=True: two-sided Student t with the same df).
            c.close(w("p-value"), inf.p_value, reference.pvalues[i], RTOL);
            // Source: statsmodels conf_int(alpha = 0.05) with use_t=True.
            let half = (reference.ci_high[i] - reference.ci_low[i]) / 2.0;
            c.close_scaled(w("CI low"), inf.ci_low, reference.ci_low[i], half);
            c.close_scaled(w("CI high"), inf.ci_high, reference.ci_high[i], half);
        }
    }
}

/// Fits every model of the case through `fit_many`, the first through `fit`, and every one
/// through `fit_independent` (a fresh QR per model), and compares each with statsmodels.
fn check_case(case: &str) {
    let f = load(case);
    let opts = options(&f);
    let design = design(&f);
    let factor = SharedFactor::new(&design)
        .unwrap_or_else(|e| panic!("{case}: SharedFactor::new refused the design: {e}"));
    let specs: Vec<ModelSpec> = f.models.iter().map(spec).collect();
    let fits = factor.fit_many(&specs, &opts);
    assert_eq!(fits.len(), specs.len(), "{case}: one result per model");

    let mut c = Checker::default();
    for (m, fit) in f.models.iter().zip(&fits) {
        match fit {
            Ok(fit) => check_model(&mut c, &f, &opts, m, fit),
            Err(e) => c
                .failures
                .push(format!("{case} / {}: engine error: {e}", m.label)),
        }
    }
    // The single-model entry point must give the same numbers as the batch one.
    match factor.fit(&specs[0], &opts) {
        Ok(fit) => check_model(&mut c, &f, &opts, &f.models[0], &fit),
        Err(e) => c.failures.push(format!("{case}: fit() error: {e}")),
    }
    for (m, s) in f.models.iter().zip(&specs) {
        match fit_independent(&design, s, &opts) {
            Ok(fit) => check_model(&mut c, &f, &opts, m, &fit),
            Err(e) => c
                .failures
                .push(format!("{case} / {}: fit_independent error: {e}", m.label)),
        }
    }
    // Shown with --nocapture; the margin under RTOL is worth knowing, not only pass/fail.
    println!("{case}: worst relative difference {:.1e}", c.worst);
    assert!(
        c.failures.is_empty(),
        "{case}: {} mismatch(es) against statsmodels {}:\n{}",
        c.failures.len(),
        f.versions["statsmodels"],
        c.failures.join("\n")
    );
}

#[test]
fn heteroskedastic_design_matches_statsmodels() {
    check_case("heteroskedastic");
}

#[test]
fn thirty_clusters_match_statsmodels() {
    check_case("cluster_30");
}

#[test]
fn two_hundred_clusters_match_statsmodels() {
    check_case("cluster_200");
}

#[test]
fn two_way_clustered_panel_matches_statsmodels() {
    check_case("two_way_panel");
}

#[test]
fn redundant_indicator_is_dropped_and_the_rest_matches_statsmodels() {
    check_case("redundant_indicator");
}

/// With `tracked` empty ("every column of the model"), a model that loses a collinear column
/// still reports every kept column, with the statsmodels numbers; the dropped column is reported
/// in `dropped` rather than turned into an error.
#[test]
fn empty_tracked_list_reports_every_kept_column() {
    let f = load("redundant_indicator");
    let opts = options(&f);
    let design = design(&f);
    let factor = SharedFactor::new(&design).expect("design accepted");
    let m = &f.models[0];
    let request = ModelSpec {
        tracked: Vec::new(),
        ..spec(m)
    };
    let fit = factor
        .fit(&request, &opts)
        .expect("an untracked collinear column is dropped, not an error");
    let mut c = Checker::default();
    check_model(&mut c, &f, &opts, m, &fit);
    assert!(c.failures.is_empty(), "{}", c.failures.join("\n"));
}

/// Tracking the column the engine has to drop is refused with `TrackedDropped`, naming it.
#[test]
fn tracking_the_dropped_indicator_is_refused() {
    let f = load("redundant_indicator");
    let design = design(&f);
    let factor = SharedFactor::new(&design).expect("design accepted");
    let m = &f.models[0];
    let dropped = m.expected_dropped[0];
    let request = ModelSpec {
        tracked: vec![dropped],
        ..spec(m)
    };
    match factor.fit(&request, &options(&f)) {
        Err(ModelError::TrackedDropped { name }) => assert_eq!(name, f.x_names[dropped]),
        other => panic!(
            "expected TrackedDropped for {}, got {other:?}",
            f.x_names[dropped]
        ),
    }
}

/// Indicators for every level placed before the constant: the constant is the later collinear
/// column and is dropped, but the kept columns still span it. statsmodels detects the implicit
/// constant (its k_constant = 1), so R², adjusted R² and the Breusch–Pagan df are the centred
/// ones with k − 1 df; a model whose column space holds the constant should report the same.
#[test]
fn indicators_spanning_the_constant_match_statsmodels() {
    check_case("indicators_span_constant");
}

/// Several hundred models in one `fit_many` call (more than one internal batch, spread over
/// threads): every result must still be the statsmodels one for its model, in input order.
fn check_many_copies(case: &str, copies: usize) {
    let f = load(case);
    let opts = options(&f);
    let design = design(&f);
    let factor = SharedFactor::new(&design).expect("design accepted");
    // Interleaved, so neighbouring requests differ: m0, m1, …, m0, m1, …
    let specs: Vec<ModelSpec> = (0..copies)
        .flat_map(|_| f.models.iter().map(spec))
        .collect();
    let fits = factor.fit_many(&specs, &opts);
    assert_eq!(fits.len(), specs.len(), "{case}: one result per model");
    let mut c = Checker::default();
    for (i, fit) in fits.iter().enumerate() {
        let m = &f.models[i % f.models.len()];
        match fit {
            Ok(fit) => check_model(&mut c, &f, &opts, m, fit),
            Err(e) => c
                .failures
                .push(format!("{case} / {} copy {i}: {e}", m.label)),
        }
    }
    assert!(c.failures.is_empty(), "{}", c.failures.join("\n"));
}

#[test]
fn hundreds_of_heteroskedastic_models_in_one_call_match_statsmodels() {
    check_many_copies("heteroskedastic", 100);
}

#[test]
fn hundreds_of_two_way_clustered_models_in_one_call_match_statsmodels() {
    check_many_copies("two_way_panel", 150);
}
