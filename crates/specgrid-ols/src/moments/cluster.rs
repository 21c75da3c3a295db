//! Per-cluster Gram matrices S_g = Σ_{i∈g} z̃ᵢz̃ᵢ' of the centred union, and the cluster sums
//! of one model from them: s_g = Σ_{i∈g} wᵢeᵢ = ã'S_g c̃, with no pass over the rows.

use faer::linalg::matmul::matmul;
use faer::{Accum, Mat, MatRef, Par};
use rayon::prelude::*;

use super::basis::{Basis, ModelVectors, EPS};
use super::ROUNDING_LAMBDA;

/// Rows gathered per matrix product while building one cluster's Gram matrix.
const GATHER_ROWS: usize = 1024;

/// The Gram matrices of one grouping (a clustering dimension or an intersection).
#[derive(Debug)]
pub(crate) struct ClusterGrams {
    /// Code range G.
    pub range: usize,
    /// Coordinates q.
    q: usize,
    /// G blocks of q × q, column-major, full (both triangles).
    grams: Vec<f64>,
    /// Rows per cluster.
    sizes: Vec<usize>,
    /// ‖z̃ₗ,g‖₂ = √S_g[l, l], G blocks of q.
    norms: Vec<f64>,
}

impl ClusterGrams {
    /// Builds S_g for every code: rows are bucketed by code (stable, so each S_g sums its rows
    /// in row order) and each cluster's Gram is one task, so the numbers do not depend on the
    /// thread count.
    pub fn build(
        basis: &Basis,
        x: MatRef<'_, f64>,
        y: MatRef<'_, f64>,
        codes: &[u32],
        range: usize,
    ) -> ClusterGrams {
        let q = basis.q;
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
        let mut grams = vec![0.0; range * q * q];
        grams
            .par_chunks_mut(q * q)
            .enumerate()
            .for_each(|(g, out)| {
                let rows = &order[start[g]..start[g + 1]];
                let mut block = Mat::<f64>::zeros(GATHER_ROWS.min(rows.len()).max(1), q);
                let mut acc = Mat::<f64>::zeros(q, q);
                for chunk in rows.chunks(GATHER_ROWS) {
                    basis.fill_rows(x, y, chunk, &mut block);
                    let b = block.as_ref().subrows(0, chunk.len());
                    matmul(acc.as_mut(), Accum::Add, b.transpose(), b, 1.0, Par::Seq);
                }
                for j in 0..q {
                    for i in 0..q {
                        out[i + j * q] = acc[(i, j)];
                    }
                }
            });
        let norms = (0..range * q)
            .map(|gl| {
                let (g, l) = (gl / q, gl % q);
                grams[g * q * q + l + l * q].max(0.0).sqrt()
            })
            .collect();
        ClusterGrams {
            range,
            q,
            grams,
            sizes,
            norms,
        }
    }

    /// Memory the Gram matrices of `range` clusters over `q` coordinates take, in f64 slots.
    pub fn slots(range: usize, q: usize) -> usize {
        range * q * q
    }

    /// Σ_g s_g s_g' over the model's w columns (nw × nw, column-major), or `None` when the
    /// rounding bound of some diagonal entry exceeds `tolerance` times that entry.
    ///
    /// Bound per cluster and w column (Higham & Mary 2019 probabilistic model, independent
    /// errors per Gram entry; see docs/methods.md): |δs_g| ≤ γ_g·A_g·C_g + slack terms, with
    /// A_g = ‖(ãₗ‖z̃ₗ,g‖)ₗ‖₂ and C_g = ‖(c̃ₘ‖z̃ₘ,g‖)ₘ‖₂ (the norms are √diag S_g).
    pub fn outer(
        &self,
        v: &ModelVectors,
        tolerance: f64,
        scratch: &mut Vec<f64>,
    ) -> Option<Vec<f64>> {
        let q = self.q;
        let na = v.active.len();
        let nw = v.a.len();
        let mut out = vec![0.0; nw * nw];
        let mut err = vec![0.0; nw];
        scratch.resize(na + nw, 0.0);
        let (t, s) = scratch.split_at_mut(na);
        for g in 0..self.range {
            if self.sizes[g] == 0 {
                continue;
            }
            let gram = &self.grams[g * q * q..(g + 1) * q * q];
            let norms = &self.norms[g * q..(g + 1) * q];
            let norm = |l: usize| norms[l];
            let mut c_size = 0.0;
            for (i, ti) in t.iter_mut().enumerate() {
                let col = &gram[v.active[i] * q..];
                *ti = (0..na).map(|m| col[v.active[m]] * v.c[m]).sum();
                c_size += (v.c[i] * norm(v.active[i])).powi(2);
            }
            let c_size = c_size.sqrt();
            let root_ng = (self.sizes[g] as f64).sqrt();
            let gamma = ROUNDING_LAMBDA * ((self.sizes[g] + na) as f64).sqrt() * EPS;
            for (w, a) in v.a.iter().enumerate() {
                s[w] = a.iter().zip(t.iter()).map(|(x, y)| x * y).sum();
                let a_size = (0..na)
                    .map(|i| (a[i] * norm(v.active[i])).powi(2))
                    .sum::<f64>()
                    .sqrt();
                let bound = gamma * a_size * c_size
                    + v.a0_slack[w] * root_ng * (c_size + v.c0_slack * root_ng)
                    + a_size * v.c0_slack * root_ng;
                err[w] += 2.0 * s[w].abs() * bound + bound * bound;
            }
            for j in 0..nw {
                for i in 0..=j {
                    out[i + j * nw] += s[i] * s[j];
                }
            }
        }
        for j in 0..nw {
            // Written so that a NaN bound also fails.
            let resolved = err[j] <= tolerance * out[j + j * nw];
            if !resolved {
                return None;
            }
            for i in 0..j {
                out[j + i * nw] = out[i + j * nw];
            }
        }
        Some(out)
    }
}
