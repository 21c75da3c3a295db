//! `specgrid run`: plan, load, estimate every model, write the results folder atomically.

use std::path::PathBuf;
use std::time::Instant;

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use specgrid_data::{Assembly, LoadedData, SampleDesign};
use specgrid_ols::{Covariance, FitOptions, ModelError, ModelFit};
use specgrid_report::{Effect, ModelEntry, ModelStatus, Scale, StoredEffects};

use specgrid_study::Plan;

use super::report::{self, RunRecord};
use super::rerun::{self, Inputs, RerunOptions};
use crate::effects::{self, EvaluationCache, Recipe};
use crate::exit::Failure;
use crate::output::Staging;
use crate::results::{ModelRows, ModelStats, ResultsTable, TermValues};
use crate::results_stream::ChunkWriter;
use crate::timings::{self, time};

/// Everything `run` was asked to do.
pub struct RunOptions {
    /// Study file.
    pub study: PathBuf,
    /// Results folder.
    pub out: PathBuf,
    /// Write terms.csv with every coefficient.
    pub all_terms: bool,
    /// Worker threads.
    pub threads: Option<usize>,
    /// No progress bar.
    pub quiet: bool,
    /// Skipping, comparison, verdict, memory bound.
    pub rerun: RerunOptions,
    /// Fit and write this many models at a time (rows in memory for one chunk only).
    pub chunk: Option<usize>,
    /// Print seconds per phase to stderr at the end (see `crate::timings`).
    pub timings: bool,
    /// Write the results table as models.parquet only.
    pub no_csv: bool,
}

/// One model's outcome: where it was fitted and what came back.
struct Estimated<'a> {
    design_index: usize,
    design: &'a SampleDesign,
    fit: Result<ModelFit, ModelError>,
}

