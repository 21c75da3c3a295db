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

/// Models per block rendered on one thread: large enough that a block's buffer is worth the
/// hand-off, small enough that two threads share a grid of a few thousand models.
const BLOCK_MODELS: usize = 4096;

/// Blocks rendered side by side before they are written: enough to keep the threads busy, few
/// enough that the file never sits in memory whole (about 35 MB at two error choices).
const BLOCKS_PER_ROUND: usize = 32;

/// Renders `effects.csv` into a string (see [`write`]).
pub fn render(report: &Report) -> String {
    let mut out = Vec::new();
    // Writing into memory cannot fail.
    let _ = write(report, &mut out);
    // The csv writer only ever writes the UTF-8 it is given.
    String::from_utf8(out).unwrap_or_else(|e| String::from_utf8_lossy(e.as_bytes()).into_owned())
}

/// Writes `effects.csv` (models in input order, covariance choices in study order; failed
/// models are left out, they are listed in models.csv).
///
/// Rounds of blocks of models are rendered on the rayon threads and written in order, so the
/// text does not depend on the thread count and a two-million-model file (half a gigabyte) is
/// never held whole; each round is written while the next is rendered. Each number is
/// formatted by `ryu` into a stack buffer (at two million models this file holds forty million
/// numbers, and the standard formatter was most of the report's time; docs/performance.md), and
/// rows are assembled as [`render_block`] says.
pub fn write(report: &Report, out: &mut (impl std::io::Write + Send)) -> std::io::Result<()> {
    use rayon::prelude::*;
    let input = &report.input;
    out.write_all(EFFECTS_COLUMNS.join(",").as_bytes())?;
    out.write_all(b"\n")?;
    let n = input.models.len();
    let write_round = |out: &mut (dyn std::io::Write + Send), blocks: &[Vec<u8>]| {
        blocks.iter().try_for_each(|block| out.write_all(block))
    };
    let mut rendered: Vec<Vec<u8>> = Vec::new();
    for round in (0..n).step_by(BLOCK_MODELS * BLOCKS_PER_ROUND) {
        let round_end = (round + BLOCK_MODELS * BLOCKS_PER_ROUND).min(n);
        let (written, next) = rayon::join(
            || write_round(out, &rendered),
            || {
                (round..round_end)
                    .into_par_iter()
                    .step_by(BLOCK_MODELS)
                    .map(|start| render_block(input, start..(start + BLOCK_MODELS).min(round_end)))
                    .collect::<Vec<Vec<u8>>>()
            },
        );
        written?;
        rendered = next;
    }
    write_round(out, &rendered)
}

/// The rows of one block of models, without the header. Rows are assembled byte by byte:
/// numbers never need quotes, the covariance labels are quoted once per block, and an id only
/// when it holds a special byte, as the `csv` writer quotes (a test holds the two together);
/// going through the `csv` writer field by field was a third of this file's time.
fn render_block(input: &crate::ReportInput, models: std::ops::Range<usize>) -> Vec<u8> {
    let mut out = Vec::with_capacity(models.len() * input.error_labels.len() * 130);
    let labels: Vec<Vec<u8>> = input
        .error_labels
        .iter()
        .map(|l| {
            let mut quoted = Vec::new();
            push_text(&mut quoted, l);
            quoted
        })
        .collect();
    let mut cell = ryu::Buffer::new();
    for m in models {
        for (e, label) in labels.iter().enumerate() {
            let Some(f) = input.models.effect(m, e) else {
                continue;
            };
            let se = f.std_error.filter(|s| s.is_finite() && *s > 0.0);
            let half = se.map(|s| {
                let q = crate::stats::interval_multiplier(input.confidence_level, f.df);
                q * s
            });
            push_text(&mut out, input.models.id(m));
            out.push(b',');
            out.extend_from_slice(label);
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
                out.push(b',');
                out.extend_from_slice(number_text(&mut cell, value).as_bytes());
            }
            out.push(b'\n');
        }
    }
    out
}

/// Appends a text field as the `csv` writer writes it by default: in double quotes, with
/// quotes doubled, when it holds a comma, a quote, a carriage return or a line feed; as it is
/// otherwise.
fn push_text(out: &mut Vec<u8>, field: &str) {
    let bytes = field.as_bytes();
    if !bytes
        .iter()
        .any(|&b| matches!(b, b',' | b'"' | b'\r' | b'\n'))
    {
        out.extend_from_slice(bytes);
        return;
    }
    out.push(b'"');
    for &b in bytes {
        if b == b'"' {
            out.push(b'"');
        }
        out.push(b);
    }
    out.push(b'"');
}

