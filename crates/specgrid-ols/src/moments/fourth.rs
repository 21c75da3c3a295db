//! Fourth moments of the centred union, M[l,m,r,s] = Σᵢ z̃ᵢₗz̃ᵢₘz̃ᵢᵣz̃ᵢₛ, and the HC0 sums and
//! Breusch–Pagan sums of one model from them, with no pass over the rows.
//!
//! Built once per design from the distinct index sets l ≤ m ≤ r ≤ s only (about q⁴/24 sums,
//! a third of the Gram matrix of all pairwise products), as matrix products over row blocks,
//! and kept in that compact form (small enough to stay in cache during the per-model
//! contractions, which visit each distinct set once).

use faer::linalg::matmul::matmul;
use faer::{Accum, Mat, MatRef, Par};
use rayon::prelude::*;

use super::basis::{pair_starts, Basis, ModelVectors, EPS};
use super::ROUNDING_LAMBDA;
use crate::finish::BpSums;
use crate::model_core::CoreFit;

/// Rows per block inside one chunk (the pair-product block is rows × q(q+1)/2).
const BLOCK_ROWS: usize = 256;
/// Rows per chunk of the parallel build, at least; chunks are summed in order.
const MIN_CHUNK_ROWS: usize = 32_768;
/// Most chunks (their partial sums are all held until the ordered reduction).
const MAX_CHUNKS: usize = 64;

/// The distinct fourth moments of the centred union.
#[derive(Debug)]
pub(crate) struct FourthMoments {
    /// Start of each first index in the pair order (length q + 1).
    starts: Vec<usize>,
    /// Per middle index m: the (m+1) × (P − start(m)) block holding M[l,m,r,s] for l ≤ m ≤ r ≤ s
    /// at row l, column (pair index of (r, s)) − start(m).
    blocks: Blocks,
    /// ‖z̃ₗ‖₄ = M[l,l,l,l]^¼ per coordinate.
    norm4: Vec<f64>,
    /// Rows.
    n: usize,
}

/// Per middle index m: the (m+1) × (P − start(m)) block of sums Σ z̃ₗz̃ₘ·(z̃ᵣz̃ₛ), l ≤ m ≤ r ≤ s.
type Blocks = Vec<Mat<f64>>;

fn empty_blocks(q: usize, starts: &[usize]) -> Blocks {
    let total = starts[q];
    (0..q)
        .map(|m| Mat::<f64>::zeros(m + 1, total - starts[m]))
        .collect()
}

fn chunk_blocks(
    basis: &Basis,
    x: MatRef<'_, f64>,
    y: MatRef<'_, f64>,
    r0: usize,
    nr: usize,
    starts: &[usize],
) -> Blocks {
    let q = basis.q;
    let total = starts[q];
    let mut out = empty_blocks(q, starts);
    let mut z = Mat::<f64>::zeros(BLOCK_ROWS, q);
    let mut pp = Mat::<f64>::zeros(BLOCK_ROWS, total);
    let mut lhs = Mat::<f64>::zeros(BLOCK_ROWS, q);
    let mut b0 = r0;
    while b0 < r0 + nr {
        let nb = BLOCK_ROWS.min(r0 + nr - b0);
        basis.fill_range(x, y, b0, nb, &mut z);
        for (r, &start) in starts[..q].iter().enumerate() {
            for s in r..q {
                let (zr, zs) = (z.col(r), z.col(s));
                let mut d = pp.col_mut(start + s - r);
                for i in 0..nb {
                    d[i] = zr[i] * zs[i];
                }
            }
        }
        for (m, block) in out.iter_mut().enumerate() {
            for (l, &start) in starts[..=m].iter().enumerate() {
                let src = pp.col(start + m - l);
                lhs.col_mut(l)
                    .subrows_mut(0, nb)
                    .copy_from(src.subrows(0, nb));
            }
            let a = lhs.as_ref().subrows(0, nb).subcols(0, m + 1);
            let b = pp
                .as_ref()
                .subrows(0, nb)
                .subcols(starts[m], total - starts[m]);
            matmul(block.as_mut(), Accum::Add, a.transpose(), b, 1.0, Par::Seq);
        }
        b0 += nb;
    }
    out
}

