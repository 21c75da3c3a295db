//! Effects on a common scale across functional forms, with delta-method standard errors.
//!
//! A model relates a transformed outcome g(y) to focus terms F₁(x)…F_d(x) (and possibly an
//! interaction x·z of the raw focus with a moderator z):
//!
//! g(y) = … + Σⱼ bⱼ Fⱼ(x) + b_xz · x · z + …
//!
//! so dg/dx = Σⱼ bⱼ Fⱼ′(x) + b_xz · z and dy/dx = (dg/dx) / g′(y). Every scale below is this
//! derivative times a factor fixed by the evaluation point, so each effect is linear in the
//! coefficients and its delta-method variance is exactly wᵀVw. The formulas and their sources
//! are in docs/methods.md (part 2).

use serde::Serialize;

/// The common scale on which the study reports the tracked effect.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Scale {
    /// The raw coefficient of the model's first focus term (comparable only across models
    /// that share outcome and focus forms).
    #[serde(rename = "coefficient")]
    Coefficient,
    /// Per-cent change in the outcome per per-cent change in the focus: (dy/dx)·x/y.
    #[serde(rename = "elasticity")]
    Elasticity,
    /// Proportional change in the outcome per unit of the focus: (dy/dx)/y.
    #[serde(rename = "semi-elasticity")]
    SemiElasticity,
    /// Change in the outcome, in outcome units, per unit of the focus: dy/dx.
    #[serde(rename = "marginal effect")]
    MarginalEffect,
}

impl Scale {
    /// The name the study file and the reports use.
    pub fn label(self) -> &'static str {
        match self {
            Scale::Coefficient => "coefficient",
            Scale::Elasticity => "elasticity",
            Scale::SemiElasticity => "semi-elasticity",
            Scale::MarginalEffect => "marginal effect",
        }
    }

    /// Parses a scale name as written in a study file.
    pub fn parse(text: &str) -> Option<Scale> {
        [
            Scale::Coefficient,
            Scale::Elasticity,
            Scale::SemiElasticity,
            Scale::MarginalEffect,
        ]
        .into_iter()
        .find(|s| s.label() == text)
    }
}

/// How the outcome enters the model.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum OutcomeForm {
    /// y.
    Level,
    /// ln y.
    Log,
    /// ln(1 + y).
    Log1p,
    /// asinh y.
    Asinh,
}

/// How the focus regressor enters the model.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum FocusForm {
    /// x.
    Level,
    /// ln x.
    Log,
    /// ln(1 + x).
    Log1p,
    /// asinh x.
    Asinh,
    /// x, x², …, x^d (d = 2 is the quadratic).
    Polynomial(u32),
    /// (x − mean)/sd; the evaluation point must carry the sd.
    Standardized,
    /// x clipped at two quantiles; treated as x inside the clip bounds (the evaluation point
    /// must lie inside them, where the derivative is 1).
    Winsorized,
}

/// Where the effect is evaluated, in raw units (the study's values, or the sample means).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EvaluationPoint {
    /// Focus value x (raw units).
    pub focus: f64,
    /// Outcome value y (raw units), used to move from g(y) to y.
    pub outcome: f64,
    /// Standard deviation of the raw focus over the model's rows (standardized focus only).
    pub focus_sd: Option<f64>,
    /// Moderator value z for an interaction of the raw focus with a moderator.
    pub moderator: Option<f64>,
}

/// What [`effect`] needs about one model under one covariance choice.
#[derive(Debug, Clone, PartialEq)]
pub struct EffectInputs<'a> {
    /// Outcome form.
    pub outcome: OutcomeForm,
    /// Focus form.
    pub focus: FocusForm,
    /// Coefficients of the focus terms in order (one, or d for a polynomial of degree d).
    pub coefficients: &'a [f64],
    /// Coefficient of the interaction x·z, if the model has one.
    pub interaction: Option<f64>,
    /// Standard errors parallel to `coefficients`, then the interaction's if present.
    pub std_errors: &'a [f64],
    /// Covariance matrix among the same coefficients (rows and columns in the same order), if
    /// the engine provides it. Without it, only effects that use a single coefficient get a
    /// standard error.
    pub covariance: Option<&'a [Vec<f64>]>,
    /// Evaluation point.
    pub at: EvaluationPoint,
    /// Degrees of freedom of the covariance choice's t reference.
    pub df: f64,
}

/// A quantity derived from the coefficients, with its delta-method standard error when it
/// can be computed.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Derived {
    /// Value.
    pub value: f64,
    /// Delta-method standard error; `None` when the needed covariances are unavailable.
    pub std_error: Option<f64>,
}

