//! Effect conversions against (1) central finite differences of the fitted model's prediction
//! and of the effect itself with respect to the coefficients, and (2) worked examples computed
//! by hand. Formulas: docs/methods.md (part 2).

use approx::assert_relative_eq;
use specgrid_report::{
    effect, EffectError, EffectInputs, EvaluationPoint, FocusForm, OutcomeForm, Scale,
};

const OUTCOMES: [OutcomeForm; 4] = [
    OutcomeForm::Level,
    OutcomeForm::Log,
    OutcomeForm::Log1p,
    OutcomeForm::Asinh,
];

/// Raw-x functions the focus terms apply (the standardized form uses mean 1.5, sd 0.8; the
/// winsorized form clips at 0.5 and 6).
fn focus_terms(form: FocusForm, x: f64) -> Vec<f64> {
    match form {
        FocusForm::Level => vec![x],
        FocusForm::Log => vec![x.ln()],
        FocusForm::Log1p => vec![x.ln_1p()],
        FocusForm::Asinh => vec![x.asinh()],
        FocusForm::Polynomial(d) => (1..=d).map(|j| x.powi(j as i32)).collect(),
        FocusForm::Standardized => vec![(x - 1.5) / 0.8],
        FocusForm::Winsorized => vec![x.clamp(0.5, 6.0)],
    }
}

fn inverse(form: OutcomeForm, g: f64) -> f64 {
    match form {
        OutcomeForm::Level => g,
        OutcomeForm::Log => g.exp(),
        OutcomeForm::Log1p => g.exp_m1(),
        OutcomeForm::Asinh => g.sinh(),
    }
}

/// A fitted model: g(y) = b0 + Σ bⱼ Fⱼ(x) + b_xz·x·z + 0.3·w, with another regressor w = 1.2.
struct Fitted {
    outcome: OutcomeForm,
    focus: FocusForm,
    b: Vec<f64>,
    bz: Option<f64>,
    z: f64,
}

impl Fitted {
    fn predict_with(&self, b: &[f64], bz: Option<f64>, x: f64) -> f64 {
        let terms = focus_terms(self.focus, x);
        let eta = 1.1
            + b.iter().zip(&terms).map(|(c, t)| c * t).sum::<f64>()
            + bz.map_or(0.0, |c| c * x * self.z)
            + 0.3 * 1.2;
        inverse(self.outcome, eta)
    }

    fn predict(&self, x: f64) -> f64 {
        self.predict_with(&self.b, self.bz, x)
    }

    /// Scale-specific effect by finite differences of the prediction, evaluated at y = ŷ(x).
    fn numeric_effect(&self, b: &[f64], bz: Option<f64>, x: f64, scale: Scale) -> f64 {
        let h = 1e-5 * x.abs().max(1.0);
        let dy = (self.predict_with(b, bz, x + h) - self.predict_with(b, bz, x - h)) / (2.0 * h);
        let y = self.predict_with(b, bz, x);
        match scale {
            Scale::MarginalEffect => dy,
            Scale::SemiElasticity => dy / y,
            Scale::Elasticity => dy * x / y,
            Scale::Coefficient => b[0],
        }
    }
}

/// A positive-definite covariance for k coefficients with correlations.
fn covariance(k: usize) -> Vec<Vec<f64>> {
    (0..k)
        .map(|i| {
            (0..k)
                .map(|j| {
                    let s = |m: usize| 0.01 / (1.0 + m as f64);
                    let rho = if i == j { 1.0 } else { 0.3 };
                    rho * s(i) * s(j)
                })
                .collect()
        })
        .collect()
}

