//! Wild cluster bootstrap-t with the null imposed (Cameron, Gelbach & Miller 2008, Review of
//! Economics and Statistics 90:414), Rademacher or Webb (2023) weights, for one coefficient of
//! one model when there are few clusters; p-value and confidence set by test inversion.
//!
//! Under H₀: β_f = β₀ the restricted residuals are ũ = M₋f·(y − β₀x_f) = ũ_y − β₀·ũ_x, and the
//! bootstrap outcome is y* = (y − ũ) + ũ∘v with one weight v_g per cluster. Everything per draw
//! reduces to G-vectors (as in Roodman, MacKinnon, Nielsen & Webb 2019, Stata Journal 19:4, "Fast
//! and wild"): with a = row f of (X'X)⁻¹, wᵢ = a'xᵢ, s_g = Σ_{i∈g} wᵢũᵢ,
//!   b*_f − β₀ = Σ_g v_g·s_g,
//!   Σ_{i∈h} wᵢe*ᵢ = Σ_g C[h, g]·v_g,  C = diag(s) − A'(X'X)⁻¹B,  A_h = X_h'w_h, B_g = X_g'ũ_g,
//! and the CR1 variance is c·Σ_h (C·v)_h², c = G/(G − 1)·(n − 1)/(n − k). Both are linear in β₀
//! (s = s_y − β₀s_x, C = C_y − β₀C_x), so after one pass the bootstrap t of every draw at any β₀
//! costs O(1): inverting the test is cheap.

use faer::{Mat, MatRef};

use crate::api::{Design, ModelSpec};
use crate::dense::{seq_product, thin_qr};
use crate::small_qr::upper_inverse;
use crate::student::two_sided_p;

use super::weights::BootstrapWeights;
use super::InferenceError;

/// Relative slack when comparing |t*| with |t|: the draw that reproduces the data (all weights
/// +1) must count as "at least as extreme" despite rounding (common practice).
const TIE_SLACK: f64 = 1e-10;
/// Relative diagonal of R below which the model's columns count as collinear.
const RANK_TOL: f64 = 1e-10;

/// Most clusters accepted: the per-draw work is O(G²), and with many clusters the CR1 t-test
/// needs no bootstrap (Cameron, Gelbach & Miller 2008 find it accurate from about 50 clusters).
const MAX_CLUSTERS: usize = 1_000;

/// Settings of the wild cluster bootstrap.
#[derive(Debug, Clone, PartialEq)]
pub struct WildClusterOptions {
    /// Weight distribution.
    pub weights: BootstrapWeights,
    /// Number of draws; when the weights have no more distinct vectors than this over the G
    /// clusters (2^G Rademacher, 6^G Webb), all of them are enumerated instead.
    pub draws: usize,
    /// Seed of the ChaCha20 weight streams (used only when not enumerating).
    pub seed: u64,
    /// Confidence level of the inverted-test confidence set.
    pub confidence_level: f64,
}

impl Default for WildClusterOptions {
    fn default() -> Self {
        WildClusterOptions {
            weights: BootstrapWeights::Rademacher,
            draws: 9_999,
            seed: 20_080_414,
            confidence_level: 0.95,
        }
    }
}

/// Result of the wild cluster bootstrap-t for one coefficient.
#[derive(Debug, Clone, PartialEq)]
pub struct WildClusterResult {
    /// OLS estimate of the coefficient.
    pub estimate: f64,
    /// The tested value β₀.
    pub null_value: f64,
    /// One-way CR1 standard error.
    pub cr1_std_error: f64,
    /// (estimate − β₀) / CR1 standard error.
    pub t_stat: f64,
    /// The conventional CR1 p-value, Student t with G − 1 degrees of freedom.
    pub cr1_p_value: f64,
    /// Bootstrap p-value: share of draws with |t*| ≥ |t|.
    pub p_value: f64,
    /// Number of weight vectors used.
    pub draws: usize,
    /// Whether all weight vectors were enumerated (then the p-value has no simulation error).
    pub enumerated: bool,
    /// Number of clusters G.
    pub clusters: usize,
    /// Lower end of the confidence set {β₀ : p(β₀) > 1 − level}; `None` if unbounded below.
    pub ci_low: Option<f64>,
    /// Upper end; `None` if unbounded above.
    pub ci_high: Option<f64>,
}

