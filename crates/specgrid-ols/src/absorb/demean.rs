//! Weighted within transformation: one column minus its projection on the indicator columns of
//! every absorbed effect, in the inner product Σ ωᵢ aᵢbᵢ.
//!
//! One effect: subtract each level's weighted mean (exact, one pass). Several: alternating
//! projections (the method of alternating projections applied to fixed effects, Gaure 2013,
//! "OLS with multiple high dimensional category variables", Computational Statistics & Data
//! Analysis 66:8–18): one sweep subtracts the level means of each effect in turn; sweeps repeat
//! until one changes no value by more than `tolerance` × the column's largest magnitude. Every
//! second sweep is followed by an Irons–Tuck extrapolation (Irons & Tuck 1969, Int. J. Numer.
//! Meth. Eng. 1:275; as used for fixed-effect fixed points by Berge 2018, from memory), an
//! affine combination of iterates, so the iterate stays "column minus something in the
//! indicator span" and the limit is unchanged.

/// One effect set ready for demeaning: codes, level count and Σω per level.
pub(super) struct Effect<'a> {
    /// Dense level code per row.
    pub codes: &'a [u32],
    /// Σ ωᵢ over the rows of each level (all positive after the drops).
    pub level_weight: Vec<f64>,
}

/// Outcome of demeaning one column.
#[derive(Debug, Clone, Copy, Default)]
pub(super) struct Convergence {
    /// Sweeps over all effects.
    pub sweeps: usize,
    /// Largest change of the last sweep, relative to the column's largest magnitude.
    pub change: f64,
    /// Whether the tolerance was met.
    pub converged: bool,
}

/// Subtracts each level's ω-weighted mean from `col` (one exact projection).
fn project_out(col: &mut [f64], effect: &Effect<'_>, omega: &[f64], sums: &mut Vec<f64>) {
    sums.clear();
    sums.resize(effect.level_weight.len(), 0.0);
    for ((&c, &v), &w) in effect.codes.iter().zip(col.iter()).zip(omega) {
        sums[c as usize] += w * v;
    }
    for (s, &lw) in sums.iter_mut().zip(&effect.level_weight) {
        *s /= lw;
    }
    for (v, &c) in col.iter_mut().zip(effect.codes) {
        *v -= sums[c as usize];
    }
}

/// One sweep: project out every effect in turn, returning the largest absolute change.
fn sweep(col: &mut [f64], effects: &[Effect<'_>], omega: &[f64], sums: &mut Vec<f64>) {
    for e in effects {
        project_out(col, e, omega, sums);
    }
}

fn max_abs_diff(a: &[f64], b: &[f64]) -> f64 {
    a.iter()
        .zip(b)
        .map(|(x, y)| (x - y).abs())
        .fold(0.0, f64::max)
}

/// Demeans `col` in place on all effects.
pub(super) fn demean_column(
    col: &mut [f64],
    effects: &[Effect<'_>],
    omega: &[f64],
    tolerance: f64,
    max_sweeps: usize,
) -> Convergence {
    let mut sums = Vec::new();
    if effects.len() == 1 {
        project_out(col, &effects[0], omega, &mut sums);
        return Convergence {
            sweeps: 1,
            change: 0.0,
            converged: true,
        };
    }
    let scale = col.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    if scale == 0.0 {
        return Convergence {
            converged: true,
            ..Convergence::default()
        };
    }
    let n = col.len();
    let mut gx = vec![0.0; n];
    let mut ggx = vec![0.0; n];
    let mut out = Convergence::default();
    while out.sweeps < max_sweeps {
        gx.copy_from_slice(col);
        sweep(&mut gx, effects, omega, &mut sums);
        ggx.copy_from_slice(&gx);
        sweep(&mut ggx, effects, omega, &mut sums);
        out.sweeps += 2;
        out.change = max_abs_diff(&ggx, &gx) / scale;
        if out.change <= tolerance {
            col.copy_from_slice(&ggx);
            out.converged = true;
            return out;
        }
        // Irons–Tuck: x ← GGx − (ΔGx·Δ²x / Δ²x·Δ²x)·ΔGx, ΔGx = GGx − Gx, Δ²x = GGx − 2Gx + x.
        let (mut num, mut den) = (0.0, 0.0);
        for i in 0..n {
            let dg = ggx[i] - gx[i];
            let d2 = ggx[i] - 2.0 * gx[i] + col[i];
            num += dg * d2;
            den += d2 * d2;
        }
        let step = if den > 0.0 { num / den } else { 0.0 };
        for i in 0..n {
            col[i] = ggx[i] - step * (ggx[i] - gx[i]);
        }
    }
    out
}
