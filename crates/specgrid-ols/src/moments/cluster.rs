//! Cluster sums of every model from one pass: with S_g = Σ_{i∈g} z̃ᵢz̃ᵢ' the per-cluster Gram
//! matrix of the centred union, a model's cluster sum is s_g = Σ_{i∈g} wᵢeᵢ = ã'S_g c̃ = u'σ_g,
//! where σ_g holds the distinct entries of S_g and u the matching products of ã and c̃. So the
//! meat Σ_g s_g s_g' = u'Ku with K = Σ_g σ_gσ_g', built once: O(k⁴) per model whatever the
//! number of clusters G (a direct Σ_g over the S_g would cost G·k², which at thousands of
//! clusters is as slow as the row pass).

use faer::linalg::matmul::matmul;
use faer::{Accum, Mat, MatRef, Par};
use rayon::prelude::*;

use super::basis::{pair_starts, Basis, ModelVectors, EPS};
use super::ROUNDING_LAMBDA;

/// Rows gathered per matrix product while building one cluster's Gram matrix.
const GATHER_ROWS: usize = 1024;
/// Clusters per block of the build, at least (each block adds its σ_gσ_g' in one product).
const MIN_BLOCK_CLUSTERS: usize = 256;
/// Most blocks (their partial K are all held until the ordered reduction).
const MAX_BLOCKS: usize = 16;

/// The cluster moments of one grouping (a clustering dimension or an intersection).
#[derive(Debug)]
pub(crate) struct ClusterGrams {
    /// Start of each first index in the pair order (length q + 1).
    starts: Vec<usize>,
    /// K[(l,m), (r,s)] = Σ_g S_g[l,m]·S_g[r,s] over the pairs l ≤ m, r ≤ s (P × P, P = q(q+1)/2).
    k: Mat<f64>,
    /// D[l, m] = Σ_g S_g[l,l]·S_g[m,m] (q × q), for the rounding bound.
    d: Mat<f64>,
    /// Rows of the largest cluster.
    largest: usize,
    /// Clusters that hold rows.
    occupied: usize,
}

impl ClusterGrams {
    /// Memory the build takes for `range` clusters and `q` coordinates, in f64 slots: K, the
    /// block partials and the σ_g rows of the blocks being built (two at a time on two
    /// threads; more threads hold more).
    pub fn slots(range: usize, q: usize) -> usize {
        let p = q * (q + 1) / 2;
        let per_block = MIN_BLOCK_CLUSTERS.max(range.div_ceil(MAX_BLOCKS));
        (MAX_BLOCKS + 2) * p * p + 2 * per_block * p
    }

    /// Builds K and D: rows are bucketed by code (stable, so each S_g sums its rows in row
    /// order), clusters are taken in fixed blocks, each block's σ_gσ_g' is one matrix product
    /// and the block partials are summed in order, so the numbers do not depend on the thread
    /// count.
    pub fn build(
        basis: &Basis,
        x: MatRef<'_, f64>,
        y: MatRef<'_, f64>,
        codes: &[u32],
        range: usize,
    ) -> ClusterGrams {
        let q = basis.q;
        let starts = pair_starts(q);
        let p = starts[q];
        let mut sizes = vec![0usize; range];
        codes.iter().for_each(|&g| sizes[g as usize] += 1);
        let mut start = vec![0usize; range + 1];
        for g in 0..range {
            start[g + 1] = start[g] + sizes[g];
        }
        let mut next = start.clone();
        let mut order = vec![0usize; codes.len()];
        for (i, &g) in codes.iter().enumerate() {
            order[next[g as usize]] = i;
            next[g as usize] += 1;
        }
        let per_block = MIN_BLOCK_CLUSTERS.max(range.div_ceil(MAX_BLOCKS)).max(1);
        let blocks: Vec<(usize, usize)> = (0..range)
            .step_by(per_block)
            .map(|g0| (g0, per_block.min(range - g0)))
            .collect();
        let parts: Vec<(Mat<f64>, Mat<f64>)> = blocks
            .par_iter()
            .map(|&(g0, ng)| {
                let mut sigma = Mat::<f64>::zeros(ng, p);
                let mut diag = Mat::<f64>::zeros(ng, q);
                let mut block = Mat::<f64>::zeros(GATHER_ROWS, q);
                let mut gram = Mat::<f64>::zeros(q, q);
                for c in 0..ng {
                    let rows = &order[start[g0 + c]..start[g0 + c + 1]];
                    gram.fill(0.0);
                    for chunk in rows.chunks(GATHER_ROWS) {
                        basis.fill_rows(x, y, chunk, &mut block);
                        let b = block.as_ref().subrows(0, chunk.len());
                        matmul(gram.as_mut(), Accum::Add, b.transpose(), b, 1.0, Par::Seq);
                    }
                    for l in 0..q {
                        diag[(c, l)] = gram[(l, l)];
                        for m in l..q {
                            sigma[(c, starts[l] + m - l)] = gram[(l, m)];
                        }
                    }
                }
                let mut k = Mat::<f64>::zeros(p, p);
                matmul(
                    k.as_mut(),
                    Accum::Replace,
                    sigma.transpose(),
                    sigma.as_ref(),
                    1.0,
                    Par::Seq,
                );
                let mut d = Mat::<f64>::zeros(q, q);
                matmul(
                    d.as_mut(),
                    Accum::Replace,
                    diag.transpose(),
                    diag.as_ref(),
                    1.0,
                    Par::Seq,
                );
                (k, d)
            })
            .collect();
        let mut k = Mat::<f64>::zeros(p, p);
        let mut d = Mat::<f64>::zeros(q, q);
        for (pk, pd) in &parts {
            k += pk;
            d += pd;
        }
        ClusterGrams {
            starts,
            k,
            d,
            largest: sizes.iter().copied().max().unwrap_or(0),
            occupied: sizes.iter().filter(|&&s| s > 0).count(),
        }
    }

