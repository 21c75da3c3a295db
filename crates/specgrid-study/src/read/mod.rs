//! Reading a study file: TOML with positions → a checked [`Study`], or every problem at once.

mod forms;
mod inference;
mod pick_block;
mod report;
mod samples;
mod sections;
mod settings;
mod values;
mod verdict;

use std::path::Path;

use toml::de::DeTable;

use crate::problem::{file_problem, Source, StudyProblem};
use crate::study::Study;

pub(crate) use values::Reader;

/// Top-level tables a study file may have.
const TOP_LEVEL: &[&str] = &[
    "study",
    "outcome",
    "focus",
    "controls",
    "samples",
    "errors",
    "grid",
    "report",
    "verdict",
    "inference",
];

/// Read and check a study file. Returns every problem found, sorted by position, rather than
/// stopping at the first.
pub fn load_study(path: &Path) -> Result<Study, Vec<StudyProblem>> {
    let text = std::fs::read_to_string(path).map_err(|e| {
        vec![file_problem(
            path,
            format!("cannot read the study file: {e}"),
            Some("check the path and that the file is UTF-8 text".into()),
        )]
    })?;
    parse_study(path, text)
}

/// Check study text as if it were read from `path` (used by [`load_study`] and tests).
pub fn parse_study(path: &Path, text: String) -> Result<Study, Vec<StudyProblem>> {
    let source = Source::new(path, text);
    let (document, syntax_errors) = DeTable::parse_recoverable(source.text());
    if !syntax_errors.is_empty() {
        let mut problems: Vec<StudyProblem> = syntax_errors
            .iter()
            .map(|e| {
                let offset = e.span().map(|s| s.start).unwrap_or(0);
                source.problem(
                    offset,
                    format!("not valid TOML: {}", e.message().trim_end()),
                    Some("fix the TOML syntax at this position".into()),
                )
            })
            .collect();
        sort_problems(&mut problems);
        return Err(problems);
    }
    let mut reader = Reader::new(&source);
    reader.check_keys(document.get_ref(), TOP_LEVEL, "the top level");
    let study = sections::read_study(&mut reader, document.get_ref());
    let mut problems = reader.into_problems();
    match study {
        Some(study) if problems.is_empty() => Ok(study),
        _ => {
            if problems.is_empty() {
                // A section failed without saying why; never leave the user without a message.
                problems.push(file_problem(path, "the study file could not be read", None));
            }
            sort_problems(&mut problems);
            Err(problems)
        }
    }
}

fn sort_problems(problems: &mut [StudyProblem]) {
    problems.sort_by_key(|p| (p.line, p.column));
}
