//! Absorbed fixed effects and regression weights, applied once to a whole union design so that
//! every model fitted on it shares the cost (see docs/methods.md, "Fixed effects and weights").
//!
//! [`absorb`] drops zero-weight rows and singleton groups, demeans every regressor and outcome
//! on the effects (ω-weighted), multiplies each row by √ω and records what the fit then needs:
//! the absorbed parameter count, which clustering dimensions nest each effect, the total sums
//! of squares before absorption, per-row leverage of the absorbed part and the frequency
//! factors. [`crate::SharedFactor::absorbed`] fits models on the result.

mod components;
mod demean;
mod leverage;
mod singletons;
mod weights;

use std::sync::OnceLock;

use faer::Mat;
use rayon::prelude::*;

use crate::api::{ClusterIds, Design, EngineError};
use crate::dense::is_constant_nonzero;
use crate::validate::{check_codes, check_design};
use demean::{demean_column, Convergence, Effect};
pub use weights::{RowWeights, WeightKind};

/// A column whose within part is at most this fraction of its ω-weighted size is constant
/// within the effects up to rounding; it is set to exactly zero, so a model using it drops it
/// as collinear instead of fitting rounding noise (an intercept column is the usual case).
const WITHIN_ZERO: f64 = 1e-8;

/// Convergence settings of the alternating projections (several effect sets).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AbsorbOptions {
    /// Stop when a sweep changes no value by more than this × the column's largest magnitude.
    pub tolerance: f64,
    /// Most sweeps per column before [`AbsorbError::NotConverged`].
    pub max_sweeps: usize,
}

impl Default for AbsorbOptions {
    fn default() -> Self {
        AbsorbOptions {
            tolerance: 1e-13,
            max_sweeps: 20_000,
        }
    }
}

/// What absorption did, for reports.
#[derive(Debug, Clone, PartialEq)]
pub struct AbsorbInfo {
    /// Names of the absorbed effect sets, in order.
    pub effects: Vec<String>,
    /// Levels of each set that hold rows after the drops.
    pub levels: Vec<usize>,
    /// Absorbed parameters counted in the degrees of freedom (see docs/methods.md).
    pub absorbed_params: usize,
    /// Connected components of the level graph of the first two sets (two or more sets).
    pub components: Option<usize>,
    /// Most sweeps any column needed (1 for one set, 0 for none).
    pub sweeps: usize,
    /// Largest last-sweep change over the columns, relative to each column's magnitude.
    pub final_change: f64,
    /// Rows dropped as singletons (iteratively).
    pub singletons_dropped: usize,
    /// Rows dropped for a zero weight.
    pub zero_weight_dropped: usize,
    /// Per effect set: indices into [`Design::clusters`] of the clustering dimensions that nest
    /// it (every level inside one cluster).
    pub nested_in: Vec<Vec<usize>>,
    /// Per outcome: ω-weighted centred total sum of squares of the raw outcome over the kept
    /// rows (the overall R² denominator).
    pub total_ss: Vec<f64>,
    /// Weights in force.
    pub weights: Option<WeightKind>,
    /// Observations the fit stands for: kept rows, or Σ frequency weights.
    pub observations: usize,
    /// Original row index of each kept row, ascending.
    pub rows_kept: Vec<usize>,
}

/// Per-row facts the fit needs beyond the transformed columns.
#[derive(Debug, Clone)]
pub(crate) struct RowAdjust {
    /// Absorbed parameters (added to k in df_resid).
    pub absorbed: usize,
    /// n in degrees of freedom and HC1: rows, or Σ frequency weights.
    pub n_df: usize,
    /// 1/f per row under frequency weights.
    pub inv_freq: Option<Vec<f64>>,
    /// Leverage of the absorbed part per row, built on first use (HC2/HC3 only); see
    /// [`RowAdjust::fe_leverage`].
    fe_leverage: OnceLock<Option<Vec<f64>>>,
    /// ωᵢ per kept row.
    omega: Vec<f64>,
    /// Components of the level graph of the first two sets.
    components: Option<usize>,
    /// Whether effects were absorbed (overall and within R²).
    pub has_effects: bool,
    /// Effect codes and levels after the drops (nesting checks against clusterings).
    pub effects: Vec<(Vec<u32>, usize)>,
    /// Whether each original column was a nonzero constant (weights only: the √ω column).
    pub x_constant: Vec<bool>,
    /// X̃'√ω: the sums the "spans the constant" test needs.
    pub x_root_sum: Vec<f64>,
    /// Σ ωᵢ = ‖√ω‖².
    pub root_norm2: f64,
}