impl FourthMoments {
    /// Memory the distinct moments take for `q` coordinates, in f64 slots (about q⁴/24, and
    /// as much again per chunk partial during the build).
    pub fn slots(q: usize) -> usize {
        q.pow(4) / 24 + q.pow(3)
    }

    /// Builds the moments: fixed row chunks in parallel (each sequential), summed in chunk
    /// order, so the numbers do not depend on the thread count.
    /// `budget` (f64 slots) caps the chunk partials held at once.
    pub fn build(
        basis: &Basis,
        x: MatRef<'_, f64>,
        y: MatRef<'_, f64>,
        budget: usize,
    ) -> FourthMoments {
        let (n, q) = (basis.n, basis.q);
        let starts = pair_starts(q);
        let chunks = (budget / Self::slots(q)).clamp(1, MAX_CHUNKS);
        let chunk = MIN_CHUNK_ROWS.max(n.div_ceil(chunks)).max(1);
        let bounds: Vec<(usize, usize)> = (0..n)
            .step_by(chunk)
            .map(|r0| (r0, chunk.min(n - r0)))
            .collect();
        let parts: Vec<Blocks> = bounds
            .par_iter()
            .map(|&(r0, nr)| chunk_blocks(basis, x, y, r0, nr, &starts))
            .collect();
        let mut sum = empty_blocks(q, &starts);
        for part in &parts {
            for (acc, b) in sum.iter_mut().zip(part) {
                *acc += b;
            }
        }
        drop(parts);
        let norm4 = (0..q).map(|l| sum[l][(l, 0)].max(0.0).powf(0.25)).collect();
        FourthMoments {
            starts,
            blocks: sum,
            norm4,
            n,
        }
    }

    /// The e²-weighted Gram T[i, j] = Σᵢ eᵢ² z̃ᵢₗz̃ᵢₘ over the model's active coordinates
    /// (na × na, row-major) and the 4-norm size of c̃ (ones slack included).
    ///
    /// Each distinct set of four active coordinates is visited once; for each way of splitting
    /// it into a pair (l, m) and a remainder (r, s) (distinct pairs only), T[l, m] gains
    /// M·c̃ᵣc̃ₛ, twice when r ≠ s (both orders of the remainder).
    fn weighted_gram(&self, v: &ModelVectors, t: &mut Vec<f64>) -> f64 {
        const SPLITS: [[usize; 4]; 6] = [
            [0, 1, 2, 3],
            [0, 2, 1, 3],
            [0, 3, 1, 2],
            [1, 2, 0, 3],
            [1, 3, 0, 2],
            [2, 3, 0, 1],
        ];
        let (act, c) = (&v.active, &v.c);
        let na = act.len();
        t.clear();
        t.resize(na * na, 0.0);
        // cc[r·na + s] = c̃ᵣc̃ₛ, doubled off the diagonal (both orders of the remainder).
        let mut cc = vec![0.0; na * na];
        for r in 0..na {
            for s in 0..na {
                cc[r * na + s] = c[r] * c[s] * if r == s { 1.0 } else { 2.0 };
            }
        }
        for i0 in 0..na {
            for i1 in i0..na {
                let block = &self.blocks[act[i1]];
                let base = self.starts[act[i1]];
                for i2 in i1..na {
                    // Both differences are non-negative (`act` and `starts` increase); the
                    // order matters, as `starts − act − base` alone can go below zero.
                    let col0 = self.starts[act[i2]] - base;
                    for i3 in i2..na {
                        let m = block[(act[i0], col0 + (act[i3] - act[i2]))];
                        if i0 < i1 && i1 < i2 && i2 < i3 {
                            // Four distinct coordinates: six distinct splits.
                            t[i0 * na + i1] += m * cc[i2 * na + i3];
                            t[i0 * na + i2] += m * cc[i1 * na + i3];
                            t[i0 * na + i3] += m * cc[i1 * na + i2];
                            t[i1 * na + i2] += m * cc[i0 * na + i3];
                            t[i1 * na + i3] += m * cc[i0 * na + i2];
                            t[i2 * na + i3] += m * cc[i0 * na + i1];
                            continue;
                        }
                        let idx = [i0, i1, i2, i3];
                        let mut seen = [(usize::MAX, usize::MAX); 6];
                        for (n_seen, split) in SPLITS.iter().enumerate() {
                            let (l, mm) = (idx[split[0]], idx[split[1]]);
                            if seen[..n_seen].contains(&(l, mm)) {
                                continue;
                            }
                            seen[n_seen] = (l, mm);
                            t[l * na + mm] += m * cc[idx[split[2]] * na + idx[split[3]]];
                        }
                    }
                }
            }
        }
        for l in 0..na {
            for mm in l + 1..na {
                t[mm * na + l] = t[l * na + mm];
            }
        }
        self.size4(&v.c, v.c0_slack, &v.active)
    }

