//! Coefficient stability under selection on unobservables (Oster 2019, Journal of Business &
//! Economic Statistics 37:187).
//!
//! Inputs: the short regression (focus alone, or a named minimal set) with estimate β̊ and R̊²;
//! the long regression with β̃ and R̃²; var(y) = σ_y², var(x) = σ_x² and τ_x, the variance of the
//! focus after partialling out the long model's controls; and R_max.
//!
//! THE EXPRESSIONS BELOW ARE WRITTEN FROM MEMORY of the paper (Proposition 2 and its cubic;
//! Proposition 1 for the approximation), not copied from it. Checks (tests below): the two
//! recollections agree (δ is linear in the cubic's coefficients, and solving the cubic for δ
//! gives the δ formula); and, independently of the recollection, in Oster's model with
//! population moments the true δ and R_max give back the true β and δ(true β) = true δ.
//! tests/reference/inference/make_fixtures.py recomputes every input from raw data with numpy
//! and the roots with numpy.roots.
//!
//! With ν = β̃ − β, Δβ = β̊ − β̃, ΔR = R̃² − R̊², ΔR_max = R_max − R̃²:
//!   δ(β) = [ν·ΔR·σ_y²·τ_x + ν·σ_x²·τ_x·Δβ² + 2ν²·τ_x·Δβ·σ_x² + ν³·(τ_x·σ_x² − τ_x²)]
//!        / [ΔR_max·σ_y²·Δβ·σ_x² + ν·ΔR_max·σ_y²·(σ_x² − τ_x) + ν²·τ_x·Δβ·σ_x² + ν³·(τ_x·σ_x² − τ_x²)]
//! and for a given δ, β* = β̃ − ν with ν a root of A·ν³ + B·ν² + C·ν + D = 0,
//!   A = (δ − 1)(τ_x·σ_x² − τ_x²), B = (δ − 2)·τ_x·Δβ·σ_x²,
//!   C = δ·ΔR_max·σ_y²·(σ_x² − τ_x) − ΔR·σ_y²·τ_x − σ_x²·τ_x·Δβ²,  D = δ·ΔR_max·σ_y²·Δβ·σ_x².
//! Approximation (Proposition 1): β* ≈ β̃ − δ·Δβ·ΔR_max / ΔR.

use crate::api::{Covariance, ModelFit};

use super::InferenceError;

/// R_max as a multiple of the long model's R² when none is given (the paper's suggestion).
pub const DEFAULT_RMAX_FACTOR: f64 = 1.3;

/// What Oster's bounds need from the short and the long regression.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OsterInputs {
    /// Focus estimate in the short model (β̊).
    pub short_estimate: f64,
    /// Centred R² of the short model (R̊²).
    pub short_r2: f64,
    /// Focus estimate in the long model (β̃).
    pub long_estimate: f64,
    /// Centred R² of the long model (R̃²).
    pub long_r2: f64,
    /// Variance of the outcome (σ_y²).
    pub var_y: f64,
    /// Variance of the focus regressor (σ_x²), same divisor as `var_y`.
    pub var_x: f64,
    /// Variance of the focus after partialling out the long model's other columns (τ_x), same
    /// divisor.
    pub var_x_resid: f64,
    /// R_max; `None` means [`DEFAULT_RMAX_FACTOR`] × `long_r2`, capped at 1.
    pub r_max: Option<f64>,
}

/// Oster's δ and bias-adjusted β* for one pair of models.
#[derive(Debug, Clone, PartialEq)]
pub struct OsterResult {
    /// R_max used.
    pub r_max: f64,
    /// δ for β = 0: how strongly unobservables would have to be related to the focus, relative
    /// to the observed controls, to explain the whole long estimate away.
    pub delta_for_zero: f64,
    /// β* for δ = 1: the real root of the (then quadratic) equation closest to β̃; NaN if none.
    pub beta_star: f64,
    /// Every real root β* for δ = 1 (one or two), ascending.
    pub beta_star_roots: Vec<f64>,
    /// Proposition 1 approximation β̃ − Δβ·ΔR_max/ΔR for δ = 1.
    pub beta_star_approx: f64,
}

