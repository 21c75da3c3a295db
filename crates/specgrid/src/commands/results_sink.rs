//! The consumer side of a run: turns each fitted chunk into result rows, report entries and
//! effects, and writes the rows, on its own thread while the next chunk is fitted
//! (docs/performance.md, "Writing while fitting").

use std::sync::mpsc::Receiver;

use specgrid_data::{LoadedData, SampleDesign};
use specgrid_ols::{ModelError, ModelFit};
use specgrid_report::{Effect, FitStats, Models, NewModel, Scale, StoredEffects};
use specgrid_study::Plan;

use crate::effects::{self, EvaluationCache, Recipe};
use crate::exit::Failure;
use crate::output::Staging;
use crate::results::{ModelRows, ModelStats, ResultsTable, TermValues};
use crate::results_stream::ChunkWriter;

/// One chunk of fitted models in plan order: (plan index, outcome).
pub(super) type Chunk<'a> = Vec<(usize, Estimated<'a>)>;

/// What the consumer needs from the run, all borrowed.
pub(super) struct SinkInputs<'a> {
    /// The plan.
    pub plan: &'a Plan,
    /// The loaded data (effects are evaluated at its means).
    pub data: &'a LoadedData,
    /// Conversions to the study's scale, when it is not `coefficient`.
    pub recipes: Option<&'a [Recipe]>,
    /// The study's effect scale.
    pub scale: Scale,
    /// The results folder being written.
    pub staging: &'a Staging,
    /// Write terms.csv with every coefficient.
    pub all_terms: bool,
    /// Leave out models.csv.
    pub no_csv: bool,
    /// More than one chunk will come (the writers append).
    pub streaming: bool,
}

/// Receives chunks until the sender hangs up, writing each before taking the next; returns what
/// the report needs. An error stops it at once (the sender then sees a closed channel).
pub(super) fn consume(
    inputs: SinkInputs<'_>,
    chunks: Receiver<Chunk<'_>>,
) -> Result<ChunkedResults, Failure> {
    let SinkInputs {
        plan,
        data,
        recipes,
        scale,
        staging,
        all_terms,
        no_csv,
        streaming,
    } = inputs;
    let mut models_out = ChunkWriter::new(
        (!no_csv).then(|| staging.file("models.csv")),
        Some(staging.file("models.parquet")),
        streaming,
    );
    let mut terms_out =
        all_terms.then(|| ChunkWriter::new(Some(staging.file("terms.csv")), None, streaming));
    let mut results = ChunkedResults {
        report_models: Models::with_capacity(
            plan.dimensions.len(),
            plan.errors.len(),
            plan.models.len(),
            plan.models.iter().map(|m| m.id.len()).sum(),
        ),
        lead_terms: Vec::new(),
        effects: recipes.map(|_| StoredEffects::new()),
        residuals: None,
        failed: 0,
    };
    let mut cache = EvaluationCache::default();
    let mut problems = Vec::new();
    let labels = RowLabels::of(plan);
    // One table for every chunk, emptied between them: its columns are tens of megabytes per
    // chunk, and made afresh each time they were first touched again each time.
    let mut table = ResultsTable::new(&plan.dimensions)?;
    for estimated in chunks {
        table.clear();
        // One row per covariance choice and tracked term of each model.
        let rows: usize = estimated
            .iter()
            .map(|(_, e)| e.tracked.len().max(1) * plan.errors.len())
            .sum();
        table.reserve(estimated.len(), rows);
        let mut terms = all_terms
            .then(|| ResultsTable::new(&plan.dimensions))
            .transpose()?;
        for (index, result) in &estimated {
            append_model(
                plan,
                &labels,
                *index,
                result,
                &mut table,
                Some(&result.tracked),
            );
            if let Some(terms) = terms.as_mut() {
                append_model(plan, &labels, *index, result, terms, None);
            }
            add_report_model(
                plan,
                &labels,
                *index,
                result,
                &mut results.report_models,
                &mut results.lead_terms,
            )?;
        }
        models_out.write(&table)?;
        if let (Some(out), Some(terms)) = (terms_out.as_mut(), terms.as_ref()) {
            out.write(terms)?;
        }
        if let (Some(recipes), Some(stored)) = (recipes, results.effects.as_mut()) {
            problems.extend(convert_effects(
                plan, data, &estimated, recipes, scale, &mut cache, stored,
            )?);
        }
        if results.residuals.is_none() {
            results.residuals = baseline_residuals(plan, &estimated);
        }
        results.failed += estimated.iter().filter(|(_, e)| e.fit.is_err()).count();
    }
    models_out.finish()?;
    if let Some(out) = terms_out {
        out.finish()?;
    }
    if let Some(first) = problems.first() {
        eprintln!(
            "warning: {} effect(s) could not be put on the `{}` scale and are left empty, e.g.: {first}",
            problems.len(),
            scale.label()
        );
    }
    Ok(results)
}

