//! The batched pass over rows that residual-based covariances and the Breusch–Pagan test need.
//!
//! For a batch of models, coefficient vectors, rows of (X'X)⁻¹ and columns of D⁻¹R⁻¹ are
//! scattered into p-row matrices, so that per block of rows the residuals E = Y − X·B, the
//! influence weights W = X·A, the leverage factors X·L and X'(E∘E) are each one matrix product
//! (faer, sequential inside a batch). Blocks are visited in a fixed order, so the sums do not
//! depend on how many threads run batches.

use faer::linalg::matmul::matmul;
use faer::reborrow::ReborrowMut;
use faer::{Accum, Mat, MatRef, Par};

use crate::absorb::RowAdjust;
use crate::finish::{BpSums, Meats, UNIT_LEVERAGE_GAP};
use crate::model_core::CoreFit;
use crate::plan::Plan;

/// Rows per block: keeps the block's E, W and leverage matrices in cache for typical batches.
const ROW_BLOCK: usize = 512;

/// How much more a multiply-add costs in the loops over a model's own columns than in faer's
/// matrix products over all union columns (which run on the widest vector unit the processor
/// has). The own columns are used when they need fewer than 1/`OWN_COLUMN_COST` of the dense
/// products' multiply-adds. `benches/row_products.rs` puts the two even at a ratio of about
/// 3.6–3.8 and the own columns 14–29% ahead from 6.3 up (2,000 and 20,000 rows); the
/// 2,048,200-model grid (61 union columns, about 7 a model) needs a ninth (docs/performance.md,
/// session 9).
const OWN_COLUMN_COST: usize = 5;

/// Which products the pass over rows uses ([`crate::SharedFactor::set_row_products`]); the
/// numbers agree to rounding (the sums run in another order).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum RowProducts {
    /// The cheaper of the two for each batch, by counted multiply-adds.
    #[default]
    Auto,
    /// One matrix product per block of rows over every union column.
    Dense,
    /// Loops over each model's own columns.
    OwnColumns,
}

/// How a batch forms E = Y − X·B, X'(E∘E), W = X·A and the leverage factors.
enum Products<'a> {
    /// One faer product per block over every union column (the scattered B, A and L hold
    /// zeros outside each model's columns).
    Dense,
    /// Loops over each model's own columns (contiguous union columns, `x_cols[c]`).
    Own(Vec<&'a [f64]>),
}

impl<'a> Products<'a> {
    /// The cheaper way for these models: per row, the dense products cost p multiply-adds for
    /// each of their 2·models + nw + nl columns; the own loops cost one per kept column of each
    /// product (E and X'(E∘E) per model, W per influence column, and the leverage factors' c + 1
    /// columns for column c). Dense when X's columns are not contiguous, and as `preference`
    /// says otherwise.
    fn choose(
        preference: RowProducts,
        x: MatRef<'a, f64>,
        cores: &[&CoreFit],
        nw_per_model: &[usize],
        leverage: bool,
    ) -> Self {
        let p = x.ncols();
        let dense: usize = p * cores
            .iter()
            .zip(nw_per_model)
            .map(|(c, &nw)| 2 + nw + if leverage { c.k() } else { 0 })
            .sum::<usize>();
        let own: usize = cores
            .iter()
            .zip(nw_per_model)
            .map(|(c, &nw)| {
                let k = c.k();
                (2 + nw) * k + if leverage { k * (k + 1) / 2 } else { 0 }
            })
            .sum();
        let own_wanted = match preference {
            RowProducts::Auto => own * OWN_COLUMN_COST < dense,
            RowProducts::Dense => false,
            RowProducts::OwnColumns => true,
        };
        if !own_wanted {
            return Products::Dense;
        }
        let cols: Option<Vec<&'a [f64]>> = (0..p)
            .map(|c| x.col(c).try_as_col_major().map(|col| col.as_slice()))
            .collect();
        cols.map_or(Products::Dense, Products::Own)
    }

    /// Whether the products are the dense ones.
    fn is_dense(&self) -> bool {
        matches!(self, Products::Dense)
    }
}

/// What one pass over the rows works on: `cores` (all on the design of `x` and `y`), the union
/// column sums `x_colsum` (for the Breusch–Pagan centring), and with `rows` an absorbed or
/// weighted design (each row's leverage gains the absorbed part and, under frequency weights,
/// leverage and HC terms are per represented observation, divided by f).
#[derive(Clone, Copy)]
pub(crate) struct PassInput<'a> {
    pub x: MatRef<'a, f64>,
    pub y: MatRef<'a, f64>,
    pub x_colsum: &'a [f64],
    pub cores: &'a [&'a CoreFit],
    pub plan: &'a Plan,
    pub rows: Option<&'a RowAdjust>,
    /// How the products are formed ([`RowProducts`]).
    pub preference: RowProducts,
}