impl OsterInputs {
    /// Reads the inputs from the short and long fits of one design: estimates and R² of the
    /// focus column `focus`, `var_y` and `var_x` (divisor n) supplied by the caller, and τ_x from
    /// the long fit's classical standard error: Σ x̃ᵢ² = σ̂²/SE², so τ_x = σ̂²/(SE²·n). The long
    /// fit must have been made with [`Covariance::Classical`] among its choices.
    pub fn from_fits(
        short: &ModelFit,
        long: &ModelFit,
        focus: usize,
        var_y: f64,
        var_x: f64,
    ) -> Result<OsterInputs, InferenceError> {
        fn find<'m>(
            fit: &'m ModelFit,
            focus: usize,
            label: &str,
        ) -> Result<&'m crate::api::Coefficient, InferenceError> {
            fit.coefficients
                .iter()
                .find(|c| c.column == focus)
                .ok_or_else(|| {
                    InferenceError::Invalid(format!(
                        "the {label} model does not report the focus column {focus}; track it"
                    ))
                })
        }
        let (s, l) = (find(short, focus, "short")?, find(long, focus, "long")?);
        let classical = l
            .inference
            .iter()
            .find(|i| i.covariance == Covariance::Classical)
            .ok_or_else(|| {
                InferenceError::Invalid(
                    "Oster's bounds need the long model fitted with classical errors".into(),
                )
            })?;
        let resid_sum = long.resid_sd.powi(2) / classical.std_error.powi(2);
        Ok(OsterInputs {
            short_estimate: s.estimate,
            short_r2: short.r_squared,
            long_estimate: l.estimate,
            long_r2: long.r_squared,
            var_y,
            var_x,
            var_x_resid: resid_sum / long.n_obs as f64,
            r_max: None,
        })
    }

    fn r_max(&self) -> f64 {
        self.r_max
            .unwrap_or((DEFAULT_RMAX_FACTOR * self.long_r2).min(1.0))
    }

    /// The cubic's coefficients (A, B, C, D) in ν = β̃ − β for a given δ.
    fn cubic(&self, delta: f64) -> [f64; 4] {
        let (sx, tx, sy) = (self.var_x, self.var_x_resid, self.var_y);
        let db = self.short_estimate - self.long_estimate;
        let dr = self.long_r2 - self.short_r2;
        let drm = self.r_max() - self.long_r2;
        [
            (delta - 1.0) * (tx * sx - tx * tx),
            (delta - 2.0) * tx * db * sx,
            delta * drm * sy * (sx - tx) - dr * sy * tx - sx * tx * db * db,
            delta * drm * sy * db * sx,
        ]
    }

    /// δ that makes β the bias-adjusted estimate (the recalled closed form).
    pub fn delta_for(&self, beta: f64) -> f64 {
        let (sx, tx, sy) = (self.var_x, self.var_x_resid, self.var_y);
        let nu = self.long_estimate - beta;
        let db = self.short_estimate - self.long_estimate;
        let dr = self.long_r2 - self.short_r2;
        let drm = self.r_max() - self.long_r2;
        let num = nu * dr * sy * tx
            + nu * sx * tx * db * db
            + 2.0 * nu * nu * tx * db * sx
            + nu.powi(3) * (tx * sx - tx * tx);
        let den = drm * sy * db * sx
            + nu * drm * sy * (sx - tx)
            + nu * nu * tx * db * sx
            + nu.powi(3) * (tx * sx - tx * tx);
        num / den
    }
}

