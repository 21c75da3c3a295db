//! Turns a model's core results and its residual-pass sums into a [`ModelFit`]: small-sample
//! factors, the two-way combination and its eigenvalue repair, inference and the
//! Breusch–Pagan statistic. Both the shared and the independent route end here.

use faer::{Mat, Side};
use statrs::distribution::{ChiSquared, ContinuousCDF};

use crate::absorb::RowAdjust;
use crate::api::{
    BreuschPagan, Coefficient, Covariance, FitOptions, Inference, ModelError, ModelFit,
};
use crate::model_core::{projected_sq_norm, CoreFit};
use crate::plan::{CovGroups, Plan};
use crate::student::TQuantiles;

/// Sums over rows of squared residuals for Koenker's Breusch–Pagan auxiliary regression.
#[derive(Debug, Clone, Default)]
pub(crate) struct BpSums {
    /// Σ uᵢ with uᵢ = eᵢ².
    pub sum_u: f64,
    /// Σ uᵢ².
    pub sum_u2: f64,
    /// X_S'u in data units, kept order. Only xtu − ū·xt1 is used, so the moment route passes
    /// the centred coordinates' parts (the offsets' parts cancel exactly).
    pub xtu: Vec<f64>,
    /// X_S'1 (column sums), kept order (the moment route: see `xtu`).
    pub xt1: Vec<f64>,
}

/// Residual-pass results for one model. `w` columns cover the kept positions `wpos`
/// (the reported ones, or all when two-way errors are requested); wᵢ = (row q of (X'X)⁻¹)·xᵢ.
#[derive(Debug, Clone, Default)]
pub(crate) struct Meats {
    /// Kept positions covered by the w columns.
    pub wpos: Vec<usize>,
    /// Σ wⱼwₗe² over the reported coefficients (t × t, row-major, reported order; empty if not
    /// requested).
    pub hc0: Vec<f64>,
    /// Σ wⱼwₗe²/(1 − h), laid out like `hc0`.
    pub hc2: Vec<f64>,
    /// Σ wⱼwₗe²/(1 − h)², laid out like `hc0`.
    pub hc3: Vec<f64>,
    /// Per plan grouping: Σ_g s_g s_g' over the w columns (nw × nw, column-major), s_g = Σ_{i∈g} wᵢeᵢ.
    pub group_outer: Vec<Vec<f64>>,
    /// First row whose leverage is 1 (HC2/HC3 undefined there).
    pub unit_leverage_row: Option<usize>,
    /// Breusch–Pagan sums.
    pub bp: Option<BpSums>,
}

/// Leverage closer to 1 than this makes HC2/HC3 undefined (common practice: a row fitted exactly
/// by its own indicator).
pub(crate) const UNIT_LEVERAGE_GAP: f64 = 1e-10;

