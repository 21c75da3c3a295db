//! Accuracy on the NIST StRD linear least-squares sets (NIST/ITL Statistical Reference Datasets,
//! public domain; copies and certified values in tests/reference/nist). Accuracy is measured by
//! the log relative error of McCullough (1998, American Statistician 52(4)):
//! LRE = −log10(|est − cert| / |cert|), capped at 15 (common practice: beyond that is noise).

use std::path::PathBuf;

use faer::Mat;
use serde_json::Value;
use specgrid_ols::{
    fit_independent, Design, FitOptions, ModelError, ModelFit, ModelSpec, SharedFactor,
};

fn nist_dir() -> PathBuf {
    PathBuf::from(
        std::env::var("CARGO_MANIFEST_DIR")
            .unwrap_or_else(|_| env!("CARGO_MANIFEST_DIR").to_string()),
    )
    .join("../../tests/reference/nist")
}

/// Reads a NIST CSV: header row, then numbers; returns the columns.
fn read_csv(name: &str) -> (Vec<String>, Vec<Vec<f64>>) {
    let text = std::fs::read_to_string(nist_dir().join(name)).expect("NIST file present");
    let mut lines = text.lines();
    let header: Vec<String> = lines.next().unwrap().split(',').map(String::from).collect();
    let mut cols = vec![Vec::new(); header.len()];
    for line in lines.filter(|l| !l.trim().is_empty()) {
        for (c, v) in line.split(',').enumerate() {
            cols[c].push(v.trim().parse::<f64>().expect("number"));
        }
    }
    (header, cols)
}

fn lre(est: f64, cert: f64) -> f64 {
    if est == cert {
        return 15.0;
    }
    (-((est - cert).abs() / cert.abs()).log10()).min(15.0)
}

/// Builds [1, regressors...] for a set: polynomial sets raise `x` to 1..=degree.
fn design_for(set: &str, degree: Option<usize>) -> Design {
    let (header, cols) = read_csv(&format!("{}.csv", set.to_lowercase()));
    let n = cols[0].len();
    let mut regs: Vec<(String, Vec<f64>)> = vec![("one".into(), vec![1.0; n])];
    match degree {
        Some(d) => {
            for j in 1..=d {
                regs.push((
                    format!("x^{j}"),
                    cols[1].iter().map(|x| x.powi(j as i32)).collect(),
                ));
            }
        }
        None => {
            for (name, col) in header.iter().zip(&cols).skip(1) {
                regs.push((name.clone(), col.clone()));
            }
        }
    }
    Design {
        x: Mat::from_fn(n, regs.len(), |i, j| regs[j].1[i]),
        y: Mat::from_fn(n, 1, |i, _| cols[0][i]),
        x_names: regs.iter().map(|r| r.0.clone()).collect(),
        y_names: vec!["y".into()],
        clusters: vec![],
    }
}

fn full_model(design: &Design) -> ModelSpec {
    ModelSpec {
        columns: (0..design.x.ncols()).collect(),
        outcome: 0,
        tracked: vec![],
    }
}