/// Computes δ for β = 0 and β* for δ = 1 (see the module docs for the expressions).
pub fn oster(inputs: &OsterInputs) -> Result<OsterResult, InferenceError> {
    let r_max = inputs.r_max();
    let positive = |v: f64| v.is_finite() && v > 0.0;
    if ![inputs.var_y, inputs.var_x, inputs.var_x_resid]
        .into_iter()
        .all(positive)
    {
        return Err(InferenceError::Invalid(
            "Oster's bounds need positive, finite variances of the outcome, the focus and the focus net of controls".into(),
        ));
    }
    if !(r_max > inputs.long_r2 && r_max <= 1.0) {
        return Err(InferenceError::Invalid(format!(
            "R_max ({r_max}) must exceed the long model's R² ({}) and be at most 1",
            inputs.long_r2
        )));
    }
    if inputs.long_r2 == inputs.short_r2 {
        return Err(InferenceError::Invalid(
            "the short and long models have the same R²: the controls explain nothing, so no movement can be scaled".into(),
        ));
    }
    let [_, b, c, d] = inputs.cubic(1.0);
    // With δ = 1 the cubic term vanishes: b·ν² + c·ν + d = 0.
    let nus = quadratic_roots(b, c, d);
    let mut roots: Vec<f64> = nus.iter().map(|nu| inputs.long_estimate - nu).collect();
    roots.sort_by(f64::total_cmp);
    let beta_star = nus
        .iter()
        .min_by(|x, y| x.abs().total_cmp(&y.abs()))
        .map_or(f64::NAN, |nu| inputs.long_estimate - nu);
    let db = inputs.short_estimate - inputs.long_estimate;
    let beta_star_approx =
        inputs.long_estimate - db * (r_max - inputs.long_r2) / (inputs.long_r2 - inputs.short_r2);
    Ok(OsterResult {
        r_max,
        delta_for_zero: inputs.delta_for(0.0),
        beta_star,
        beta_star_roots: roots,
        beta_star_approx,
    })
}

/// Real roots of a·x² + b·x + c = 0 (linear when a = 0), by the cancellation-free form.
fn quadratic_roots(a: f64, b: f64, c: f64) -> Vec<f64> {
    if a == 0.0 {
        return if b != 0.0 { vec![-c / b] } else { Vec::new() };
    }
    let disc = b * b - 4.0 * a * c;
    if disc < 0.0 {
        return Vec::new();
    }
    let q = -0.5 * (b + b.signum() * disc.sqrt());
    if q == 0.0 {
        return vec![0.0];
    }
    vec![q / a, c / q]
}

#[cfg(test)]
mod tests {
    use super::*;

    fn example() -> OsterInputs {
        OsterInputs {
            short_estimate: 1.0,
            short_r2: 0.10,
            long_estimate: 0.6,
            long_r2: 0.30,
            var_y: 2.0,
            var_x: 1.0,
            var_x_resid: 0.8,
            r_max: Some(0.39),
        }
    }

    #[test]
    fn delta_for_zero_by_hand() {
        // Hand computation from the recalled formula (arithmetic checked on paper):
        // ν = 0.6, Δβ = 0.4, ΔR = 0.2, ΔR_max = 0.09, σ_y² = 2, σ_x² = 1, τ = 0.8.
        // num = 0.6·0.2·2·0.8 + 0.6·1·0.8·0.16 + 2·0.36·0.8·0.4 + 0.216·(0.8 − 0.64)
        //     = 0.192 + 0.0768 + 0.2304 + 0.03456 = 0.53376
        // den = 0.09·2·0.4·1 + 0.6·0.09·2·0.2 + 0.36·0.8·0.4 + 0.216·0.16
        //     = 0.072 + 0.0216 + 0.1152 + 0.03456 = 0.24336
        let r = oster(&example()).unwrap();
        assert!((r.delta_for_zero - 0.53376 / 0.24336).abs() < 1e-12);
        // Approximation: 0.6 − 0.4·0.09/0.2 = 0.42.
        assert!((r.beta_star_approx - 0.42).abs() < 1e-12);
    }

    #[test]
    fn delta_formula_inverts_the_cubic() {
        // The two recollections agree: δ(β*) = 1 at each root for δ = 1, and for any β the
        // cubic with δ = δ(β) vanishes at ν = β̃ − β.
        let inp = example();
        let r = oster(&inp).unwrap();
        assert!(!r.beta_star_roots.is_empty());
        for &root in &r.beta_star_roots {
            assert!((inp.delta_for(root) - 1.0).abs() < 1e-9, "{root}");
        }
        for beta in [-1.0, 0.0, 0.3, 2.0] {
            let delta = inp.delta_for(beta);
            let [a, b, c, d] = inp.cubic(delta);
            let nu = inp.long_estimate - beta;
            let value = ((a * nu + b) * nu + c) * nu + d;
            let scale = (a * nu.powi(3)).abs() + (b * nu * nu).abs() + (c * nu).abs() + d.abs();
            assert!(value.abs() <= 1e-12 * scale, "{beta}: {value}");
        }
        // The root closest to β̃ is near the first-order approximation here.
        assert!((r.beta_star - r.beta_star_approx).abs() < 0.1, "{r:?}");
    }

