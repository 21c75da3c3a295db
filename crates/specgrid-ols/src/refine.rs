//! Iterative refinement of the coefficients (Björck 1967; corrected semi-normal equations,
//! Björck 1987, "Stability analysis of the method of seminormal equations", Linear Algebra
//! Appl. 88/89): b ← b + (X'X)⁻¹X'r with r = y − Xb accumulated in doubled precision
//! (Ogita, Rump & Oishi 2005, "Accurate sum and dot product", SIAM J. Sci. Comput. 26).
//!
//! Needed where a coefficient's contribution is tiny next to the outcome (polynomials in raw x,
//! NIST Wampler sets): plain QR is then accurate only relative to ‖b‖, not to each |b_j|.

use faer::{ColRef, MatRef};

use crate::api::{FitOptions, ModelError};
use crate::model_core::CoreFit;

/// Unit roundoff of f64.
const EPS: f64 = f64::EPSILON / 2.0;
/// Refine when the first-order bound says a coefficient may be off by more than this fraction
/// of its yardstick (b̃ = coefficients in scaled units, i.e. in units of y).
const TRIGGER: f64 = 1e-9;
/// Largest last correction (relative to the yardstick) accepted as converged: the remaining
/// error is about one more correction, so 1e-8 leaves a factor 10 against the 7-digit promise.
const ACCEPT: f64 = 1e-8;
/// Up to this many rows × coefficients, refinement is cheap (a few passes over at most 65,536
/// numbers), so it runs at the much lower [`SMALL_TRIGGER`].
const SMALL_WORK: usize = 1 << 16;
/// Trigger for small problems: a thousand times below [`TRIGGER`], which keeps the margin
/// refinement buys on the ill-conditioned NIST sets (Wampler3 at LRE ≥ 10) while a
/// well-conditioned small model, whose bound sits near 1e-14 of its yardstick, skips the passes
/// (they were most of the per-model cost of the many-small-models scenario, docs/performance.md).
const SMALL_TRIGGER: f64 = 1e-12;
/// Most refinement steps.
const MAX_STEPS: usize = 12;

/// Size against which a coefficient's digits are judged, in scaled units: the larger of |b̃_j|
/// and its classical standard error (a coefficient indistinguishable from zero needs digits
/// relative to its uncertainty, not to itself).
fn yardsticks(core: &CoreFit) -> Vec<f64> {
    let k = core.k();
    let sigma = core.sigma2().sqrt();
    (0..k)
        .map(|q| {
            let row: f64 = (q..k).map(|c| core.rinv[q + c * k].powi(2)).sum();
            (core.coef[q] * core.scales[q])
                .abs()
                .max(sigma * row.sqrt())
        })
        .collect()
}

/// Whether the model's coefficients need refinement: for some coefficient the first-order
/// rounding bound (normwise in the data, per coefficient; Higham, Accuracy and Stability of
/// Numerical Algorithms, 2nd ed., ch. 20, and Golub & Van Loan, Thm 5.3.1)
/// u·(‖e_j'R⁻¹‖·(√k‖b̃‖ + ‖y‖) + ‖e_j'R⁻¹R⁻ᵀ‖·√k‖r‖), in scaled units (‖X̃‖ ≤ √k for unit
/// columns), exceeds [`TRIGGER`] times its yardstick ([`SMALL_TRIGGER`] for small problems,
/// n·k ≤ [`SMALL_WORK`], where refinement is cheap and buys margin: NIST Wampler3 goes from
/// LRE 9.2 unrefined to 10).
pub(crate) fn needs_refinement(core: &CoreFit) -> bool {
    let k = core.k();
    let trigger = if core.n * k <= SMALL_WORK {
        SMALL_TRIGGER
    } else {
        TRIGGER
    };
    let root_k = (k as f64).sqrt();
    let b_norm = core
        .coef
        .iter()
        .zip(&core.scales)
        .map(|(b, s)| (b * s).powi(2))
        .sum::<f64>()
        .sqrt();
    let y_norm = core.tss.uncentred.sqrt();
    let r_norm = core.rss.sqrt();
    // R⁻¹ is upper triangular: entry (i, c) is stored for i ≤ c, and every index below has
    // c ≥ the row, so the entries are read directly (no test for the zero triangle).
    let rinv = &core.rinv;
    yardsticks(core).iter().enumerate().any(|(j, &yard)| {
        let row_inv = (j..k).map(|c| rinv[j + c * k].powi(2)).sum::<f64>().sqrt();
        // Row j of R⁻¹R⁻ᵀ: (R⁻¹R⁻ᵀ)[j, l] = Σ_{c ≥ max(j, l)} R⁻¹[j, c]·R⁻¹[l, c].
        let row_gram = (0..k)
            .map(|l| {
                (j.max(l)..k)
                    .map(|c| rinv[j + c * k] * rinv[l + c * k])
                    .sum::<f64>()
                    .powi(2)
            })
            .sum::<f64>()
            .sqrt();
        let bound = EPS * (row_inv * (root_k * b_norm + y_norm) + row_gram * root_k * r_norm);
        bound > trigger * yard
    })
}

