//! The independent reference route: a fresh Householder QR (faer) of each model's own gathered
//! columns and plain per-row loops for every residual-based sum. It shares no factor with
//! [`crate::SharedFactor`]; property tests compare the two and the benchmark uses it as baseline.

use faer::Mat;

use crate::api::{Design, FitOptions, ModelError, ModelFit, ModelSpec};
use crate::dense::{householder_in_place, is_constant_nonzero, unit_scale};
use crate::finish::{finish, BpSums, Meats, UNIT_LEVERAGE_GAP};
use crate::model_core::{core_from_factor, CoreFit, FactorParts, ModelTss};
use crate::plan::Plan;
use crate::refine::{needs_refinement, refine};
use crate::row_pass::{empty_meats, outer_sums};
use crate::student::TQuantiles;
use crate::validate::{check_design_shape, check_model, check_options, check_used_columns};

/// Fits one model by a fresh QR of its own columns (model order), dropping any column whose
/// diagonal entry in R falls below the collinearity tolerance and re-factoring without it.
pub fn fit_independent(
    design: &Design,
    model: &ModelSpec,
    opts: &FitOptions,
) -> Result<ModelFit, ModelError> {
    let invalid = |e: crate::api::EngineError| ModelError::InvalidRequest(e.to_string());
    check_design_shape(design).map_err(invalid)?;
    check_options(opts, design)?;
    let (n, p, m) = (design.x.nrows(), design.x.ncols(), design.y.ncols());
    check_model(model, p, m, n)?;
    check_used_columns(design, &model.columns, model.outcome).map_err(invalid)?;
    let plan = Plan::new(design, opts);
    let core = independent_core(design, model, opts)?;
    let meats = direct_sums(design, &core, &plan);
    finish(
        &core,
        &meats,
        &plan,
        opts,
        &mut TQuantiles::new(opts.confidence_level),
        None,
    )
}

fn independent_core(
    design: &Design,
    model: &ModelSpec,
    opts: &FitOptions,
) -> Result<CoreFit, ModelError> {
    let n = design.x.nrows();
    let col_scales: Vec<f64> = model
        .columns
        .iter()
        .map(|&c| unit_scale(design.x.col(c)))
        .collect();
    let y = design.y.col(model.outcome);
    let y_scale = unit_scale(y);
    let col_constant: Vec<bool> = model
        .columns
        .iter()
        .map(|&c| is_constant_nonzero(design.x.col(c)))
        .collect();
    let col_sums: Vec<f64> = model
        .columns
        .iter()
        .map(|&c| design.x.col(c).iter().sum())
        .collect();
    let mut kept_pos: Vec<usize> = (0..model.columns.len()).collect();
    loop {
        let k = kept_pos.len();
        let mut z = Mat::<f64>::zeros(n, k + 1);
        for (q, &pos) in kept_pos.iter().enumerate() {
            let (c, s) = (model.columns[pos], col_scales[pos]);
            z.col_mut(q)
                .iter_mut()
                .zip(column(&design.x, c))
                .for_each(|(d, v)| *d = v / s);
        }
        z.col_mut(k)
            .iter_mut()
            .zip(y.iter())
            .for_each(|(d, v)| *d = v / y_scale);
        householder_in_place(&mut z);
        // A unit-norm column keeps |R_qq| of new direction; below tolerance it is dependent.
        // Only the first small diagonal is trustworthy: after a dependent column the unpivoted
        // QR's later diagonals can collapse too (R_qq = 0 seen for an independent column), so
        // drop one column per pass and re-factor.
        if let Some(q) = (0..k).find(|&q| q >= n || z[(q, q)].abs() <= opts.collinearity_tolerance)
        {
            kept_pos.remove(q);
            continue;
        }
        let r: Vec<f64> = (0..k * k)
            .map(|idx| {
                let (i, j) = (idx % k, idx / k);
                if i <= j {
                    z[(i, j)]
                } else {
                    0.0
                }
            })
            .collect();
        let qty: Vec<f64> = (0..k).map(|i| z[(i, k)]).collect();
        let resid_norm = if n > k { z[(k, k)].abs() } else { 0.0 };
        let parts = FactorParts {
            kept_pos: &kept_pos,
            r: &r,
            qty: &qty,
            resid_norm,
            col_scales: &col_scales,
            y_scale,
            col_constant: &col_constant,
            tss: ModelTss::of(y),
            col_sums: &col_sums,
            ones_norm2: n as f64,
        };
        let mut core = core_from_factor(n, model, &parts, &design.x_names, opts, &mut Vec::new())?;
        if needs_refinement(&core) {
            refine(&mut core, design.x.as_ref(), y, opts, &mut Vec::new())?;
        }
        return Ok(core);
    }
}

/// Contiguous slice of a column of a column-major faer matrix.
fn column(m: &Mat<f64>, j: usize) -> &[f64] {
    m.col(j)
        .try_as_col_major()
        .expect("faer Mat columns are contiguous")
        .as_slice()
}

