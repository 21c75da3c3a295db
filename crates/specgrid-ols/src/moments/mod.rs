//! Covariance sums from moments of the centred union instead of a pass over the rows
//! (docs/methods.md, "Covariances from moments"; docs/performance.md, "Choosing the covariance
//! route").
//!
//! Once per design: for each clustering the call uses, K = Σ_g σ_gσ_g' over the distinct
//! entries σ_g of the per-cluster Gram matrices S_g of Z̃ = [1, centred X, centred Y]; and the
//! fourth moments of Z̃ (for HC0/HC1 and the Breusch–Pagan sums). Per model: contractions of
//! those with the model's influence and residual coordinates, O(k⁴), independent of n and of
//! the number of clusters. Each model's sums carry a rounding bound; a model whose bound is
//! too loose goes to the row pass instead.

mod basis;
mod cluster;
mod cost;
mod fourth;

use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Arc, Mutex, OnceLock};

use crate::absorb::RowAdjust;
use crate::api::{Design, ModelSpec};
use crate::finish::Meats;
use crate::model_core::CoreFit;
use crate::plan::Plan;
use crate::row_pass::{empty_meats, reported_w};
use basis::{Basis, ModelVectors};
use cluster::ClusterGrams;
use cost::Workload;
use fourth::FourthMoments;

/// λ of the probabilistic rounding bound λ·√n·u for a sum of n rounded terms (Higham & Mary
/// 2019, SIAM J. Sci. Comput. 41(5):A2815, Thm 2.4: holds with probability at least
/// 1 − 2n·exp(−λ²/2), which for λ = 8 and n ≤ 10⁹ is above 1 − 10⁻⁴; stated from memory).
pub(crate) const ROUNDING_LAMBDA: f64 = 8.0;
/// A model's moment sums (a meat, i.e. a variance) are used only when their rounding bound is
/// at most this fraction of the quantity: 5e-9 of a standard error, a factor 2 below the 1e-8
/// the tests hold the routes to. The bound is a high-probability worst case (λ = 8, Hölder);
/// at 1e-9 it sent 10–40% of the wide scenario's models (12,500 clusters, cubic focus forms)
/// to the row pass with bounds of 1–7e-9 (docs/performance.md).
const MOMENT_TOLERANCE: f64 = 1e-8;
/// The Breusch–Pagan statistic from moments is used only when its rounding bound is at most
/// this fraction of max(statistic, degrees of freedom). The statistic is inherently less
/// resolved than a variance: under homoskedasticity its explained sum is about k/n of the
/// total, so any route summing over n rows (the row pass included) resolves it only to about
/// √(n/k)·u times the size of the sums (docs/methods.md).
const BP_TOLERANCE: f64 = 1e-8;
/// Most f64 slots the moments of one factor may hold (1 GiB); above it the row pass runs.
const MEMORY_BUDGET_SLOTS: usize = 1 << 27;

/// How a [`crate::SharedFactor`] computes the residual-based covariance sums.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum CovarianceRoute {
    /// Decide per call from the cost model, using the number of models announced with
    /// [`crate::SharedFactor::expect_models`] (or the call's own count).
    #[default]
    Auto,
    /// Always the batched pass over rows.
    Direct,
    /// The moment route whenever the call's choices allow it (not HC2/HC3, not HC under
    /// frequency weights, within the memory budget), whatever the cost.
    Moments,
}

/// Counts of how the residual-based sums were computed on one factor, over all calls so far.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct MomentStats {
    /// Models whose sums came from the moments.
    pub by_moments: usize,
    /// Models sent to the row pass because their rounding bound was too loose.
    pub fallbacks: usize,
}

/// A clustering: a design dimension, or the intersection of two (see `plan::Grouping::key`).
type GroupKey = (usize, Option<usize>);

/// Moments cached in a factor, shared by every call (chunk) on it.
#[derive(Debug, Default)]
pub(crate) struct MomentStore {
    basis: OnceLock<Basis>,
    fourth: OnceLock<FourthMoments>,
    clusters: Mutex<Vec<(GroupKey, Arc<ClusterGrams>)>>,
    by_moments: AtomicUsize,
    fallbacks: AtomicUsize,
}

/// What one call uses of the store.
#[derive(Debug)]
pub(crate) struct Prepared<'s> {
    basis: &'s Basis,
    fourth: Option<&'s FourthMoments>,
    /// One per plan grouping, in plan order.
    grams: Vec<Arc<ClusterGrams>>,
    need_bp: bool,
    plain_rows: bool,
}

/// Per-thread buffers of the per-model contractions.
#[derive(Debug, Default)]
pub(crate) struct MomentWork {
    vectors: ModelVectors,
    scratch: Vec<f64>,
}

impl MomentStore {
    /// Counts so far.
    pub fn stats(&self) -> MomentStats {
        MomentStats {
            by_moments: self.by_moments.load(Ordering::Relaxed),
            fallbacks: self.fallbacks.load(Ordering::Relaxed),
        }
    }