/// Runs the pass and returns one [`Meats`] per core.
///
/// The loops over own columns are compiled three times, for AVX-512, AVX2 and the baseline
/// x86-64 vector unit, and the widest one the processor has runs. Each loop does the same
/// operations in the same order in every version (the sums keep their fixed partial sums, and
/// there is no fused multiply-add), so the numbers are the same double on every processor.
pub(crate) fn row_pass(input: PassInput<'_>) -> Vec<Meats> {
    row_pass_on(VectorUnit::detected(), input)
}

/// The vector units [`row_pass`] is compiled for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum VectorUnit {
    /// The baseline of the build target (SSE2 on x86-64).
    Baseline,
    /// AVX2 (x86-64).
    Avx2,
    /// AVX-512F (x86-64).
    Avx512,
}

impl VectorUnit {
    /// The widest unit this processor has.
    pub(crate) fn detected() -> VectorUnit {
        #[cfg(target_arch = "x86_64")]
        {
            if std::arch::is_x86_feature_detected!("avx512f") {
                return VectorUnit::Avx512;
            }
            if std::arch::is_x86_feature_detected!("avx2") {
                return VectorUnit::Avx2;
            }
        }
        VectorUnit::Baseline
    }
}

/// [`row_pass`] in the version for `unit`; the baseline version where the processor lacks it.
pub(crate) fn row_pass_on(unit: VectorUnit, input: PassInput<'_>) -> Vec<Meats> {
    #[cfg(target_arch = "x86_64")]
    {
        if unit == VectorUnit::Avx512 && std::arch::is_x86_feature_detected!("avx512f") {
            // SAFETY: the processor has AVX-512F (checked just above).
            return unsafe { row_pass_avx512(input) };
        }
        if unit == VectorUnit::Avx2 && std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the processor has AVX2 (checked just above).
            return unsafe { row_pass_avx2(input) };
        }
    }
    row_pass_body(input)
}

/// [`row_pass`] compiled for AVX-512F.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx512f")]
fn row_pass_avx512(input: PassInput<'_>) -> Vec<Meats> {
    row_pass_body(input)
}

/// [`row_pass`] compiled for AVX2.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn row_pass_avx2(input: PassInput<'_>) -> Vec<Meats> {
    row_pass_body(input)
}