    /// ‖(xₗ‖z̃ₗ‖₄)ₗ‖₂ with the ones-coordinate slack added: by Hölder each moment's rounding
    /// error is at most γ times the product of four 4-norms, and errors of different moments
    /// add in quadrature under the probabilistic model (docs/methods.md).
    fn size4(&self, x: &[f64], slack: f64, active: &[usize]) -> f64 {
        let one4 = (self.n as f64).powf(0.25);
        x.iter()
            .zip(active)
            .map(|(v, &l)| (v * self.norm4[l]).powi(2))
            .sum::<f64>()
            .sqrt()
            + slack * one4
    }

    /// Rounding constant of a sum over the rows of a product of four coordinates.
    fn gamma(&self, na: usize) -> f64 {
        (ROUNDING_LAMBDA * ((self.n + na * na) as f64).sqrt() + 4.0) * EPS
    }

    /// HC0 sums Σ wₐw_b e² over the reported w columns `rep` (t × t, row-major) and, when
    /// `need_bp`, the Breusch–Pagan sums; `None` when a rounding bound exceeds `tolerance` of
    /// an HC0 diagonal entry, or `bp_tolerance` of the Breusch–Pagan statistic's scale.
    #[allow(clippy::too_many_arguments)]
    pub fn model_sums(
        &self,
        basis: &Basis,
        core: &CoreFit,
        v: &ModelVectors,
        rep: &[usize],
        need_hc: bool,
        need_bp: bool,
        tolerance: f64,
        bp_tolerance: f64,
        t: &mut Vec<f64>,
    ) -> Option<(Vec<f64>, Option<BpSums>)> {
        let na = v.active.len();
        let c4 = self.weighted_gram(v, t);
        let gamma = self.gamma(na);
        let mut hc0 = Vec::new();
        if need_hc {
            let nt = rep.len();
            hc0 = vec![0.0; nt * nt];
            let mut ta = vec![0.0; na];
            for a in 0..nt {
                let xa = &v.a[rep[a]];
                for (i, o) in ta.iter_mut().enumerate() {
                    *o = (0..na).map(|j| t[i * na + j] * xa[j]).sum();
                }
                for b in a..nt {
                    let xb = &v.a[rep[b]];
                    let s: f64 = xb.iter().zip(&ta).map(|(p, q)| p * q).sum();
                    hc0[a * nt + b] = s;
                    hc0[b * nt + a] = s;
                }
                let a4 = self.size4(xa, v.a0_slack[rep[a]], &v.active);
                let bound = gamma * (a4 * c4).powi(2);
                // Written so that a NaN bound also fails.
                let resolved = bound <= tolerance * hc0[a * nt + a];
                if !resolved {
                    return None;
                }
            }
        }
        let bp = match need_bp {
            true => Some(self.bp_sums(basis, core, v, t, c4, gamma, bp_tolerance)?),
            false => None,
        };
        Some((hc0, bp))
    }

