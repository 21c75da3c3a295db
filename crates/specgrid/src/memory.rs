//! Refusing up front a grid whose results would not fit in memory, with the estimate, before
//! any model is built or any data is read.

use specgrid_study::{GridCount, Study};

use crate::exit::Failure;

/// Bytes a planned model takes (id, choices, term lists).
const BYTES_PER_MODEL: u128 = 320;
/// Bytes per results row in one copy, plus this much per decision dimension. Calibrated on the
/// demo study: peak memory grew by 157 MiB from 100 to 1,908 models (62 → 219 MiB, 38,160
/// tracked rows at most), about 4.3 KiB per row once the fits behind the rows are counted; these
/// constants give 5.1 KiB, erring on the side of refusing.
const BYTES_PER_ROW: u128 = 1000;
const BYTES_PER_ROW_PER_DIMENSION: u128 = 40;
/// Copies of the result rows alive at once: the builder, the polars frame and the writers'
/// buffers, and the report's input. With `--chunk` a second chunk of fits is alive while the
/// results writer works on the first; the measured peak of the 2,048,200-model grid did not
/// move (3.0-3.1 GiB, docs/performance.md), so this count still covers it.
const ROW_COPIES: u128 = 4;
/// Bytes the report keeps per model while a chunked run goes on (id, option indices, status,
/// outcome label), plus this much per covariance choice (its effect). Calibrated on the
/// 2,048,200-model pick grid with `--chunk 200000` (docs/performance.md): peak 3.5 GiB, which
/// these constants reproduced with the plan's share and one chunk of rows. Since the report
/// keeps its models as columns (about 131 bytes a model at two covariance choices, session 8)
/// the same grid peaks at 1.7–1.8 GiB, so the estimate now errs further on the side of
/// refusing; recalibrating it, effect scales other than `coefficient` included, is left open.
const BYTES_PER_REPORT_MODEL: u128 = 300;
const BYTES_PER_REPORT_EFFECT: u128 = 100;

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
    let (held_rows, report_bytes) = match chunk {
        Some(c) if (c as u128) < models => {
            let per_model = rows / models.max(1);
            let per_entry = BYTES_PER_REPORT_MODEL
                + BYTES_PER_REPORT_EFFECT * study.errors.len().max(1) as u128;
            (
                (c as u128 * per_model).saturating_mul(ROW_COPIES),
                models.saturating_mul(per_entry),
            )
        }
        _ => (rows.saturating_mul(ROW_COPIES), 0),
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