/// The pass itself, inlined into each of [`row_pass`]'s versions.
#[inline(always)]
fn row_pass_body(input: PassInput<'_>) -> Vec<Meats> {
    let PassInput {
        x,
        y,
        x_colsum,
        cores,
        plan,
        rows,
        preference,
    } = input;
    let fe_lev = if plan.need_leverage() {
        rows.and_then(|r| r.fe_leverage())
    } else {
        None
    };
    let inv_freq = rows.and_then(|r| r.inv_freq.as_deref());
    let (n, p) = (x.nrows(), x.ncols());
    let nb_models = cores.len();
    let mut meats: Vec<Meats> = cores.iter().map(|c| empty_meats(c, plan)).collect();
    if nb_models == 0 {
        return meats;
    }
    let nw_per_model: Vec<usize> = meats.iter().map(|m| m.wpos.len()).collect();
    let products = Products::choose(preference, x, cores, &nw_per_model, plan.need_leverage());
    // Scatter the per-model vectors into p-row matrices (the coefficients only for the dense
    // products; the own loops read them from the cores).
    let mut neg_b = Mat::<f64>::zeros(p, if products.is_dense() { nb_models } else { 0 });
    for (t, core) in cores.iter().enumerate().filter(|_| products.is_dense()) {
        for (q, &c) in core.kept.iter().enumerate() {
            neg_b[(c, t)] = -core.coef[q];
        }
    }
    // w columns: (model, kept position); A holds the matching rows of (X'X)⁻¹.
    let w_cols: Vec<(usize, usize)> = meats
        .iter()
        .enumerate()
        .flat_map(|(t, m)| m.wpos.iter().map(move |&q| (t, q)))
        .collect();
    let nw = w_cols.len();
    let mut a = Mat::<f64>::zeros(p, nw);
    let mut row = vec![0.0; cores.iter().map(|c| c.k()).max().unwrap_or(0)];
    for (col, &(t, q)) in w_cols.iter().enumerate() {
        let core = cores[t];
        core.xtx_inv_row(q, &mut row);
        for (l, &c) in core.kept.iter().enumerate() {
            a[(c, col)] = row[l];
        }
    }
    // Leverage: hᵢ = ‖xᵢ'D⁻¹R⁻¹‖² over each model's own columns.
    let lev_start: Vec<usize> = cores
        .iter()
        .scan(0, |s, c| {
            let start = *s;
            *s += if plan.need_leverage() { c.k() } else { 0 };
            Some(start)
        })
        .collect();
    let nl = if plan.need_leverage() {
        cores.iter().map(|c| c.k()).sum()
    } else {
        0
    };
    let mut lmat = Mat::<f64>::zeros(p, nl);
    if nl > 0 {
        for (t, core) in cores.iter().enumerate() {
            let k = core.k();
            for c in 0..k {
                for (l, &u) in core.kept.iter().enumerate().take(c + 1) {
                    lmat[(u, lev_start[t] + c)] = core.rinv[l + c * k] / core.scales[l];
                }
            }
        }
    }
    let mut cluster_sums: Vec<Vec<f64>> = plan
        .groupings
        .iter()
        .map(|g| vec![0.0; g.range * nw])
        .collect();
    let mut xtu = Mat::<f64>::zeros(p, nb_models);
    let mut sum_u = vec![0.0; nb_models];
    let mut sum_u2 = vec![0.0; nb_models];
    let block = ROW_BLOCK.min(n);
    let mut e = Mat::<f64>::zeros(block, nb_models);
    let mut u = Mat::<f64>::zeros(block, nb_models);
    let mut w = Mat::<f64>::zeros(block, nw);
    let mut lev = Mat::<f64>::zeros(block, nl);
    let mut h = vec![0.0; block];
    // HC sums over pairs of reported coefficients: model t owns the upper triangle of a
    // t_rep × t_rep block starting at hc_start[t]; rep_w[t] are its reported w columns.
    let need_hc = plan.need_hc0 || plan.need_hc2 || plan.need_hc3;
    let mut w_start = 0;
    let rep_w: Vec<Vec<usize>> = cores
        .iter()
        .zip(&meats)
        .map(|(core, m)| {
            let cols = if need_hc {
                reported_w(core, m)
                    .into_iter()
                    .map(|c| w_start + c)
                    .collect()
            } else {
                Vec::new()
            };
            w_start += m.wpos.len();
            cols
        })
        .collect();
    let hc_start: Vec<usize> = rep_w
        .iter()
        .scan(0, |s, r| {
            let start = *s;
            *s += r.len() * r.len();
            Some(start)
        })
        .collect();
    let mut hc_acc = vec![[0.0f64; 3]; rep_w.iter().map(|r| r.len() * r.len()).sum()];

    let mut r0 = 0;
    while r0 < n {
        let nr = block.min(n - r0);
        let xb = x.subrows(r0, nr);
        let mut eb = e.as_mut().subrows_mut(0, nr);
        for (t, core) in cores.iter().enumerate() {
            eb.rb_mut()
                .col_mut(t)
                .copy_from(y.col(core.outcome).subrows(r0, nr));
        }
        match &products {
            Products::Dense => matmul(eb.rb_mut(), Accum::Add, xb, neg_b.as_ref(), 1.0, Par::Seq),
            Products::Own(x_cols) => {
                for (t, core) in cores.iter().enumerate() {
                    let ec = &mut e.col_as_slice_mut(t)[..nr];
                    for (&c, &b) in core.kept.iter().zip(&core.coef) {
                        axpy(ec, -b, &x_cols[c][r0..r0 + nr]);
                    }
                }
            }
        }
        for t in 0..nb_models {
            let uc = &mut u.col_as_slice_mut(t)[..nr];
            for (ui, ei) in uc.iter_mut().zip(&e.col_as_slice(t)[..nr]) {
                *ui = ei * ei;
            }
            sum_u[t] += sum4(nr, |i| uc[i]);
            sum_u2[t] += sum4(nr, |i| uc[i] * uc[i]);
        }
        match &products {
            Products::Dense => matmul(
                xtu.as_mut(),
                Accum::Add,
                xb.transpose(),
                u.as_ref().subrows(0, nr),
                1.0,
                Par::Seq,
            ),
            Products::Own(x_cols) => {
                for (t, core) in cores.iter().enumerate() {
                    let uc = &u.col_as_slice(t)[..nr];
                    for &c in &core.kept {
                        xtu[(c, t)] += dot(&x_cols[c][r0..r0 + nr], uc);
                    }
                }
            }
        }
        if nw > 0 {
            match &products {
                Products::Dense => {
                    let mut wb = w.as_mut().subrows_mut(0, nr);
                    matmul(wb.rb_mut(), Accum::Replace, xb, a.as_ref(), 1.0, Par::Seq);
                    if nl > 0 {
                        let mut lb = lev.as_mut().subrows_mut(0, nr);
                        matmul(
                            lb.rb_mut(),
                            Accum::Replace,
                            xb,
                            lmat.as_ref(),
                            1.0,
                            Par::Seq,
                        );
                    }
                }
                Products::Own(x_cols) => {
                    for (col, &(t, _)) in w_cols.iter().enumerate() {
                        let kept = &cores[t].kept;
                        combine(&mut w.col_as_slice_mut(col)[..nr], kept, x_cols, r0, |c| {
                            a[(c, col)]
                        });
                    }
                    for (t, core) in cores.iter().enumerate().filter(|_| nl > 0) {
                        for c in 0..core.k() {
                            // Column c of R⁻¹ is zero below row c: only the first c + 1 kept
                            // columns contribute.
                            let lc = lev_start[t] + c;
                            combine(
                                &mut lev.col_as_slice_mut(lc)[..nr],
                                &core.kept[..=c],
                                x_cols,
                                r0,
                                |u| lmat[(u, lc)],
                            );
                        }
                    }
                }
            }
            let mut last_model = usize::MAX;
            for (col, &(t, _)) in w_cols.iter().enumerate() {
                let core = cores[t];
                if nl > 0 && t != last_model {
                    // Leverages of model t for this block.
                    for (i, hi) in h[..nr].iter_mut().enumerate() {
                        *hi = (0..core.k())
                            .map(|c| lev[(i, lev_start[t] + c)].powi(2))
                            .sum();
                        if let Some(fl) = fe_lev {
                            *hi += fl[r0 + i];
                        }
                        if let Some(f) = inv_freq {
                            *hi *= f[r0 + i];
                        }
                        if 1.0 - *hi <= UNIT_LEVERAGE_GAP && meats[t].unit_leverage_row.is_none() {
                            meats[t].unit_leverage_row = Some(r0 + i);
                        }
                    }
                }
                if t != last_model && need_hc {
                    hc_pairs(
                        &w,
                        &e.col_as_slice(t)[..nr],
                        if nl > 0 { Some(&h[..nr]) } else { None },
                        inv_freq.map(|f| &f[r0..r0 + nr]),
                        &rep_w[t],
                        &mut hc_acc[hc_start[t]..],
                    );
                }
                last_model = t;
                let (wc, ec) = (w.col(col), e.col(t));
                for (sums, grouping) in cluster_sums.iter_mut().zip(&plan.groupings) {
                    let s = &mut sums[col * grouping.range..(col + 1) * grouping.range];
                    let codes = &grouping.codes[r0..r0 + nr];
                    for i in 0..nr {
                        s[codes[i] as usize] += wc[i] * ec[i];
                    }
                }
            }
        }
        r0 += nr;
    }

    // Collect per model.
    let mut col = 0;
    for (t, (core, meat)) in cores.iter().zip(meats.iter_mut()).enumerate() {
        let nwt = meat.wpos.len();
        let nt = rep_w[t].len();
        let acc = &hc_acc[hc_start[t]..hc_start[t] + nt * nt];
        let full = |which: usize| -> Vec<f64> {
            (0..nt * nt)
                .map(|ab| {
                    let (a, b) = (ab / nt, ab % nt);
                    acc[a.min(b) * nt + a.max(b)][which]
                })
                .collect()
        };
        if plan.need_hc0 {
            meat.hc0 = full(0);
        }
        if plan.need_hc2 {
            meat.hc2 = full(1);
        }
        if plan.need_hc3 {
            meat.hc3 = full(2);
        }
        meat.group_outer = cluster_sums
            .iter()
            .zip(&plan.groupings)
            .map(|(sums, g)| outer_sums(&sums[col * g.range..(col + nwt) * g.range], g.range, nwt))
            .collect();
        meat.bp = Some(BpSums {
            sum_u: sum_u[t],
            sum_u2: sum_u2[t],
            xtu: core.kept.iter().map(|&c| xtu[(c, t)]).collect(),
            xt1: core.kept.iter().map(|&c| x_colsum[c]).collect(),
        });
        col += nwt;
    }
    meats
}

