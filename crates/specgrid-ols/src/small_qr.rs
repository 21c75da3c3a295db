//! Small dense kernels used per model: a Householder QR in model order that drops collinear
//! columns, the inverse of a triangular factor, and a 2-norm condition estimate.
//!
//! Written by hand because faer's QR has no "drop a column whose new direction vanishes, keep
//! model order" rule, and these matrices are tiny (at most p + m rows, k + 1 columns), so the
//! kernels run in caller-owned workspaces without allocating.

use crate::lockstep::advance_pair;

/// Reusable buffers for [`factor_in_order`]; grow-only, so a batch allocates once.
#[derive(Debug, Default)]
pub(crate) struct QrWork {
    /// The current Householder vector (`rows` long).
    vector: Vec<f64>,
    /// Original column norms.
    norms: Vec<f64>,
    /// Last row of each column that may be nonzero (inclusive), updated as reflections mix rows.
    ends: Vec<usize>,
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
///
/// `last_rows[c]` is the last row of column c that may be nonzero (rows below it must be exact
/// zeros, as in columns taken from a triangular factor). Every loop stops there: a reflection
/// built from rows `r..=e` only mixes those rows, so the skipped work was sums of exact zeros and
/// the result is the same as the dense loop's. Columns taken from the union's triangular factor
/// in union order make most of the work vanish (docs/performance.md, "Per-model factor").
pub(crate) fn factor_in_order(
    a: &mut [f64],
    rows: usize,
    cols: usize,
    last_rows: &[usize],
    tol: f64,
    kept: &mut Vec<usize>,
    work: &mut QrWork,
) -> OrderedQr {
    debug_assert!(a.len() >= rows * cols && cols >= 1 && last_rows.len() >= cols);
    kept.clear();
    work.ends.clear();
    work.ends.extend(
        last_rows[..cols]
            .iter()
            .map(|&e| e.min(rows.saturating_sub(1))),
    );
    work.norms.clear();
    work.norms
        .extend((0..cols).map(|c| norm2(&a[c * rows..c * rows + (work.ends[c] + 1).min(rows)])));
    if work.vector.len() < rows {
        work.vector.resize(rows, 0.0);
    }
    let mut r = 0usize;
    for c in 0..cols - 1 {
        if r >= rows {
            break;
        }
        // Rows r..=end of this column are the only ones that can be nonzero.
        let end = work.ends[c].max(r);
        let sub = norm2(&a[c * rows + r..=c * rows + end]);
        let orig = work.norms[c];
        if orig == 0.0 || sub <= tol * orig {
            continue;
        }
        // Reflector H = I - 2 v v'/(v'v) mapping x = a[r..=end, c] to alpha e1,
        // alpha = -sign(x0)‖x‖ (the sign choice avoids cancellation in v0).
        let x0 = a[c * rows + r];
        let alpha = if x0 >= 0.0 { -sub } else { sub };
        let v = &mut work.vector[r..=end];
        v.copy_from_slice(&a[c * rows + r..=c * rows + end]);
        v[0] -= alpha;
        let vtv = dot(v, v);
        a[c * rows + r] = alpha;
        a[c * rows + r + 1..=c * rows + end].fill(0.0);
        if vtv > 0.0 {
            // One division per reflection, not one per column it is applied to.
            let twice_inv = 2.0 / vtv;
            for c2 in c + 1..cols {
                let col = &mut a[c2 * rows + r..=c2 * rows + end];
                let s = dot(v, col) * twice_inv;
                for (ci, vi) in col.iter_mut().zip(v.iter()) {
                    *ci -= s * vi;
                }
                work.ends[c2] = work.ends[c2].max(end);
            }
        }
        kept.push(c);
        r += 1;
    }
    let last = cols - 1;
    let resid_norm = if r < rows && r <= work.ends[last] {
        norm2(&a[last * rows + r..=last * rows + work.ends[last]])
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

/// Relative accuracy the condition number is certified to (see [`condition_estimate`]).
pub(crate) const CONDITION_ACCURACY: f64 = 1e-5;

/// Relative accuracy each of its two singular values is certified to: half of
/// [`CONDITION_ACCURACY`], since both estimates are low by at most a factor 1 + δ and their
/// product by at most (1 + δ)², a relative error below 2δ.
const SINGULAR_ACCURACY: f64 = CONDITION_ACCURACY / 2.0;

/// Slots of scratch [`condition_estimate`] needs for a k × k factor: [`triangle_scratch`] for
/// each of the two triangles.
pub(crate) const fn condition_scratch(k: usize) -> usize {
    2 * triangle_scratch(k)
}

/// Scratch for one triangle: its Gram matrix (k²) and a work area that serves the power
/// iteration (2k) and then the certificate's Cholesky factor (k²).
const fn triangle_scratch(k: usize) -> usize {
    let work = if 2 * k > k * k { 2 * k } else { k * k };
    k * k + work
}

/// The 2-norm condition number σ_max/σ_min of the upper-triangular `r` (k × k), to a certified
/// relative accuracy of [`CONDITION_ACCURACY`]: σ_max(R)·σ_max(R⁻¹), each certified to
/// [`SINGULAR_ACCURACY`] (see [`dominant_root_pair`] and [`certify`]). Where a certificate
/// fails, both values come from an SVD instead (faer), exact to rounding but several times as
/// costly; it served 0.8% of 3,000 models of a real grid. `tmp` needs
/// [`condition_scratch`]`(k)` slots.
pub(crate) fn condition_estimate(r: &[f64], rinv: &[f64], k: usize, tmp: &mut [f64]) -> f64 {
    if k == 0 {
        return 1.0;
    }
    let (left, right) = tmp[..condition_scratch(k)].split_at_mut(triangle_scratch(k));
    let (gram_r, work_r) = left.split_at_mut(k * k);
    let (gram_inv, work_inv) = right.split_at_mut(k * k);
    upper_gram(r, k, gram_r);
    upper_gram(rinv, k, gram_inv);
    let (s_r, s_inv) = dominant_root_pair(
        Power::new(gram_r, k, work_r),
        Power::new(gram_inv, k, work_inv),
    );
    match (
        certify(gram_r, k, s_r, work_r),
        certify(gram_inv, k, s_inv, work_inv),
    ) {
        (Some(smax), Some(inv_smin)) => smax * inv_smin,
        _ => exact_largest_singular(r, k) * exact_largest_singular(rinv, k),
    }
}

/// G = U'U of the upper-triangular k × k `u`: G[i, j] = Σ_{l ≤ min(i, j)} U[l, i]·U[l, j],
/// both triangles (column-major).
fn upper_gram(u: &[f64], k: usize, gram: &mut [f64]) {
    for j in 0..k {
        for i in j..k {
            let g: f64 = (0..=j).map(|l| u[l + i * k] * u[l + j * k]).sum();
            gram[i + j * k] = g;
            gram[j + i * k] = g;
        }
    }
}

/// `s` as the largest singular value of the U with G = U'U, certified to
/// [`SINGULAR_ACCURACY`], or `None` when the certificate fails; `work` needs k² slots.
///
/// The power iteration gives s = √(x'Gx) ≤ σ. It starts from G's longest column (one step
/// from the unit vector with the largest image), which cut the steps by a third on a real grid
/// against a fixed start vector. Its stopping rule (a relative change under 1e-6) cannot tell a
/// slow climb from convergence, and from a poor start it can settle near the second singular
/// value (8% low on some models of a real grid). So s is certified: if (s(1 + δ))²·I − G has a
/// Cholesky factor, every singular value of U is below s(1 + δ).
fn certify(gram: &[f64], k: usize, s: f64, work: &mut [f64]) -> Option<f64> {
    (s.is_finite()
        && s > 0.0
        && all_eigen_below(gram, k, (s * (1.0 + SINGULAR_ACCURACY)).powi(2), work))
    .then_some(s)
}

/// A power iteration for √λ_max of a symmetric k × k Gram matrix (column-major), started from
/// its longest column. The entries are bounded (unit-norm columns, or the inverse of such a
/// factor under the condition limit), so plain sums of squares cannot overflow.
struct Power<'a> {
    gram: &'a [f64],
    k: usize,
    /// The current unit vector.
    x: &'a mut [f64],
    /// The product buffer.
    z: &'a mut [f64],
    /// The last estimate.
    sigma: f64,
    /// The result, once the iteration has finished (at the start already for a zero or
    /// non-finite longest column).
    result: Option<f64>,
}

impl<'a> Power<'a> {
    /// Starts on `gram`; `work` needs 2k slots.
    fn new(gram: &'a [f64], k: usize, work: &'a mut [f64]) -> Power<'a> {
        let (x, z) = work[..2 * k].split_at_mut(k);
        let column = |j: usize| &gram[j * k..j * k + k];
        let longest = (0..k)
            .map(|j| (j, dot(column(j), column(j))))
            .fold((0, -1.0), |best, c| if c.1 > best.1 { c } else { best })
            .0;
        x.copy_from_slice(column(longest));
        let norm = dot(x, x).sqrt();
        let result = if norm == 0.0 || !norm.is_finite() {
            Some(if norm == 0.0 { 0.0 } else { f64::INFINITY })
        } else {
            let inv = 1.0 / norm;
            x.iter_mut().for_each(|v| *v *= inv);
            None
        };
        Power {
            gram,
            k,
            x,
            z,
            sigma: 0.0,
            result,
        }
    }

    /// One step; true once the iteration has finished (its result is then set).
    ///
    /// Each step waits on the one before, so the step is arranged for a short chain: the
    /// product is k independent dot products (G is symmetric: entry i is column i times x,
    /// summed in registers, which the processor overlaps), x'z and z'z are summed together in
    /// pairs, and z'z normalises the next x (no separate norm of x).
    fn step(&mut self) -> bool {
        let k = self.k;
        for (i, zi) in self.z.iter_mut().enumerate() {
            *zi = dot(&self.gram[i * k..i * k + k], self.x);
        }
        let (xz, zz) = paired_dots(self.x, self.z);
        let new_sigma = xz.max(0.0).sqrt();
        let norm = zz.sqrt();
        if norm == 0.0 || !norm.is_finite() {
            self.result = Some(if norm == 0.0 { 0.0 } else { f64::INFINITY });
            return true;
        }
        let inv = 1.0 / norm;
        self.x
            .iter_mut()
            .zip(self.z.iter())
            .for_each(|(a, b)| *a = b * inv);
        if (new_sigma - self.sigma).abs() <= 1e-6 * new_sigma {
            self.result = Some(new_sigma);
            return true;
        }
        self.sigma = new_sigma;
        false
    }

    /// The result, or the last estimate when the steps ran out.
    fn value(&self) -> f64 {
        self.result.unwrap_or(self.sigma)
    }
}

/// Runs two power iterations side by side ([`advance_pair`]), at most 40 steps each (after
/// which the last estimate stands): the square roots and sums of both chains are in flight at
/// once, and each result is the same double as alone.
fn dominant_root_pair(first: Power<'_>, second: Power<'_>) -> (f64, f64) {
    let mut lanes = [first, second];
    let finished = lanes.each_ref().map(|p| p.result.is_some());
    advance_pair(&mut lanes, finished, 0..40, |power, _| power.step());
    (lanes[0].value(), lanes[1].value())
}

/// (x'z, z'z), each summed in two interleaved halves (even and odd entries), the halves held in
/// four named accumulators: an array indexed by i % 2 was kept on the stack and every add
/// went through memory.
fn paired_dots(x: &[f64], z: &[f64]) -> (f64, f64) {
    let (mut xz_even, mut xz_odd, mut zz_even, mut zz_odd) = (0.0f64, 0.0f64, 0.0f64, 0.0f64);
    let mut xs = x.chunks_exact(2);
    let mut zs = z.chunks_exact(2);
    for (a, b) in (&mut xs).zip(&mut zs) {
        xz_even += a[0] * b[0];
        xz_odd += a[1] * b[1];
        zz_even += b[0] * b[0];
        zz_odd += b[1] * b[1];
    }
    if let ([a], [b]) = (xs.remainder(), zs.remainder()) {
        xz_even += a * b;
        zz_even += b * b;
    }
    (xz_even + xz_odd, zz_even + zz_odd)
}

/// Whether every eigenvalue of the symmetric k × k `gram` is below `mu`: whether μI − G is
/// positive definite, by a Cholesky factorisation of it in `work` (k² slots). A floating-point
/// Cholesky that succeeds proves a matrix within a few rounding errors of the given one
/// positive definite, so a pass certifies the bound up to about 1e-15 relative.
fn all_eigen_below(gram: &[f64], k: usize, mu: f64, work: &mut [f64]) -> bool {
    let a = &mut work[..k * k];
    for j in 0..k {
        for i in j..k {
            a[i + j * k] = if i == j { mu } else { 0.0 } - gram[i + j * k];
        }
    }
    // Cholesky in place, lower triangle, column by column.
    for j in 0..k {
        let d = a[j + j * k] - (0..j).map(|l| a[j + l * k].powi(2)).sum::<f64>();
        if d.is_nan() || d <= 0.0 {
            return false;
        }
        let root = d.sqrt();
        a[j + j * k] = root;
        for i in j + 1..k {
            let s: f64 = (0..j).map(|l| a[i + l * k] * a[j + l * k]).sum();
            a[i + j * k] = (a[i + j * k] - s) / root;
        }
    }
    true
}

/// Largest singular value of the upper-triangular k × k `u` by faer's SVD (the fallback of
/// [`condition_estimate`]); infinite when the SVD fails (non-finite entries).
fn exact_largest_singular(u: &[f64], k: usize) -> f64 {
    let m = faer::Mat::<f64>::from_fn(k, k, |i, j| if i <= j { u[i + j * k] } else { 0.0 });
    match m.singular_values() {
        Ok(values) => values.first().copied().unwrap_or(0.0),
        Err(_) => f64::INFINITY,
    }
}

/// Smallest sum of squares [`norm2`] takes without scaling: squares that underflow (below
/// about 2e-308 each) are then less than 1e-50 of it relative, far below one rounding.
const PLAIN_SUM_FLOOR: f64 = 1e-250;

/// Euclidean norm, safe against overflow and underflow: the plain sum of squares where it is
/// finite and far above the underflow threshold (nearly always), else the sum of squares of the
/// entries divided by the largest one. Scaling every entry cost a division each, a fifth of the
/// per-model QR (docs/performance.md, session 7).
pub(crate) fn norm2(v: &[f64]) -> f64 {
    let plain: f64 = v.iter().map(|x| x * x).sum();
    if plain.is_finite() && plain >= PLAIN_SUM_FLOOR {
        return plain.sqrt();
    }
    scaled_norm2(v)
}

/// Euclidean norm with every entry divided by the largest first (the slow, safe path of
/// [`norm2`]).
fn scaled_norm2(v: &[f64]) -> f64 {
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
        let out = factor_in_order(&mut a, rows, 4, &[2; 4], 1e-10, &mut kept, &mut w);
        assert_eq!(kept, vec![0, 2]);
        assert_eq!(out.kept, 2);
        assert!((a[0].abs() - 2f64.sqrt()).abs() < 1e-15);
        // y = (1,2,3): projection on span{(1,1,0),(0,0,1)} leaves (-0.5, 0.5, 0), norm √0.5.
        assert!((out.resid_norm - 0.5f64.sqrt()).abs() < 1e-15);
    }

