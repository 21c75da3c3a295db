//! One module per subcommand; [`dispatch`] routes the parsed command line.

mod check;
mod demo_data;
mod plan;
mod report;
mod run;

use std::path::Path;

use specgrid_study::{load_study, Plan, StudyProblem};

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
            timings,
        } => run::run(&run::RunOptions {
            study,
            out,
            all_terms,
            threads,
            quiet,
            timings,
        }),
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