/// Adds one block's HC sums for one model: for every pair a ≤ b of its reported w columns,
/// Σᵢ (wₐᵢeᵢ)(w_bᵢeᵢ) and the same over (1 − hᵢ) and (1 − hᵢ)² (`lev` present only when HC2/HC3
/// are requested); each term times `inv_freq` (frequency weights: f copies of (w e/f)²).
/// `acc` starts at the model's t × t block (upper triangle used). Cost O(rows·t²).
#[inline(always)]
fn hc_pairs(
    w: &Mat<f64>,
    e: &[f64],
    lev: Option<&[f64]>,
    inv_freq: Option<&[f64]>,
    rep_w: &[usize],
    acc: &mut [[f64; 3]],
) {
    let nt = rep_w.len();
    let nr = e.len();
    for a in 0..nt {
        let wa = &w.col_as_slice(rep_w[a])[..nr];
        for b in a..nt {
            let wb = &w.col_as_slice(rep_w[b])[..nr];
            // Same products as the diagonal's (w·e)², so the diagonal is unchanged.
            let prod = |i: usize| {
                let p = (wa[i] * e[i]) * (wb[i] * e[i]);
                inv_freq.map_or(p, |f| p * f[i])
            };
            let cell = &mut acc[a * nt + b];
            cell[0] += sum4(nr, prod);
            if let Some(h) = lev {
                // Rows at unit leverage are left out (their HC2/HC3 are refused in `finish`).
                let gap = |i: usize| 1.0 - h[i];
                cell[1] += sum4(nr, |i| match gap(i) {
                    g if g > UNIT_LEVERAGE_GAP => prod(i) / g,
                    _ => 0.0,
                });
                cell[2] += sum4(nr, |i| match gap(i) {
                    g if g > UNIT_LEVERAGE_GAP => prod(i) / (g * g),
                    _ => 0.0,
                });
            }
        }
    }
}