/// Checks one set through both routes; returns the smallest LRE per quantity.
fn check_set(set: &str, degree: Option<usize>) {
    let cert: Value =
        serde_json::from_str(&std::fs::read_to_string(nist_dir().join("certified.json")).unwrap())
            .unwrap();
    let c = &cert[set];
    let beta: Vec<f64> = c["beta"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    let sd: Vec<f64> = c["sd"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    let resid_sd = c["residual_sd"].as_f64().unwrap();
    let r2 = c["r_squared"].as_f64().unwrap();
    let design = design_for(set, degree);
    let model = full_model(&design);
    let opts = FitOptions::default();
    let y_scale = design.y.col(0).iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let shared = SharedFactor::new(&design)
        .unwrap()
        .fit(&model, &opts)
        .unwrap();
    let indep = fit_independent(&design, &model, &opts).unwrap();
    for (route, fit) in [("shared", &shared), ("independent", &indep)] {
        let fit: &ModelFit = fit;
        assert!(fit.dropped.is_empty(), "{set}: nothing may be dropped");
        let mut min_b = 15.0f64;
        let mut min_sd = 15.0f64;
        for (j, coef) in fit.coefficients.iter().enumerate() {
            min_b = min_b.min(lre(coef.estimate, beta[j]));
            let se = coef.inference[0].std_error;
            if sd[j] == 0.0 {
                // Exact fit: certified SD 0. Absolute check on the scale of y: the coefficient's
                // uncertainty times the column's largest value must vanish against max|y|.
                let xmax = design.x.col(j).iter().fold(0.0f64, |m, v| m.max(v.abs()));
                assert!(se * xmax <= 1e-9 * y_scale, "{set} {route}: sd[{j}] = {se}");
            } else {
                min_sd = min_sd.min(lre(se, sd[j]));
            }
        }
        let lre_resid = if resid_sd == 0.0 {
            assert!(
                fit.resid_sd <= 1e-9 * y_scale,
                "{set} {route}: resid sd {}",
                fit.resid_sd
            );
            f64::NAN
        } else {
            lre(fit.resid_sd, resid_sd)
        };
        let lre_r2 = lre(fit.r_squared, r2);
        println!(
            "{set:9} {route:11} LRE: coefficients {min_b:5.1}, SD {min_sd:5.1}, residual SD {lre_resid:5.1}, R² {lre_r2:5.1}  (condition {:.2e})",
            fit.condition_number
        );
        assert!(min_b >= 9.0, "{set} {route}: coefficient LRE {min_b}");
        assert!(min_sd >= 9.0, "{set} {route}: SD LRE {min_sd}");
        assert!(
            lre_resid.is_nan() || lre_resid >= 9.0,
            "{set} {route}: residual SD LRE {lre_resid}"
        );
        assert!(lre_r2 >= 9.0, "{set} {route}: R² LRE {lre_r2}");
    }
}

#[test]
fn norris() {
    check_set("Norris", Some(1));
}

#[test]
fn pontius() {
    check_set("Pontius", Some(2));
}

#[test]
fn longley() {
    check_set("Longley", None);
}

#[test]
fn wampler1() {
    check_set("Wampler1", Some(5));
}

#[test]
fn wampler2() {
    check_set("Wampler2", Some(5));
}

#[test]
fn wampler3() {
    check_set("Wampler3", Some(5));
}

/// Polynomials in raw x with y = Σ_{j=0}^{d} x^j (the Wampler1 construction taken further;
/// exact answer: every coefficient 1; all values are integers below 2^53, so the data are
/// exact). Degree 10 on x = 0..20, degrees 10 and 15 on x = −10..10 and degrees 2..=5 on
/// x = 1000..1020 reach scaled condition numbers from about 1e3 to beyond 1e13; the engine must refuse, drop and report, or be right
/// to 7 digits, never silently wrong.
#[test]
fn near_singular_polynomials_are_right_or_refused() {
    let mut cases: Vec<(Vec<f64>, usize)> = vec![((0..=20).map(|i| i as f64).collect(), 10)];
    for d in [10, 15] {
        cases.push(((-10..=10).map(|i| i as f64).collect(), d));
    }
    // Far from the origin the powers are nearly collinear: condition grows ~100× per degree.
    for d in 2..=5 {
        cases.push(((1000..=1020).map(|i| i as f64).collect(), d));
    }
    let mut refused = 0;
    for (xs, d) in cases {
        refused += polynomial_case(&xs, d);
    }
    // The sweep must reach the refusal branch at least once, or it tests nothing beyond NIST.
    assert!(refused > 0, "no case was refused");
}

/// Columns x^0..x^d and outcome y = Σ_j x^j.
fn polynomial_design(xs: &[f64], d: usize) -> Design {
    let n = xs.len();
    Design {
        x: Mat::from_fn(n, d + 1, |i, j| xs[i].powi(j as i32)),
        y: Mat::from_fn(n, 1, |i, _| (0..=d).map(|j| xs[i].powi(j as i32)).sum()),
        x_names: (0..=d).map(|j| format!("x^{j}")).collect(),
        y_names: vec!["y".into()],
        clusters: vec![],
    }
}

/// Returns how many of the four fits (two routes × two limits) were refused.
fn polynomial_case(xs: &[f64], d: usize) -> usize {
    let n = xs.len();
    let design = polynomial_design(xs, d);
    let model = full_model(&design);
    let mut refused = 0;
    for limit in [FitOptions::default().condition_limit, 1e18] {
        let opts = FitOptions {
            condition_limit: limit,
            ..FitOptions::default()
        };
        let results = [
            (
                "shared",
                SharedFactor::new(&design).unwrap().fit(&model, &opts),
            ),
            ("independent", fit_independent(&design, &model, &opts)),
        ];
        for (route, r) in results {
            let label = format!(
                "degree {d:2} on x {}..{}, limit {limit:e}, {route}",
                xs[0],
                xs[n - 1]
            );
            match r {
                Ok(fit) if !fit.dropped.is_empty() => {
                    println!(
                        "{label}: dropped {:?} as collinear (condition {:.2e})",
                        fit.dropped, fit.condition_number
                    );
                }
                Ok(fit) => {
                    let worst = fit
                        .all_estimates
                        .iter()
                        .map(|&(_, b)| lre(b, 1.0))
                        .fold(15.0f64, f64::min);
                    println!(
                        "{label}: fitted, condition {:.2e}, worst LRE {worst:.1}",
                        fit.condition_number
                    );
                    assert!(
                        worst >= 7.0,
                        "{label}: silent loss of accuracy, LRE {worst}"
                    );
                }
                Err(ModelError::IllConditioned { condition, .. }) => {
                    println!("{label}: refused, condition {condition:.2e}");
                    refused += 1;
                }
                Err(e) => panic!("{label}: unexpected error {e}"),
            }
        }
    }
    refused
}

/// The same construction on many rows (x = 0..20,000, degree 3: y = 1 + x + x² + x³, exact
/// integers below 2^53), so n·k is far above the size where refinement always runs: here the
/// rounding bound must call for it (the intercept's contribution is ~1e-12 of ‖y‖), and every
/// coefficient must come out right to LRE ≥ 9 on both routes.
#[test]
fn many_row_polynomial_is_refined_by_the_bound() {
    let xs: Vec<f64> = (0..20_000).map(|i| i as f64).collect();
    let design = polynomial_design(&xs, 3);
    let model = full_model(&design);
    let opts = FitOptions::default();
    let fits = [
        SharedFactor::new(&design)
            .unwrap()
            .fit(&model, &opts)
            .unwrap(),
        fit_independent(&design, &model, &opts).unwrap(),
    ];
    for fit in fits {
        let worst = fit
            .all_estimates
            .iter()
            .map(|&(_, b)| lre(b, 1.0))
            .fold(15.0f64, f64::min);
        println!(
            "degree 3 on x 0..20000: condition {:.2e}, worst LRE {worst:.1}",
            fit.condition_number
        );
        assert!(worst >= 9.0, "LRE {worst}");
    }
}
