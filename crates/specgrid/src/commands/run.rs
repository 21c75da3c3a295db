//! `specgrid run`: plan, load, estimate every model, write the results folder atomically.

use std::path::PathBuf;
use std::time::Instant;

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use rayon::prelude::*;
use specgrid_data::{Assembly, LoadedData};
use specgrid_ols::{Covariance, FitOptions};
use specgrid_report::Scale;

use specgrid_study::Plan;

use super::report::{self, RunRecord};
use super::rerun::{self, Inputs, RerunOptions};
use super::results_sink::{self, Chunk, ChunkedResults, Estimated, SinkInputs};
use crate::effects::{self, Recipe};
use crate::exit::Failure;
use crate::output::Staging;
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
    let (
        ChunkedResults {
            report_models,
            lead_terms,
            effects: converted,
            residuals,
            failed,
        },
        covariance_sums,
    ) = written_models;
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
    // `run` is the last thing the process does: the system takes the plan's memory back at
    // exit at once, where the destructors of millions of planned models took tenths of a second.
    std::mem::forget(plan);
    match verdict.and_then(|v| v.failure()) {
        Some(failure) => Err(failure),
        None => Ok(()),
    }
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

/// Fits every model of the plan, one shared factorisation per design made once, in chunks of
/// plan order (`--chunk`, default: the whole grid). Each fitted chunk goes to the results
/// writer ([`results_sink::consume`]) on its own thread, which writes it while the next chunk is
/// fitted; at most two chunks of fits are held (the channel has no buffer). Rows stay in plan
/// order whatever the chunk size. Also returns, per design, how many models' covariance sums
/// came from the moments and how many went back to the row pass (for manifest.json).
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
) -> Result<(ChunkedResults, Vec<specgrid_ols::MomentStats>), Failure> {
    let n = plan.models.len();
    let chunk = options.chunk.unwrap_or(n).max(1);
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
    let sink = SinkInputs {
        plan,
        data,
        recipes,
        scale,
        staging,
        all_terms: options.all_terms,
        no_csv: options.no_csv,
        streaming: chunk < n,
    };
    let (fitted, written) = std::thread::scope(|scope| {
        let (send, receive) = std::sync::mpsc::sync_channel::<Chunk<'_>>(0);
        let writer = scope.spawn(move || results_sink::consume(sink, receive));
        let mut wild_failures = 0;
        let fitted = (|| -> Result<usize, Failure> {
            for start in (0..n).step_by(chunk) {
                let end = (start + chunk).min(n);
                let (estimated, wild) = fit_chunk(
                    plan,
                    assembly,
                    &factors,
                    fit_options,
                    options.all_terms,
                    start..end,
                    &progress,
                )?;
                wild_failures += wild;
                // A closed channel means the writer stopped on an error, which `join` returns.
                if time("write", || send.send(estimated)).is_err() {
                    break;
                }
            }
            Ok(wild_failures)
        })();
        drop(send);
        let written = time("write", || writer.join()).unwrap_or_else(|_| {
            Err(Failure::Output(
                "the results writer stopped unexpectedly (internal error; please report it)".into(),
            ))
        });
        (fitted, written)
    });
    progress.finish_and_clear();
    let wild_failures = fitted?;
    let results = written?;
    if wild_failures > 0 {
        eprintln!(
            "warning: the wild cluster bootstrap could not serve {wild_failures} coefficient(s) (e.g. a coefficient collinear with the others on a sample's rows); those keep the cluster-robust p-value and interval"
        );
    }
    Ok((results, factors.iter().map(|f| f.moment_stats()).collect()))
}

/// Fits the plan models `range` on their designs' factors; returns them in plan order, and how
/// many (model, coefficient, choice) triples the wild bootstrap could not serve.
fn fit_chunk<'a>(
    plan: &Plan,
    assembly: &'a Assembly,
    factors: &[specgrid_ols::SharedFactor<'_>],
    fit_options: &FitOptions,
    all_terms: bool,
    range: std::ops::Range<usize>,
    progress: &ProgressBar,
) -> Result<(Chunk<'a>, usize), Failure> {
    let (start, end) = (range.start, range.end);
    let mut wild_failures = 0;
    // Each design's fits, in plan order within the design, are merged into plan order below:
    // each model is moved once, into its place in the chunk (the chunk's results are tens of
    // megabytes, moved on this thread while the workers wait).
    let mut per_design: Vec<DesignFits<'a>> = Vec::new();
    let mut owner: Vec<u32> = vec![u32::MAX; end - start];
    for (design_index, (design, factor)) in assembly.designs.iter().zip(factors).enumerate() {
        // A design's models are in plan order, so the chunk's are one contiguous run.
        let from = design.models.partition_point(|&m| m < start);
        let to = design.models.partition_point(|&m| m < end);
        let members = &design.models[from..to];
        if members.is_empty() {
            continue;
        }
        progress.set_message(format!("sample `{}`", design.sample_name));
        // Built on the rayon threads, which would otherwise wait for them, into vectors of
        // the right size (grown by doubling they copied into fresh memory on this thread).
        let built: Vec<Result<_, Failure>> = members
            .par_iter()
            .map(|&m| {
                design
                    .model_spec(&plan.models[m])
                    .map_err(|e| Failure::Data(e.to_string()))
            })
            .collect();
        let mut specs = Vec::with_capacity(members.len());
        // With every coefficient requested the engine gets an empty tracked list; the tracked
        // columns are kept aside for the results table.
        let mut set_aside = Vec::with_capacity(if all_terms { members.len() } else { 0 });
        for spec in built {
            let mut spec = spec?;
            if all_terms {
                set_aside.push(std::mem::take(&mut spec.tracked));
            }
            specs.push(spec);
        }
        let mut fits = time("fit", || {
            factor.fit_many_with_progress(&specs, fit_options, &|k| progress.inc(k as u64))
        });
        wild_failures += time("inference", || {
            crate::wild::apply(plan, fit_options, design, members, &specs, &mut fits)
        });
        let slot = per_design.len() as u32;
        for &m in members {
            owner[m - start] = slot;
        }
        per_design.push(DesignFits {
            design_index,
            design,
            fits: fits.into_iter(),
            specs: specs.into_iter(),
            set_aside: set_aside.into_iter(),
        });
    }
    let mut estimated = Vec::with_capacity(end - start);
    for (k, &slot) in owner.iter().enumerate() {
        let next = per_design.get_mut(slot as usize).and_then(DesignFits::next);
        let Some(e) = next else {
            return Err(Failure::Estimation(format!(
                "model {} was not assigned to any design (internal error; please report it)",
                plan.models[start + k].id
            )));
        };
        estimated.push((start + k, e));
    }
    Ok((estimated, wild_failures))
}

/// One design's fits within a chunk, handed out in plan order by [`DesignFits::next`].
struct DesignFits<'a> {
    design_index: usize,
    design: &'a specgrid_data::SampleDesign,
    fits: std::vec::IntoIter<Result<specgrid_ols::ModelFit, specgrid_ols::ModelError>>,
    specs: std::vec::IntoIter<specgrid_ols::ModelSpec>,
    /// With every coefficient requested, the tracked columns taken out of the specs.
    set_aside: std::vec::IntoIter<Vec<usize>>,
}

impl<'a> DesignFits<'a> {
    /// The design's next model as the results writer takes it.
    fn next(&mut self) -> Option<Estimated<'a>> {
        let fit = self.fits.next()?;
        let spec = self.specs.next()?;
        Some(Estimated {
            design_index: self.design_index,
            design: self.design,
            tracked: self.set_aside.next().unwrap_or(spec.tracked),
            fit,
        })
    }
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
