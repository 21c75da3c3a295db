//! The independent reference route: a fresh Householder QR (faer) of each model's own gathered
//! columns and plain per-row loops for every residual-based sum. It shares no factor with
//! [`crate::SharedFactor`]; property tests compare the two and the benchmark uses it as baseline.

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::linalg::qr::no_pivoting::factor::{
    qr_in_place, qr_in_place_scratch, recommended_block_size,
};
use faer::{Mat, Par};

use crate::api::{Design, FitOptions, ModelError, ModelFit, ModelSpec};
use crate::finish::{finish, BpSums, Meats, UNIT_LEVERAGE_GAP};
use crate::model_core::{core_from_factor, CoreFit, FactorParts, ModelTss};
use crate::plan::Plan;
use crate::refine::{needs_refinement, refine};
use crate::row_pass::{empty_meats, outer_sums};
use crate::student::TQuantiles;
use crate::validate::{check_design, check_model, check_options};

/// Fits one model by a fresh QR of its own columns (model order), dropping any column whose
/// diagonal entry in R falls below the collinearity tolerance and re-factoring without it.
pub fn fit_independent(
    design: &Design,
    model: &ModelSpec,
    opts: &FitOptions,
) -> Result<ModelFit, ModelError> {
    check_design(design).map_err(|e| ModelError::InvalidRequest(e.to_string()))?;
    check_options(opts, design)?;
    let (n, p, m) = (design.x.nrows(), design.x.ncols(), design.y.ncols());
    check_model(model, p, m, n)?;
    let plan = Plan::new(design, opts);
    let core = independent_core(design, model, opts)?;
    let meats = direct_sums(design, &core, &plan);
    finish(
        &core,
        &meats,
        &plan,
        opts,
        &mut TQuantiles::new(opts.confidence_level),
    )
}

fn independent_core(
    design: &Design,
    model: &ModelSpec,
    opts: &FitOptions,
) -> Result<CoreFit, ModelError> {
    let n = design.x.nrows();
    let norm = |v: f64| if v > 0.0 { v } else { 1.0 };
    let col_scales: Vec<f64> = model
        .columns
        .iter()
        .map(|&c| norm(design.x.col(c).norm_l2()))
        .collect();
    let y = design.y.col(model.outcome);
    let y_scale = norm(y.norm_l2());
    let col_constant: Vec<bool> = model
        .columns
        .iter()
        .map(|&c| {
            let col = design.x.col(c);
            col[0] != 0.0 && col.iter().all(|&v| v == col[0])
        })
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
            for i in 0..n {
                z[(i, q)] = design.x[(i, c)] / s;
            }
        }
        for i in 0..n {
            z[(i, k)] = y[i] / y_scale;
        }
        let size = n.min(k + 1);
        let block = recommended_block_size::<f64>(n, k + 1).max(1);
        let mut coeff = Mat::<f64>::zeros(block, size);
        qr_in_place(
            z.as_mut(),
            coeff.as_mut(),
            Par::Seq,
            MemStack::new(&mut MemBuffer::new(qr_in_place_scratch::<f64>(
                n,
                k + 1,
                block,
                Par::Seq,
                Default::default(),
            ))),
            Default::default(),
        );
        // A unit-norm column keeps |R_qq| of new direction; below tolerance it is dependent.
        // Only the first small diagonal is trustworthy: after a dependent column the unpivoted
        // QR's later diagonals can collapse too (R_qq = 0 seen for an independent column), so
        // drop one column per pass and re-factor.
        let flagged: Vec<usize> = (0..k)
            .find(|&q| q >= n || z[(q, q)].abs() <= opts.collinearity_tolerance)
            .into_iter()
            .collect();
        if !flagged.is_empty() {
            kept_pos = kept_pos
                .iter()
                .enumerate()
                .filter(|(q, _)| !flagged.contains(q))
                .map(|(_, &pos)| pos)
                .collect();
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
        };
        let mut core = core_from_factor(n, model, &parts, &design.x_names, opts)?;
        if needs_refinement(&core) {
            refine(&mut core, design.x.as_ref(), y, opts, &mut Vec::new())?;
        }
        return Ok(core);
    }
}

/// Every residual-based sum by direct loops over rows.
fn direct_sums(design: &Design, core: &CoreFit, plan: &Plan) -> Meats {
    let n = core.n;
    let k = core.k();
    let x = &design.x;
    let y = design.y.col(core.outcome);
    let mut meats = empty_meats(core, plan);
    let resid: Vec<f64> = (0..n)
        .map(|i| {
            y[i] - (0..k)
                .map(|q| x[(i, core.kept[q])] * core.coef[q])
                .sum::<f64>()
        })
        .collect();
    let mut bp = BpSums {
        xtu: vec![0.0; k],
        xt1: vec![0.0; k],
        ..BpSums::default()
    };
    for (i, e) in resid.iter().enumerate() {
        let u = e * e;
        bp.sum_u += u;
        bp.sum_u2 += u * u;
        for q in 0..k {
            let xv = x[(i, core.kept[q])];
            bp.xtu[q] += xv * u;
            bp.xt1[q] += xv;
        }
    }
    meats.bp = Some(bp);
    let nw = meats.wpos.len();
    if nw == 0 {
        return meats;
    }
    let mut a = vec![vec![0.0; k]; nw];
    for (wi, &q) in meats.wpos.iter().enumerate() {
        core.xtx_inv_row(q, &mut a[wi]);
    }
    let leverage: Vec<f64> = (0..n)
        .map(|i| {
            (0..k)
                .map(|c| {
                    (0..=c)
                        .map(|l| x[(i, core.kept[l])] / core.scales[l] * core.rinv[l + c * k])
                        .sum::<f64>()
                        .powi(2)
                })
                .sum()
        })
        .collect();
    let mut hc = vec![[0.0f64; 3]; nw];
    let mut cluster: Vec<Vec<f64>> = plan
        .groupings
        .iter()
        .map(|g| vec![0.0; g.range * nw])
        .collect();
    for i in 0..n {
        let gap = 1.0 - leverage[i];
        if plan.need_leverage() && gap <= UNIT_LEVERAGE_GAP && meats.unit_leverage_row.is_none() {
            meats.unit_leverage_row = Some(i);
        }
        for (wi, aw) in a.iter().enumerate() {
            let w: f64 = (0..k).map(|l| aw[l] * x[(i, core.kept[l])]).sum();
            let we = w * resid[i];
            hc[wi][0] += we * we;
            if gap > UNIT_LEVERAGE_GAP {
                hc[wi][1] += we * we / gap;
                hc[wi][2] += we * we / (gap * gap);
            }
            for (sums, g) in cluster.iter_mut().zip(&plan.groupings) {
                sums[wi * g.range + g.codes[i] as usize] += we;
            }
        }
    }
    if plan.need_hc0 {
        meats.hc0 = hc.iter().map(|h| h[0]).collect();
    }
    if plan.need_hc2 {
        meats.hc2 = hc.iter().map(|h| h[1]).collect();
    }
    if plan.need_hc3 {
        meats.hc3 = hc.iter().map(|h| h[2]).collect();
    }
    meats.group_outer = cluster
        .iter()
        .zip(&plan.groupings)
        .map(|(s, g)| outer_sums(s, g.range, nw))
        .collect();
    meats
}