/// Every residual-based sum by direct loops over the model's own columns.
fn direct_sums(design: &Design, core: &CoreFit, plan: &Plan) -> Meats {
    let n = core.n;
    let k = core.k();
    let cols: Vec<&[f64]> = core.kept.iter().map(|&c| column(&design.x, c)).collect();
    let y = column(&design.y, core.outcome);
    let mut meats = empty_meats(core, plan);
    let mut resid = y.to_vec();
    for (col, b) in cols.iter().zip(&core.coef) {
        resid
            .iter_mut()
            .zip(col.iter())
            .for_each(|(r, x)| *r -= b * x);
    }
    let u: Vec<f64> = resid.iter().map(|e| e * e).collect();
    meats.bp = Some(BpSums {
        sum_u: u.iter().sum(),
        sum_u2: u.iter().map(|v| v * v).sum(),
        xtu: cols
            .iter()
            .map(|c| c.iter().zip(&u).map(|(x, v)| x * v).sum())
            .collect(),
        xt1: cols.iter().map(|c| c.iter().sum()).collect(),
    });
    let nw = meats.wpos.len();
    if nw == 0 {
        return meats;
    }
    // hᵢ = ‖row i of X_S D⁻¹ R⁻¹‖², built column by column of Q = X_S D⁻¹R⁻¹.
    let leverage: Vec<f64> = if plan.need_leverage() {
        let mut h = vec![0.0; n];
        let mut qc = vec![0.0; n];
        for c in 0..k {
            qc.fill(0.0);
            for (l, col) in cols.iter().enumerate().take(c + 1) {
                let f = core.rinv[l + c * k] / core.scales[l];
                qc.iter_mut().zip(col.iter()).for_each(|(q, x)| *q += f * x);
            }
            h.iter_mut().zip(&qc).for_each(|(h, q)| *h += q * q);
        }
        h
    } else {
        Vec::new()
    };
    if let Some(row) = leverage.iter().position(|h| 1.0 - h <= UNIT_LEVERAGE_GAP) {
        meats.unit_leverage_row = Some(row);
    }
    let mut a = vec![0.0; k];
    let mut we = vec![0.0; n];
    let mut cluster: Vec<Vec<f64>> = plan
        .groupings
        .iter()
        .map(|g| vec![0.0; g.range * nw])
        .collect();
    let nt = core.reported.len();
    let mut reported_we: Vec<Vec<f64>> = vec![Vec::new(); nt];
    for (wi, &q) in meats.wpos.clone().iter().enumerate() {
        // wᵢ·eᵢ with wᵢ = (row q of (X'X)⁻¹)·xᵢ.
        core.xtx_inv_row(q, &mut a);
        we.fill(0.0);
        for (col, al) in cols.iter().zip(&a) {
            we.iter_mut()
                .zip(col.iter())
                .for_each(|(w, x)| *w += al * x);
        }
        we.iter_mut().zip(&resid).for_each(|(w, e)| *w *= e);
        if let Some(a) = core.reported.iter().position(|&r| r == q) {
            reported_we[a] = we.clone();
        }
        for (sums, g) in cluster.iter_mut().zip(&plan.groupings) {
            let s = &mut sums[wi * g.range..(wi + 1) * g.range];
            for (v, &code) in we.iter().zip(&g.codes) {
                s[code as usize] += v;
            }
        }
    }
    // HC sums over every pair of reported coefficients, Σ (wₐe)(w_b e) [/(1 − h), /(1 − h)²].
    let need_hc = plan.need_hc0 || plan.need_hc2 || plan.need_hc3;
    if need_hc {
        let mut sums = vec![[0.0f64; 3]; nt * nt];
        for a in 0..nt {
            for b in a..nt {
                let mut cell = [0.0f64; 3];
                for (i, (va, vb)) in reported_we[a].iter().zip(&reported_we[b]).enumerate() {
                    let prod = va * vb;
                    cell[0] += prod;
                    if let Some(h) = leverage.get(i) {
                        let gap = 1.0 - h;
                        if gap > UNIT_LEVERAGE_GAP {
                            cell[1] += prod / gap;
                            cell[2] += prod / (gap * gap);
                        }
                    }
                }
                sums[a * nt + b] = cell;
                sums[b * nt + a] = cell;
            }
        }
        let pick = |which: usize| sums.iter().map(|c| c[which]).collect::<Vec<f64>>();
        if plan.need_hc0 {
            meats.hc0 = pick(0);
        }
        if plan.need_hc2 {
            meats.hc2 = pick(1);
        }
        if plan.need_hc3 {
            meats.hc3 = pick(2);
        }
    }
    meats.group_outer = cluster
        .iter()
        .zip(&plan.groupings)
        .map(|(s, g)| outer_sums(s, g.range, nw))
        .collect();
    meats
}