fn check_against_finite_differences(outcome: OutcomeForm, focus: FocusForm, interaction: bool) {
    let b: Vec<f64> = match focus {
        FocusForm::Polynomial(d) => (1..=d).map(|j| 0.05 / f64::from(j * j)).collect(),
        _ => vec![0.07],
    };
    let fitted = Fitted {
        outcome,
        focus,
        b: b.clone(),
        bz: interaction.then_some(0.02),
        z: 0.6,
    };
    let x = 2.3;
    let k = b.len() + usize::from(interaction);
    let cov = covariance(k);
    let ses: Vec<f64> = (0..k).map(|i| cov[i][i].sqrt()).collect();
    let y = fitted.predict(x);
    let at = EvaluationPoint {
        focus: x,
        outcome: y,
        focus_sd: Some(0.8),
        moderator: Some(fitted.z),
    };
    for scale in [
        Scale::MarginalEffect,
        Scale::SemiElasticity,
        Scale::Elasticity,
    ] {
        let inputs = EffectInputs {
            outcome,
            focus,
            coefficients: &b,
            interaction: fitted.bz,
            std_errors: &ses,
            covariance: Some(&cov),
            at,
            df: 50.0,
        };
        let got = effect(&inputs, scale).unwrap();
        let want = fitted.numeric_effect(&b, fitted.bz, x, scale);
        assert_relative_eq!(got.estimate, want, max_relative = 1e-6);

        // Delta method: gradient of the effect in the coefficients by finite differences,
        // holding the evaluation point fixed, then √(gᵀVg).
        let all: Vec<f64> = b.iter().copied().chain(fitted.bz).collect();
        let grad: Vec<f64> = (0..k)
            .map(|i| {
                let bump = |d: f64| {
                    let mut c = all.clone();
                    c[i] += d;
                    let (cb, cz) = if interaction {
                        (c[..k - 1].to_vec(), Some(c[k - 1]))
                    } else {
                        (c.clone(), None)
                    };
                    let shifted = EffectInputs {
                        coefficients: &cb,
                        interaction: cz,
                        ..inputs.clone()
                    };
                    effect(&shifted, scale).unwrap().estimate
                };
                (bump(1e-6) - bump(-1e-6)) / 2e-6
            })
            .collect();
        let var: f64 = (0..k)
            .flat_map(|i| (0..k).map(move |j| (i, j)))
            .map(|(i, j)| grad[i] * cov[i][j] * grad[j])
            .sum();
        assert_relative_eq!(got.std_error.unwrap(), var.sqrt(), max_relative = 1e-6);
    }
}

#[test]
fn every_outcome_and_focus_form_matches_finite_differences() {
    let focus_forms = [
        FocusForm::Level,
        FocusForm::Log,
        FocusForm::Log1p,
        FocusForm::Asinh,
        FocusForm::Polynomial(2),
        FocusForm::Polynomial(3),
        FocusForm::Standardized,
        FocusForm::Winsorized,
    ];
    for outcome in OUTCOMES {
        for focus in focus_forms {
            for interaction in [false, true] {
                check_against_finite_differences(outcome, focus, interaction);
            }
        }
    }
}

#[test]
fn turning_point_is_where_the_finite_difference_slope_vanishes() {
    // Quadratic with an interaction: slope b1 + 2·b2·x + b_xz·z.
    let fitted = Fitted {
        outcome: OutcomeForm::Log,
        focus: FocusForm::Polynomial(2),
        b: vec![0.08, -0.004],
        bz: Some(0.01),
        z: 1.0,
    };
    let cov = covariance(3);
    let ses: Vec<f64> = (0..3).map(|i| cov[i][i].sqrt()).collect();
    let inputs = EffectInputs {
        outcome: fitted.outcome,
        focus: fitted.focus,
        coefficients: &fitted.b,
        interaction: fitted.bz,
        std_errors: &ses,
        covariance: Some(&cov),
        at: EvaluationPoint {
            focus: 3.0,
            outcome: fitted.predict(3.0),
            focus_sd: None,
            moderator: Some(1.0),
        },
        df: 80.0,
    };
    let tp = effect(&inputs, Scale::MarginalEffect)
        .unwrap()
        .turning_point
        .unwrap();
    // −(0.08 + 0.01)/(2·(−0.004)) = 11.25.
    assert_relative_eq!(tp.value, 11.25, max_relative = 1e-12);
    let slope = fitted.numeric_effect(&fitted.b, fitted.bz, tp.value, Scale::MarginalEffect);
    assert!(slope.abs() < 1e-8, "slope at the turning point {slope}");
    // SE against a finite-difference gradient of −(b1 + bz·z)/(2b2).
    let f = |c: [f64; 3]| -(c[0] + c[2]) / (2.0 * c[1]);
    let base = [0.08, -0.004, 0.01];
    let grad: Vec<f64> = (0..3)
        .map(|i| {
            let (mut up, mut down) = (base, base);
            up[i] += 1e-8;
            down[i] -= 1e-8;
            (f(up) - f(down)) / 2e-8
        })
        .collect();
    let var: f64 = (0..3)
        .flat_map(|i| (0..3).map(move |j| (i, j)))
        .map(|(i, j)| grad[i] * cov[i][j] * grad[j])
        .sum();
    assert_relative_eq!(tp.std_error.unwrap(), var.sqrt(), max_relative = 1e-5);
}

