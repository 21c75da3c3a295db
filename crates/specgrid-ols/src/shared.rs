//! The shared-factor route: one Householder QR of the scaled union [X | Y], then per model a
//! small QR of the selected columns of R (see docs/methods.md, "One factorisation for the grid").

use faer::Mat;
use rayon::prelude::*;

use crate::absorb::{AbsorbedDesign, RowAdjust};
use crate::api::{Design, EngineError, FitOptions, ModelError, ModelFit, ModelSpec};
use crate::dense::{householder_in_place, is_constant_nonzero, thin_q, unit_scale};
use crate::finish::{finish, Meats};
use crate::model_core::{core_from_factor, CoreFit, FactorParts, ModelTss};
use crate::moments::{CovarianceRoute, MomentStats, MomentStore, MomentWork, Prepared};
use crate::plan::Plan;
use crate::refine::{needs_refinement, refine};
use crate::row_pass::{row_pass, PassInput, RowProducts};
use crate::small_qr::{factor_in_order, QrWork};
use crate::student::TQuantiles;
use crate::validate::{check_design, check_model, check_options};

/// Most models per batch of the residual pass.
const BATCH_MODELS: usize = 128;
/// Budget (in f64 slots) for the per-cluster sums one batch may hold.
const CLUSTER_BUDGET: usize = 1 << 22;

/// One factorisation of a design, shared by every model fitted on it.
#[derive(Debug)]
pub struct SharedFactor<'a> {
    design: &'a Design,
    /// 2-norm of each union column (1 for an all-zero column).
    x_scales: Vec<f64>,
    /// 2-norm of each outcome (1 for an all-zero outcome).
    y_scales: Vec<f64>,
    /// Upper-triangular factor of the scaled [X | Y], min(n, p+m) × (p+m).
    r: Mat<f64>,
    /// Whether each union column is constant and nonzero.
    x_constant: Vec<bool>,
    /// Sum of each union column.
    x_colsum: Vec<f64>,
    /// Total sums of squares per outcome.
    tss: Vec<ModelTss>,
    /// ‖u‖² of the constant vector u (n; Σω for a weighted design).
    ones_norm2: f64,
    /// Absorbed effects and weights, when the design came from [`crate::absorb()`].
    rows: Option<&'a RowAdjust>,
    /// The first min(n, p) columns of Q (an orthonormal basis of the union X columns' span),
    /// kept only by [`SharedFactor::new_for_refits`]; outcome-only refits multiply new outcomes
    /// by it (see `inference::refit`).
    x_basis: Option<Mat<f64>>,
    /// How residual-based covariance sums are computed (see [`CovarianceRoute`]).
    route: CovarianceRoute,
    /// Models the caller expects to fit on this factor over all calls (the route decision).
    expected_models: Option<usize>,
    /// Moments built on first use by the moment route, shared by later calls.
    moments: MomentStore,
    /// Which products the pass over rows uses.
    row_products: RowProducts,
}

/// Per-thread buffers for the per-model small factorisations.
#[derive(Debug, Default)]
struct CoreWork {
    m: Vec<f64>,
    /// Last possibly-nonzero row of each column of `m`.
    last: Vec<usize>,
    kept: Vec<usize>,
    r: Vec<f64>,
    qty: Vec<f64>,
    scales: Vec<f64>,
    constant: Vec<bool>,
    qr: QrWork,
    resid: Vec<f64>,
    sums: Vec<f64>,
    /// The condition estimate's working space.
    condition: Vec<f64>,
}

