//! Refusing up front a grid whose results would not fit in memory, with the estimate, before
//! any model is built or any data is read.

use specgrid_study::{EffectScale, GridCount, Study};

use crate::exit::Failure;

// The constants below are the results' memory, the process's fixed part (about 90 MB: the
// binary, thread stacks, polars) left out, measured as peak resident set on the comparison
// suite's 150-region pick grids (292,600 and 2,048,200 models, with and without --chunk,
// coefficient and elasticity scales) and rounded up so that the estimate stays 5–25% above
// every measurement. The nine measurements and the estimates beside them are in
// docs/performance.md, "The memory guard recalibrated"; remeasure there when a constant moves.

/// Bytes a planned model takes (id, choices, term lists, and the run's per-model lists).
const BYTES_PER_MODEL: u128 = 320;
/// Bytes per result row held, every copy counted (the fits behind the rows, the results table,
/// the polars frame and the writers' buffers, and the report's input), plus this much per
/// decision dimension: 1,330 bytes a row measured at 4 dimensions, without chunks and per
/// row of a chunk alike.
const BYTES_PER_ROW: u128 = 1_400;
const BYTES_PER_ROW_PER_DIMENSION: u128 = 50;
/// Bytes the report keeps per model while a chunked run goes on (id, option numbers, flags,
/// outcome label), plus this much per covariance choice (its effect's columns): about 300
/// measured at two choices.
const BYTES_PER_REPORT_MODEL: u128 = 250;
const BYTES_PER_REPORT_EFFECT: u128 = 50;
/// Bytes more per model when the report puts effects on a converted scale (elasticity,
/// semi-elasticity, marginal effect): it keeps each model's evaluation values. Measured about
/// 750 a model in chunked runs and 205 without chunks (where the rows dominate).
const BYTES_PER_CONVERTED_MODEL_CHUNKED: u128 = 850;
const BYTES_PER_CONVERTED_MODEL: u128 = 250;

/// The memory estimate of a run.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Estimate {
    /// Models to estimate.
    pub models: u128,
    /// Result rows (models × covariance choices × tracked terms).
    pub rows: u128,
    /// Bytes.
    pub bytes: u128,
}

/// Estimates the memory of a run's results from the counted grid; with `chunk` (models written
/// at a time) only that many models' rows are held in full, plus each model's entry for the
/// report.
pub fn estimate(study: &Study, count: &GridCount, chunk: Option<usize>) -> Estimate {
    let models = match study.grid.sample {
        Some(n) => count.after_exclusions.min(n as u128),
        None => count.after_exclusions,
    };
    let tracked = study
        .focus
        .forms
        .iter()
        .map(|f| f.terms.len())
        .max()
        .unwrap_or(1)
        + study.focus.also_track.len();
    let rows = models
        .saturating_mul(study.errors.len().max(1) as u128)
        .saturating_mul(tracked.max(1) as u128);
    let per_row = BYTES_PER_ROW + BYTES_PER_ROW_PER_DIMENSION * count.dimensions.len() as u128;
    let converted = study.report.scale != EffectScale::Coefficient;
    let (held_rows, report_bytes) = match chunk {
        Some(c) if (c as u128) < models => {
            let per_model = rows / models.max(1);
            let per_entry = BYTES_PER_REPORT_MODEL
                + BYTES_PER_REPORT_EFFECT * study.errors.len().max(1) as u128
                + if converted {
                    BYTES_PER_CONVERTED_MODEL_CHUNKED
                } else {
                    0
                };
            (c as u128 * per_model, models.saturating_mul(per_entry))
        }
        _ => (
            rows,
            if converted {
                models.saturating_mul(BYTES_PER_CONVERTED_MODEL)
            } else {
                0
            },
        ),
    };
    let bytes = models
        .saturating_mul(BYTES_PER_MODEL)
        .saturating_add(held_rows.saturating_mul(per_row))
        .saturating_add(report_bytes);
    Estimate {
        models,
        rows,
        bytes,
    }
}

/// The memory a run may use: `--max-memory` in MiB, else half of what the system reports as
/// available (Linux `/proc/meminfo`), else no bound.
pub fn budget(max_memory_mib: Option<u64>) -> Option<u128> {
    if let Some(mib) = max_memory_mib {
        return Some(mib as u128 * 1024 * 1024);
    }
    let info = std::fs::read_to_string("/proc/meminfo").ok()?;
    let line = info.lines().find(|l| l.starts_with("MemAvailable:"))?;
    let kib: u128 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kib * 1024 / 2)
}

/// Refuses a run whose estimate exceeds the budget.
pub fn check(
    study: &Study,
    count: &GridCount,
    budget: Option<u128>,
    chunk: Option<usize>,
) -> Result<(), Failure> {
    let Some(budget) = budget else {
        return Ok(());
    };
    let e = estimate(study, count, chunk);
    // Past the grid limit the planner refuses with its own positioned message.
    if e.bytes <= budget || e.models > study.grid.limit {
        return Ok(());
    }
    Err(Failure::Study(format!(
        "{}: the results of this grid would need about {} of memory ({} models × {} covariance choice(s) × tracked terms = {} result rows), more than the {} this run may use; draw fewer models with `sample = N` in [grid], add skip rules, write the results in chunks with --chunk MODELS, or raise the bound with --max-memory (MiB)",
        study.source_path.display(),
        size_text(e.bytes),
        super::commands::thousands(e.models),
        study.errors.len(),
        super::commands::thousands(e.rows),
        size_text(budget),
    )))
}

/// Bytes as MiB or GiB with one decimal.
fn size_text(bytes: u128) -> String {
    let mib = bytes as f64 / (1024.0 * 1024.0);
    if mib >= 1024.0 {
        format!("{:.1} GiB", mib / 1024.0)
    } else {
        format!("{mib:.1} MiB")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_converted_effect_scale_is_counted_per_model() {
        // The measured costs of session 9 (docs/performance.md): with an elasticity scale the
        // report keeps each model's evaluation values, about 750 bytes a model in chunked runs.
        let path = std::path::Path::new("../../specs/orchards.toml");
        let text = include_str!("../../../specs/orchards.toml").to_string();
        let mut study = specgrid_study::parse_study(path, text).expect("the demo study parses");
        let count = specgrid_study::count_grid(&study).expect("the demo grid counts");
        let chunk = Some(100);
        study.report.scale = EffectScale::Coefficient;
        let plain = (
            estimate(&study, &count, None),
            estimate(&study, &count, chunk),
        );
        study.report.scale = EffectScale::Elasticity;
        let converted = (
            estimate(&study, &count, None),
            estimate(&study, &count, chunk),
        );
        let models = plain.0.models;
        assert!(models > 100, "{models} models");
        assert_eq!(
            converted.0.bytes - plain.0.bytes,
            models * BYTES_PER_CONVERTED_MODEL
        );
        assert_eq!(
            converted.1.bytes - plain.1.bytes,
            models * BYTES_PER_CONVERTED_MODEL_CHUNKED
        );
        // A chunk holds fewer rows than the whole grid.
        assert!(plain.1.bytes < plain.0.bytes);
    }
}
