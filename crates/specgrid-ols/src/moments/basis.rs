//! The centred union Z̃ = [1, (X − μ)/s, (Y − μ)/s] the moment route works on, and the
//! coordinates of one model's influence and residual vectors in it (docs/methods.md,
//! "Covariances from moments").

use faer::{Mat, MatRef};

use crate::model_core::CoreFit;

/// Unit roundoff of f64.
pub(crate) const EPS: f64 = f64::EPSILON / 2.0;

/// How every union column and outcome is written in the centred coordinates:
/// value = offset + scale·z̃[coord] (no coordinate for a constant column).
#[derive(Debug)]
pub(crate) struct Basis {
    /// Rows.
    pub n: usize,
    /// Coordinates, the ones column (0) included.
    pub q: usize,
    /// Per union column: offset μ (the column mean, or the value of a constant column).
    pub x_offset: Vec<f64>,
    /// Per union column: power-of-two scale, so dividing by it is exact.
    pub x_scale: Vec<f64>,
    /// Per union column: its coordinate, `None` for a constant column.
    pub x_coord: Vec<Option<usize>>,
    /// Per outcome: offset.
    pub y_offset: Vec<f64>,
    /// Per outcome: power-of-two scale.
    pub y_scale: Vec<f64>,
    /// Per outcome: coordinate (`None` for a constant outcome).
    pub y_coord: Vec<Option<usize>>,
    /// Σᵢ z̃ᵢ per coordinate (n for the ones column, about zero for the others).
    pub colsum: Vec<f64>,
    /// Per coordinate: (source is outcome, index), coordinate 0 excluded.
    sources: Vec<(bool, usize)>,
}

/// One model in the centred coordinates: active coordinates (ascending, 0 first), the residual
/// vector c̃ and one influence vector ã per w column, all over the active coordinates.
#[derive(Debug, Default)]
pub(crate) struct ModelVectors {
    /// Active coordinates, ascending.
    pub active: Vec<usize>,
    /// c̃ over `active`: eᵢ = Σ c̃ₗ z̃ᵢₗ.
    pub c: Vec<f64>,
    /// One ã per w column, each over `active`: wᵢ = Σ ãₗ z̃ᵢₗ.
    pub a: Vec<Vec<f64>>,
    /// Rounding uncertainty of c̃ on the ones coordinate (0 when an exact identity fixed it).
    pub c0_slack: f64,
    /// Rounding uncertainty of each ã on the ones coordinate.
    pub a0_slack: Vec<f64>,
}

/// The power of two nearest above `v` (1 for zero), so that division by it is exact.
fn pow2_scale(v: f64) -> f64 {
    if v > 0.0 && v.is_finite() {
        2f64.powi(v.log2().ceil() as i32)
    } else {
        1.0
    }
}

/// (offset, scale, is constant) of one column: offset = mean (exact value for a constant
/// column), scale = a power of two near the centred 2-norm.
fn centring(col: faer::ColRef<'_, f64>) -> (f64, f64, bool) {
    let n = col.nrows();
    if n == 0 || col.iter().all(|&v| v == col[0]) {
        return (if n == 0 { 0.0 } else { col[0] }, 1.0, true);
    }
    let mean = col.iter().sum::<f64>() / n as f64;
    let norm2: f64 = col.iter().map(|v| (v - mean) * (v - mean)).sum();
    (mean, pow2_scale(norm2.sqrt()), false)
}