    /// Decides the route for one call and builds (or reuses) the moments it needs; `None`
    /// means the row pass. `expected` is the number of models announced for the factor.
    pub fn prepare(
        &self,
        design: &Design,
        plan: &Plan,
        rows: Option<&RowAdjust>,
        route: CovarianceRoute,
        expected: Option<usize>,
        models: &[ModelSpec],
    ) -> Option<Prepared<'_>> {
        if route == CovarianceRoute::Direct || plan.need_leverage() || models.is_empty() {
            return None;
        }
        let frequency = rows.is_some_and(|r| r.inv_freq.is_some());
        if frequency && plan.need_hc0 {
            return None;
        }
        let need_bp = rows.is_none();
        let fourth = plan.need_hc0 || need_bp;
        let (n, p, m) = (design.x.nrows(), design.x.ncols(), design.y.ncols());
        // Upper bound of q before the basis exists (constant columns drop out later).
        let q_max = 1 + p + m;
        let total_range: usize = plan.groupings.iter().map(|g| g.range).sum();
        let slots = if fourth {
            // The moments, their sum during the build and at least one chunk partial.
            3 * FourthMoments::slots(q_max)
        } else {
            0
        } + plan
            .groupings
            .iter()
            .map(|g| ClusterGrams::slots(g.range, q_max))
            .sum::<usize>();
        if slots > MEMORY_BUDGET_SLOTS {
            return None;
        }
        if route == CovarianceRoute::Auto {
            let count = models.len() as f64;
            let mean_k = models.iter().map(|s| s.columns.len()).sum::<usize>() as f64 / count;
            let mean_w = if !plan.need_w {
                0.0
            } else if plan.all_coefs {
                mean_k
            } else {
                models
                    .iter()
                    .map(|s| {
                        if s.tracked.is_empty() {
                            s.columns.len()
                        } else {
                            s.tracked.len()
                        }
                    })
                    .sum::<usize>() as f64
                    / count
            };
            let work = Workload {
                n,
                q: self.basis.get().map_or(q_max, |b| b.q),
                models: expected.unwrap_or(models.len()).max(models.len()),
                mean_k,
                mean_w,
                groupings: plan.groupings.len(),
                total_range,
                fourth,
            };
            if !work.prefers_moments() {
                return None;
            }
        }
        let (x, y) = (design.x.as_ref(), design.y.as_ref());
        let basis = self.basis.get_or_init(|| Basis::new(x, y));
        let fourth = fourth.then(|| {
            self.fourth
                .get_or_init(|| FourthMoments::build(basis, x, y, MEMORY_BUDGET_SLOTS / 2))
        });
        let grams = plan
            .groupings
            .iter()
            .map(|g| {
                let mut cache = self.clusters.lock().expect("moment cache lock");
                if let Some((_, found)) = cache.iter().find(|(k, _)| *k == g.key) {
                    return found.clone();
                }
                let built = Arc::new(ClusterGrams::build(basis, x, y, &g.codes, g.range));
                cache.push((g.key, built.clone()));
                built
            })
            .collect();
        Some(Prepared {
            basis,
            fourth,
            grams,
            need_bp,
            plain_rows: rows.is_none(),
        })
    }

    /// The model's residual-pass sums from the moments, or `None` (counted as a fallback) when
    /// a rounding bound is too loose; the caller then runs the row pass for it.
    pub fn meats(
        &self,
        prep: &Prepared<'_>,
        core: &CoreFit,
        plan: &Plan,
        work: &mut MomentWork,
    ) -> Option<Meats> {
        let out = moment_meats(prep, core, plan, work);
        let counter = if out.is_some() {
            &self.by_moments
        } else {
            &self.fallbacks
        };
        counter.fetch_add(1, Ordering::Relaxed);
        out
    }
}

fn moment_meats(
    prep: &Prepared<'_>,
    core: &CoreFit,
    plan: &Plan,
    work: &mut MomentWork,
) -> Option<Meats> {
    let mut meats = empty_meats(core, plan);
    let v = &mut work.vectors;
    prep.basis
        .model_vectors(core, &meats.wpos, prep.plain_rows, v);
    for grams in &prep.grams {
        meats
            .group_outer
            .push(grams.outer(v, MOMENT_TOLERANCE, &mut work.scratch)?);
    }
    if let Some(fourth) = prep.fourth {
        let rep: Vec<usize> = if plan.need_hc0 {
            reported_w(core, &meats)
        } else {
            Vec::new()
        };
        let (hc0, bp) = fourth.model_sums(
            prep.basis,
            core,
            v,
            &rep,
            plan.need_hc0,
            prep.need_bp,
            MOMENT_TOLERANCE,
            BP_TOLERANCE,
            &mut work.scratch,
        )?;
        meats.hc0 = hc0;
        meats.bp = bp;
    }
    Some(meats)
}