    #[test]
    fn norm_is_safe_at_both_ends_of_the_range() {
        // Reference: hand-worked 3-4-5 triangles, scaled by powers of two (exact in binary).
        for scale in [1.0, 2f64.powi(600), 2f64.powi(-600), 2f64.powi(-1070)] {
            let v = [3.0 * scale, 4.0 * scale];
            assert_eq!(norm2(&v), 5.0 * scale, "scale {scale:e}");
        }
        assert_eq!(norm2(&[0.0, 0.0]), 0.0);
        assert_eq!(norm2(&[]), 0.0);
        assert_eq!(norm2(&[f64::INFINITY, 1.0]), f64::INFINITY);
    }

    #[test]
    fn paired_dots_sum_even_and_odd_entries_apart() {
        for len in 0..12 {
            let x: Vec<f64> = (0..len).map(|i| 1.0 / (i as f64 + 1.5)).collect();
            let z: Vec<f64> = (0..len).map(|i| (i as f64 * 0.7).sin()).collect();
            let (mut xz, mut zz) = ([0.0f64; 2], [0.0f64; 2]);
            for i in 0..len {
                xz[i % 2] += x[i] * z[i];
                zz[i % 2] += z[i] * z[i];
            }
            let (a, b) = paired_dots(&x, &z);
            assert_eq!(a.to_bits(), (xz[0] + xz[1]).to_bits(), "length {len}");
            assert_eq!(b.to_bits(), (zz[0] + zz[1]).to_bits(), "length {len}");
        }
    }