    /// Σ_g s_g s_g' over the model's w columns (nw × nw, column-major), or `None` when the
    /// rounding bound of some diagonal entry exceeds `tolerance` times that entry.
    ///
    /// Bound (docs/methods.md): with E = Σ_g A_g²C_g² = Σ_{l,m} ã_l²c̃_m²·D[l,m] (A_g, C_g the
    /// 2-norms of (ã_l‖z̃_l,g‖)_l and (c̃_m‖z̃_m,g‖)_m, ones-coordinate slack added), the S_g
    /// entries' rounding moves the meat by at most 2·√meat·γ_S·√E + γ_S²·E and K's by γ_K·E
    /// (Higham & Mary 2019 probabilistic γ, errors added in quadrature).
    pub fn outer(
        &self,
        v: &ModelVectors,
        tolerance: f64,
        scratch: &mut Vec<f64>,
    ) -> Option<Vec<f64>> {
        let na = v.active.len();
        let nw = v.a.len();
        let pairs = na * (na + 1) / 2;
        // Active pairs (i ≤ j over active positions) and their K indices.
        scratch.clear();
        scratch.resize(pairs * (nw + 1), 0.0);
        let (u, ku) = scratch.split_at_mut(pairs * nw);
        let mut index = Vec::with_capacity(pairs);
        for i in 0..na {
            for j in i..na {
                index.push(self.starts[v.active[i]] + v.active[j] - v.active[i]);
            }
        }
        for (w, a) in v.a.iter().enumerate() {
            let uw = &mut u[w * pairs..(w + 1) * pairs];
            let mut t = 0;
            for i in 0..na {
                for j in i..na {
                    uw[t] = if i == j {
                        a[i] * v.c[i]
                    } else {
                        a[i] * v.c[j] + a[j] * v.c[i]
                    };
                    t += 1;
                }
            }
        }
        let mut out = vec![0.0; nw * nw];
        for b in 0..nw {
            let ub = &u[b * pairs..(b + 1) * pairs];
            ku[..pairs].fill(0.0);
            for (t2, &p2) in index.iter().enumerate() {
                let col = self.k.col(p2);
                let scale = ub[t2];
                for (t1, &p1) in index.iter().enumerate() {
                    ku[t1] += col[p1] * scale;
                }
            }
            for a in 0..=b {
                let ua = &u[a * pairs..(a + 1) * pairs];
                let s: f64 = ua.iter().zip(&ku[..pairs]).map(|(x, y)| x * y).sum();
                out[a + b * nw] = s;
                out[b + a * nw] = s;
            }
        }
        let gamma_s = ROUNDING_LAMBDA * ((self.largest + na) as f64).sqrt() * EPS;
        let gamma_k = ROUNDING_LAMBDA * ((self.occupied + pairs * pairs) as f64).sqrt() * EPS;
        let magnitude =
            |x: &[f64], slack: f64, i: usize| x[i].abs() + if i == 0 { slack } else { 0.0 };
        for (w, a) in v.a.iter().enumerate() {
            let mut e = 0.0;
            for i in 0..na {
                let ai = magnitude(a, v.a0_slack[w], i).powi(2);
                for j in 0..na {
                    let cj = magnitude(&v.c, v.c0_slack, j).powi(2);
                    e += ai * cj * self.d[(v.active[i], v.active[j])];
                }
            }
            let meat = out[w + w * nw];
            let err = gamma_k * e
                + 2.0 * meat.max(0.0).sqrt() * gamma_s * e.sqrt()
                + gamma_s * gamma_s * e;
            // Written so that a NaN bound also fails.
            let resolved = err <= tolerance * meat;
            if !resolved {
                return None;
            }
        }
        Some(out)
    }
}