/// Everything the bootstrap t needs, reduced to per-draw scalars.
struct Reduced {
    estimate: f64,
    se: f64,
    /// CR1 factor c.
    factor: f64,
    /// Per draw: s_y'v, s_x'v, ‖C_y v‖², (C_y v)'(C_x v), ‖C_x v‖².
    per_draw: Vec<[f64; 5]>,
}

impl Reduced {
    /// Bootstrap p-value of H₀: β = β₀.
    fn p_value(&self, beta0: f64) -> f64 {
        let t = ((self.estimate - beta0) / self.se).abs();
        let hits = self
            .per_draw
            .iter()
            .filter(|&&[ny, nx, a, c, d]| {
                let num = ny - beta0 * nx;
                let var = self.factor * (a - 2.0 * beta0 * c + beta0 * beta0 * d);
                let tb = if var > 0.0 {
                    (num / var.sqrt()).abs()
                } else {
                    0.0
                };
                tb >= t * (1.0 - TIE_SLACK)
            })
            .count();
        hits as f64 / self.per_draw.len() as f64
    }
}

/// Tests H₀: coefficient of `focus` = `null_value` in `model` (its outcome and columns) with
/// cluster dimension `cluster_dim` of `design`, and inverts the test for a confidence set.
pub fn wild_cluster_test(
    design: &Design,
    model: &ModelSpec,
    focus: usize,
    cluster_dim: usize,
    null_value: f64,
    opts: &WildClusterOptions,
) -> Result<WildClusterResult, InferenceError> {
    let invalid = |m: String| Err(InferenceError::Invalid(m));
    let Some(f) = model.columns.iter().position(|&c| c == focus) else {
        return invalid(format!("the focus column {focus} is not in the model"));
    };
    let Some(cl) = design.clusters.get(cluster_dim) else {
        return invalid(format!(
            "no clustering dimension {cluster_dim} in the design"
        ));
    };
    if !(opts.confidence_level > 0.0 && opts.confidence_level < 1.0) || opts.draws == 0 {
        return invalid("the wild bootstrap needs draws > 0 and a level in (0, 1)".into());
    }
    let n = design.x.nrows();
    let k = model.columns.len();
    // Clusters that hold rows, renumbered 0..G, so that empty codes get no weight.
    let (codes, g) = occupied_codes(&cl.codes, cl.count);
    let occupied = g;
    if g > MAX_CLUSTERS {
        return invalid(format!(
            "the wild cluster bootstrap is meant for few clusters; `{}` has {g} (limit {MAX_CLUSTERS}), where the CR1 t-test is reliable",
            cl.name
        ));
    }
    if occupied < 2 || n <= k {
        return invalid(format!(
            "the wild cluster bootstrap needs at least 2 clusters and more rows than coefficients (found {occupied} clusters, {n} rows, {k} coefficients)"
        ));
    }
    let x = Mat::from_fn(n, k, |i, j| design.x[(i, model.columns[j])]);
    let y = design.y.col(model.outcome);
    let ls = LeastSquares::new(x.as_ref()).ok_or_else(|| {
        InferenceError::Invalid(
            "the model's columns are collinear; drop the redundant column before the wild bootstrap".into(),
        )
    })?;
    let kinv = ls.xtx_inverse();
    let a: Vec<f64> = (0..k).map(|j| kinv[(f, j)]).collect();
    let w: Vec<f64> = (0..n)
        .map(|i| (0..k).map(|j| x[(i, j)] * a[j]).sum())
        .collect();
    let yv: Vec<f64> = y.iter().copied().collect();
    let estimate: f64 = w.iter().zip(&yv).map(|(w, y)| w * y).sum();
    let resid = ls.residuals(&yv);
    let mut score = vec![0.0; g];
    for i in 0..n {
        score[codes[i] as usize] += w[i] * resid[i];
    }
    let (gf, nf, kf) = (occupied as f64, n as f64, k as f64);
    let factor = gf / (gf - 1.0) * (nf - 1.0) / (nf - kf);
    let se = (factor * score.iter().map(|s| s * s).sum::<f64>()).sqrt();
    // Restricted residual pieces ũ_y = M₋f y, ũ_x = M₋f x_f, without a second factorisation
    // (Frisch–Waugh–Lovell): w = X(X'X)⁻¹e_f = ũ_x/(ũ_x'ũ_x) and a_f = 1/(ũ_x'ũ_x), so
    // ũ_x = w/a_f; and M₋f y = b_f·ũ_x + e because the full residual e is orthogonal to X₋f.
    let ux: Vec<f64> = w.iter().map(|wi| wi / a[f]).collect();
    let uy: Vec<f64> = resid
        .iter()
        .zip(&ux)
        .map(|(e, u)| e + estimate * u)
        .collect();
    // A_h = X_h'w_h (k × G), and per cluster sums for ũ_y and ũ_x.
    // Column by column, so each pass reads one contiguous column of X.
    let cluster_sums = |u: &[f64]| -> Mat<f64> {
        let mut out = Mat::<f64>::zeros(k, g);
        for j in 0..k {
            let xj = x.col(j);
            for i in 0..n {
                out[(j, codes[i] as usize)] += xj[i] * u[i];
            }
        }
        out
    };
    let amat = cluster_sums(&w);
    let cmat = |u: &[f64]| -> (Vec<f64>, Mat<f64>) {
        let mut s = vec![0.0; g];
        for i in 0..n {
            s[codes[i] as usize] += w[i] * u[i];
        }
        let b = cluster_sums(u);
        // C = diag(s) − A'·K·B.
        let mut c = seq_product(
            amat.transpose(),
            seq_product(kinv.as_ref(), b.as_ref()).as_ref(),
        );
        for h in 0..g {
            c.row_mut(h).iter_mut().for_each(|v| *v = -*v);
            c[(h, h)] += s[h];
        }
        (s, c)
    };
    let (sy, cy) = cmat(&uy);
    let (sx, cx) = cmat(&ux);
    let (v, enumerated) = weight_matrix(opts, g);
    let per_draw = reduce(&sy, &sx, cy.as_ref(), cx.as_ref(), v.as_ref());
    let reduced = Reduced {
        estimate,
        se,
        factor,
        per_draw,
    };
    let t_stat = (estimate - null_value) / se;
    let alpha = 1.0 - opts.confidence_level;
    let (ci_low, ci_high) = (invert(&reduced, alpha, -1.0), invert(&reduced, alpha, 1.0));
    Ok(WildClusterResult {
        estimate,
        null_value,
        cr1_std_error: se,
        t_stat,
        cr1_p_value: two_sided_p(t_stat, gf - 1.0),
        p_value: reduced.p_value(null_value),
        draws: v.ncols(),
        enumerated,
        clusters: occupied,
        ci_low,
        ci_high,
    })
}