    #[test]
    fn inverse_and_condition_of_diagonal() {
        let r = [2.0, 0.0, 0.0, 0.5];
        let mut inv = [0.0; 4];
        upper_inverse(&r, 2, &mut inv);
        assert_eq!(inv, [0.5, 0.0, 0.0, 2.0]);
        let mut tmp = [0.0; condition_scratch(2)];
        let c = condition_estimate(&r, &inv, 2, &mut tmp);
        assert!((c - 4.0).abs() < 1e-9, "{c}");
    }

    /// Upper-triangular 9 × 9 with a fixed pattern of entries (no random source needed).
    fn triangle(size: usize) -> Vec<f64> {
        let mut r = vec![0.0; size * size];
        for j in 0..size {
            for i in 0..=j {
                r[i + j * size] =
                    ((i * 31 + j * 17) % 11) as f64 / 7.0 - 0.6 + if i == j { 2.0 } else { 0.0 };
            }
        }
        r
    }

    #[test]
    fn skipping_known_zeros_changes_nothing() {
        // Columns of a triangular factor taken out of order (one a copy of an earlier one, so
        // it must be dropped), outcome last. The loops that stop at each column's last nonzero
        // row must give the dense loops' numbers bit for bit: the skipped terms are exact zeros.
        let size = 9;
        let r = triangle(size);
        let picks = [0usize, 5, 2, 5, 7, 3, 8];
        let rows = size;
        let build = || -> Vec<f64> {
            picks
                .iter()
                .flat_map(|&c| r[c * size..(c + 1) * size].to_vec())
                .collect()
        };
        let sparse_last: Vec<usize> = picks.to_vec();
        let dense_last = vec![rows - 1; picks.len()];
        let (mut a, mut b) = (build(), build());
        let (mut ka, mut kb) = (Vec::new(), Vec::new());
        let (mut wa, mut wb) = (QrWork::default(), QrWork::default());
        let oa = factor_in_order(
            &mut a,
            rows,
            picks.len(),
            &sparse_last,
            1e-10,
            &mut ka,
            &mut wa,
        );
        let ob = factor_in_order(
            &mut b,
            rows,
            picks.len(),
            &dense_last,
            1e-10,
            &mut kb,
            &mut wb,
        );
        assert_eq!(ka, vec![0, 1, 2, 4, 5]);
        assert_eq!(ka, kb);
        assert_eq!(oa.kept, ob.kept);
        assert_eq!(oa.resid_norm.to_bits(), ob.resid_norm.to_bits());
        for (x, y) in a.iter().zip(&b) {
            assert!(x == y, "{x} vs {y}");
        }
    }