/// `dst += a·x`.
#[inline(always)]
fn axpy(dst: &mut [f64], a: f64, x: &[f64]) {
    for (d, v) in dst.iter_mut().zip(x) {
        *d += a * v;
    }
}

/// `dst = Σ_c weight(c)·x_cols[c][r0..]` over `columns` (one block of rows).
#[inline(always)]
fn combine(
    dst: &mut [f64],
    columns: &[usize],
    x_cols: &[&[f64]],
    r0: usize,
    weight: impl Fn(usize) -> f64,
) {
    dst.fill(0.0);
    let nr = dst.len();
    for &c in columns {
        axpy(dst, weight(c), &x_cols[c][r0..r0 + nr]);
    }
}

/// Σᵢ term(i) for i < n in four interleaved partial sums, which the compiler keeps in vector
/// registers (a single running sum is one long chain of dependent additions), added in a
/// fixed order: the same double in every version of the pass.
#[inline(always)]
fn sum4(n: usize, term: impl Fn(usize) -> f64) -> f64 {
    let full = n - n % 4;
    let mut acc = [0.0f64; 4];
    for i in (0..full).step_by(4) {
        for (j, a) in acc.iter_mut().enumerate() {
            *a += term(i + j);
        }
    }
    let tail: f64 = (full..n).map(term).sum();
    (acc[0] + acc[1]) + (acc[2] + acc[3]) + tail
}

/// Dot product ([`sum4`] of the products).
#[inline(always)]
fn dot(a: &[f64], b: &[f64]) -> f64 {
    let n = a.len().min(b.len());
    sum4(n, |i| a[i] * b[i])
}

/// Position of each reported coefficient among the meats' w columns, in reporting order.
pub(crate) fn reported_w(core: &CoreFit, meats: &Meats) -> Vec<usize> {
    core.reported
        .iter()
        .map(|q| {
            meats
                .wpos
                .iter()
                .position(|w| w == q)
                .expect("reported in wpos")
        })
        .collect()
}

/// Meats with the w positions decided but no sums yet.
pub(crate) fn empty_meats(core: &CoreFit, plan: &Plan) -> Meats {
    let wpos = if !plan.need_w {
        Vec::new()
    } else if plan.all_coefs {
        (0..core.k()).collect()
    } else {
        core.reported.clone()
    };
    Meats {
        wpos,
        ..Meats::default()
    }
}

/// Σ_g s_g s_g' for `nw` columns of per-cluster sums laid out column after column (`range` each).
pub(crate) fn outer_sums(sums: &[f64], range: usize, nw: usize) -> Vec<f64> {
    let mut out = vec![0.0; nw * nw];
    for j in 0..nw {
        let sj = &sums[j * range..(j + 1) * range];
        for i in 0..=j {
            let si = &sums[i * range..(i + 1) * range];
            let v: f64 = si.iter().zip(sj).map(|(a, b)| a * b).sum();
            out[i + j * nw] = v;
            out[j + i * nw] = v;
        }
    }
    out
}