    /// Σe², Σe⁴ and X'(e∘e) from the weighted Gram, checked against their effect on the
    /// statistic n·ESS/TSS (see docs/methods.md).
    #[allow(clippy::too_many_arguments)]
    fn bp_sums(
        &self,
        basis: &Basis,
        core: &CoreFit,
        v: &ModelVectors,
        t: &[f64],
        c4: f64,
        gamma: f64,
        tolerance: f64,
    ) -> Option<BpSums> {
        let na = v.active.len();
        let nf = self.n as f64;
        let root_n = nf.sqrt();
        let one4 = nf.powf(0.25);
        let sum_u = t[0];
        let sum_u2: f64 = (0..na)
            .map(|i| v.c[i] * (0..na).map(|j| t[i * na + j] * v.c[j]).sum::<f64>())
            .sum();
        let d_sum_u = gamma * root_n * c4 * c4;
        let d_sum_u2 = gamma * c4.powi(4);
        let mean = sum_u / nf;
        // X'(e∘e) − ū·X'1 per column: with x = μ + s·z̃ the μ parts cancel exactly, so only the
        // centred coordinate's part is passed on (Σ z̃ e² and Σ z̃), free of the offsets.
        let mut xtu = Vec::with_capacity(core.k());
        let mut xt1 = Vec::with_capacity(core.k());
        let mut d_centred = Vec::with_capacity(core.k());
        for &c in &core.kept {
            let sc = basis.x_scale[c];
            match basis.x_coord[c] {
                Some(l) => {
                    let i = v.active.binary_search(&l).expect("active");
                    xtu.push(sc * t[i * na]);
                    xt1.push(sc * basis.colsum[l]);
                    d_centred.push(
                        sc * (gamma * one4 * self.norm4[l] * c4 * c4
                            + basis.colsum[l].abs() * d_sum_u / nf),
                    );
                }
                None => {
                    xtu.push(0.0);
                    xt1.push(0.0);
                    d_centred.push(0.0);
                }
            }
        }
        let tss = sum_u2 - nf * mean * mean;
        let d_tss = d_sum_u2 + 2.0 * mean.abs() * d_sum_u;
        if tss > 0.0 && d_tss < tss {
            let centred: Vec<f64> = (0..core.k()).map(|q| xtu[q] - mean * xt1[q]).collect();
            let ess = crate::model_core::projected_sq_norm(&core.rinv, &core.scales, &centred);
            // ‖R⁻ᵀδ‖ ≈ ‖R⁻¹‖_F‖δ‖/√k for errors δ independent across columns (the same
            // probabilistic model as γ).
            let rinv_f = (core.rinv.iter().map(|r| r * r).sum::<f64>() / core.k() as f64).sqrt();
            let dx = rinv_f
                * d_centred
                    .iter()
                    .zip(&core.scales)
                    .map(|(d, s)| (d / s).powi(2))
                    .sum::<f64>()
                    .sqrt();
            let d_ess = 2.0 * ess.sqrt() * dx + dx * dx;
            let stat = nf * ess / tss;
            let d_stat = nf * (d_ess / tss + ess * d_tss / (tss * tss)) / (1.0 - d_tss / tss);
            // Judged against the statistic or, when it is below its degrees of freedom, against
            // those: digits of a statistic far inside its null distribution do not matter.
            let resolved = d_stat <= tolerance * stat.max(core.k() as f64 - 1.0);
            if !resolved {
                return None;
            }
        } else if core.has_constant && core.k() >= 2 {
            // The statistic would be reported but its denominator is not resolved.
            return None;
        }
        Some(BpSums {
            sum_u,
            sum_u2,
            xtu,
            xt1,
        })
    }
}