#[test]
fn unit_step_proportional_change_is_exact_on_the_fitted_model() {
    // Log outcome, level focus: ŷ(x+1)/ŷ(x) − 1 = exp(b) − 1 for any x.
    let fitted = Fitted {
        outcome: OutcomeForm::Log,
        focus: FocusForm::Level,
        b: vec![0.25],
        bz: None,
        z: 0.0,
    };
    let inputs = EffectInputs {
        outcome: OutcomeForm::Log,
        focus: FocusForm::Level,
        coefficients: &[0.25],
        interaction: None,
        std_errors: &[0.05],
        covariance: None,
        at: EvaluationPoint {
            focus: 1.0,
            outcome: 10.0,
            focus_sd: None,
            moderator: None,
        },
        df: 30.0,
    };
    let p = effect(&inputs, Scale::SemiElasticity)
        .unwrap()
        .proportional_change
        .unwrap();
    assert_relative_eq!(
        p.value,
        fitted.predict(4.0) / fitted.predict(3.0) - 1.0,
        max_relative = 1e-12
    );
    // Halvorsen & Palmquist (1980, AER 70:474): an indicator with coefficient c in a log
    // equation changes y by exp(c) − 1; exp(0.25) − 1 = 0.2840254166877414 (by hand).
    assert_relative_eq!(p.value, 0.2840254166877414, max_relative = 1e-12);
    // Delta method: se·exp(c) = 0.05 · 1.2840254166877414.
    assert_relative_eq!(
        p.std_error.unwrap(),
        0.05 * 1.2840254166877414,
        max_relative = 1e-12
    );
}

fn simple(outcome: OutcomeForm, focus: FocusForm, b: &[f64], at: (f64, f64)) -> EffectInputs<'_> {
    EffectInputs {
        outcome,
        focus,
        coefficients: b,
        interaction: None,
        std_errors: &[0.01, 0.001, 0.0001][..b.len()],
        covariance: None,
        at: EvaluationPoint {
            focus: at.0,
            outcome: at.1,
            focus_sd: None,
            moderator: None,
        },
        df: 100.0,
    }
}