/// Refines `core.coef` in place and replaces `core.rss` with the accurately accumulated sum.
/// Refuses the model when the corrections stop shrinking while still above [`ACCEPT`] of a
/// coefficient's yardstick (the corrected semi-normal equations contract by about κ²u per
/// step, so they stall when κ²u approaches 1).
pub(crate) fn refine(
    core: &mut CoreFit,
    x: MatRef<'_, f64>,
    y: ColRef<'_, f64>,
    opts: &FitOptions,
    resid: &mut Vec<f64>,
) -> Result<(), ModelError> {
    let (n, k) = (core.n, core.k());
    resid.resize(n, 0.0);
    let yard = yardsticks(core);
    let mut g = vec![0.0; k];
    let mut v = vec![0.0; k];
    let mut previous = f64::INFINITY;
    let mut worst = f64::INFINITY;
    for _ in 0..MAX_STEPS {
        compensated_residuals(core, x, y, resid);
        core.rss = resid.iter().map(|r| r * r).sum();
        for (q, gq) in g.iter_mut().enumerate() {
            let col = x.col(core.kept[q]);
            let dot: f64 = resid.iter().zip(col.iter()).map(|(r, xv)| r * xv).sum();
            *gq = dot / core.scales[q];
        }
        // δ̃ = R⁻¹R⁻ᵀ D⁻¹X'r in scaled units; δ = D⁻¹δ̃.
        for (c, vc) in v.iter_mut().enumerate() {
            *vc = (0..=c).map(|l| core.rinv[l + c * k] * g[l]).sum();
        }
        let mut step = 0.0;
        worst = 0.0f64;
        for (q, yq) in yard.iter().enumerate() {
            let d: f64 = (q..k).map(|c| core.rinv[q + c * k] * v[c]).sum();
            core.coef[q] += d / core.scales[q];
            step += d * d;
            worst = worst.max(d.abs() / yq);
        }
        let step = step.sqrt();
        if worst <= 4.0 * EPS || step > 0.5 * previous {
            break;
        }
        previous = step;
    }
    if worst <= ACCEPT {
        Ok(())
    } else {
        Err(ModelError::IllConditioned {
            condition: core.condition,
            limit: opts.condition_limit,
        })
    }
}

/// rᵢ = yᵢ − Σ_l x_il b_l with the products and sums carried in doubled precision
/// (TwoProduct by Veltkamp–Dekker splitting, TwoSum; Ogita, Rump & Oishi 2005, Algorithms 3.2,
/// 3.3 and Dot2). Splitting instead of a fused multiply-add keeps this loop inline on every
/// x86-64 CPU: without the `fma` target feature `f64::mul_add` is a library call, which made
/// refinement most of the cost of a fit (docs/performance.md). Each coefficient is split once.
fn compensated_residuals(core: &CoreFit, x: MatRef<'_, f64>, y: ColRef<'_, f64>, out: &mut [f64]) {
    let cols: Vec<ColRef<'_, f64>> = core.kept.iter().map(|&c| x.col(c)).collect();
    let neg_b: Vec<(f64, f64, f64)> = core
        .coef
        .iter()
        .map(|&b| {
            let (hi, lo) = split(-b);
            (-b, hi, lo)
        })
        .collect();
    for (i, o) in out.iter_mut().enumerate() {
        let (mut s, mut err) = (y[i], 0.0);
        for (col, &(nb, nb_hi, nb_lo)) in cols.iter().zip(&neg_b) {
            let (p, pe) = two_product(nb, nb_hi, nb_lo, col[i]);
            let t = s + p;
            let z = t - s;
            err += (s - (t - z)) + (p - z) + pe;
            s = t;
        }
        *o = s + err;
    }
}

/// Veltkamp's split of a into hi + lo, each with at most 26 significant bits, so their products
/// are exact (Ogita, Rump & Oishi 2005, Algorithm 3.2). Values too large to split safely fall
/// back to the fused multiply-add in [`two_product`].
#[inline(always)]
fn split(a: f64) -> (f64, f64) {
    const FACTOR: f64 = 134_217_729.0; // 2^27 + 1
    let c = FACTOR * a;
    let hi = c - (c - a);
    (hi, a - hi)
}

/// Above this magnitude the split's scaled value could overflow.
const SPLIT_LIMIT: f64 = 1e290;

/// a·x = p + e exactly (Dekker's TwoProduct; Ogita, Rump & Oishi 2005, Algorithm 3.3), with a
/// already split into (a_hi, a_lo).
#[inline(always)]
fn two_product(a: f64, a_hi: f64, a_lo: f64, x: f64) -> (f64, f64) {
    let p = a * x;
    if a.abs() > SPLIT_LIMIT || x.abs() > SPLIT_LIMIT {
        return (p, a.mul_add(x, -p));
    }
    let (x_hi, x_lo) = split(x);
    let e = a_lo * x_lo - (((p - a_hi * x_hi) - a_lo * x_hi) - a_hi * x_lo);
    (p, e)
}

#[cfg(test)]
mod tests {
    use super::{split, two_product};

    /// TwoProduct must be exact: p + e equals the fused multiply-add's exact product, checked
    /// on awkward operands (common practice: compare against FMA, which rounds a·x − p once).
    /// Like FMA-free TwoProduct in general, it is exact only when nothing underflows (Ogita, Rump
    /// & Oishi 2005, Theorem 3.4), so products near the subnormal range are left out; there the
    /// error term is below 1e-300 and cannot matter to a residual.
    #[test]
    fn two_product_is_exact() {
        let values = [
            1.0 / 3.0,
            -7.123456789012345e10,
            2.0f64.sqrt(),
            -1e-300,
            123456789.0,
            0.1,
            -3.5e150,
            f64::MIN_POSITIVE * 1e10,
        ];
        for &a in &values {
            let (hi, lo) = split(a);
            assert_eq!(hi + lo, a);
            for &x in &values {
                let (p, e) = two_product(a, hi, lo, x);
                assert_eq!(p, a * x);
                if p.abs() < 1e-270 {
                    continue;
                }
                assert_eq!(e, a.mul_add(x, -p), "a = {a:e}, x = {x:e}");
            }
        }
    }
}
