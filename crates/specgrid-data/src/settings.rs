//! Designs whose models absorb fixed effects or use regression weights: the union design of
//! such a group is demeaned within the effects' levels and weighted once, by the engine's
//! [`specgrid_ols::absorb`], and every model of the group is then fitted on that one result
//! (docs/methods.md, "Fixed effects and weights"; docs/data-layer.md).

use std::collections::HashMap;

use specgrid_ols::{
    absorb, AbsorbOptions, EngineError, RowWeights, SharedFactor, WeightKind as EngineWeightKind,
};
use specgrid_study::{Plan, Term, WeightKind};

use crate::assemble::{DropCount, DropReason, SampleDesign};
use crate::column::Levels;
use crate::error::DataError;
use crate::loaded::LoadedData;

/// Absorbs and weights `design` for the plan terms in `settings`; a design without settings is
/// returned as it is.
pub(crate) fn prepare(
    plan: &Plan,
    data: &LoadedData,
    mut design: SampleDesign,
    settings: &[usize],
    levels: &HashMap<String, Levels>,
) -> Result<SampleDesign, DataError> {
    if settings.is_empty() {
        return Ok(design);
    }
    let mut effects = Vec::new();
    let mut weights = None;
    for &t in settings {
        match &plan.terms[t] {
            Term::Absorbed { column } => {
                effects.push(crate::assemble::dense_codes(
                    column,
                    &levels[column],
                    &design.rows,
                ));
            }
            Term::Weights { column, kind } => {
                let values = data.numbers(column)?;
                weights = Some(RowWeights {
                    name: column.clone(),
                    kind: match kind {
                        WeightKind::Analytic => EngineWeightKind::Analytic,
                        WeightKind::Frequency => EngineWeightKind::Frequency,
                    },
                    values: design
                        .rows
                        .iter()
                        .map(|&r| values[r].unwrap_or(f64::NAN))
                        .collect(),
                });
            }
            _ => {}
        }
    }
    let failed = |detail: String| DataError::Preparation {
        path: data.path.clone(),
        sample: design.sample_name.clone(),
        detail,
    };
    let prepared = absorb(
        &design.design,
        &effects,
        weights.as_ref(),
        &AbsorbOptions::default(),
    )
    .map_err(|e| failed(e.to_string()))?;
    let info = &prepared.info;
    for (reason, rows) in [
        (DropReason::Singleton, info.singletons_dropped),
        (DropReason::ZeroWeight, info.zero_weight_dropped),
    ] {
        if rows > 0 {
            design.account.dropped.push(DropCount { reason, rows });
        }
    }
    // Keep the untransformed design on the same rows as the prepared one, so means, labels and
    // row numbers agree with what was fitted.
    let kept = &info.rows_kept;
    if kept.len() != design.rows.len() {
        let raw = &design.design;
        design.design = specgrid_ols::Design {
            x: faer::Mat::from_fn(kept.len(), raw.x.ncols(), |i, j| raw.x[(kept[i], j)]),
            y: faer::Mat::from_fn(kept.len(), raw.y.ncols(), |i, j| raw.y[(kept[i], j)]),
            x_names: raw.x_names.clone(),
            y_names: raw.y_names.clone(),
            clusters: prepared.design.clusters.clone(),
        };
        design.rows = kept.iter().map(|&i| design.rows[i]).collect();
    }
    design.account.rows_kept = design.rows.len();
    design.settings = settings.to_vec();
    design.absorbed = Some(prepared);
    Ok(design)
}

impl SampleDesign {
    /// The engine's shared factorisation of this design: of the absorbed and weighted design
    /// when there is one.
    pub fn factor(&self) -> Result<SharedFactor<'_>, EngineError> {
        match &self.absorbed {
            Some(prepared) => SharedFactor::absorbed(prepared),
            None => SharedFactor::new(&self.design),
        }
    }

    /// The design the engine fits: the absorbed and weighted one when there is one (its rows
    /// are demeaned and weighted), otherwise the plain design.
    pub fn fitted_design(&self) -> &specgrid_ols::Design {
        self.absorbed
            .as_ref()
            .map_or(&self.design, |prepared| &prepared.design)
    }

    /// What the models of this design absorb, as source column names (empty when nothing).
    pub fn absorbed_columns<'p>(&self, plan: &'p Plan) -> Vec<&'p str> {
        self.settings
            .iter()
            .filter_map(|&t| match &plan.terms[t] {
                Term::Absorbed { column } => Some(column.as_str()),
                _ => None,
            })
            .collect()
    }

    /// The weights of this design's models as `kind:column`, when they have any.
    pub fn weights_label(&self, plan: &Plan) -> Option<String> {
        self.settings.iter().find_map(|&t| match &plan.terms[t] {
            Term::Weights { column, kind } => Some(format!("{}:{column}", kind.word())),
            _ => None,
        })
    }
}
