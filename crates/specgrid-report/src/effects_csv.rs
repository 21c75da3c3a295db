//! `effects.csv`: every model's effect under every covariance choice, with its interval, p-value
//! and the derived quantities (exp(b) − 1, turning point) and their delta-method SEs.

use std::collections::HashMap;

use crate::effect::{Derived, Effect};
use crate::stats::two_sided_p;
use crate::{Report, ReportError};

/// Column names of `effects.csv`, in order.
pub const EFFECTS_COLUMNS: [&str; 12] = [
    "model_id",
    "errors",
    "estimate",
    "std_error",
    "ci_low",
    "ci_high",
    "p_value",
    "df",
    "proportional_change",
    "proportional_change_se",
    "turning_point",
    "turning_point_se",
];

/// Renders `effects.csv` (models in input order, covariance choices in study order; failed
/// models are left out, they are listed in models.csv).
///
/// Fields go one by one to the `csv` writer (which quotes them), each number formatted into one
/// reused buffer: at two million models a string per cell was tens of millions of allocations.
pub fn render(report: &Report) -> String {
    let input = &report.input;
    let capacity = 64 + input.models.len() * input.error_labels.len() * 130;
    let mut w = csv::WriterBuilder::new()
        .terminator(csv::Terminator::Any(b'\n'))
        .from_writer(Vec::with_capacity(capacity));
    // Writing into memory cannot fail; a failure would only truncate the text.
    let _ = write_rows(input, &mut w);
    w.into_inner()
        .ok()
        .and_then(|b| String::from_utf8(b).ok())
        .unwrap_or_default()
}

fn write_rows(input: &crate::ReportInput, w: &mut csv::Writer<Vec<u8>>) -> csv::Result<()> {
    w.write_record(EFFECTS_COLUMNS)?;
    let mut cell = String::new();
    for m in &input.models {
        for (e, label) in input.error_labels.iter().enumerate() {
            let Some(f) = m.effects[e] else { continue };
            let se = f.std_error.filter(|s| s.is_finite() && *s > 0.0);
            let half = se.map(|s| {
                let q = crate::stats::interval_multiplier(input.confidence_level, f.df);
                q * s
            });
            w.write_field(&m.model_id)?;
            w.write_field(label)?;
            for value in [
                Some(f.estimate),
                f.std_error,
                half.map(|h| f.estimate - h),
                half.map(|h| f.estimate + h),
                f.p_value
                    .or_else(|| se.map(|s| two_sided_p(f.estimate / s, f.df))),
                Some(f.df),
                f.proportional_change.map(|d| d.value),
                f.proportional_change.and_then(|d| d.std_error),
                f.turning_point.map(|d| d.value),
                f.turning_point.and_then(|d| d.std_error),
            ] {
                cell.clear();
                push_cell(&mut cell, value);
                w.write_field(&cell)?;
            }
            w.write_record(None::<&[u8]>)?;
        }
    }
    Ok(())
}

/// Shortest round-trip text of a finite number (exponent form for very small or very large
/// magnitudes, so a p-value of 1e-120 is not written as 120 zeros); empty for missing or
/// non-finite values. Appended to `out` without allocating.
fn push_cell(out: &mut String, v: Option<f64>) {
    use std::fmt::Write;
    if let Some(x) = v.filter(|x| x.is_finite()) {
        // Writing into a String cannot fail.
        let _ = if x != 0.0 && (x.abs() < 1e-5 || x.abs() >= 1e16) {
            write!(out, "{x:e}")
        } else {
            write!(out, "{x}")
        };
    }
}

/// Every model's effects read back from `effects.csv`, keyed by model id, then by covariance
/// label. Used to re-render a report on the study's scale without re-estimating.
pub type StoredEffects = HashMap<String, HashMap<String, Effect>>;

/// Parses `effects.csv` as [`render`] writes it. Errors name the row and what to do.
pub fn parse(text: &str) -> Result<StoredEffects, ReportError> {
    let mut reader = csv::ReaderBuilder::new().from_reader(text.as_bytes());
    let headers = reader
        .headers()
        .map_err(|e| ReportError::Input(format!("effects.csv: {e}")))?
        .clone();
    if headers.iter().ne(EFFECTS_COLUMNS.iter().copied()) {
        return Err(ReportError::Input(format!(
            "effects.csv: the header must be {}; the file is damaged or from another version, re-run the study",
            EFFECTS_COLUMNS.join(",")
        )));
    }
    let mut out: StoredEffects = HashMap::new();
    for (n, record) in reader.records().enumerate() {
        let row = n + 1;
        let bad = |message: String| ReportError::Row { row, message };
        let record = record.map_err(|e| bad(format!("effects.csv: {e}")))?;
        let number = |i: usize| -> Result<Option<f64>, ReportError> {
            let cell = record.get(i).unwrap_or("");
            if cell.is_empty() {
                return Ok(None);
            }
            cell.parse::<f64>().map(Some).map_err(|_| {
                bad(format!(
                    "effects.csv column `{}` holds `{cell}`, not a number; re-run the study",
                    EFFECTS_COLUMNS[i]
                ))
            })
        };
        let derived = |v: usize, se: usize| -> Result<Option<Derived>, ReportError> {
            Ok(number(v)?.map(|value| Derived {
                value,
                std_error: number(se).ok().flatten(),
            }))
        };
        let estimate = number(2)?.ok_or_else(|| bad("effects.csv: empty `estimate`".into()))?;
        let effect = Effect {
            estimate,
            std_error: number(3)?,
            df: number(7)?.unwrap_or(f64::INFINITY),
            proportional_change: derived(8, 9)?,
            turning_point: derived(10, 11)?,
            p_value: number(6)?,
        };
        out.entry(record.get(0).unwrap_or("").to_string())
            .or_default()
            .insert(record.get(1).unwrap_or("").to_string(), effect);
    }
    Ok(out)
}