impl Basis {
    /// Centres and scales every column of the design (one pass per column).
    pub fn new(x: MatRef<'_, f64>, y: MatRef<'_, f64>) -> Basis {
        let n = x.nrows();
        let mut sources = Vec::new();
        let mut q = 1;
        let mut place = |c: faer::ColRef<'_, f64>, is_y: bool, j: usize| {
            let (off, sc, constant) = centring(c);
            let coord = (!constant).then(|| {
                sources.push((is_y, j));
                q += 1;
                q - 1
            });
            (off, sc, coord)
        };
        let xs: Vec<_> = (0..x.ncols()).map(|j| place(x.col(j), false, j)).collect();
        let ys: Vec<_> = (0..y.ncols()).map(|j| place(y.col(j), true, j)).collect();
        let mut basis = Basis {
            n,
            q,
            x_offset: xs.iter().map(|t| t.0).collect(),
            x_scale: xs.iter().map(|t| t.1).collect(),
            x_coord: xs.iter().map(|t| t.2).collect(),
            y_offset: ys.iter().map(|t| t.0).collect(),
            y_scale: ys.iter().map(|t| t.1).collect(),
            y_coord: ys.iter().map(|t| t.2).collect(),
            colsum: vec![0.0; q],
            sources,
        };
        basis.colsum[0] = n as f64;
        for l in 1..q {
            let (off, sc, col) = basis.source(x, y, l);
            basis.colsum[l] = col.iter().map(|v| (v - off) / sc).sum();
        }
        basis
    }

    fn source<'m>(
        &self,
        x: MatRef<'m, f64>,
        y: MatRef<'m, f64>,
        l: usize,
    ) -> (f64, f64, faer::ColRef<'m, f64>) {
        match self.sources[l - 1] {
            (false, j) => (self.x_offset[j], self.x_scale[j], x.col(j)),
            (true, j) => (self.y_offset[j], self.y_scale[j], y.col(j)),
        }
    }

    /// Writes rows r0..r0 + nr of Z̃ into the first nr rows of `out` (≥ nr × q).
    pub fn fill_rows(
        &self,
        x: MatRef<'_, f64>,
        y: MatRef<'_, f64>,
        rows: &[usize],
        out: &mut Mat<f64>,
    ) {
        for (i, _) in rows.iter().enumerate() {
            out[(i, 0)] = 1.0;
        }
        for l in 1..self.q {
            let (off, sc, col) = self.source(x, y, l);
            let mut dst = out.col_mut(l);
            for (i, &r) in rows.iter().enumerate() {
                dst[i] = (col[r] - off) / sc;
            }
        }
    }

    /// As [`Basis::fill_rows`] for the contiguous rows r0..r0 + nr.
    pub fn fill_range(
        &self,
        x: MatRef<'_, f64>,
        y: MatRef<'_, f64>,
        r0: usize,
        nr: usize,
        out: &mut Mat<f64>,
    ) {
        out.col_mut(0).subrows_mut(0, nr).fill(1.0);
        for l in 1..self.q {
            let (off, sc, col) = self.source(x, y, l);
            let src = col.subrows(r0, nr);
            let mut dst = out.col_mut(l);
            for i in 0..nr {
                dst[i] = (src[i] - off) / sc;
            }
        }
    }

    /// The model's vectors in the centred coordinates. `wpos` are the kept positions that need
    /// an influence vector; `plain_rows` says the design is neither absorbed nor weighted, so a
    /// model with an explicit constant column has residuals summing to exactly zero and
    /// influence sums known exactly (used to fix the ones coordinate without cancellation).
    pub fn model_vectors(
        &self,
        core: &CoreFit,
        wpos: &[usize],
        plain_rows: bool,
        out: &mut ModelVectors,
    ) {
        let k = core.k();
        let constant_pos = core
            .kept
            .iter()
            .position(|&c| self.x_coord[c].is_none() && self.x_offset[c] != 0.0);
        let exact_mean = plain_rows && constant_pos.is_some();
        out.active.clear();
        out.active.push(0);
        for &c in &core.kept {
            if let Some(l) = self.x_coord[c] {
                out.active.push(l);
            }
        }
        if let Some(l) = self.y_coord[core.outcome] {
            out.active.push(l);
        }
        out.active.sort_unstable();
        out.active.dedup();
        let pos = |l: usize, active: &[usize]| active.binary_search(&l).expect("active");
        let na = out.active.len();
        // Residual e = y − Σ b_j x_j.
        out.c.clear();
        out.c.resize(na, 0.0);
        let (y_off, y_sc) = (self.y_offset[core.outcome], self.y_scale[core.outcome]);
        if let Some(l) = self.y_coord[core.outcome] {
            out.c[pos(l, &out.active)] = y_sc;
        }
        let mut c0 = y_off;
        let mut c0_size = y_off.abs();
        for (q, &c) in core.kept.iter().enumerate() {
            let b = core.coef[q];
            c0 -= b * self.x_offset[c];
            c0_size += (b * self.x_offset[c]).abs();
            if let Some(l) = self.x_coord[c] {
                out.c[pos(l, &out.active)] -= b * self.x_scale[c];
            }
        }
        if exact_mean {
            // Σ eᵢ = 0: the ones coordinate follows from the others without cancellation.
            let rest: f64 = (1..na).map(|i| out.c[i] * self.colsum[out.active[i]]).sum();
            out.c[0] = -rest / self.n as f64;
            out.c0_slack = 0.0;
        } else {
            out.c[0] = c0;
            out.c0_slack = 2.0 * (k as f64 + 1.0) * EPS * c0_size;
        }
        // Influence vectors w = a'x with a a row of (X'X)⁻¹.
        let mut row = vec![0.0; k];
        out.a.resize_with(wpos.len(), Vec::new);
        out.a0_slack.resize(wpos.len(), 0.0);
        for (t, &q) in wpos.iter().enumerate() {
            core.xtx_inv_row(q, &mut row);
            let a = &mut out.a[t];
            a.clear();
            a.resize(na, 0.0);
            let (mut a0, mut a0_size) = (0.0, 0.0);
            for (j, &c) in core.kept.iter().enumerate() {
                a0 += row[j] * self.x_offset[c];
                a0_size += (row[j] * self.x_offset[c]).abs();
                if let Some(l) = self.x_coord[c] {
                    a[pos(l, &out.active)] += row[j] * self.x_scale[c];
                }
            }
            match constant_pos.filter(|_| exact_mean) {
                Some(cp) => {
                    // Σ wᵢ = a'X'1 = e_q'(X'X)⁻¹X'X d with X d = 1, d = e_cp / value.
                    let target = if q == cp {
                        1.0 / self.x_offset[core.kept[cp]]
                    } else {
                        0.0
                    };
                    let rest: f64 = (1..na).map(|i| a[i] * self.colsum[out.active[i]]).sum();
                    a[0] = (target - rest) / self.n as f64;
                    out.a0_slack[t] = 0.0;
                }
                _ => {
                    a[0] = a0;
                    out.a0_slack[t] = 2.0 * (k as f64 + 1.0) * EPS * a0_size;
                }
            }
        }
    }
}

/// Start of each first index in the order of the pairs (l, m), l ≤ m, of q coordinates (length
/// q + 1): pair (l, m) has index starts[l] + m − l.
pub(crate) fn pair_starts(q: usize) -> Vec<usize> {
    let mut s = Vec::with_capacity(q + 1);
    s.push(0);
    for r in 0..q {
        s.push(s[r] + (q - r));
    }
    s
}
