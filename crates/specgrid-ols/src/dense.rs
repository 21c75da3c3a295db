//! Column helpers and the sequential faer QR that both routes use.

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::linalg::qr::no_pivoting::factor::{
    qr_in_place, qr_in_place_scratch, recommended_block_size,
};
use faer::{ColRef, Mat, Par};

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

/// Householder QR of `z` in place (R in the upper triangle), sequential so the result is
/// bit-identical whatever the thread count.
pub(crate) fn householder_in_place(z: &mut Mat<f64>) {
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
}
