//! `specgrid compare OLD_DIR NEW_DIR`, and the comparison `run --against` makes.

use std::fs;
use std::path::Path;

use specgrid_report::{
    compare, comparison_page, comparison_section, comparison_terminal, insert_comparison_section,
    Tolerance,
};
use specgrid_study::Verdict;

use super::report;
use crate::exit::Failure;
use crate::verdict::{judge, Outcome, VERDICT_FILE};

/// File names the comparison writes into the newer folder.
pub const COMPARISON_JSON: &str = "comparison.json";
/// The standalone page `specgrid compare` writes.
pub const COMPARISON_HTML: &str = "comparison.html";

/// `specgrid compare`: writes comparison.json, comparison.html and (with a `[verdict]` in the
/// newer folder's study.toml) verdict.json into `new`, prints the table, and fails with the
/// verdict code when a rule fails.
pub fn run(
    old: &Path,
    new: &Path,
    errors: Option<&str>,
    tolerance: Tolerance,
) -> Result<(), Failure> {
    let rules = verdict_of(new)?;
    let (text, outcome) =
        compare_folders(Some(old), new, rules.as_ref(), errors, tolerance, false)?;
    print!("{text}");
    match outcome.and_then(|o| o.failure()) {
        Some(failure) => Err(failure),
        None => Ok(()),
    }
}

/// The `[verdict]` of the study copied into a results folder.
fn verdict_of(dir: &Path) -> Result<Option<Verdict>, Failure> {
    let path = dir.join("study.toml");
    let text = fs::read_to_string(&path).map_err(|e| {
        Failure::Data(format!(
            "{}: {e}; is {} a specgrid results folder?",
            path.display(),
            dir.display()
        ))
    })?;
    match specgrid_study::parse_study(&path, text) {
        Ok(study) => Ok(study.verdict),
        Err(problems) => Err(Failure::Study(
            problems
                .iter()
                .map(|p| p.to_string())
                .collect::<Vec<_>>()
                .join("\n"),
        )),
    }
}

/// Compares `new` with `old` (when given) and judges `rules` (when given), writing the results
/// into `new`. `in_report` is the `run --against` mode: the comparison section goes into
/// `new`'s report.html (a folder still being staged) and an earlier folder that cannot be
/// compared is a warning, not an error; otherwise a standalone comparison.html is written.
pub(crate) fn compare_folders(
    old: Option<&Path>,
    new: &Path,
    rules: Option<&Verdict>,
    errors: Option<&str>,
    tolerance: Tolerance,
    in_report: bool,
) -> Result<(String, Option<Outcome>), Failure> {
    let new_report = report::load(new)?;
    let label = errors.or(rules.and_then(|r| r.errors.as_deref()));
    let comparison = match old {
        Some(old) => {
            let compared = report::load(old).and_then(|old_report| {
                compare(&old_report, &new_report, label, tolerance).map_err(|e| {
                    Failure::Data(format!(
                        "cannot compare {} with {}: {e}",
                        old.display(),
                        new.display()
                    ))
                })
            });
            match compared {
                Ok(c) => Some(c),
                // A run keeps its new results when the earlier folder cannot be compared; the
                // flip rule is then reported as not checked.
                Err(failure) if in_report => {
                    eprintln!("warning: no comparison: {failure}");
                    None
                }
                Err(failure) => return Err(failure),
            }
        }
        None => None,
    };
    let outcome = rules
        .map(|r| judge(r, &new_report, comparison.as_ref()))
        .transpose()?;
    let lines = outcome.as_ref().map(Outcome::lines).unwrap_or_default();
    let mut text = String::new();
    if let Some(c) = &comparison {
        write_atomic(&new.join(COMPARISON_JSON), &c.to_json())?;
        if in_report {
            let page_path = new.join("report.html");
            let page = fs::read_to_string(&page_path)
                .map_err(|e| Failure::Output(format!("{}: {e}", page_path.display())))?;
            let section = comparison_section(c, &lines);
            write_atomic(&page_path, &insert_comparison_section(&page, &section))?;
        } else {
            write_atomic(&new.join(COMPARISON_HTML), &comparison_page(c, &lines))?;
        }
        text.push_str(&comparison_terminal(c));
    }
    if let Some(o) = &outcome {
        write_atomic(&new.join(VERDICT_FILE), &o.to_json()?)?;
        text.push_str(&o.terminal());
    }
    Ok((text, outcome))
}

/// Writes a file beside its final name and renames it into place, so a reader never sees half
/// of it.
fn write_atomic(path: &Path, text: &str) -> Result<(), Failure> {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let partial = path.with_file_name(format!(".{name}.partial"));
    let fail = |e: std::io::Error| Failure::Output(format!("{}: {e}", path.display()));
    fs::write(&partial, text).map_err(|e| {
        let _ = fs::remove_file(&partial);
        fail(e)
    })?;
    fs::rename(&partial, path).map_err(fail)
}