/// Codes renumbered densely over the clusters that hold rows, and their number.
fn occupied_codes(codes: &[u32], range: usize) -> (Vec<u32>, usize) {
    let mut index = vec![u32::MAX; range];
    let mut next = 0u32;
    let dense = codes
        .iter()
        .map(|&c| {
            let slot = &mut index[c as usize];
            if *slot == u32::MAX {
                *slot = next;
                next += 1;
            }
            *slot
        })
        .collect();
    (dense, next as usize)
}

/// G × B weight matrix: every weight vector when there are at most `draws` of them, otherwise
/// `draws` seeded ones.
fn weight_matrix(opts: &WildClusterOptions, g: usize) -> (Mat<f64>, bool) {
    let mut v = vec![0.0; g];
    match opts.weights.support_size(g) {
        Some(total) if total <= opts.draws => {
            let mut m = Mat::<f64>::zeros(g, total);
            for b in 0..total {
                opts.weights.enumerated(b, &mut v);
                m.col_mut(b).iter_mut().zip(&v).for_each(|(d, s)| *d = *s);
            }
            (m, true)
        }
        _ => {
            let mut m = Mat::<f64>::zeros(g, opts.draws);
            for b in 0..opts.draws {
                opts.weights.seeded(opts.seed, b as u64, &mut v);
                m.col_mut(b).iter_mut().zip(&v).for_each(|(d, s)| *d = *s);
            }
            (m, false)
        }
    }
}

