//! Small dense kernels used per model: a Householder QR in model order that drops collinear
//! columns, the inverse of a triangular factor, and a 2-norm condition estimate.
//!
//! Written by hand because faer's QR has no "drop a column whose new direction vanishes, keep
//! model order" rule, and these matrices are tiny (at most p + m rows, k + 1 columns), so the
//! kernels run in caller-owned workspaces without allocating.

/// Reusable buffers for [`factor_in_order`]; grow-only, so a batch allocates once.
#[derive(Debug, Default)]
pub(crate) struct QrWork {
    /// The current Householder vector (`rows` long).
    vector: Vec<f64>,
    /// Original column norms.
    norms: Vec<f64>,
}

/// Outcome of [`factor_in_order`].
#[derive(Debug, Clone, Copy)]
pub(crate) struct OrderedQr {
    /// Number of kept regressor columns.
    pub kept: usize,
    /// ‖residual‖ of the last column after projecting out the kept columns.
    pub resid_norm: f64,
}

/// Factors the column-major `rows × cols` matrix `a` (last column = outcome) by Householder
/// reflections in column order. A regressor column whose component orthogonal to the kept
/// earlier columns has norm ≤ `tol` × its own norm is dropped, so the LATER of two dependent
/// columns goes. Kept positions are appended to `kept`. On return, for kept column q (position
/// `kept[q]` in `a`), rows `0..=q` of that column hold column q of the triangular factor, and
/// rows `0..kept` of the last column hold Q'y.
pub(crate) fn factor_in_order(
    a: &mut [f64],
    rows: usize,
    cols: usize,
    tol: f64,
    kept: &mut Vec<usize>,
    work: &mut QrWork,
) -> OrderedQr {
    debug_assert!(a.len() >= rows * cols && cols >= 1);
    kept.clear();
    work.norms.clear();
    work.norms
        .extend((0..cols).map(|c| norm2(&a[c * rows..(c + 1) * rows])));
    if work.vector.len() < rows {
        work.vector.resize(rows, 0.0);
    }
    let mut r = 0usize;
    for c in 0..cols - 1 {
        let sub = norm2(&a[c * rows + r.min(rows)..(c + 1) * rows]);
        let orig = work.norms[c];
        if r >= rows || orig == 0.0 || sub <= tol * orig {
            continue;
        }
        // Reflector H = I - 2 v v'/(v'v) mapping x = a[r.., c] to alpha e1, alpha = -sign(x0)‖x‖
        // (the sign choice avoids cancellation in v0).
        let x0 = a[c * rows + r];
        let alpha = if x0 >= 0.0 { -sub } else { sub };
        let v = &mut work.vector[..rows];
        v[r..].copy_from_slice(&a[c * rows + r..(c + 1) * rows]);
        v[r] -= alpha;
        let vtv = dot(&v[r..], &v[r..]);
        a[c * rows + r] = alpha;
        a[c * rows + r + 1..(c + 1) * rows].fill(0.0);
        if vtv > 0.0 {
            for c2 in c + 1..cols {
                let col = &mut a[c2 * rows + r..(c2 + 1) * rows];
                let s = 2.0 * dot(&v[r..], col) / vtv;
                for (ci, vi) in col.iter_mut().zip(&v[r..]) {
                    *ci -= s * vi;
                }
            }
        }
        kept.push(c);
        r += 1;
    }
    let last = cols - 1;
    let resid_norm = if r < rows {
        norm2(&a[last * rows + r..(last + 1) * rows])
    } else {
        0.0
    };
    OrderedQr {
        kept: r,
        resid_norm,
    }
}

/// Inverse of the upper-triangular `k × k` column-major matrix `r`, written into `out`
/// (column-major, lower part zero) by back substitution.
pub(crate) fn upper_inverse(r: &[f64], k: usize, out: &mut [f64]) {
    out[..k * k].fill(0.0);
    for j in 0..k {
        // Solve R x = e_j; x has zeros below row j.
        out[j + j * k] = 1.0 / r[j + j * k];
        for i in (0..j).rev() {
            let mut s = 0.0;
            for l in i + 1..=j {
                s += r[i + l * k] * out[l + j * k];
            }
            out[i + j * k] = -s / r[i + i * k];
        }
    }
}