#[test]
fn textbook_functional_form_interpretations() {
    // Common practice (the functional-form table of introductory econometrics texts, e.g.
    // Wooldridge, Introductory Econometrics, ch. 2; from memory): level-level elasticity at the
    // means is b·x̄/ȳ; log-level semi-elasticity is b; log-log elasticity is b; level-log
    // marginal effect is b/x.
    let e = |i: &EffectInputs<'_>, s| effect(i, s).unwrap().estimate;
    // b = 2, x̄ = 5, ȳ = 40: 2·5/40 = 0.25.
    assert_relative_eq!(
        e(
            &simple(OutcomeForm::Level, FocusForm::Level, &[2.0], (5.0, 40.0)),
            Scale::Elasticity
        ),
        0.25
    );
    assert_relative_eq!(
        e(
            &simple(OutcomeForm::Log, FocusForm::Level, &[0.03], (5.0, 40.0)),
            Scale::SemiElasticity
        ),
        0.03
    );
    assert_relative_eq!(
        e(
            &simple(OutcomeForm::Log, FocusForm::Log, &[0.4], (5.0, 40.0)),
            Scale::Elasticity
        ),
        0.4
    );
    // Level-log: 0.8 / 5 = 0.16 per unit of x; a 1% rise in x moves y by about 0.8/100.
    assert_relative_eq!(
        e(
            &simple(OutcomeForm::Level, FocusForm::Log, &[0.8], (5.0, 40.0)),
            Scale::MarginalEffect
        ),
        0.16
    );
    // Log outcome, marginal effect in outcome units at ȳ = 40: 0.03·40 = 1.2.
    assert_relative_eq!(
        e(
            &simple(OutcomeForm::Log, FocusForm::Level, &[0.03], (5.0, 40.0)),
            Scale::MarginalEffect
        ),
        1.2
    );
    // Coefficient scale passes the first coefficient through untouched.
    assert_relative_eq!(
        e(
            &simple(OutcomeForm::Log, FocusForm::Log1p, &[0.07], (5.0, 40.0)),
            Scale::Coefficient
        ),
        0.07
    );
}

#[test]
fn quadratic_worked_example() {
    // Wooldridge, Introductory Econometrics, Example 6.2 (from memory): predicted wage
    // = 3.73 + 0.298·exper − 0.0061·exper². Marginal effect at exper = 10:
    // 0.298 − 2·0.0061·10 = 0.176; turning point 0.298/(2·0.0061) = 24.4262… years.
    let b = [0.298, -0.0061];
    let mut inputs = simple(
        OutcomeForm::Level,
        FocusForm::Polynomial(2),
        &b,
        (10.0, 6.0),
    );
    let out = effect(&inputs, Scale::MarginalEffect).unwrap();
    assert_relative_eq!(out.estimate, 0.176, max_relative = 1e-12);
    assert_relative_eq!(
        out.turning_point.unwrap().value,
        24.42622950819672,
        max_relative = 1e-12
    );
    // Without the covariance of b1 and b2 neither SE can be computed: say so, invent nothing.
    assert_eq!(out.std_error, None);
    assert_eq!(out.turning_point.unwrap().std_error, None);
    // With V = [[4e-4, −1e-6], [−1e-6, 1e-8]]: gradient of the turning point
    // (−1/(2b2), b1/(2b2²)) = (81.9672, 4004.2999); variance
    // 81.9672²·4e-4 − 2·81.9672·4004.2999·1e-6 + 4004.2999²·1e-8 = 2.19135 → SE 1.48032 (by hand).
    let cov = vec![vec![4e-4, -1e-6], vec![-1e-6, 1e-8]];
    inputs.covariance = Some(&cov);
    let out = effect(&inputs, Scale::MarginalEffect).unwrap();
    assert_relative_eq!(
        out.turning_point.unwrap().std_error.unwrap(),
        1.4803213093883163,
        max_relative = 1e-9
    );
    // ME SE: w = (1, 2·10) → 4e-4 − 2·20·1e-6 + 400·1e-8 = 3.64e-4 → 0.0190788.
    assert_relative_eq!(
        out.std_error.unwrap(),
        3.64e-4f64.sqrt(),
        max_relative = 1e-12
    );
}