impl RowAdjust {
    /// Absorbed parameters counted in the cluster-robust factor for a clustering with these
    /// codes: effect sets nested in it do not count (Cameron & Miller 2015, J. Human Resources
    /// 50:317, section on fixed effects), max(0, a − Σ_nested L).
    pub fn absorbed_for_clustering(&self, codes: &[u32]) -> usize {
        let nested: usize = self
            .effects
            .iter()
            .filter(|(e, l)| is_nested(e, *l, codes))
            .map(|(_, l)| *l)
            .sum();
        self.absorbed.saturating_sub(nested)
    }

    /// Leverage of the absorbed part per row, scaled rows (see `leverage.rs`), computed once on
    /// first use; `None` with three or more sets, or two whose smaller one has more than 2,000
    /// levels.
    pub fn fe_leverage(&self) -> Option<&[f64]> {
        self.fe_leverage
            .get_or_init(|| {
                let weights: Vec<Vec<f64>> = self
                    .effects
                    .iter()
                    .map(|(c, l)| level_weights(c, *l, &self.omega))
                    .collect();
                match (self.effects.as_slice(), weights.as_slice()) {
                    ([], _) => Some(vec![0.0; self.omega.len()]),
                    ([(c, _)], [w]) => Some(leverage::one_way(c, w, &self.omega)),
                    ([(c1, _), (c2, _)], [w1, w2]) => {
                        leverage::two_way((c1, w1), (c2, w2), &self.omega, self.components?)
                    }
                    _ => None,
                }
            })
            .as_deref()
    }
}

/// Σ ωᵢ over the rows of each level.
fn level_weights(codes: &[u32], levels: usize, omega: &[f64]) -> Vec<f64> {
    let mut out = vec![0.0; levels];
    codes
        .iter()
        .zip(omega)
        .for_each(|(&g, &w)| out[g as usize] += w);
    out
}

/// Whether every level of the effect lies inside one cluster.
fn is_nested(effect: &[u32], levels: usize, cluster: &[u32]) -> bool {
    let mut owner = vec![u32::MAX; levels];
    effect.iter().zip(cluster).all(|(&e, &c)| {
        let o = &mut owner[e as usize];
        if *o == u32::MAX {
            *o = c;
        }
        *o == c
    })
}

/// The design after absorption and weighting, ready for [`crate::SharedFactor::absorbed`].
#[derive(Debug, Clone)]
pub struct AbsorbedDesign {
    /// Kept rows, demeaned and multiplied by √ω; clusters restricted to the kept rows.
    pub design: Design,
    /// What was done.
    pub info: AbsorbInfo,
    pub(crate) rows: RowAdjust,
}

/// Why absorption failed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum AbsorbError {
    /// The design itself is malformed.
    #[error(transparent)]
    Engine(#[from] EngineError),
    /// The convergence settings make no sense.
    #[error("invalid absorption settings: {0}")]
    InvalidOptions(String),
    /// Shapes disagree (effect codes or weights against rows).
    #[error("absorption inputs disagree: {0}")]
    Shape(String),
    /// Missing (NaN) or infinite weights.
    #[error("weights `{name}` are missing or not finite in {rows} row(s); fill them or drop those rows in the sample")]
    MissingWeights {
        /// Weights column.
        name: String,
        /// Rows affected.
        rows: usize,
    },
    /// Negative weights.
    #[error("weights `{name}` are negative in {rows} row(s); weights must be zero (drop the row) or positive")]
    NegativeWeights {
        /// Weights column.
        name: String,
        /// Rows affected.
        rows: usize,
    },
    /// Frequency weights that are not whole numbers.
    #[error("frequency weights `{name}` are not whole numbers in {rows} row(s); use analytic weights for non-integer values")]
    FractionalFrequency {
        /// Weights column.
        name: String,
        /// Rows affected.
        rows: usize,
    },
    /// Nothing left after dropping zero weights and singletons.
    #[error("no rows are left after dropping {zero_weight} zero-weight and {singletons} singleton row(s)")]
    NoRowsLeft {
        /// Zero-weight rows dropped.
        zero_weight: usize,
        /// Singleton rows dropped.
        singletons: usize,
    },
    /// The alternating projections did not meet the tolerance.
    #[error("absorbing {effects} did not converge on column `{column}`: after {sweeps} sweeps the last change was {change:.2e} (tolerance {tolerance:.1e}); the level graph may be nearly disconnected — absorb fewer effects or raise the sweep limit")]
    NotConverged {
        /// Effect set, names joined.
        effects: String,
        /// Column that failed.
        column: String,
        /// Sweeps done.
        sweeps: usize,
        /// Last relative change.
        change: f64,
        /// Tolerance in force.
        tolerance: f64,
    },
}