    #[test]
    fn condition_estimate_matches_singular_values() {
        // Reference: faer's SVD of the same triangle (a general-purpose library routine).
        let size = 7;
        let r = triangle(size);
        let mut inv = vec![0.0; size * size];
        upper_inverse(&r, size, &mut inv);
        let mut tmp = vec![0.0; condition_scratch(size)];
        let estimate = condition_estimate(&r, &inv, size, &mut tmp);
        let m = faer::Mat::<f64>::from_fn(size, size, |i, j| r[i + j * size]);
        let s = m.singular_values().expect("svd");
        let exact = s[0] / s[size - 1];
        assert!(
            (estimate / exact - 1.0).abs() < 1e-5,
            "{estimate} vs {exact}"
        );
    }

    /// A triangle on which a power iteration from the fixed start vector 1 + 0.1·((7919 i) mod
    /// 13) settled near the second singular value, 8% low (random entries, found by searching a
    /// thousand such triangles).
    const STALLING: [&[f64]; 7] = [
        &[0.9636384782296343],
        &[0.2230313552074652, 0.9543707473434209],
        &[-0.3866771811094728, -0.0686876593683805, 0.7906836344268359],
        &[
            0.10834433064537896,
            -0.18058732797289323,
            0.3076114872902659,
            1.2479745620830174,
        ],
        &[
            -0.1849535605810696,
            -0.054638234717009126,
            -0.1600574342504989,
            -0.35667560657626896,
            0.7561378411990596,
        ],
        &[
            -0.304444501219007,
            0.13618791574563072,
            0.14243166514886452,
            0.02145087896690223,
            0.3017839801729003,
            1.0969084674528735,
        ],
        &[
            0.2433430334163742,
            0.456031259013689,
            -0.23110185282150864,
            -0.24570292449093512,
            0.040987631375152156,
            -0.07912181731393109,
            0.5918538028405079,
        ],
    ];

