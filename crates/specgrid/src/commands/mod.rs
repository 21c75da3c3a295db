//! One module per subcommand; [`dispatch`] routes the parsed command line.

mod check;
mod compare;
mod demo_data;
mod plan;
mod report;
mod rerun;
mod results_sink;
mod run;

use std::path::Path;

use specgrid_study::{load_study, Plan, Study, StudyProblem};

use crate::cli::Command;
use crate::exit::Failure;

/// Runs one subcommand.
pub fn dispatch(command: Command) -> Result<(), Failure> {
    match command {
        Command::Check { study } => check::run(&study),
        Command::Plan { study, list } => plan::run(&study, list),
        Command::Run {
            study,
            out,
            all_terms,
            threads,
            quiet,
            force,
            against,
            tolerance,
            max_memory,
            chunk,
            timings,
            no_csv,
        } => run::run(&run::RunOptions {
            study,
            out,
            all_terms,
            threads,
            quiet,
            rerun: rerun::RerunOptions {
                force,
                against,
                tolerance: tolerance.into(),
                max_memory,
            },
            chunk: chunk.map(|c| c as usize),
            timings,
            no_csv,
        }),
        Command::Compare {
            old,
            new,
            errors,
            tolerance,
        } => compare::run(&old, &new, errors.as_deref(), tolerance.into()),
        Command::Report { dir } => report::run(&dir),
        Command::DemoData {
            plots,
            seasons,
            villages,
            seed,
            out,
        } => demo_data::run(plots, seasons, villages, seed, &out),
    }
}

/// Reads and plans a study, turning every problem into one [`Failure::Study`] that lists them
/// all, one per line.
pub(crate) fn load_plan(study: &Path) -> Result<Plan, Failure> {
    let parsed = load_study(study).map_err(study_failure)?;
    specgrid_study::plan(&parsed).map_err(study_failure)
}

/// For `run`: reads a study, refuses it up front if its results would not fit in memory (the
/// grid is counted, not built), and plans it.
pub(crate) fn load_study_plan(
    study: &Path,
    max_memory_mib: Option<u64>,
    chunk: Option<usize>,
) -> Result<(Study, Plan), Failure> {
    let parsed = load_study(study).map_err(study_failure)?;
    let count = specgrid_study::count_grid(&parsed).map_err(study_failure)?;
    crate::memory::check(
        &parsed,
        &count,
        crate::memory::budget(max_memory_mib),
        chunk,
    )?;
    let plan = specgrid_study::plan(&parsed).map_err(study_failure)?;
    Ok((parsed, plan))
}

fn study_failure(problems: Vec<StudyProblem>) -> Failure {
    let lines: Vec<String> = problems.iter().map(|p| p.to_string()).collect();
    let count = lines.len();
    Failure::Study(format!(
        "{count} problem{} found\n{}",
        if count == 1 { "" } else { "s" },
        lines.join("\n")
    ))
}

/// The readable label of a plan outcome form, e.g. `log(yield_t_ha)`.
pub(crate) fn outcome_label(plan: &Plan, outcome: usize) -> String {
    let form = &plan.outcomes[outcome];
    specgrid_study::Term::Numeric {
        column: form.column.clone(),
        transform: form.transform.clone(),
    }
    .label()
}

impl From<crate::cli::ToleranceArgs> for specgrid_report::Tolerance {
    fn from(t: crate::cli::ToleranceArgs) -> Self {
        specgrid_report::Tolerance {
            relative: t.relative_tolerance,
            std_errors: t.se_tolerance,
        }
    }
}

/// Formats a count with thousands separators (1,908).
pub(crate) fn thousands(n: u128) -> String {
    let digits = n.to_string();
    let mut out = String::new();
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    out
}