/// Runs the whole study.
pub fn run(options: &RunOptions) -> Result<(), Failure> {
    let started = Instant::now();
    if let Some(n) = options.threads {
        rayon::ThreadPoolBuilder::new()
            .num_threads(n.max(1))
            .build_global()
            .map_err(|e| Failure::Estimation(format!("cannot start {n} worker threads: {e}")))?;
    }
    let (study, plan) = time("plan", || {
        super::load_study_plan(&options.study, options.rerun.max_memory, options.chunk)
    })?;
    let study_text = std::fs::read_to_string(&options.study)
        .map_err(|e| Failure::Study(format!("{}: {e}", options.study.display())))?;
    let inputs = Inputs::hash(&study_text, &plan)?;
    if let Some(skipped) = rerun::skip_unchanged(&options.out, &inputs, options.rerun.force) {
        return skipped;
    }
    let scale = effects::report_scale(plan.report.scale);
    // Decided from the plan alone, so a study whose effects cannot be converted fails at once.
    let recipes = (scale != Scale::Coefficient)
        .then(|| effects::recipes(&plan))
        .transpose()?;
    let (data, assembly) = time("load", || crate::data_guard::load_and_assemble(&plan))?;
    for warning in &assembly.warnings {
        eprintln!("warning: {warning}");
    }
    for design in &assembly.designs {
        if let Some(absorption) = crate::manifest::Absorption::of(design, &plan) {
            eprintln!("{}", absorption.summary(&design.sample_name));
        }
    }
    let fit_options = fit_options(&plan, &assembly)?;
    crate::wild::check_cluster_counts(&plan, &fit_options, &assembly.designs)?;
    let staging = Staging::begin(&options.out)?;
    let written_models = estimate_and_write(
        &plan,
        &data,
        &assembly,
        &fit_options,
        options,
        recipes.as_deref(),
        scale,
        &staging,
    )?;
    let ChunkedResults {
        report_models,
        lead_terms,
        effects: converted,
        residuals,
        failed,
        covariance_sums,
        ..
    } = written_models;
    if let Some(pairs) = &residuals {
        report::write_residuals(&staging.file(report::RESIDUALS_FILE), pairs)?;
    }
    let record = RunRecord {
        title: plan.title.clone(),
        significance_level: plan.significance_level,
        confidence_level: plan.confidence_level,
        // Only a baseline the study named; otherwise the report takes the first options.
        baseline_model_id: plan
            .report
            .baseline
            .as_ref()
            .and(plan.baseline)
            .map(|i| plan.models[i].id.clone()),
        data_fingerprint: inputs.data_sha256.clone(),
        dimensions: plan
            .dimensions
            .iter()
            .map(|d| (d.name.clone(), d.options.clone()))
            .collect(),
        candidates: plan
            .dimensions
            .iter()
            .filter(|d| !d.candidates.is_empty())
            .map(|d| (d.name.clone(), d.candidates.clone()))
            .collect(),
        scale: plan.report.scale.word().to_string(),
        effect_label: if converted.is_some() {
            plan.focus_column.clone()
        } else {
            String::new()
        },
    };
    write_text(&staging.file("study.toml"), &study_text)?;
    let record_json = serde_json::to_string_pretty(&record)
        .map_err(|e| Failure::Output(format!("run.json: {e}")))?;
    write_text(&staging.file("run.json"), &record_json)?;
    let across = time("inference", || {
        crate::across_grid::run(
            &study,
            &plan,
            &data,
            &assembly.designs,
            &fit_options,
            converted.as_ref(),
            &plan.errors[0].label(),
        )
    })?;
    if let Some(out) = &across {
        report::write_across_grid(&staging, out)?;
    }
    let extras = report::Extras {
        effects: converted,
        baseline_residuals: residuals,
        across_grid: across.map(|a| a.summary),
    };
    let terminal = time("report", || {
        report::render_models(
            &record,
            study_text,
            plan.errors.iter().map(|e| e.label()).collect(),
            report_models,
            specgrid_report::lead_term_label(lead_terms.iter().map(String::as_str)),
            extras,
            staging.dir(),
        )
    })?;
    let (rerun_text, verdict) = rerun::compare_and_judge(&staging, &study, &options.rerun)?;
    rerun::write_manifest(
        &staging,
        &plan,
        &assembly,
        data.n_rows,
        &inputs,
        &covariance_sums,
    )?;
    rerun::pause_for_tests();
    let written = time("write", || staging.commit())?;

    println!(
        "{} models estimated in {:.1} s ({} failed; see `status` and `message`) → {}",
        super::thousands(plan.models.len() as u128),
        started.elapsed().as_secs_f64(),
        super::thousands(failed as u128),
        written.display()
    );
    print!("{terminal}");
    print!("{rerun_text}");
    if options.timings {
        eprintln!("{}", timings::summary_line(started.elapsed()));
    }
    match verdict.and_then(|v| v.failure()) {
        Some(failure) => Err(failure),
        None => Ok(()),
    }
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

fn write_text(path: &std::path::Path, text: &str) -> Result<(), Failure> {
    std::fs::write(path, text).map_err(|e| Failure::Output(format!("{}: {e}", path.display())))
}

/// Maps the study's error choices to engine covariances.
fn fit_options(plan: &Plan, assembly: &Assembly) -> Result<FitOptions, Failure> {
    let covariances = plan
        .errors
        .iter()
        .map(|choice| {
            assembly.covariance(choice).ok_or_else(|| {
                Failure::Data(format!(
                    "the error choice `{}` names a clustering column that was not loaded",
                    choice.label()
                ))
            })
        })
        .collect::<Result<Vec<Covariance>, Failure>>()?;
    Ok(FitOptions {
        covariances,
        confidence_level: plan.confidence_level,
        ..FitOptions::default()
    })
}

/// What the chunked estimation keeps for the report once every chunk is written.
struct ChunkedResults {
    /// Every model as the report sees it: the first tracked term under each covariance choice.
    report_models: Vec<ModelEntry>,
    /// The distinct first tracked terms (two at most are kept: the report only needs to know
    /// whether every model's is the same).
    lead_terms: Vec<String>,
    /// Effects on the study's scale, when it is not `coefficient`.
    effects: Option<StoredEffects>,
    /// The baseline's (fitted, residual) pairs.
    residuals: Option<Vec<(f64, f64)>>,
    /// Models that failed.
    failed: usize,
    /// (model, coefficient, choice) triples the wild bootstrap could not serve.
    wild_failures: usize,
    /// Per design: models whose covariance sums came from the moments, and those sent back to
    /// the row pass by their rounding bound (for manifest.json).
    covariance_sums: Vec<specgrid_ols::MomentStats>,
}

/// Fits every model of the plan, one shared factorisation per design made once, in chunks of
/// plan order (`--chunk`, default: the whole grid), writing each chunk's rows before the next
/// is fitted. Rows stay in plan order whatever the chunk size.
#[allow(clippy::too_many_arguments)]
fn estimate_and_write(
    plan: &Plan,
    data: &LoadedData,
    assembly: &Assembly,
    fit_options: &FitOptions,
    options: &RunOptions,
    recipes: Option<&[Recipe]>,
    scale: Scale,
    staging: &Staging,
) -> Result<ChunkedResults, Failure> {
    let n = plan.models.len();
    let chunk = options.chunk.unwrap_or(n).max(1);
    let streaming = chunk < n;
    let dimension_names: Vec<String> = plan.dimensions.iter().map(|d| d.name.clone()).collect();
    let mut models_out = ChunkWriter::new(
        (!options.no_csv).then(|| staging.file("models.csv")),
        Some(staging.file("models.parquet")),
        streaming,
    );
    let mut terms_out = options
        .all_terms
        .then(|| ChunkWriter::new(Some(staging.file("terms.csv")), None, streaming));
    let progress = progress_bar(n as u64, options.quiet);
    let factors = assembly
        .designs
        .iter()
        .map(|design| {
            let mut factor = time("factor", || design.factor()).map_err(|e| {
                Failure::Estimation(format!("sample `{}`: {e}", design.sample_name))
            })?;
            // Chunks share the factor: the engine weighs a one-off moment build against all of
            // this design's models, not one chunk's.
            factor.expect_models(design.models.len());
            Ok(factor)
        })
        .collect::<Result<Vec<_>, Failure>>()?;
    let mut results = ChunkedResults {
        report_models: Vec::with_capacity(n),
        lead_terms: Vec::new(),
        effects: recipes.map(|_| StoredEffects::new()),
        residuals: None,
        failed: 0,
        wild_failures: 0,
        covariance_sums: Vec::new(),
    };
    let mut cache = EvaluationCache::default();
    let mut problems = Vec::new();
    let labels = RowLabels::of(plan);
    for start in (0..n).step_by(chunk) {
        let end = (start + chunk).min(n);
        let mut slots: Vec<Option<Estimated<'_>>> = (start..end).map(|_| None).collect();
        for (design_index, (design, factor)) in assembly.designs.iter().zip(&factors).enumerate() {
            // A design's models are in plan order, so the chunk's are one contiguous run.
            let from = design.models.partition_point(|&m| m < start);
            let to = design.models.partition_point(|&m| m < end);
            let members = &design.models[from..to];
            if members.is_empty() {
                continue;
            }
            progress.set_message(format!("sample `{}`", design.sample_name));
            let specs = members
                .iter()
                .map(|&m| {
                    let mut spec = design
                        .model_spec(&plan.models[m])
                        .map_err(|e| Failure::Data(e.to_string()))?;
                    if options.all_terms {
                        // Empty tracked = inference for every coefficient of the model.
                        spec.tracked.clear();
                    }
                    Ok(spec)
                })
                .collect::<Result<Vec<_>, Failure>>()?;
            let mut fits = time("fit", || {
                factor.fit_many_with_progress(&specs, fit_options, &|k| progress.inc(k as u64))
            });
            results.wild_failures += time("inference", || {
                crate::wild::apply(plan, fit_options, design, members, &specs, &mut fits)
            });
            for (&m, fit) in members.iter().zip(fits) {
                slots[m - start] = Some(Estimated {
                    design_index,
                    design,
                    fit,
                });
            }
        }
        let estimated = slots
            .into_iter()
            .enumerate()
            .map(|(k, slot)| {
                slot.map(|e| (start + k, e)).ok_or_else(|| {
                    Failure::Estimation(format!(
                        "model {} was not assigned to any design (internal error; please report it)",
                        plan.models[start + k].id
                    ))
                })
            })
            .collect::<Result<Vec<_>, Failure>>()?;
        let mut table = ResultsTable::new(&dimension_names)?;
        let mut terms = options
            .all_terms
            .then(|| ResultsTable::new(&dimension_names))
            .transpose()?;
        for (index, result) in &estimated {
            let tracked = tracked_columns(plan, result.design, *index)?;
            append_model(plan, &labels, *index, result, &mut table, Some(&tracked));
            if let Some(terms) = terms.as_mut() {
                append_model(plan, &labels, *index, result, terms, None);
            }
            if let Some(entry) = report_entry(
                plan,
                &labels,
                *index,
                result,
                &tracked,
                &mut results.lead_terms,
            ) {
                results.report_models.push(entry);
            }
        }
        time("write", || -> Result<(), Failure> {
            models_out.write(&table)?;
            if let (Some(out), Some(terms)) = (terms_out.as_mut(), terms.as_ref()) {
                out.write(terms)?;
            }
            Ok(())
        })?;
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
    progress.finish_and_clear();
    results.covariance_sums = factors.iter().map(|f| f.moment_stats()).collect();
    if results.wild_failures > 0 {
        eprintln!(
            "warning: the wild cluster bootstrap could not serve {} coefficient(s) (e.g. a coefficient collinear with the others on a sample's rows); those keep the cluster-robust p-value and interval",
            results.wild_failures
        );
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

/// One model as the report sees it, made straight from its fit: the same entry
/// `ReportInput::from_rows` builds from the model's rows in models.csv (its first tracked
/// term under each covariance choice), without the rows' strings. `None` where the model has
/// no row (a fit with no tracked coefficient), as there. Adds the model's first tracked term
/// to `lead_terms` when it is a new one (at most two are kept).
fn report_entry(
    plan: &Plan,
    labels: &RowLabels,
    index: usize,
    estimated: &Estimated<'_>,
    tracked: &[usize],
    lead_terms: &mut Vec<String>,
) -> Option<ModelEntry> {
    let model = &plan.models[index];
    let outcome_label = labels.outcomes[model.outcome].clone();
    let names = &estimated.design.design.x_names;
    let (status, effects, lead_column, stats) = match &estimated.fit {
        Ok(fit) => {
            let lead = fit
                .coefficients
                .iter()
                .find(|c| tracked.contains(&c.column))?;
            let effects = lead
                .inference
                .iter()
                .map(|inf| {
                    let mut e = Effect::coefficient(lead.estimate, Some(inf.std_error), inf.df);
                    e.p_value = Some(inf.p_value);
                    Some(e)
                })
                .collect();
            let stats = (
                Some(fit.n_obs as u64),
                Some(fit.n_params as u64),
                Some(fit.r_squared),
                Some(fit.resid_sd),
                fit.breusch_pagan.map(|b| b.p_value),
            );
            (ModelStatus::Ok, effects, lead.column, stats)
        }
        Err(error) => {
            let lead = *tracked.first()?;
            (
                ModelStatus::Failed(error.to_string()),
                vec![None; plan.errors.len()],
                lead,
                (None, None, None, None, None),
            )
        }
    };
    let term = &names[lead_column];
    if lead_terms.len() < 2 && !lead_terms.contains(term) {
        lead_terms.push(term.clone());
    }
    let (n_obs, n_params, r_squared, resid_sd, het_p_value) = stats;
    Some(ModelEntry {
        model_id: model.id.clone(),
        choices: model.choices.clone(),
        status,
        effects,
        n_obs,
        n_params,
        r_squared,
        resid_sd,
        het_p_value,
        outcome_label,
    })
}

fn progress_bar(total: u64, quiet: bool) -> ProgressBar {
    if quiet {
        return ProgressBar::with_draw_target(Some(total), ProgressDrawTarget::hidden());
    }
    let bar = ProgressBar::with_draw_target(Some(total), ProgressDrawTarget::stderr());
    if let Ok(style) =
        ProgressStyle::with_template("{bar:40} {pos}/{len} models  {elapsed_precise}  {msg}")
    {
        bar.set_style(style);
    }
    bar
}

/// The union columns of a model's tracked terms, in the design it was fitted on.
fn tracked_columns(
    plan: &Plan,
    design: &SampleDesign,
    model: usize,
) -> Result<Vec<usize>, Failure> {
    design
        .model_spec(&plan.models[model])
        .map(|spec| spec.tracked)
        .map_err(|e| Failure::Data(e.to_string()))
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
    let choices: Vec<&str> = plan
        .choice_names(model)
        .into_iter()
        .map(|(_, option)| option)
        .collect();
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