/// Absorbs `effects` (dense codes, one per row, like clustering dimensions) and applies
/// `weights` to the whole design once. With no effects and no weights the design is returned
/// unchanged (plus its info).
pub fn absorb(
    design: &Design,
    effects: &[ClusterIds],
    weights: Option<&RowWeights>,
    opts: &AbsorbOptions,
) -> Result<AbsorbedDesign, AbsorbError> {
    check_design(design)?;
    if !(opts.tolerance > 0.0 && opts.tolerance < 1.0) || opts.max_sweeps == 0 {
        return Err(AbsorbError::InvalidOptions(format!(
            "tolerance must lie strictly between 0 and 1 and the sweep limit be at least 1 (got {} and {})",
            opts.tolerance, opts.max_sweeps
        )));
    }
    let n = design.x.nrows();
    for e in effects {
        check_codes(e, n, "effect", "levels").map_err(AbsorbError::Shape)?;
    }
    let mut keep = match weights {
        Some(w) => weights::check_weights(w, n)?,
        None => vec![true; n],
    };
    let zero_weight_dropped = keep.iter().filter(|&&k| !k).count();
    let size: Vec<f64> = match weights {
        Some(w) if w.kind == WeightKind::Frequency => w.values.clone(),
        _ => vec![1.0; n],
    };
    let raw: Vec<(&[u32], usize)> = effects.iter().map(|e| (&e.codes[..], e.count)).collect();
    let singletons_dropped = singletons::drop_singletons(&raw, &size, &mut keep);
    let rows_kept: Vec<usize> = (0..n).filter(|&i| keep[i]).collect();
    if rows_kept.is_empty() {
        return Err(AbsorbError::NoRowsLeft {
            zero_weight: zero_weight_dropped,
            singletons: singletons_dropped,
        });
    }
    let omega: Vec<f64> = match weights {
        Some(w) => rows_kept.iter().map(|&i| w.values[i]).collect(),
        None => vec![1.0; rows_kept.len()],
    };
    let codes: Vec<(Vec<u32>, usize)> = effects
        .iter()
        .map(|e| recode(rows_kept.iter().map(|&i| e.codes[i]), e.count))
        .collect();
    let sets: Vec<Effect<'_>> = codes
        .iter()
        .map(|(c, l)| Effect {
            codes: c,
            level_weight: level_weights(c, *l, &omega),
        })
        .collect();
    let refs: Vec<(&[u32], usize)> = codes.iter().map(|(c, l)| (&c[..], *l)).collect();
    let (absorbed_params, components) = components::absorbed_parameters(&refs);

    let gather = |m: &Mat<f64>| -> Vec<Vec<f64>> {
        (0..m.ncols())
            .map(|j| rows_kept.iter().map(|&i| m[(i, j)]).collect())
            .collect()
    };
    let raw_x = gather(&design.x);
    let raw_y = gather(&design.y);
    let x_constant: Vec<bool> = (0..design.x.ncols())
        .map(|j| effects.is_empty() && is_constant_nonzero(design.x.col(j)))
        .collect();
    let total_ss: Vec<f64> = raw_y
        .iter()
        .map(|y| weighted_centred_ss(y, &omega))
        .collect();
    let names: Vec<&String> = design.x_names.iter().chain(&design.y_names).collect();
    let mut columns: Vec<Vec<f64>> = raw_x.iter().chain(&raw_y).cloned().collect();
    let results: Vec<Convergence> = if sets.is_empty() {
        let untouched = Convergence {
            converged: true,
            ..Convergence::default()
        };
        vec![untouched; columns.len()]
    } else {
        columns
            .par_iter_mut()
            .map(|col| demean_column(col, &sets, &omega, opts.tolerance, opts.max_sweeps))
            .collect()
    };
    if let Some((j, c)) = results.iter().enumerate().find(|(_, c)| !c.converged) {
        return Err(AbsorbError::NotConverged {
            effects: effects
                .iter()
                .map(|e| format!("`{}`", e.name))
                .collect::<Vec<_>>()
                .join(" and "),
            column: names[j].clone(),
            sweeps: c.sweeps,
            change: c.change,
            tolerance: opts.tolerance,
        });
    }
    let raw_cols = raw_x.iter().chain(&raw_y);
    let root: Vec<f64> = omega.iter().map(|w| w.sqrt()).collect();
    for (col, raw) in columns.iter_mut().zip(raw_cols) {
        if !sets.is_empty()
            && weighted_norm2(col, &omega) <= (WITHIN_ZERO.powi(2)) * weighted_norm2(raw, &omega)
        {
            col.fill(0.0);
        }
        col.iter_mut().zip(&root).for_each(|(v, r)| *v *= r);
    }
    let nk = rows_kept.len();
    let p = design.x.ncols();
    let x = Mat::from_fn(nk, p, |i, j| columns[j][i]);
    let y = Mat::from_fn(nk, design.y.ncols(), |i, j| columns[p + j][i]);
    let x_root_sum = (0..p)
        .map(|j| columns[j].iter().zip(&root).map(|(v, r)| v * r).sum())
        .collect();
    let clusters: Vec<ClusterIds> = design
        .clusters
        .iter()
        .map(|c| ClusterIds {
            name: c.name.clone(),
            codes: rows_kept.iter().map(|&i| c.codes[i]).collect(),
            count: c.count,
        })
        .collect();
    let nested_in = codes
        .iter()
        .map(|(e, l)| {
            (0..clusters.len())
                .filter(|&d| is_nested(e, *l, &clusters[d].codes))
                .collect()
        })
        .collect();
    let frequency = matches!(weights, Some(w) if w.kind == WeightKind::Frequency);
    let observations = if frequency {
        omega.iter().sum::<f64>() as usize
    } else {
        nk
    };
    let info = AbsorbInfo {
        effects: effects.iter().map(|e| e.name.clone()).collect(),
        levels: codes.iter().map(|(_, l)| *l).collect(),
        absorbed_params,
        components,
        sweeps: results.iter().map(|c| c.sweeps).max().unwrap_or(0),
        final_change: results.iter().map(|c| c.change).fold(0.0, f64::max),
        singletons_dropped,
        zero_weight_dropped,
        nested_in,
        total_ss,
        weights: weights.map(|w| w.kind),
        observations,
        rows_kept,
    };
    let rows = RowAdjust {
        absorbed: absorbed_params,
        n_df: observations,
        inv_freq: frequency.then(|| omega.iter().map(|f| 1.0 / f).collect()),
        fe_leverage: OnceLock::new(),
        has_effects: !effects.is_empty(),
        effects: codes,
        x_constant,
        x_root_sum,
        root_norm2: omega.iter().sum(),
        omega,
        components,
    };
    let design = Design {
        x,
        y,
        x_names: design.x_names.clone(),
        y_names: design.y_names.clone(),
        clusters,
    };
    Ok(AbsorbedDesign { design, info, rows })
}

/// Dense codes 0..L (L = levels present) in order of first appearance, and L.
fn recode(codes: impl Iterator<Item = u32>, range: usize) -> (Vec<u32>, usize) {
    let mut map = vec![u32::MAX; range];
    let mut next = 0u32;
    let out = codes
        .map(|c| {
            let slot = &mut map[c as usize];
            if *slot == u32::MAX {
                *slot = next;
                next += 1;
            }
            *slot
        })
        .collect();
    (out, next as usize)
}

fn weighted_norm2(v: &[f64], omega: &[f64]) -> f64 {
    v.iter().zip(omega).map(|(x, w)| w * x * x).sum()
}

/// Σ ωᵢ(yᵢ − ȳ_ω)², two-pass.
fn weighted_centred_ss(y: &[f64], omega: &[f64]) -> f64 {
    let total: f64 = omega.iter().sum();
    let mean = y.iter().zip(omega).map(|(v, w)| v * w).sum::<f64>() / total;
    y.iter()
        .zip(omega)
        .map(|(v, w)| w * (v - mean) * (v - mean))
        .sum()
}
