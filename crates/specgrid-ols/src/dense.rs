//! Column helpers and the sequential faer QR that both routes use.

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::linalg::householder::{
    apply_block_householder_sequence_on_the_left_in_place_scratch,
    apply_block_householder_sequence_on_the_left_in_place_with_conj,
};
use faer::linalg::matmul::matmul;
use faer::linalg::qr::no_pivoting::factor::{
    qr_in_place, qr_in_place_scratch, recommended_block_size,
};
use faer::{Accum, ColRef, Conj, Mat, MatRef, Par};

/// The 2-norm used to scale a column to unit length; 1 for an all-zero column.
pub(crate) fn unit_scale(col: ColRef<'_, f64>) -> f64 {
    let norm = col.norm_l2();
    if norm > 0.0 {
        norm
    } else {
        1.0
    }
}

/// Whether a column holds one nonzero value in every row (an explicit constant).
pub(crate) fn is_constant_nonzero(col: ColRef<'_, f64>) -> bool {
    col.nrows() > 0 && col[0] != 0.0 && col.iter().all(|&v| v == col[0])
}

/// Householder QR of `z` in place (R in the upper triangle, the Householder vectors below it),
/// sequential so the result is bit-identical whatever the thread count. Returns the block
/// Householder factor, which [`thin_q`] needs to rebuild Q.
pub(crate) fn householder_in_place(z: &mut Mat<f64>) -> Mat<f64> {
    let (n, c) = z.shape();
    let block = recommended_block_size::<f64>(n, c).max(1);
    let mut coeff = Mat::<f64>::zeros(block, n.min(c));
    qr_in_place(
        z.as_mut(),
        coeff.as_mut(),
        Par::Seq,
        MemStack::new(&mut MemBuffer::new(qr_in_place_scratch::<f64>(
            n,
            c,
            block,
            Par::Seq,
            Default::default(),
        ))),
        Default::default(),
    );
    coeff
}

/// Thin QR of a tall `x` (rows ≥ columns = k): Q (rows × k) and the k × k upper factor R,
/// column-major. Sequential (thread-independent numbers).
pub(crate) fn thin_qr(x: MatRef<'_, f64>) -> (Mat<f64>, Vec<f64>) {
    let k = x.ncols();
    let mut z = x.to_owned();
    let coeff = householder_in_place(&mut z);
    let q = thin_q(z.as_ref(), coeff.as_ref(), k);
    let mut r = vec![0.0; k * k];
    for j in 0..k {
        for i in 0..=j {
            r[i + j * k] = z[(i, j)];
        }
    }
    (q, r)
}

/// a·b as a new matrix, computed sequentially (thread-independent numbers).
pub(crate) fn seq_product(a: MatRef<'_, f64>, b: MatRef<'_, f64>) -> Mat<f64> {
    let mut out = Mat::<f64>::zeros(a.nrows(), b.ncols());
    matmul(out.as_mut(), Accum::Replace, a, b, 1.0, Par::Seq);
    out
}

/// The first `cols` columns of Q from a factor left by [`householder_in_place`] (`z` and its
/// returned block factor), applied sequentially so the result does not depend on threads.
pub(crate) fn thin_q(z: MatRef<'_, f64>, coeff: MatRef<'_, f64>, cols: usize) -> Mat<f64> {
    let n = z.nrows();
    let mut q = Mat::<f64>::identity(n, cols);
    if cols == 0 {
        return q;
    }
    // The first `cols` reflectors alone build the first `cols` columns of Q.
    let (basis, factor) = (z.subcols(0, cols), coeff.subcols(0, cols));
    apply_block_householder_sequence_on_the_left_in_place_with_conj(
        basis,
        factor,
        Conj::No,
        q.as_mut(),
        Par::Seq,
        MemStack::new(&mut MemBuffer::new(
            apply_block_householder_sequence_on_the_left_in_place_scratch::<f64>(
                n,
                factor.nrows(),
                cols,
            ),
        )),
    );
    q
}