/// Estimated 2-norm condition number σ_max/σ_min of the upper-triangular `r` (k × k), from
/// power iterations on R'R and on R⁻¹R⁻ᵀ (both explicit, so no solves). `tmp` needs 2k slots.
pub(crate) fn condition_estimate(r: &[f64], rinv: &[f64], k: usize, tmp: &mut [f64]) -> f64 {
    if k == 0 {
        return 1.0;
    }
    let smax = largest_singular(r, k, tmp);
    let inv_smin = largest_singular(rinv, k, tmp);
    smax * inv_smin
}

/// Power iteration for the largest singular value of an upper-triangular k × k matrix.
fn largest_singular(u: &[f64], k: usize, tmp: &mut [f64]) -> f64 {
    let (x, y) = tmp[..2 * k].split_at_mut(k);
    // A start vector with no special structure, so it is unlikely to be orthogonal to the top
    // singular vector.
    for (i, xi) in x.iter_mut().enumerate() {
        *xi = 1.0 + 0.1 * ((i * 7919) % 13) as f64;
    }
    let mut sigma = 0.0;
    for _ in 0..40 {
        let nx = norm2(x);
        if nx == 0.0 {
            return 0.0;
        }
        x.iter_mut().for_each(|v| *v /= nx);
        // y = U x
        for (i, yi) in y.iter_mut().enumerate() {
            *yi = (i..k).map(|l| u[i + l * k] * x[l]).sum();
        }
        let new_sigma = norm2(y);
        // x = U' y
        for (l, xl) in x.iter_mut().enumerate() {
            *xl = (0..=l).map(|i| u[i + l * k] * y[i]).sum();
        }
        if (new_sigma - sigma).abs() <= 1e-6 * new_sigma {
            return new_sigma;
        }
        sigma = new_sigma;
    }
    sigma
}

/// Euclidean norm with scaling against overflow/underflow.
pub(crate) fn norm2(v: &[f64]) -> f64 {
    let scale = v.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    if scale == 0.0 || !scale.is_finite() {
        return scale;
    }
    let s: f64 = v.iter().map(|x| (x / scale) * (x / scale)).sum();
    scale * s.sqrt()
}

/// Plain dot product.
pub(crate) fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn drops_later_copy_and_reproduces_triangle() {
        // Columns: e1+e2, 2(e1+e2) (a multiple: must go), e3, y. Hand-checked: the first column has
        // norm √2, the copy has no new direction.
        let rows = 3;
        let mut a = vec![1.0, 1.0, 0.0, 2.0, 2.0, 0.0, 0.0, 0.0, 1.0, 1.0, 2.0, 3.0];
        let mut kept = Vec::new();
        let mut w = QrWork::default();
        let out = factor_in_order(&mut a, rows, 4, 1e-10, &mut kept, &mut w);
        assert_eq!(kept, vec![0, 2]);
        assert_eq!(out.kept, 2);
        assert!((a[0].abs() - 2f64.sqrt()).abs() < 1e-15);
        // y = (1,2,3): projection on span{(1,1,0),(0,0,1)} leaves (-0.5, 0.5, 0), norm √0.5.
        assert!((out.resid_norm - 0.5f64.sqrt()).abs() < 1e-15);
    }

    #[test]
    fn inverse_and_condition_of_diagonal() {
        let r = [2.0, 0.0, 0.0, 0.5];
        let mut inv = [0.0; 4];
        upper_inverse(&r, 2, &mut inv);
        assert_eq!(inv, [0.5, 0.0, 0.0, 2.0]);
        let mut tmp = [0.0; 4];
        let c = condition_estimate(&r, &inv, 2, &mut tmp);
        assert!((c - 4.0).abs() < 1e-9, "{c}");
    }
}
