//! Absorbed fixed effects and regression weights against statsmodels 0.15 (PyPI): OLS and WLS
//! with explicit indicator columns, written by tests/reference/statsmodels/make_fixtures_fe.py
//! into tests/reference/statsmodels/fixtures/{fe_*,wls_*}.json (regenerated and compared by
//! check_live.sh). The engine absorbs the effects (same weights) and must report the same slope
//! estimates, standard errors, t, p, 95% intervals, overall R², adjusted R², σ, n and df_resid
//! (statsmodels' df_resid = n − rank of the explicit design = n − k − absorbed parameters).
//! WLS conventions: statsmodels' robust covariances use the whitened design √w·x and residuals
//! √w·e, its R² the w-weighted centred total sum of squares.

mod support;

use serde::Deserialize;
use specgrid_ols::{
    absorb, AbsorbOptions, ClusterIds, Covariance, Design, FitOptions, ModelSpec, RowWeights,
    SharedFactor, WeightKind,
};
use support::close;

/// Relative tolerance against statsmodels.
const RTOL: f64 = 1e-8;

#[derive(Deserialize)]
struct Fixture {
    source: String,
    case: String,
    confidence_level: f64,
    n: usize,
    x_names: Vec<String>,
    y_names: Vec<String>,
    x: Vec<Vec<f64>>,
    y: Vec<Vec<f64>>,
    clusters: Vec<Codes>,
    effects: Vec<Codes>,
    weights: Option<Weights>,
    models: Vec<Model>,
}

#[derive(Deserialize)]
struct Codes {
    name: String,
    count: usize,
    codes: Vec<u32>,
}

#[derive(Deserialize)]
struct Weights {
    name: String,
    kind: String,
    values: Vec<f64>,
}

#[derive(Deserialize)]
struct Model {
    label: String,
    columns: Vec<usize>,
    outcome: usize,
    explicit_columns: usize,
    nobs: f64,
    df_resid: f64,
    params: Vec<f64>,
    rsquared: f64,
    rsquared_adj: f64,
    resid_sd: f64,
    covariances: Vec<Cov>,
}

#[derive(Deserialize)]
struct Cov {
    kind: String,
    dims: Vec<usize>,
    df: f64,
    bse: Vec<f64>,
    tvalues: Vec<f64>,
    pvalues: Vec<f64>,
    ci_low: Vec<f64>,
    ci_high: Vec<f64>,
}

fn ids(c: &Codes) -> ClusterIds {
    ClusterIds {
        name: c.name.clone(),
        codes: c.codes.clone(),
        count: c.count,
    }
}

fn load(case: &str) -> Fixture {
    let path = std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR")).join(format!(
        "../../tests/reference/statsmodels/fixtures/{case}.json"
    ));
    let text = std::fs::read_to_string(&path)
        .unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()));
    let f: Fixture = serde_json::from_str(&text).expect("fixture parses");
    assert_eq!(f.case, case);
    assert!(f.source.contains("statsmodels"));
    f
}

fn covariance(c: &Cov) -> Covariance {
    support::fixture_covariance(&c.kind, &c.dims)
}

fn check_case(case: &str) {
    let f = load(case);
    let n = f.n;
    let design = Design {
        x: faer::Mat::from_fn(n, f.x.len(), |i, j| f.x[j][i]),
        y: faer::Mat::from_fn(n, f.y.len(), |i, j| f.y[j][i]),
        x_names: f.x_names.clone(),
        y_names: f.y_names.clone(),
        clusters: f.clusters.iter().map(ids).collect(),
    };
    let effects: Vec<ClusterIds> = f.effects.iter().map(ids).collect();
    let weights = f.weights.as_ref().map(|w| RowWeights {
        name: w.name.clone(),
        kind: match w.kind.as_str() {
            "analytic" => WeightKind::Analytic,
            other => panic!("weights kind {other}"),
        },
        values: w.values.clone(),
    });
    let prepared = absorb(
        &design,
        &effects,
        weights.as_ref(),
        &AbsorbOptions::default(),
    )
    .expect("absorbs");
    // statsmodels fits every row: the generator's panels have no singletons.
    assert_eq!(prepared.info.singletons_dropped, 0, "{case}");
    let factor = SharedFactor::absorbed(&prepared).unwrap();
    let mut failures = Vec::new();
    let mut check = |what: String, ours: f64, reference: f64| {
        if !close(ours, reference, RTOL) {
            failures.push(format!(
                "{what}: engine {ours:e}, statsmodels {reference:e}"
            ));
        }
    };
    for m in &f.models {
        let covs: Vec<Covariance> = m.covariances.iter().map(covariance).collect();
        let opts = FitOptions {
            covariances: covs,
            confidence_level: f.confidence_level,
            ..FitOptions::default()
        };
        let fit = factor
            .fit(
                &ModelSpec {
                    columns: m.columns.clone(),
                    outcome: m.outcome,
                    tracked: m.columns.clone(),
                },
                &opts,
            )
            .unwrap_or_else(|e| panic!("{case}/{}: {e}", m.label));
        let at = |s: &str| format!("{case}/{}: {s}", m.label);
        // Source: statsmodels nobs, df_resid (n − rank of the explicit design).
        assert_eq!(fit.n_obs as f64, m.nobs, "{}", at("n"));
        assert_eq!(fit.df_resid as f64, m.df_resid, "{}", at("df_resid"));
        assert_eq!(
            fit.n_params + fit.absorbed_params,
            m.explicit_columns,
            "{}",
            at("k + absorbed")
        );
        // Source: statsmodels rsquared, rsquared_adj, sqrt(scale).
        check(at("R²"), fit.r_squared, m.rsquared);
        check(at("adjusted R²"), fit.adj_r_squared, m.rsquared_adj);
        check(at("residual SD"), fit.resid_sd, m.resid_sd);
        for (i, coef) in fit.coefficients.iter().enumerate() {
            check(at(&format!("param {i}")), coef.estimate, m.params[i]);
            for (inf, c) in coef.inference.iter().zip(&m.covariances) {
                let w = |s: &str| at(&format!("{} {s} {i}", c.kind));
                // Source: statsmodels bse, tvalues, pvalues (use_t), conf_int(0.05), df.
                check(w("SE"), inf.std_error, c.bse[i]);
                check(w("t"), inf.t_stat, c.tvalues[i]);
                check(w("p"), inf.p_value, c.pvalues[i]);
                check(w("CI low"), inf.ci_low, c.ci_low[i]);
                check(w("CI high"), inf.ci_high, c.ci_high[i]);
                assert_eq!(inf.df, c.df, "{}", w("df"));
            }
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn one_way_effect_matches_statsmodels_explicit_indicators() {
    check_case("fe_one_way");
}

#[test]
fn two_way_effects_match_statsmodels_explicit_indicators() {
    check_case("fe_two_way");
}

#[test]
fn one_way_effect_with_weights_matches_statsmodels_wls() {
    check_case("fe_one_way_wls");
}

#[test]
fn two_way_effects_with_weights_match_statsmodels_wls() {
    check_case("fe_two_way_wls");
}

#[test]
fn weights_without_effects_match_statsmodels_wls() {
    check_case("wls_no_effects");
}
