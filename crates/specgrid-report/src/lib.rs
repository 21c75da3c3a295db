//! The robustness report of a specification grid: aggregates over the models and the
//! renderers (terminal text, `summary.json`, `report.html`, `report.md`, `appendix.tex`).
//!
//! # Contract with the binary
//!
//! 1. Build a [`ReportInput`]: the decisions ([`DimensionInfo`]), the covariance choice labels,
//!    and the [`Models`] table: per model the tracked effect under each covariance choice.
//!    - `specgrid run`: for each model and covariance choice call [`effect()`] with the model's
//!      outcome and focus forms, focus coefficients, their SEs (and covariance matrix if the
//!      engine provides one), and the evaluation point (means of the raw focus and outcome over
//!      the model's rows unless the study names values; the raw focus sd for a standardized
//!      focus; the moderator value for an interaction).
//!    - `specgrid report DIR`: read `models.csv` into [`ResultRow`]s and call
//!      [`ReportInput::from_rows`] (scale `coefficient`).
//! 2. Call [`Report::build`], then write its outputs with [`Report::write_all`] (or take the
//!    strings: [`Report::summary_json`], [`Report::terminal`], [`Report::html`],
//!    [`Report::markdown`], [`Report::latex`]). The same input always gives the same bytes.
//!
//! Mapping the planner's transforms (crates/specgrid-study/src/plan.rs) to [`FocusForm`]:
//! `Level` → `Level`, `Log` → `Log`, `Log1p` → `Log1p`, `Asinh` → `Asinh`, a focus form with
//! terms x, x², …, x^d (`Level` then `Power(2..=d)`) → `Polynomial(d)`, `Standardize` →
//! `Standardized`, `Winsorize` → `Winsorized`. An interaction passed as `interaction` must be the
//! product of the **raw** focus column with the moderator (as in the demo's `visits × irrigated`).
//!
//! The crate never reads data files and does not depend on polars or faer.

#![warn(missing_docs)]

mod across_grid;
mod aggregate;
mod comparison;
mod comparison_html;
mod curve;
mod effect;
mod effects_csv;
mod html;
mod input;
mod latex;
mod markdown;
mod models;
mod rows;
mod stats;
mod summary;
mod svg;
mod terminal;
mod text;

use std::path::Path;

pub use across_grid::{
    AcrossGrid, BlockPart, DecompositionResult, JointTestResult, StabilityResult,
};
pub use aggregate::{baseline_index, significance, summarize, CAUTIONS, SUMMARY_FORMAT};
pub use comparison::{
    compare, AggregateChange, Comparison, ModelChange, Tolerance, COMPARISON_FORMAT,
};
pub use comparison_html::{
    insert_section as insert_comparison_section, render_page as comparison_page,
    render_section as comparison_section, render_terminal as comparison_terminal, VerdictLine,
};
pub use effect::{
    effect, Derived, Effect, EffectError, EffectInputs, EvaluationPoint, FocusForm, OutcomeForm,
    Scale,
};
pub use effects_csv::{parse as parse_effects_csv, StoredEffects, EFFECTS_COLUMNS};
pub use input::{DimensionInfo, ModelEntry, ModelStatus, ReportInput};
pub use models::{FitStats, ModelRef, Models, NewModel};
pub use rows::{dimensions_from_rows, lead_term_label, ReportHeader, ResultRow};
pub use summary::*;

/// Why a report cannot be built or written.
#[derive(Debug, thiserror::Error)]
pub enum ReportError {
    /// The input is inconsistent (a bug in the caller or a damaged results folder).
    #[error("report input: {0}")]
    Input(String),
    /// A results row cannot be used.
    #[error("models.csv row {row}: {message}")]
    Row {
        /// 1-based data row number (the header is row 0).
        row: usize,
        /// What is wrong and what to do.
        message: String,
    },
    /// An output file could not be written.
    #[error("cannot write {path}: {source}; check that the folder exists and is writable")]
    Write {
        /// The file.
        path: String,
        /// The cause.
        source: std::io::Error,
    },
}

/// A built report: the input and its aggregates, ready to render.
#[derive(Debug, Clone)]
pub struct Report {
    /// What the report was built from.
    pub input: ReportInput,
    /// The aggregates.
    pub summary: Summary,
    /// The models of the first covariance choice sorted by estimate, ties by id, as (estimate,
    /// model index): sorted once for the summary, drawn in this order by the curve.
    curve_order: Vec<(f64, usize)>,
    /// The specification curve's sorted points, made by the first figure that needs them.
    curve: std::sync::OnceLock<curve::Curve>,
}