/// The tracked effect of one model under one covariance choice.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Effect {
    /// The effect on the study's scale.
    pub estimate: f64,
    /// Its standard error; `None` means the delta-method SE is unavailable (say so, never
    /// guess).
    pub std_error: Option<f64>,
    /// Degrees of freedom of the t reference for tests and bands.
    pub df: f64,
    /// Log outcome and a focus entering linearly: exp(effect of a one-unit step on ln y) − 1,
    /// the exact proportional change for a unit step (or an indicator switching on).
    pub proportional_change: Option<Derived>,
    /// Quadratic focus: the turning point −(b₁ + b_xz·z)/(2·b₂) in focus units.
    pub turning_point: Option<Derived>,
    /// Two-sided p-value of "effect = 0" when it comes from elsewhere than the t test of
    /// `estimate / std_error` (the wild cluster bootstrap; or the stored value when re-read);
    /// significance then uses it. `None` means the t test.
    #[serde(skip)]
    pub p_value: Option<f64>,
}

impl Effect {
    /// An effect that is a plain coefficient with its standard error (scale `coefficient`,
    /// e.g. when re-rendering from `models.csv`).
    pub fn coefficient(estimate: f64, std_error: Option<f64>, df: f64) -> Effect {
        Effect {
            estimate,
            std_error,
            df,
            proportional_change: None,
            turning_point: None,
            p_value: None,
        }
    }
}

/// Why an effect cannot be computed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum EffectError {
    /// The coefficient or SE count does not match the focus form.
    #[error("the {form} focus form needs {expected} coefficient(s) and as many standard errors, got {got} coefficient(s) and {ses} standard error(s); pass the focus terms in model order")]
    WrongCount {
        /// Focus form description.
        form: String,
        /// Coefficients expected.
        expected: usize,
        /// Coefficients given.
        got: usize,
        /// Standard errors given.
        ses: usize,
    },
    /// The covariance matrix has the wrong shape.
    #[error(
        "the covariance matrix must be {0}×{0}, matching the coefficients (and the interaction)"
    )]
    CovarianceShape(usize),
    /// The evaluation point is outside the form's domain.
    #[error("cannot evaluate at {what} = {value}: {why}; name another evaluation value in the study's [report] section")]
    OutsideDomain {
        /// Which value.
        what: &'static str,
        /// The value.
        value: f64,
        /// The reason.
        why: &'static str,
    },
    /// A needed part of the evaluation point is missing.
    #[error("{0}")]
    Missing(&'static str),
}

/// The focus coefficients followed by the interaction coefficient, if any: the order the
/// gradients and the covariance matrix use.
fn stacked_coefficients(inputs: &EffectInputs<'_>) -> Vec<f64> {
    inputs
        .coefficients
        .iter()
        .copied()
        .chain(inputs.interaction)
        .collect()
}

/// Computes the tracked effect on `scale` with its delta-method standard error.
pub fn effect(inputs: &EffectInputs<'_>, scale: Scale) -> Result<Effect, EffectError> {
    check_counts(inputs)?;
    let k = inputs.coefficients.len() + usize::from(inputs.interaction.is_some());
    let all = stacked_coefficients(inputs);

    let weights = match scale {
        Scale::Coefficient => {
            let mut w = vec![0.0; k];
            w[0] = 1.0;
            w
        }
        _ => {
            let factor = scale_factor(inputs, scale)?;
            derivative_weights(inputs)?
                .into_iter()
                .map(|w| w * factor)
                .collect()
        }
    };
    let estimate = dot(&weights, &all);
    let std_error = linear_se(&weights, inputs);
    Ok(Effect {
        estimate,
        std_error,
        df: inputs.df,
        proportional_change: proportional_change(inputs),
        turning_point: turning_point(inputs),
        p_value: None,
    })
}

/// Weights w with dg/dx = w·(b₁…b_d, b_xz): Fⱼ′(x) for the focus terms, z for the interaction.
fn derivative_weights(inputs: &EffectInputs<'_>) -> Result<Vec<f64>, EffectError> {
    let x = inputs.at.focus;
    let mut w: Vec<f64> = match inputs.focus {
        FocusForm::Level | FocusForm::Winsorized => vec![1.0],
        FocusForm::Log => {
            if x <= 0.0 {
                return Err(outside("the focus", x, "a log focus needs x > 0"));
            }
            vec![1.0 / x]
        }
        FocusForm::Log1p => {
            if x <= -1.0 {
                return Err(outside("the focus", x, "a log1p focus needs x > −1"));
            }
            vec![1.0 / (1.0 + x)]
        }
        FocusForm::Asinh => vec![1.0 / (1.0 + x * x).sqrt()],
        FocusForm::Polynomial(d) => (1..=d)
            .map(|j| f64::from(j) * x.powi(j as i32 - 1))
            .collect(),
        FocusForm::Standardized => match inputs.at.focus_sd {
            Some(sd) if sd > 0.0 && sd.is_finite() => vec![1.0 / sd],
            _ => {
                return Err(EffectError::Missing(
                    "a standardized focus needs the standard deviation of the raw focus over the model's rows (positive)",
                ))
            }
        },
    };
    if inputs.interaction.is_some() {
        w.push(inputs.at.moderator.ok_or(EffectError::Missing(
            "a model with an interaction needs the moderator value to evaluate the effect at",
        ))?);
    }
    Ok(w)
}