/// Assembles the model's result. With `rows` (an absorbed or weighted design), n is the
/// observations represented and the absorbed parameters count in k, except in the
/// cluster-robust factor of a clustering that nests them (`plan.absorbed_in_k`).
pub(crate) fn finish(
    core: &CoreFit,
    meats: &Meats,
    plan: &Plan,
    opts: &FitOptions,
    tq: &mut TQuantiles,
    rows: Option<&RowAdjust>,
) -> Result<ModelFit, ModelError> {
    let k = core.k();
    let absorbed = rows.map_or(0, |r| r.absorbed);
    let n = rows.map_or(core.n, |r| r.n_df);
    if n <= k + absorbed {
        return Err(ModelError::NoResidualDf { n, k: k + absorbed });
    }
    let df_resid = n - k - absorbed;
    let nf = n as f64;
    // (n − 1)/(n − k) of the cluster-robust factor, k counting the absorbed parameters that the
    // grouping does not nest.
    let resid_factor = |g: usize| {
        let a = plan.absorbed_in_k.get(g).copied().unwrap_or(0);
        (nf - 1.0) / (nf - (k + a) as f64)
    };
    // σ² = RSS/df_resid; the core's own σ² divides by rows − k.
    let classical_factor = (core.n - k) as f64 / df_resid as f64;
    // Allocated only when some choice is two-way (most grids have none; this runs per model).
    let mut two_way: Vec<Option<Mat<f64>>> = Vec::new();
    let mut coefficients: Vec<Coefficient> = core
        .reported
        .iter()
        .map(|&q| Coefficient {
            column: core.kept[q],
            estimate: core.coef[q],
            inference: Vec::with_capacity(opts.covariances.len()),
        })
        .collect();
    for (ci, (cov, groups)) in opts.covariances.iter().zip(&plan.cov_groups).enumerate() {
        if matches!(cov, Covariance::Hc2 | Covariance::Hc3) {
            if rows.is_some_and(|r| r.fe_leverage().is_none()) {
                return Err(ModelError::InvalidRequest(
                    "HC2/HC3 errors need the leverage of the absorbed effects, which is built for one effect, or two whose smaller one has at most 2,000 levels; use HC1 or a cluster-robust choice".into(),
                ));
            }
            if let Some(row) = meats.unit_leverage_row {
                return Err(ModelError::InvalidRequest(format!(
                    "HC2/HC3 errors are undefined for this model: row {row} has leverage 1 (it is fitted exactly, e.g. by its own indicator); use HC1 or a cluster-robust choice"
                )));
            }
        }
        if let CovGroups::Two(a, b, ab) = *groups {
            let nw = meats.wpos.len();
            let mut v = Mat::<f64>::zeros(nw, nw);
            for (g, sign) in [(a, 1.0), (b, 1.0), (ab, -1.0)] {
                let occ = check_clusters(plan, g)?;
                let f = sign * occ / (occ - 1.0) * resid_factor(g);
                let outer = &meats.group_outer[g];
                for j in 0..nw {
                    for i in 0..nw {
                        v[(i, j)] += f * outer[i + j * nw];
                    }
                }
            }
            if two_way.is_empty() {
                two_way.resize(opts.covariances.len(), None);
            }
            two_way[ci] = Some(repair_psd(v)?);
        }
    }
    // Row of each reported coefficient among the w columns (when any are computed).
    let nt = core.reported.len();
    let nw = meats.wpos.len();
    let w_of: Vec<Option<usize>> = if nw == 0 {
        Vec::new()
    } else {
        core.reported
            .iter()
            .map(|&q| meats.wpos.iter().position(|&w| w == q))
            .collect()
    };
    let w = |a: usize| {
        w_of.get(a)
            .copied()
            .flatten()
            .expect("reported coefficient has a w column")
    };
    let hc_df = df_resid as f64;
    let mut tracked_covariance = Vec::with_capacity(opts.covariances.len());
    for (ci, (cov, groups)) in opts.covariances.iter().zip(&plan.cov_groups).enumerate() {
        let mut m = vec![0.0; nt * nt];
        let mut df = hc_df;
        for a in 0..nt {
            for b in a..nt {
                let (qa, qb) = (core.reported[a], core.reported[b]);
                let ab = a * nt + b;
                let v = match (*cov, *groups) {
                    (Covariance::Classical, _) => core.classical_cov(qa, qb) * classical_factor,
                    (Covariance::Hc0, _) => meats.hc0[ab],
                    (Covariance::Hc1, _) => meats.hc0[ab] * nf / hc_df,
                    (Covariance::Hc2, _) => meats.hc2[ab],
                    (Covariance::Hc3, _) => meats.hc3[ab],
                    (Covariance::Cluster { .. }, CovGroups::One(g)) => {
                        let occ = check_clusters(plan, g)?;
                        df = occ - 1.0;
                        let meat = meats.group_outer[g][w(a) + w(b) * nw];
                        occ / (occ - 1.0) * resid_factor(g) * meat
                    }
                    (Covariance::TwoWayCluster { .. }, CovGroups::Two(ga, gb, _)) => {
                        let v = two_way[ci].as_ref().expect("built above");
                        let g = plan.groupings[ga].occupied.min(plan.groupings[gb].occupied);
                        df = g as f64 - 1.0;
                        v[(w(a), w(b))]
                    }
                    _ => unreachable!("plan and covariances are built together"),
                };
                m[ab] = v;
                m[b * nt + a] = v;
            }
        }
        for (a, coef) in coefficients.iter_mut().enumerate() {
            let var = m[a * nt + a];
            coef.inference
                .push(inference(*cov, coef.estimate, var, df, tq));
        }
        tracked_covariance.push(m);
    }
    // The p-values, two at a time (each the same double as alone; see TQuantiles::p_value_pair).
    let mut pending = coefficients.iter_mut().flat_map(|c| c.inference.iter_mut());
    while let Some(first) = pending.next() {
        match pending.next() {
            Some(second) => {
                let (p, q) = tq.p_value_pair((first.t_stat, first.df), (second.t_stat, second.df));
                first.p_value = p;
                second.p_value = q;
            }
            None => first.p_value = tq.p_value(first.t_stat, first.df),
        }
    }
    let has_effects = rows.is_some_and(|r| r.has_effects);
    let (r_squared, adj_r_squared) = r_squared(core, n, absorbed, has_effects);
    Ok(ModelFit {
        n_obs: n,
        n_params: k,
        df_resid,
        resid_sd: (core.rss / df_resid as f64).sqrt(),
        r_squared,
        adj_r_squared,
        within_r_squared: has_effects.then(|| within_r_squared(core)),
        absorbed_params: absorbed,
        condition_number: core.condition,
        dropped: core.dropped.clone(),
        all_estimates: core
            .kept
            .iter()
            .copied()
            .zip(core.coef.iter().copied())
            .collect(),
        coefficients,
        tracked_covariance,
        // Not defined here for absorbed or weighted designs (see docs/methods.md).
        breusch_pagan: if rows.is_some() {
            None
        } else {
            meats.bp.as_ref().and_then(|bp| breusch_pagan(core, bp))
        },
    })
}

