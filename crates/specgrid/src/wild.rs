//! The wild cluster bootstrap as an error choice: the engine computes the CR1 errors of the
//! slot, and this module replaces their p-value and interval by the bootstrap's (null imposed,
//! test inverted for the interval; specgrid-ols `inference::wild_cluster_test`).

use rayon::prelude::*;
use specgrid_data::SampleDesign;
use specgrid_ols::inference::{wild_cluster_test, BootstrapWeights, WildClusterOptions};
use specgrid_ols::{Covariance, FitOptions, ModelError, ModelFit, ModelSpec};
use specgrid_study::{BootstrapDraws, ErrorChoice, Plan};

use crate::exit::Failure;

/// Most clusters the bootstrap accepts (the engine's limit; with more, CR1 needs no bootstrap).
const MAX_CLUSTERS: usize = 1_000;

/// One wild-bootstrap slot among the fit's covariance choices.
struct WildSlot {
    /// Position in `FitOptions::covariances` (and in each coefficient's inference).
    slot: usize,
    /// Clustering dimension in the designs.
    dim: usize,
    weights: BootstrapWeights,
    draws: usize,
}

fn slots(plan: &Plan, fit_options: &FitOptions) -> Vec<WildSlot> {
    plan.errors
        .iter()
        .zip(&fit_options.covariances)
        .enumerate()
        .filter_map(|(slot, (choice, cov))| match (choice, cov) {
            (ErrorChoice::WildCluster { weights, draws, .. }, Covariance::Cluster { dim }) => {
                Some(WildSlot {
                    slot,
                    dim: *dim,
                    weights: match weights {
                        BootstrapDraws::Rademacher => BootstrapWeights::Rademacher,
                        BootstrapDraws::Webb => BootstrapWeights::Webb,
                    },
                    draws: *draws,
                })
            }
            _ => None,
        })
        .collect()
}

/// Refuses, before any estimation, a wild-bootstrap choice on a design with too many clusters.
pub fn check_cluster_counts(
    plan: &Plan,
    fit_options: &FitOptions,
    designs: &[SampleDesign],
) -> Result<(), Failure> {
    for s in slots(plan, fit_options) {
        for d in designs {
            let cl = &d.fitted_design().clusters[s.dim];
            if cl.count > MAX_CLUSTERS {
                return Err(Failure::Study(format!(
                    "the error choice `{}` asks for the wild cluster bootstrap, but sample `{}` has {} clusters of `{}` (at most {MAX_CLUSTERS} are supported); with that many clusters the ordinary cluster-robust errors are accurate: write {{ cluster = \"{}\" }} instead",
                    plan.errors[s.slot].label(),
                    d.sample_name,
                    cl.count,
                    cl.name,
                    cl.name
                )));
            }
        }
    }
    Ok(())
}

/// Replaces the p-value and interval of every wild-bootstrap slot of the fits of `design`'s
/// models `members` (plan indices, parallel to `specs` and `fits`). The seed of each model comes
/// from the study seed and the model id, so a model's bootstrap repeats in any run that plans
/// it. Returns how many (model, coefficient) pairs the bootstrap could not serve; their slots
/// keep the CR1 p-value and interval.
pub fn apply(
    plan: &Plan,
    fit_options: &FitOptions,
    design: &SampleDesign,
    members: &[usize],
    specs: &[ModelSpec],
    fits: &mut [Result<ModelFit, ModelError>],
) -> usize {
    let slots = slots(plan, fit_options);
    if slots.is_empty() {
        return 0;
    }
    let data = design.fitted_design();
    fits.par_iter_mut()
        .zip(specs)
        .zip(members)
        .map(|((fit, spec), &m)| {
            let Ok(fit) = fit else { return 0 };
            let seed = plan.seed ^ u64::from_str_radix(&plan.models[m].id, 16).unwrap_or(0);
            // Columns dropped as collinear are left out of the bootstrap's regression.
            let kept = ModelSpec {
                columns: fit.all_estimates.iter().map(|&(c, _)| c).collect(),
                outcome: spec.outcome,
                tracked: Vec::new(),
            };
            let mut failed = 0;
            for coef in fit.coefficients.iter_mut() {
                for s in &slots {
                    let opts = WildClusterOptions {
                        weights: s.weights,
                        draws: s.draws,
                        seed,
                        confidence_level: fit_options.confidence_level,
                    };
                    match wild_cluster_test(data, &kept, coef.column, s.dim, 0.0, &opts) {
                        Ok(w) => {
                            let inf = &mut coef.inference[s.slot];
                            inf.p_value = w.p_value;
                            inf.ci_low = w.ci_low.unwrap_or(f64::NEG_INFINITY);
                            inf.ci_high = w.ci_high.unwrap_or(f64::INFINITY);
                        }
                        Err(_) => failed += 1,
                    }
                }
            }
            failed
        })
        .sum()
}