/// The factor turning dg/dx into the chosen scale at the evaluation point.
fn scale_factor(inputs: &EffectInputs<'_>, scale: Scale) -> Result<f64, EffectError> {
    let y = inputs.at.outcome;
    // 1 / g′(y): how much y moves per unit of g(y).
    let dy_dg = match inputs.outcome {
        OutcomeForm::Level => 1.0,
        OutcomeForm::Log => {
            if y <= 0.0 {
                return Err(outside("the outcome", y, "a log outcome needs y > 0"));
            }
            y
        }
        OutcomeForm::Log1p => {
            if y <= -1.0 {
                return Err(outside("the outcome", y, "a log1p outcome needs y > −1"));
            }
            1.0 + y
        }
        OutcomeForm::Asinh => (1.0 + y * y).sqrt(),
    };
    let needs_y = matches!(scale, Scale::Elasticity | Scale::SemiElasticity);
    if needs_y && y == 0.0 {
        return Err(outside(
            "the outcome",
            y,
            "a proportional change is undefined at y = 0",
        ));
    }
    Ok(match scale {
        Scale::Coefficient => 1.0,
        Scale::MarginalEffect => dy_dg,
        Scale::SemiElasticity => dy_dg / y,
        Scale::Elasticity => dy_dg * inputs.at.focus / y,
    })
}

/// exp(c) − 1 with c the change in ln y for a one-unit step of a linearly entering focus.
fn proportional_change(inputs: &EffectInputs<'_>) -> Option<Derived> {
    if inputs.outcome != OutcomeForm::Log
        || !matches!(
            inputs.focus,
            FocusForm::Level | FocusForm::Winsorized | FocusForm::Standardized
        )
    {
        return None;
    }
    let mut w = vec![1.0];
    if inputs.interaction.is_some() {
        w.push(inputs.at.moderator?);
    }
    let all = stacked_coefficients(inputs);
    let c = dot(&w, &all);
    let g = c.exp();
    // d(exp(c) − 1)/db = exp(c)·w.
    let grad: Vec<f64> = w.iter().map(|wi| wi * g).collect();
    Some(Derived {
        value: c.exp_m1(),
        std_error: linear_se(&grad, inputs),
    })
}

/// −(b₁ + b_xz·z)/(2·b₂) for a quadratic focus.
fn turning_point(inputs: &EffectInputs<'_>) -> Option<Derived> {
    if inputs.focus != FocusForm::Polynomial(2) {
        return None;
    }
    let (b1, b2) = (inputs.coefficients[0], inputs.coefficients[1]);
    let (bz, z) = match inputs.interaction {
        Some(b) => (b, inputs.at.moderator?),
        None => (0.0, 0.0),
    };
    let slope = b1 + bz * z;
    let value = -slope / (2.0 * b2);
    // Gradient with respect to (b₁, b₂, b_xz).
    let mut grad = vec![-1.0 / (2.0 * b2), slope / (2.0 * b2 * b2)];
    if inputs.interaction.is_some() {
        grad.push(-z / (2.0 * b2));
    }
    Some(Derived {
        value,
        std_error: linear_se(&grad, inputs),
    })
}

/// √(wᵀVw); with no covariance matrix, |wₖ|·seₖ when only one weight is non-zero, else `None`.
fn linear_se(weights: &[f64], inputs: &EffectInputs<'_>) -> Option<f64> {
    if let Some(v) = inputs.covariance {
        let mut var = 0.0;
        for (i, wi) in weights.iter().enumerate() {
            for (j, wj) in weights.iter().enumerate() {
                var += wi * v[i][j] * wj;
            }
        }
        return Some(var.max(0.0).sqrt());
    }
    let mut nonzero = weights.iter().enumerate().filter(|(_, w)| **w != 0.0);
    match (nonzero.next(), nonzero.next()) {
        (Some((i, w)), None) => Some(w.abs() * inputs.std_errors[i]),
        (None, _) => Some(0.0),
        _ => None,
    }
}

fn check_counts(inputs: &EffectInputs<'_>) -> Result<(), EffectError> {
    let (form, expected) = match inputs.focus {
        FocusForm::Polynomial(d) => (format!("polynomial of degree {d}"), d as usize),
        other => (format!("{other:?}").to_lowercase(), 1),
    };
    let k = expected + usize::from(inputs.interaction.is_some());
    if expected < 1 || inputs.coefficients.len() != expected || inputs.std_errors.len() != k {
        return Err(EffectError::WrongCount {
            form,
            expected,
            got: inputs.coefficients.len(),
            ses: inputs.std_errors.len(),
        });
    }
    if let Some(v) = inputs.covariance {
        if v.len() != k || v.iter().any(|row| row.len() != k) {
            return Err(EffectError::CovarianceShape(k));
        }
    }
    Ok(())
}

fn outside(what: &'static str, value: f64, why: &'static str) -> EffectError {
    EffectError::OutsideDomain { what, value, why }
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}