/// Shortest round-trip text of a finite number, as Rust's `{}` writes it (`143`, `0.25`) but in
/// exponent form below 1e-5 and from 1e16 on (`1.9e-5`, so a p-value of 1e-120 is not written as
/// 120 zeros); empty for missing or non-finite values.
///
/// `ryu` picks the same shortest digits as the standard formatter and switches to exponent form
/// at the same magnitudes; it only writes integers as `143.0`, so that `.0` is dropped. Where two
/// 17-digit texts are equally close to the number, the last digit may differ from the standard
/// formatter's; both read back to the same number.
fn number_text(buffer: &mut ryu::Buffer, v: Option<f64>) -> &str {
    match v.filter(|x| x.is_finite()) {
        Some(x) => {
            let text = buffer.format_finite(x);
            text.strip_suffix(".0").unwrap_or(text)
        }
        None => "",
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn text_fields_are_quoted_as_the_csv_writer_quotes_them() {
        let fields = [
            "plain",
            "",
            "a,b",
            "say \"hi\"",
            "line\nbreak",
            "cr\rhere",
            " spaced ",
            "#hash",
            "cluster:village",
            "ünïcode, too",
        ];
        for field in fields {
            // Reference: the csv crate's writer, as this file was written before.
            let mut w = csv::WriterBuilder::new()
                .terminator(csv::Terminator::Any(b'\n'))
                .from_writer(Vec::new());
            w.write_record([field, "x"]).unwrap();
            let expected = w.into_inner().unwrap();
            let mut ours = Vec::new();
            push_text(&mut ours, field);
            ours.extend_from_slice(b",x\n");
            assert_eq!(
                String::from_utf8(ours).unwrap(),
                String::from_utf8(expected).unwrap(),
                "field {field:?}"
            );
        }
    }

    /// The text the standard formatter gives under the file's rule (reference: Rust's `{}` and
    /// `{:e}`, which the file used before `ryu`).
    fn standard(x: f64) -> String {
        if x != 0.0 && (x.abs() < 1e-5 || x.abs() >= 1e16) {
            format!("{x:e}")
        } else {
            format!("{x}")
        }
    }

    #[test]
    fn numbers_read_as_the_standard_formatter_writes_them() {
        let mut values = vec![
            0.0,
            -0.0,
            143.0,
            -7.0,
            0.1 + 0.2,
            1e-5,
            9.999999999999999e-6,
            1.9439792587639093e-5,
            1e15,
            1e16,
            1.5e16,
            -2.5e17,
            1e-120,
            5e-324,
            f64::MAX,
            f64::MIN_POSITIVE,
            0.6524639640417972,
        ];
        // A deterministic spread over many magnitudes and digit counts.
        let mut x = 0.123456789f64;
        for i in 0..4000 {
            x = (x * 7.3 + 0.917).fract();
            values.push((x - 0.5) * 10f64.powi(i % 50 - 25));
            values.push(((i as f64) * 0.37).round() * 10f64.powi(i % 20));
        }
        let mut buffer = ryu::Buffer::new();
        let mut ties = 0;
        for v in values {
            let (ours, theirs) = (number_text(&mut buffer, Some(v)).to_string(), standard(v));
            assert_eq!(
                ours.parse::<f64>().unwrap().to_bits(),
                v.to_bits(),
                "{ours}"
            );
            if ours != theirs {
                // A tie between two 17-digit texts equally close to the number: both read back
                // to it; the texts differ in the last digit only.
                assert_eq!(ours.len(), theirs.len(), "{ours} vs {theirs}");
                let common = ours.len() - 1;
                assert_eq!(ours[..common], theirs[..common], "{ours} vs {theirs}");
                ties += 1;
            }
        }
        assert!(ties < 20, "{ties} texts differ from the standard formatter");
        assert_eq!(number_text(&mut buffer, Some(f64::NAN)), "");
        assert_eq!(number_text(&mut buffer, Some(f64::INFINITY)), "");
        assert_eq!(number_text(&mut buffer, None), "");
    }
}