/// File names [`Report::write_all`] writes, in order.
pub const OUTPUT_FILES: [&str; 5] = [
    "summary.json",
    "effects.csv",
    "report.html",
    "report.md",
    "appendix.tex",
];

/// Position of effects.csv in [`OUTPUT_FILES`] (streamed, not rendered to a string).
const EFFECTS_FILE: usize = 1;

impl Report {
    /// Checks the input and computes the aggregates.
    pub fn build(input: ReportInput) -> Result<Report, ReportError> {
        let (summary, first_order) = aggregate::summarize_with_order(&input)?;
        Ok(Report {
            input,
            summary,
            curve_order: first_order,
            curve: std::sync::OnceLock::new(),
        })
    }

    /// `summary.json`: pretty-printed, keys in a fixed order, numbers in shortest round-trip
    /// form, non-finite numbers as `null`, ending in a newline.
    pub fn summary_json(&self) -> String {
        let mut s = serde_json::to_string_pretty(&self.summary)
            .unwrap_or_else(|e| format!("{{\"error\": \"{e}\"}}"));
        s.push('\n');
        s
    }

    /// `effects.csv`: one row per model and covariance choice with the effect, its interval and
    /// p-value, and the derived quantities with their SEs (columns: [`EFFECTS_COLUMNS`]).
    pub fn effects_csv(&self) -> String {
        effects_csv::render(self)
    }

    /// The compact terminal summary.
    pub fn terminal(&self) -> String {
        terminal::render(self)
    }

    /// The self-contained `report.html`.
    pub fn html(&self) -> String {
        html::render(self)
    }

    /// `report.md`.
    pub fn markdown(&self) -> String {
        markdown::render(self)
    }

    /// `appendix.tex`: a table and a TikZ figure of the specification curve.
    pub fn latex(&self) -> String {
        latex::render(self)
    }

    /// Writes [`OUTPUT_FILES`] into `dir`. All files are first written beside their final names
    /// and renamed into place only when every one is complete, so a failure never leaves a
    /// half-written file or a mix of old and new files from a failed write.
    pub fn write_all(&self, dir: &Path) -> Result<(), ReportError> {
        let staged: Vec<(std::path::PathBuf, std::path::PathBuf)> = OUTPUT_FILES
            .iter()
            .map(|name| (dir.join(format!(".{name}.partial")), dir.join(name)))
            .collect();
        // effects.csv (by far the largest) goes to its file round by round on the rayon
        // threads while the other files are rendered beside it, one task each.
        let renderers: [&(dyn Fn(&Report) -> String + Sync); 4] = [
            &Report::summary_json,
            &Report::html,
            &Report::markdown,
            &Report::latex,
        ];
        let effects_path = &staged[EFFECTS_FILE].0;
        let (effects_written, contents) = rayon::join(
            || {
                let file = std::fs::File::create(effects_path)?;
                let mut out = std::io::BufWriter::with_capacity(1 << 20, file);
                effects_csv::write(self, &mut out)?;
                std::io::Write::flush(&mut out)
            },
            || {
                use rayon::prelude::*;
                renderers
                    .par_iter()
                    .map(|render| render(self))
                    .collect::<Vec<String>>()
            },
        );
        let fail = |path: &Path, source| ReportError::Write {
            path: path.display().to_string(),
            source,
        };
        // The other files, in OUTPUT_FILES order around effects.csv.
        let others = staged
            .iter()
            .enumerate()
            .filter(|(i, _)| *i != EFFECTS_FILE);
        let mut written: Vec<std::io::Result<()>> = others
            .zip(contents)
            .map(|((_, (partial, _)), text)| std::fs::write(partial, text))
            .collect();
        written.insert(EFFECTS_FILE, effects_written);
        for ((_, target), result) in staged.iter().zip(written) {
            if let Err(e) = result {
                for (p, _) in &staged {
                    let _ = std::fs::remove_file(p);
                }
                return Err(fail(target, e));
            }
        }
        for (partial, target) in &staged {
            std::fs::rename(partial, target).map_err(|e| fail(target, e))?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn streamed_file_is_effects_csv() {
        assert_eq!(OUTPUT_FILES[EFFECTS_FILE], "effects.csv");
    }
}