fn check_clusters(plan: &Plan, g: usize) -> Result<f64, ModelError> {
    let grouping = &plan.groupings[g];
    if grouping.occupied < 2 {
        return Err(ModelError::TooFewClusters {
            name: grouping.name.clone(),
            count: grouping.occupied,
        });
    }
    Ok(grouping.occupied as f64)
}

fn inference(cov: Covariance, estimate: f64, var: f64, df: f64, tq: &mut TQuantiles) -> Inference {
    let std_error = var.max(0.0).sqrt();
    let t_stat = estimate / std_error;
    let q = tq.quantile(df);
    Inference {
        covariance: cov,
        std_error,
        t_stat,
        df,
        // Filled in by `finish` once every choice's statistics are known, two at a time.
        p_value: f64::NAN,
        ci_low: estimate - q * std_error,
        ci_high: estimate + q * std_error,
    }
}

/// Two-way V can be indefinite; following Cameron, Gelbach & Miller (2011, sec. 2.3) negative
/// eigenvalues are set to zero and V is rebuilt, V⁺ = U·max(Λ, 0)·U'.
fn repair_psd(v: Mat<f64>) -> Result<Mat<f64>, ModelError> {
    let eig = v.self_adjoint_eigen(Side::Lower).map_err(|e| {
        ModelError::InvalidRequest(format!(
            "two-way covariance eigen-decomposition failed ({e:?})"
        ))
    })?;
    let s = eig.S().column_vector();
    if (0..s.nrows()).all(|i| s[i] >= 0.0) {
        return Ok(v);
    }
    let u = eig.U();
    let nw = v.nrows();
    let mut out = Mat::<f64>::zeros(nw, nw);
    for l in 0..nw {
        let lam = s[l].max(0.0);
        if lam == 0.0 {
            continue;
        }
        for j in 0..nw {
            for i in 0..nw {
                out[(i, j)] += lam * u[(i, l)] * u[(j, l)];
            }
        }
    }
    Ok(out)
}

/// R² and adjusted R² over `n` observations with `absorbed` extra parameters. With absorbed
/// effects the R² is overall: 1 − RSS/TSS of the raw outcome (centred, ω-weighted; the
/// effects span the constant).
fn r_squared(core: &CoreFit, n: usize, absorbed: usize, has_effects: bool) -> (f64, f64) {
    let tss = core.tss;
    let (total, c) = if core.has_constant || has_effects {
        (tss.centred, 1.0)
    } else {
        (tss.uncentred, 0.0)
    };
    let r2 = if total > 0.0 {
        1.0 - core.rss / total
    } else {
        f64::NAN
    };
    let (n, k) = (n as f64, (core.k() + absorbed) as f64);
    (r2, 1.0 - (1.0 - r2) * (n - c) / (n - k))
}

/// Within R²: 1 − RSS/Σỹ², the demeaned (and √ω-scaled) outcome's own sum of squares.
fn within_r_squared(core: &CoreFit) -> f64 {
    if core.tss.uncentred > 0.0 {
        1.0 - core.rss / core.tss.uncentred
    } else {
        f64::NAN
    }
}

/// Coefficients up to which per-model scratch lives on the stack.
const SMALL_K: usize = 32;

/// Koenker (1981) studentized Breusch–Pagan: LM = n·R² of u = e² on the model's columns,
/// df = k − 1 (the constant, explicit or spanned, carries no slope). Needs a constant.
fn breusch_pagan(core: &CoreFit, bp: &BpSums) -> Option<BreuschPagan> {
    if !core.has_constant || core.k() < 2 || core.rss <= 0.0 {
        return None;
    }
    let (n, k) = (core.n as f64, core.k());
    let mean = bp.sum_u / n;
    let tss = bp.sum_u2 - n * mean * mean;
    if tss.is_nan() || tss <= 0.0 {
        return None;
    }
    // Q_S'(u − ū1) = R⁻ᵀ D⁻¹ X_S'(u − ū1); its squared norm is the explained sum of squares
    // (the constant lies in the column space, so centring commutes with the projection).
    // On the stack for the usual model sizes (this runs per model).
    let centre = |q: usize| bp.xtu[q] - mean * bp.xt1[q];
    let ess = if k <= SMALL_K {
        let mut centred = [0.0; SMALL_K];
        for (q, c) in centred.iter_mut().enumerate().take(k) {
            *c = centre(q);
        }
        projected_sq_norm(&core.rinv, &core.scales, &centred[..k])
    } else {
        let centred: Vec<f64> = (0..k).map(centre).collect();
        projected_sq_norm(&core.rinv, &core.scales, &centred)
    };
    let statistic = n * (ess / tss).clamp(0.0, 1.0);
    let df = (core.k() - 1) as f64;
    let p_value = ChiSquared::new(df)
        .map(|d| d.sf(statistic))
        .unwrap_or(f64::NAN);
    Some(BreuschPagan {
        statistic,
        df,
        p_value,
    })
}
