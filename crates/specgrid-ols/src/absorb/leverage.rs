//! Leverage of the absorbed part: the diagonal of the ω-weighted projection on the indicator
//! columns, which HC2/HC3 add to the within leverage (the explicit-indicator regression's
//! hat-matrix diagonal is the sum of the two, by Frisch–Waugh–Lovell).
//!
//! One effect: ωᵢ/W_a (W_a = Σω over row i's level). Two effects A and B (B the smaller): the
//! span splits ω-orthogonally into span(D_A) ⊕ span(M_A D_B), so hᵢ = ωᵢ/W_a + ωᵢ·d̃ᵢ'G⁺d̃ᵢ with
//! d̃ᵢ = e_b − c_a (row i of M_A D_B; c_a[b] = W_ab/W_a the share of level a's weight in level b)
//! and G = D̃_B'ΩD̃_B = diag(W_b) − Σ_a W_a c_a c_a' (the Schur complement of D_A'ΩD_A in
//! [D_A D_B]'Ω[D_A D_B]; common practice of block elimination, e.g. Golub & Van Loan 2013,
//! sec. 3.2). G has rank L_B − C (C components of the level graph), so G⁺ keeps its L_B − C
//! largest eigenvalues. Per cell (a, b): d̃'G⁺d̃ = G⁺_bb − 2(G⁺c_a)_b + c_a'G⁺c_a, which costs
//! O(cells in level a) per cell, never a dense n × L_B matrix.

use faer::{Mat, Side};

/// Largest level count of the smaller effect for which the two-way leverage is built (its
/// eigendecomposition costs O(L³)); above it HC2/HC3 are refused.
pub(super) const MAX_SMALL_LEVELS: usize = 2_000;

/// ωᵢ/W_a for one effect.
pub(super) fn one_way(codes: &[u32], level_weight: &[f64], omega: &[f64]) -> Vec<f64> {
    codes
        .iter()
        .zip(omega)
        .map(|(&g, &w)| w / level_weight[g as usize])
        .collect()
}

/// Exact leverage of two absorbed effects; `components` is C of their level graph. `None` when
/// the smaller effect has more than [`MAX_SMALL_LEVELS`] levels or the eigendecomposition fails.
pub(super) fn two_way(
    a: (&[u32], &[f64]),
    b: (&[u32], &[f64]),
    omega: &[f64],
    components: usize,
) -> Option<Vec<f64>> {
    // B is the smaller effect.
    let (a, b) = if b.1.len() <= a.1.len() {
        (a, b)
    } else {
        (b, a)
    };
    let (codes_a, wa) = a;
    let (codes_b, wb) = b;
    let lb = wb.len();
    if lb > MAX_SMALL_LEVELS {
        return None;
    }
    // Cells (a, b) with their weight W_ab, grouped by a.
    let mut order: Vec<usize> = (0..omega.len()).collect();
    order.sort_unstable_by_key(|&i| (codes_a[i], codes_b[i]));
    let mut cells: Vec<(u32, u32, f64)> = Vec::new();
    let mut cell_of_row = vec![0usize; omega.len()];
    for &i in &order {
        let key = (codes_a[i], codes_b[i]);
        match cells.last_mut() {
            Some(last) if (last.0, last.1) == key => last.2 += omega[i],
            _ => cells.push((key.0, key.1, omega[i])),
        }
        cell_of_row[i] = cells.len() - 1;
    }
    // Start of each level a's run of cells.
    let mut starts = vec![0usize];
    for k in 1..cells.len() {
        if cells[k].0 != cells[k - 1].0 {
            starts.push(k);
        }
    }
    starts.push(cells.len());
    let mut g = Mat::<f64>::zeros(lb, lb);
    for (b, &w) in wb.iter().enumerate() {
        g[(b, b)] = w;
    }
    for run in starts.windows(2) {
        let level = &cells[run[0]..run[1]];
        let total = wa[level[0].0 as usize];
        for &(_, b1, w1) in level {
            for &(_, b2, w2) in level {
                g[(b1 as usize, b2 as usize)] -= w1 * w2 / total;
            }
        }
    }
    let eig = g.self_adjoint_eigen(Side::Lower).ok()?;
    let (u, s) = (eig.U(), eig.S().column_vector());
    let rank = lb.checked_sub(components)?;
    // Eigenvalues come in ascending order: keep the last `rank`.
    let mut pinv = Mat::<f64>::zeros(lb, lb);
    for l in lb - rank..lb {
        if s[l] <= 0.0 {
            return None;
        }
        let inv = 1.0 / s[l];
        for j in 0..lb {
            let f = inv * u[(j, l)];
            for i in 0..lb {
                pinv[(i, j)] += f * u[(i, l)];
            }
        }
    }
    // Per cell: G⁺_bb − 2(G⁺c_a)_b + c_a'G⁺c_a.
    let mut value = vec![0.0; cells.len()];
    for run in starts.windows(2) {
        let level = &cells[run[0]..run[1]];
        let total = wa[level[0].0 as usize];
        let gc: Vec<f64> = level
            .iter()
            .map(|&(_, b1, _)| {
                level
                    .iter()
                    .map(|&(_, b2, w2)| pinv[(b1 as usize, b2 as usize)] * w2 / total)
                    .sum()
            })
            .collect();
        let quad: f64 = level
            .iter()
            .zip(&gc)
            .map(|(&(_, _, w1), q)| w1 / total * q)
            .sum();
        for (k, &(_, b1, _)) in level.iter().enumerate() {
            value[run[0] + k] = pinv[(b1 as usize, b1 as usize)] - 2.0 * gc[k] + quad;
        }
    }
    Some(
        (0..omega.len())
            .map(|i| {
                let w = omega[i];
                w / wa[codes_a[i] as usize] + w * value[cell_of_row[i]]
            })
            .collect(),
    )
}