    /// Population moments of Oster's model (her section 3, as recalled): Y = βX + W₁ + W₂ + ε
    /// with W₁ (observed index), W₂ (unobserved index), ε mutually uncorrelated, and
    /// X = a₁W₁ + a₂W₂ + u. Proportional selection then holds with δ = (σ_2X/σ_22)/(σ_1X/σ_11) =
    /// a₂/a₁, and R_max is the R² of Y on X, W₁ and W₂. Returns the inputs and the true δ.
    fn population(
        beta: f64,
        a1: f64,
        a2: f64,
        s1: f64,
        s2: f64,
        su: f64,
        se: f64,
    ) -> (OsterInputs, f64) {
        let var_x = a1 * a1 * s1 + a2 * a2 * s2 + su;
        let cov_yx = beta * var_x + a1 * s1 + a2 * s2;
        let cov_yw1 = beta * a1 * s1 + s1;
        let var_y = beta * beta * var_x + s1 + s2 + 2.0 * beta * (a1 * s1 + a2 * s2) + se;
        // Long regression of Y on X and W₁: the 2 × 2 normal equations.
        let (m11, m12, m22) = (var_x, a1 * s1, s1);
        let det = m11 * m22 - m12 * m12;
        let b = (m22 * cov_yx - m12 * cov_yw1) / det;
        let c = (m11 * cov_yw1 - m12 * cov_yx) / det;
        let inputs = OsterInputs {
            short_estimate: cov_yx / var_x,
            short_r2: cov_yx * cov_yx / (var_x * var_y),
            long_estimate: b,
            long_r2: (b * cov_yx + c * cov_yw1) / var_y,
            var_y,
            var_x,
            // Residual variance of X after W₁.
            var_x_resid: a2 * a2 * s2 + su,
            r_max: Some(1.0 - se / var_y),
        };
        (inputs, a2 / a1)
    }

    #[test]
    fn recovers_the_true_beta_and_delta_in_the_population() {
        // Independent of the recollection: in Oster's model with population moments, the true
        // δ and R_max must make β* equal the true β, and δ(true β) equal the true δ.
        for &(beta, a1, a2, s1, s2, su, se) in &[
            (0.5, 0.8, 0.8, 1.0, 1.5, 1.0, 2.0),
            (0.5, 0.6, 1.2, 1.0, 0.7, 1.3, 1.0),
            (-0.3, 1.0, 0.4, 2.0, 1.0, 0.5, 3.0),
            (-0.3, 0.5, 0.5, 1.0, 2.0, 1.0, 1.5),
        ] {
            let (inp, delta) = population(beta, a1, a2, s1, s2, su, se);
            assert!(
                (inp.delta_for(beta) - delta).abs() < 1e-9 * delta.abs().max(1.0),
                "{:?}",
                (inp.delta_for(beta), delta)
            );
            let [a, b, c, d] = inp.cubic(delta);
            let nu = inp.long_estimate - beta;
            let value = ((a * nu + b) * nu + c) * nu + d;
            assert!(value.abs() < 1e-10 * (d.abs() + c.abs()), "{value}");
            if delta == 1.0 {
                let r = oster(&inp).unwrap();
                assert!(
                    r.beta_star_roots.iter().any(|&x| (x - beta).abs() < 1e-9),
                    "{r:?}"
                );
                // Here the root closest to β̃ (our stated choice) is the true one.
                assert!((r.beta_star - beta).abs() < 1e-9, "{r:?}");
            }
        }
    }

    #[test]
    fn refuses_rmax_below_long_r2() {
        let inp = OsterInputs {
            r_max: Some(0.2),
            ..example()
        };
        assert!(oster(&inp).is_err());
    }
}