/// One model's outcome: where it was fitted and what came back.
pub(super) struct Estimated<'a> {
    /// Position of the design in the assembly.
    pub design_index: usize,
    /// The design the model was fitted on.
    pub design: &'a SampleDesign,
    /// Union columns of the model's tracked terms (kept even when `--all-terms` asks the engine
    /// for every coefficient).
    pub tracked: Vec<usize>,
    /// What the engine returned.
    pub fit: Result<ModelFit, ModelError>,
}

/// What the results writer keeps for the report once every chunk is written.
pub(super) struct ChunkedResults {
    /// Every model as the report sees it: the first tracked term under each covariance choice.
    pub report_models: Models,
    /// The distinct first tracked terms (two at most are kept: the report only needs to know
    /// whether every model's is the same).
    pub lead_terms: Vec<String>,
    /// Effects on the study's scale, when it is not `coefficient`.
    pub effects: Option<StoredEffects>,
    /// The baseline's (fitted, residual) pairs.
    pub residuals: Option<Vec<(f64, f64)>>,
    /// Models that failed.
    pub failed: usize,
}

/// Every model's effect on the study's scale, keyed for the report; conversions undefined at
/// the evaluation point are counted and shown as one warning.
fn convert_effects(
    plan: &Plan,
    data: &LoadedData,
    estimated: &[(usize, Estimated<'_>)],
    recipes: &[Recipe],
    scale: Scale,
    cache: &mut EvaluationCache,
    stored: &mut StoredEffects,
) -> Result<Vec<String>, Failure> {
    let labels: Vec<String> = plan.errors.iter().map(|e| e.label()).collect();
    let mut problems = Vec::new();
    for &(i, ref result) in estimated {
        let Ok(fit) = &result.fit else { continue };
        let model = &plan.models[i];
        let point = cache.point(
            plan,
            data,
            result.design_index,
            result.design,
            model,
            &recipes[i],
        )?;
        let values =
            effects::model_effects(&recipes[i], result.design, fit, point, scale, &mut problems);
        let entry = stored.entry(model.id.clone()).or_default();
        for (label, value) in labels.iter().zip(values) {
            if let Some(v) = value {
                entry.insert(label.clone(), v);
            }
        }
    }
    Ok(problems)
}

/// Most points kept for the baseline's residual plot (the plot draws at most this many).
const RESIDUAL_POINTS: usize = 4000;

/// (fitted, residual) of the baseline model over its rows, every k-th row so at most
/// [`RESIDUAL_POINTS`] remain; `None` when there is no baseline or it failed.
fn baseline_residuals(
    plan: &Plan,
    estimated: &[(usize, Estimated<'_>)],
) -> Option<Vec<(f64, f64)>> {
    let b = plan.baseline?;
    let (_, result) = estimated.iter().find(|(i, _)| *i == b)?;
    let fit = result.fit.as_ref().ok()?;
    // With absorbed effects or weights the fit lives on the prepared design: within (and
    // weighted) fitted values and residuals.
    let design = result.design.fitted_design();
    let outcome = result.design.outcome_columns[plan.models[b].outcome]?;
    let n = design.x.nrows();
    let step = n.div_ceil(RESIDUAL_POINTS).max(1);
    Some(
        (0..n)
            .step_by(step)
            .map(|i| {
                let fitted: f64 = fit
                    .all_estimates
                    .iter()
                    .map(|&(c, b)| design.x[(i, c)] * b)
                    .sum();
                (fitted, design.y[(i, outcome)] - fitted)
            })
            .collect(),
    )
}

/// Adds one model as the report sees it, made straight from its fit: the same model
/// `ReportInput::from_rows` builds from the model's rows in models.csv (its first tracked
/// term under each covariance choice), without the rows' strings. Nothing is added where the
/// model has no row (a fit with no tracked coefficient), as there. Adds the model's first
/// tracked term to `lead_terms` when it is a new one (at most two are kept).
fn add_report_model(
    plan: &Plan,
    labels: &RowLabels,
    index: usize,
    estimated: &Estimated<'_>,
    models: &mut Models,
    lead_terms: &mut Vec<String>,
) -> Result<(), Failure> {
    let model = &plan.models[index];
    let names = &estimated.design.design.x_names;
    let new = |failure, stats| NewModel {
        id: &model.id,
        choices: &model.choices,
        failure,
        stats,
        outcome_label: &labels.outcomes[model.outcome],
    };
    let (added, lead_column) = match &estimated.fit {
        Ok(fit) => {
            let Some(lead) = fit
                .coefficients
                .iter()
                .find(|c| estimated.tracked.contains(&c.column))
            else {
                return Ok(());
            };
            let stats = FitStats {
                n_obs: Some(fit.n_obs as u64),
                n_params: Some(fit.n_params as u64),
                r_squared: Some(fit.r_squared),
                resid_sd: Some(fit.resid_sd),
                het_p_value: fit.breusch_pagan.map(|b| b.p_value),
            };
            let effects = lead.inference.iter().map(|inf| {
                let mut e = Effect::coefficient(lead.estimate, Some(inf.std_error), inf.df);
                e.p_value = Some(inf.p_value);
                Some(e)
            });
            (models.push(new(None, stats), effects), lead.column)
        }
        Err(error) => {
            let Some(&lead) = estimated.tracked.first() else {
                return Ok(());
            };
            let message = error.to_string();
            let effects = std::iter::repeat_n(None, plan.errors.len());
            (
                models.push(new(Some(&message), FitStats::default()), effects),
                lead,
            )
        }
    };
    added.map_err(|e| Failure::Output(format!("cannot keep the model for the report: {e}")))?;
    let term = &names[lead_column];
    if lead_terms.len() < 2 && !lead_terms.contains(term) {
        lead_terms.push(term.clone());
    }
    Ok(())
}

/// Labels every row of a run repeats, made once so the results table can borrow them.
struct RowLabels {
    /// Per covariance choice, its results label.
    errors: Vec<String>,
    /// Per outcome form, its label.
    outcomes: Vec<String>,
}

impl RowLabels {
    fn of(plan: &Plan) -> RowLabels {
        RowLabels {
            errors: plan.errors.iter().map(|e| e.label()).collect(),
            outcomes: (0..plan.outcomes.len())
                .map(|o| super::outcome_label(plan, o))
                .collect(),
        }
    }
}

/// Appends the rows of one model: one per covariance choice and reported term. `only` limits the
/// terms to those union columns (the tracked ones); `None` writes every reported coefficient.
fn append_model<'a>(
    plan: &'a Plan,
    labels: &'a RowLabels,
    index: usize,
    estimated: &Estimated<'a>,
    table: &mut ResultsTable<'a>,
    only: Option<&[usize]>,
) {
    let model = &plan.models[index];
    let choices = model.choices.as_slice();
    let design = estimated.design;
    let names = &design.design.x_names;
    let outcome = labels.outcomes[model.outcome].as_str();
    match &estimated.fit {
        Ok(fit) => {
            let stats = ModelStats {
                n_obs: Some(fit.n_obs as u64),
                n_params: Some(fit.n_params as u64),
                r_squared: Some(fit.r_squared),
                adj_r_squared: Some(fit.adj_r_squared),
                resid_sd: Some(fit.resid_sd),
                condition_number: Some(fit.condition_number),
                het_test_stat: fit.breusch_pagan.map(|b| b.statistic),
                het_test_p_value: fit.breusch_pagan.map(|b| b.p_value),
                within_r_squared: fit.within_r_squared,
                absorbed: design.absorbed_columns(plan).join("; "),
                weights: design.weights_label(plan).unwrap_or_default(),
                dropped: fit
                    .dropped
                    .iter()
                    .map(|&c| names[c].as_str())
                    .collect::<Vec<_>>()
                    .join("; "),
                outcome,
            };
            table.begin_model(ModelRows {
                model_id: &model.id,
                choices,
                stats,
                status: "ok",
                message: String::new(),
            });
            for (choice_index, label) in labels.errors.iter().enumerate() {
                for coefficient in &fit.coefficients {
                    if only.is_some_and(|cols| !cols.contains(&coefficient.column)) {
                        continue;
                    }
                    let inference = &coefficient.inference[choice_index];
                    let values = TermValues {
                        estimate: Some(coefficient.estimate),
                        std_error: Some(inference.std_error),
                        t_stat: Some(inference.t_stat),
                        p_value: Some(inference.p_value),
                        ci_low: Some(inference.ci_low),
                        ci_high: Some(inference.ci_high),
                        df: Some(inference.df),
                    };
                    table.push(label, &names[coefficient.column], values);
                }
            }
        }
        Err(error) => {
            let stats = ModelStats {
                outcome,
                absorbed: design.absorbed_columns(plan).join("; "),
                weights: design.weights_label(plan).unwrap_or_default(),
                ..ModelStats::default()
            };
            table.begin_model(ModelRows {
                model_id: &model.id,
                choices,
                stats,
                status: "failed",
                message: error.to_string(),
            });
            let terms: Vec<&str> = match only {
                Some(cols) => cols.iter().map(|&c| names[c].as_str()).collect(),
                None => vec![""],
            };
            for label in &labels.errors {
                for term in &terms {
                    table.push(label, term, TermValues::default());
                }
            }
        }
    }
}