    #[test]
    fn condition_is_certified_where_power_iteration_stalls() {
        let k = STALLING.len();
        let mut r = vec![0.0; k * k];
        for (j, column) in STALLING.iter().enumerate() {
            r[j * k..j * k + column.len()].copy_from_slice(column);
        }
        let mut inv = vec![0.0; k * k];
        upper_inverse(&r, k, &mut inv);
        let mut tmp = vec![0.0; condition_scratch(k)];
        // Reference: numpy 2.4.6, s = numpy.linalg.svd(R, compute_uv=False); s[0] / s[-1].
        let reference = 2.96722683707312;
        let certified = condition_estimate(&r, &inv, k, &mut tmp);
        assert!(
            (certified / reference - 1.0).abs() < CONDITION_ACCURACY,
            "{certified} vs {reference}"
        );
        // Where a stalled iteration ends (the second singular value, from faer's SVD), the
        // certificate refuses.
        let m = faer::Mat::<f64>::from_fn(k, k, |i, j| r[i + j * k]);
        let second = m.singular_values().expect("svd")[1];
        let gram = gram_of(&r, k);
        let bound = (second * (1.0 + CONDITION_ACCURACY)).powi(2);
        assert!(!all_eigen_below(&gram, k, bound, &mut tmp));
    }

    /// U'U of an upper-triangular k × k U, both triangles.
    fn gram_of(u: &[f64], k: usize) -> Vec<f64> {
        let m = faer::Mat::<f64>::from_fn(k, k, |i, j| if i <= j { u[i + j * k] } else { 0.0 });
        let g = m.transpose() * &m;
        (0..k * k).map(|i| g[(i % k, i / k)]).collect()
    }

    #[test]
    fn certificate_accepts_a_bound_just_above_and_refuses_one_just_below() {
        // Reference: faer's SVD of the same triangle.
        let size = 6;
        let r = triangle(size);
        let m = faer::Mat::<f64>::from_fn(size, size, |i, j| r[i + j * size]);
        let top = m.singular_values().expect("svd")[0];
        let gram = gram_of(&r, size);
        let mut tmp = vec![0.0; size * size];
        assert!(all_eigen_below(
            &gram,
            size,
            (top * (1.0 + 1e-9)).powi(2),
            &mut tmp
        ));
        assert!(!all_eigen_below(
            &gram,
            size,
            (top * (1.0 - 1e-9)).powi(2),
            &mut tmp
        ));
    }
}