impl<'a> SharedFactor<'a> {
    /// Validates the design and factors its scaled union [X | Y] once.
    pub fn new(design: &'a Design) -> Result<SharedFactor<'a>, EngineError> {
        Self::build(design, false)
    }

    /// As [`SharedFactor::new`], and also keeps an orthonormal basis of the union regressors
    /// (n × min(n, p) more memory) so that the grid can be refitted on new outcome vectors
    /// without factoring X again (`inference::OutcomeRefit`).
    pub fn new_for_refits(design: &'a Design) -> Result<SharedFactor<'a>, EngineError> {
        Self::build(design, true)
    }

    fn build(design: &'a Design, keep_basis: bool) -> Result<SharedFactor<'a>, EngineError> {
        check_design(design)?;
        let (n, p, m) = (design.x.nrows(), design.x.ncols(), design.y.ncols());
        let x_scales: Vec<f64> = (0..p).map(|j| unit_scale(design.x.col(j))).collect();
        let y_scales: Vec<f64> = (0..m).map(|j| unit_scale(design.y.col(j))).collect();
        let mut z = Mat::<f64>::zeros(n, p + m);
        for (j, &s) in x_scales.iter().enumerate() {
            z.col_mut(j)
                .iter_mut()
                .zip(design.x.col(j).iter())
                .for_each(|(d, v)| *d = v / s);
        }
        for (j, &s) in y_scales.iter().enumerate() {
            z.col_mut(p + j)
                .iter_mut()
                .zip(design.y.col(j).iter())
                .for_each(|(d, v)| *d = v / s);
        }
        let coeff = householder_in_place(&mut z);
        let x_basis = keep_basis.then(|| thin_q(z.as_ref(), coeff.as_ref(), n.min(p)));
        let size = n.min(p + m);
        let mut r = Mat::<f64>::zeros(size, p + m);
        for j in 0..p + m {
            for i in 0..=j.min(size.saturating_sub(1)) {
                r[(i, j)] = z[(i, j)];
            }
        }
        let x_constant = (0..p)
            .map(|j| is_constant_nonzero(design.x.col(j)))
            .collect();
        let x_colsum = (0..p).map(|j| design.x.col(j).iter().sum()).collect();
        let tss = (0..m).map(|j| ModelTss::of(design.y.col(j))).collect();
        Ok(SharedFactor {
            design,
            x_scales,
            y_scales,
            r,
            x_constant,
            x_colsum,
            tss,
            ones_norm2: n as f64,
            rows: None,
            x_basis,
            route: CovarianceRoute::Auto,
            expected_models: None,
            moments: MomentStore::default(),
            row_products: RowProducts::Auto,
        })
    }

    /// Factors a design prepared by [`crate::absorb()`]: models fitted on it count the absorbed
    /// parameters in their degrees of freedom, follow the weights' conventions and report
    /// overall and within R² (see docs/methods.md, "Fixed effects and weights").
    pub fn absorbed(prepared: &'a AbsorbedDesign) -> Result<SharedFactor<'a>, EngineError> {
        let mut factor = SharedFactor::new(&prepared.design)?;
        let rows = &prepared.rows;
        factor.x_constant.clone_from(&rows.x_constant);
        factor.x_colsum.clone_from(&rows.x_root_sum);
        factor.ones_norm2 = rows.root_norm2;
        for (t, &total) in factor.tss.iter_mut().zip(&prepared.info.total_ss) {
            t.centred = total;
        }
        factor.rows = Some(rows);
        Ok(factor)
    }

    /// Upper-triangular factor of the scaled union [X | Y].
    pub(crate) fn union_r(&self) -> faer::MatRef<'_, f64> {
        self.r.as_ref()
    }

    /// 2-norm scale of each union column (the R columns are X divided by these).
    pub(crate) fn x_scales(&self) -> &[f64] {
        &self.x_scales
    }

    /// The kept orthonormal basis of the union columns, if built by
    /// [`SharedFactor::new_for_refits`].
    pub(crate) fn x_basis(&self) -> Option<faer::MatRef<'_, f64>> {
        self.x_basis.as_ref().map(|q| q.as_ref())
    }

    /// Chooses how residual-based covariance sums are computed (default
    /// [`CovarianceRoute::Auto`]). The numbers agree between routes to about 1e-8 relative.
    pub fn set_covariance_route(&mut self, route: CovarianceRoute) {
        self.route = route;
    }

    /// Chooses how the pass over rows forms its products (default [`RowProducts::Auto`]): the
    /// numbers agree between the two to rounding.
    pub fn set_row_products(&mut self, products: RowProducts) {
        self.row_products = products;
    }

    /// Announces how many models will be fitted on this factor over all calls, so that the
    /// automatic route choice weighs a one-off moment build against the whole grid rather than
    /// against one chunk.
    pub fn expect_models(&mut self, count: usize) {
        self.expected_models = Some(count);
    }

    /// How many models got their covariance sums from moments so far, and how many fell back
    /// to the row pass because a rounding bound was too loose.
    pub fn moment_stats(&self) -> MomentStats {
        self.moments.stats()
    }

    /// The design this factor belongs to.
    pub fn design(&self) -> &Design {
        self.design
    }

    /// Fits one model.
    pub fn fit(&self, model: &ModelSpec, opts: &FitOptions) -> Result<ModelFit, ModelError> {
        self.fit_many(std::slice::from_ref(model), opts)
            .pop()
            .expect("one result per model")
    }

    /// Fits many models in parallel (rayon); the output order is the input order, and the
    /// numbers do not depend on the number of threads.
    pub fn fit_many(
        &self,
        models: &[ModelSpec],
        opts: &FitOptions,
    ) -> Vec<Result<ModelFit, ModelError>> {
        self.fit_many_with_progress(models, opts, &|_| {})
    }

    /// As [`SharedFactor::fit_many`], calling `on_done(count)` after each finished batch with the
    /// number of models that batch held (the calls may come from several threads).
    pub fn fit_many_with_progress(
        &self,
        models: &[ModelSpec],
        opts: &FitOptions,
        on_done: &(dyn Fn(usize) + Sync),
    ) -> Vec<Result<ModelFit, ModelError>> {
        if let Err(e) = check_options(opts, self.design) {
            on_done(models.len());
            return vec![Err(e); models.len()];
        }
        let mut plan = Plan::new(self.design, opts);
        if let Some(rows) = self.rows {
            plan.absorbed_in_k = plan
                .groupings
                .iter()
                .map(|g| rows.absorbed_for_clustering(&g.codes))
                .collect();
        }
        let prepared = self.moments.prepare(
            self.design,
            &plan,
            self.rows,
            self.route,
            self.expected_models,
            models,
        );
        let batches = batch_bounds(models, &plan);
        let results: Vec<Vec<Result<ModelFit, ModelError>>> = batches
            .par_iter()
            .map(|&(start, end)| {
                let out = self.fit_batch(&models[start..end], opts, &plan, prepared.as_ref());
                on_done(end - start);
                out
            })
            .collect();
        let mut out = Vec::with_capacity(models.len());
        for batch in results {
            out.extend(batch);
        }
        out
    }

    fn fit_batch(
        &self,
        models: &[ModelSpec],
        opts: &FitOptions,
        plan: &Plan,
        prepared: Option<&Prepared<'_>>,
    ) -> Vec<Result<ModelFit, ModelError>> {
        let mut work = CoreWork::default();
        let cores: Vec<Result<CoreFit, ModelError>> = models
            .iter()
            .map(|m| self.core(m, opts, &mut work))
            .collect();
        // Moment sums where the route is on and the bound holds; the row pass for the rest.
        let mut moment_work = MomentWork::default();
        let from_moments: Vec<Option<Meats>> = cores
            .iter()
            .map(|c| {
                let (prep, core) = (prepared?, c.as_ref().ok()?);
                self.moments.meats(prep, core, plan, &mut moment_work)
            })
            .collect();
        let rest: Vec<&CoreFit> = cores
            .iter()
            .zip(&from_moments)
            .filter(|(_, m)| m.is_none())
            .filter_map(|(c, _)| c.as_ref().ok())
            .collect();
        let mut passed = row_pass(PassInput {
            x: self.design.x.as_ref(),
            y: self.design.y.as_ref(),
            x_colsum: &self.x_colsum,
            cores: &rest,
            plan,
            rows: self.rows,
            preference: self.row_products,
        })
        .into_iter();
        let mut tq = TQuantiles::new(opts.confidence_level);
        cores
            .into_iter()
            .zip(from_moments)
            .map(|(c, moment)| {
                let core = c?;
                let meat = match moment {
                    Some(m) => m,
                    None => passed.next().expect("one meat per core"),
                };
                finish(&core, &meat, plan, opts, &mut tq, self.rows)
            })
            .collect()
    }

    /// The small factorisation of one model: M = [R[:, S] | R[:, p + j]] in model order.
    fn core(
        &self,
        model: &ModelSpec,
        opts: &FitOptions,
        w: &mut CoreWork,
    ) -> Result<CoreFit, ModelError> {
        let design = self.design;
        let (n, p, m) = (design.x.nrows(), design.x.ncols(), design.y.ncols());
        check_model(model, p, m, n)?;
        let k = model.columns.len();
        let ycol = p + model.outcome;
        // R is upper triangular, so rows beyond the outcome's column are zero.
        let rows = self.r.nrows().min(ycol + 1);
        // Column c of R is zero below row c: copy its top and remember where it ends, so the
        // small QR skips the zeros.
        w.m.clear();
        w.m.resize(rows * (k + 1), 0.0);
        w.last.clear();
        for (j, &c) in model
            .columns
            .iter()
            .chain(std::iter::once(&ycol))
            .enumerate()
        {
            let top = (c + 1).min(rows);
            w.m[j * rows..j * rows + top].copy_from_slice(&self.r.col_as_slice(c)[..top]);
            w.last.push(top - 1);
        }
        let out = factor_in_order(
            &mut w.m,
            rows,
            k + 1,
            &w.last,
            opts.collinearity_tolerance,
            &mut w.kept,
            &mut w.qr,
        );
        let kk = out.kept;
        w.r.clear();
        w.r.resize(kk * kk, 0.0);
        for (q, &pos) in w.kept.iter().enumerate() {
            for i in 0..=q {
                w.r[i + q * kk] = w.m[pos * rows + i];
            }
        }
        w.qty.clear();
        w.qty.extend((0..kk).map(|i| w.m[k * rows + i]));
        w.scales.clear();
        w.scales
            .extend(model.columns.iter().map(|&c| self.x_scales[c]));
        w.sums.clear();
        w.sums
            .extend(model.columns.iter().map(|&c| self.x_colsum[c]));
        w.constant.clear();
        w.constant
            .extend(model.columns.iter().map(|&c| self.x_constant[c]));
        let parts = FactorParts {
            kept_pos: &w.kept,
            r: &w.r,
            qty: &w.qty,
            resid_norm: out.resid_norm,
            col_scales: &w.scales,
            y_scale: self.y_scales[model.outcome],
            col_constant: &w.constant,
            tss: self.tss[model.outcome],
            col_sums: &w.sums,
            ones_norm2: self.ones_norm2,
        };
        let mut core = core_from_factor(n, model, &parts, &design.x_names, opts, &mut w.condition)?;
        if needs_refinement(&core) {
            let y = design.y.col(model.outcome);
            refine(&mut core, design.x.as_ref(), y, opts, &mut w.resid)?;
        }
        Ok(core)
    }
}

/// Splits the models into contiguous batches: at most [`BATCH_MODELS`], and no more per-cluster
/// sums than [`CLUSTER_BUDGET`]. Depends only on the request, never on the thread count.
fn batch_bounds(models: &[ModelSpec], plan: &Plan) -> Vec<(usize, usize)> {
    let range: usize = plan.groupings.iter().map(|g| g.range).sum();
    let mut out = Vec::new();
    let (mut start, mut used) = (0, 0usize);
    for (i, m) in models.iter().enumerate() {
        let nw = if plan.all_coefs || m.tracked.is_empty() {
            m.columns.len()
        } else {
            m.tracked.len()
        };
        let cost = nw * range;
        if i > start && (i - start >= BATCH_MODELS || used + cost > CLUSTER_BUDGET) {
            out.push((start, i));
            start = i;
            used = 0;
        }
        used += cost;
    }
    if start < models.len() {
        out.push((start, models.len()));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::api::{ClusterIds, Covariance};
    use crate::row_pass::{row_pass_on, PassInput, VectorUnit};

    /// Deterministic values in [−1, 1) (a multiplicative hash; no generator needed).
    fn wobble(i: usize, j: usize) -> f64 {
        let h =
            (i as u64 * 2_654_435_761 + j as u64 * 40_503 + 7).wrapping_mul(0x9E37_79B9_7F4A_7C15);
        (h >> 11) as f64 / (1u64 << 52) as f64 - 1.0
    }

    #[test]
    fn every_vector_unit_gives_the_same_bits() {
        // 1,031 rows: two full blocks of rows and a short one whose length is not a multiple of
        // the dot products' four partial sums; every covariance choice, so the leverage
        // factors, influence columns and cluster sums all run.
        let (n, p) = (1_031, 9);
        let x = Mat::from_fn(n, p, |i, j| {
            if j == 0 {
                1.0
            } else {
                3.0 * j as f64 + wobble(i, j)
            }
        });
        let y = Mat::from_fn(n, 1, |i, _| {
            x[(i, 1)] - 0.5 * x[(i, 2)] + wobble(i, 99) * (1.0 + x[(i, 3)].abs())
        });
        let design = Design {
            x,
            y,
            x_names: (0..p).map(|j| format!("x{j}")).collect(),
            y_names: vec!["harvest".into()],
            clusters: vec![ClusterIds {
                name: "village".into(),
                codes: (0..n).map(|i| ((i * 7) % 31) as u32).collect(),
                count: 31,
            }],
        };
        let opts = FitOptions {
            covariances: vec![
                Covariance::Hc1,
                Covariance::Hc3,
                Covariance::Cluster { dim: 0 },
            ],
            ..FitOptions::default()
        };
        let factor = SharedFactor::new(&design).unwrap();
        let models: Vec<ModelSpec> = (2..p)
            .map(|k| ModelSpec {
                columns: (0..k).collect(),
                outcome: 0,
                tracked: vec![1],
            })
            .collect();
        let mut work = CoreWork::default();
        let cores: Vec<CoreFit> = models
            .iter()
            .map(|m| factor.core(m, &opts, &mut work).unwrap())
            .collect();
        let cores: Vec<&CoreFit> = cores.iter().collect();
        let plan = Plan::new(&design, &opts);
        let run = |unit| {
            let meats = row_pass_on(
                unit,
                PassInput {
                    x: design.x.as_ref(),
                    y: design.y.as_ref(),
                    x_colsum: &factor.x_colsum,
                    cores: &cores,
                    plan: &plan,
                    rows: None,
                    preference: RowProducts::OwnColumns,
                },
            );
            // Debug prints each double's shortest round-trip form: equal text, equal bits.
            format!("{meats:?}")
        };
        let baseline = run(VectorUnit::Baseline);
        assert!(
            baseline.contains("hc2") && !baseline.contains("NaN"),
            "{baseline}"
        );
        for unit in [VectorUnit::Avx2, VectorUnit::Avx512] {
            assert_eq!(run(unit), baseline, "{unit:?}");
        }
    }
}