/// Per-draw scalars [s_y'v, s_x'v, ‖C_y v‖², (C_y v)'(C_x v), ‖C_x v‖²].
fn reduce(
    sy: &[f64],
    sx: &[f64],
    cy: MatRef<'_, f64>,
    cx: MatRef<'_, f64>,
    v: MatRef<'_, f64>,
) -> Vec<[f64; 5]> {
    let (g, b) = (v.nrows(), v.ncols());
    let (py, px) = (seq_product(cy, v), seq_product(cx, v));
    (0..b)
        .map(|d| {
            let vc = v.col(d);
            let (ny, nx) = (
                (0..g).map(|h| sy[h] * vc[h]).sum(),
                (0..g).map(|h| sx[h] * vc[h]).sum(),
            );
            let (yc, xc) = (py.col(d), px.col(d));
            [
                ny,
                nx,
                yc.squared_norm_l2(),
                (0..g).map(|h| yc[h] * xc[h]).sum(),
                xc.squared_norm_l2(),
            ]
        })
        .collect()
}

/// End of the confidence set in `direction` (+1 up, −1 down): step outward from the estimate in
/// doubling multiples of the CR1 standard error until the test rejects (p ≤ alpha), then bisect.
/// `None` when no rejection is found within 2⁴⁰ standard errors (an unbounded set).
fn invert(r: &Reduced, alpha: f64, direction: f64) -> Option<f64> {
    let at = |m: f64| r.estimate + direction * m * r.se;
    let (mut inside, mut outside) = (0.0, 1.0);
    let mut found = false;
    for _ in 0..40 {
        if r.p_value(at(outside)) <= alpha {
            found = true;
            break;
        }
        inside = outside;
        outside *= 2.0;
    }
    if !found {
        return None;
    }
    for _ in 0..200 {
        let mid = 0.5 * (inside + outside);
        if mid == inside || mid == outside || outside - inside <= 1e-13 * outside {
            break;
        }
        if r.p_value(at(mid)) <= alpha {
            outside = mid;
        } else {
            inside = mid;
        }
    }
    Some(at(0.5 * (inside + outside)))
}

/// Thin QR of one model's columns for residuals and (X'X)⁻¹.
struct LeastSquares {
    q: Mat<f64>,
    rinv: Mat<f64>,
}

impl LeastSquares {
    /// `None` when a diagonal of R is negligible (collinear columns).
    fn new(x: MatRef<'_, f64>) -> Option<LeastSquares> {
        let k = x.ncols();
        let (q, r) = thin_qr(x);
        let collinear = (0..k).any(|j| {
            let norm = x.col(j).norm_l2().max(f64::MIN_POSITIVE);
            r[j + j * k].abs() <= RANK_TOL * norm
        });
        if collinear {
            return None;
        }
        let mut inv = vec![0.0; k * k];
        upper_inverse(&r, k, &mut inv);
        Some(LeastSquares {
            q,
            rinv: Mat::from_fn(k, k, |i, j| inv[i + j * k]),
        })
    }

    /// (X'X)⁻¹ = R⁻¹R⁻ᵀ.
    fn xtx_inverse(&self) -> Mat<f64> {
        seq_product(self.rinv.as_ref(), self.rinv.transpose())
    }

    /// v − Q·Q'v.
    fn residuals(&self, v: &[f64]) -> Vec<f64> {
        let k = self.q.ncols();
        let coef: Vec<f64> = (0..k)
            .map(|j| self.q.col(j).iter().zip(v).map(|(q, v)| q * v).sum())
            .collect();
        (0..v.len())
            .map(|i| v[i] - (0..k).map(|j| self.q[(i, j)] * coef[j]).sum::<f64>())
            .collect()
    }
}