#[test]
fn interaction_worked_example() {
    // Log outcome, b_x = 0.03, b_xz = 0.01, z = 1: semi-elasticity 0.03 + 0.01·1 = 0.04.
    // V = [[1e-4, −2e-5], [−2e-5, 4e-5]]: var = 1e-4 + 4e-5 − 2·2e-5 = 1e-4 → SE 0.01.
    let cov = vec![vec![1e-4, -2e-5], vec![-2e-5, 4e-5]];
    let inputs = EffectInputs {
        outcome: OutcomeForm::Log,
        focus: FocusForm::Level,
        coefficients: &[0.03],
        interaction: Some(0.01),
        std_errors: &[0.01, 4e-5f64.sqrt()],
        covariance: Some(&cov),
        at: EvaluationPoint {
            focus: 1.2,
            outcome: 18.9,
            focus_sd: None,
            moderator: Some(1.0),
        },
        df: 149.0,
    };
    let out = effect(&inputs, Scale::SemiElasticity).unwrap();
    assert_relative_eq!(out.estimate, 0.04, max_relative = 1e-12);
    assert_relative_eq!(out.std_error.unwrap(), 0.01, max_relative = 1e-12);
    // Without the covariance the SE of a sum of two coefficients is unavailable.
    let no_cov = EffectInputs {
        covariance: None,
        ..inputs.clone()
    };
    assert_eq!(
        effect(&no_cov, Scale::SemiElasticity).unwrap().std_error,
        None
    );
    // At z = 0 only b_x is involved, so its own SE is exact.
    let z0 = EffectInputs {
        covariance: None,
        at: EvaluationPoint {
            moderator: Some(0.0),
            ..inputs.at
        },
        ..inputs
    };
    assert_relative_eq!(
        effect(&z0, Scale::SemiElasticity)
            .unwrap()
            .std_error
            .unwrap(),
        0.01
    );
}

#[test]
fn standardized_focus_is_per_raw_unit_on_common_scales() {
    // b = 0.12 per sd, sd = 3: 0.04 per raw unit.
    let mut inputs = simple(
        OutcomeForm::Log,
        FocusForm::Standardized,
        &[0.12],
        (2.0, 20.0),
    );
    inputs.at.focus_sd = Some(3.0);
    assert_relative_eq!(
        effect(&inputs, Scale::SemiElasticity).unwrap().estimate,
        0.04,
        max_relative = 1e-12
    );
    assert_relative_eq!(effect(&inputs, Scale::Coefficient).unwrap().estimate, 0.12);
    inputs.at.focus_sd = None;
    assert!(matches!(
        effect(&inputs, Scale::SemiElasticity),
        Err(EffectError::Missing(_))
    ));
}

#[test]
fn bad_evaluation_points_and_shapes_are_clear_errors() {
    let log_at_zero = simple(OutcomeForm::Level, FocusForm::Log, &[0.5], (0.0, 10.0));
    let err = effect(&log_at_zero, Scale::MarginalEffect).unwrap_err();
    assert!(
        err.to_string().contains("x > 0") && err.to_string().contains("[report]"),
        "{err}"
    );
    let zero_outcome = simple(OutcomeForm::Level, FocusForm::Level, &[0.5], (1.0, 0.0));
    assert!(effect(&zero_outcome, Scale::Elasticity).is_err());
    let wrong = simple(
        OutcomeForm::Level,
        FocusForm::Polynomial(2),
        &[0.5],
        (1.0, 2.0),
    );
    assert!(matches!(
        effect(&wrong, Scale::MarginalEffect),
        Err(EffectError::WrongCount { .. })
    ));
    let mut bad_cov = simple(OutcomeForm::Level, FocusForm::Level, &[0.5], (1.0, 2.0));
    let cov = vec![vec![1.0, 0.0], vec![0.0, 1.0]];
    bad_cov.covariance = Some(&cov);
    assert_eq!(
        effect(&bad_cov, Scale::MarginalEffect).unwrap_err(),
        EffectError::CovarianceShape(1)
    );
}

#[test]
fn scale_names_round_trip() {
    for s in [
        Scale::Coefficient,
        Scale::Elasticity,
        Scale::SemiElasticity,
        Scale::MarginalEffect,
    ] {
        assert_eq!(Scale::parse(s.label()), Some(s));
    }
    assert_eq!(Scale::parse("semi elasticity"), None);
}
