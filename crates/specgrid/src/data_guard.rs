//! Reading the data file defensively for unattended runs: a CSV file's shape is checked before
//! polars reads it (a file cut short by a failed copy, or a row with a stray comma, would
//! otherwise become missing or shifted cells), and a reader that panics on a damaged file
//! becomes an ordinary data error naming the file instead of a crash.

use std::cell::Cell;
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::Path;

use specgrid_data::{Assembly, LoadedData};
use specgrid_study::Plan;

use crate::exit::Failure;

thread_local! {
    /// Set while a guarded reader runs, so the panic hook stays quiet: the panic is reported
    /// as a data error instead.
    static GUARDED: Cell<bool> = const { Cell::new(false) };
}

/// Installs a panic hook that is silent inside [`load_and_assemble`] and otherwise prints the
/// usual message (an internal error).
pub fn install_panic_hook() {
    let default = std::panic::take_hook();
    std::panic::set_hook(Box::new(move |info| {
        if !GUARDED.with(Cell::get) {
            default(info);
        }
    }));
}

/// Checks, loads and assembles the data of a plan.
pub fn load_and_assemble(plan: &Plan) -> Result<(LoadedData, Assembly), Failure> {
    let path = &plan.data_path;
    let is_csv = path
        .extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| e.eq_ignore_ascii_case("csv"));
    if is_csv && path.is_file() {
        check_csv_shape(path)?;
    }
    GUARDED.with(|g| g.set(true));
    let outcome = catch_unwind(AssertUnwindSafe(|| {
        let data = specgrid_data::load(plan).map_err(|e| Failure::Data(e.to_string()))?;
        let assembly =
            specgrid_data::assemble(plan, &data).map_err(|e| Failure::Data(e.to_string()))?;
        Ok((data, assembly))
    }));
    GUARDED.with(|g| g.set(false));
    outcome.unwrap_or_else(|payload| {
        let detail = payload
            .downcast_ref::<String>()
            .map(String::as_str)
            .or_else(|| payload.downcast_ref::<&str>().copied())
            .unwrap_or("no detail");
        Err(Failure::Data(format!(
            "{}: the file is damaged and cannot be read (the reader stopped: {detail}); write or copy the file again",
            path.display()
        )))
    })
}

/// Every record must have as many fields as the header, and no cell may run over several lines
/// (the polars reader refuses those without saying where). Names the first line that breaks a
/// rule, and recognises a file cut short (last line without a line end).
fn check_csv_shape(path: &Path) -> Result<(), Failure> {
    let bad = |message: String| Failure::Data(format!("{}: {message}", path.display()));
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(true)
        .flexible(true)
        .from_path(path)
        .map_err(|e| bad(format!("cannot read the file: {e}")))?;
    let width = reader
        .byte_headers()
        .map_err(|e| bad(format!("cannot read the header: {e}")))?
        .len();
    let mut record = csv::ByteRecord::new();
    loop {
        match reader.read_byte_record(&mut record) {
            Ok(false) => return Ok(()),
            Ok(true) => {
                let spans_lines = record.iter().any(|field| field.contains(&b'\n'));
                if record.len() == width && !spans_lines {
                    continue;
                }
                let line = record.position().map_or(0, |p| p.line());
                let at_end = !reader
                    .read_byte_record(&mut csv::ByteRecord::new())
                    .unwrap_or(false);
                let hint = if spans_lines {
                    "a cell starting here runs over several lines: a quote opened on this line is probably never closed"
                } else if at_end && record.len() < width && !ends_with_newline(path) {
                    "the file looks cut short (its last line has no line end): copy or export it again"
                } else if record.len() > width {
                    "look for a stray separator or a text cell that needs quotes"
                } else {
                    "fill in the missing cells (leave a cell empty between two commas for a missing value)"
                };
                return Err(bad(format!(
                    "line {line} has {} fields where the header has {width}; {hint}",
                    record.len()
                )));
            }
            Err(e) => return Err(bad(format!("not a readable CSV file: {e}"))),
        }
    }
}

fn ends_with_newline(path: &Path) -> bool {
    use std::io::{Read, Seek, SeekFrom};
    let Ok(mut file) = std::fs::File::open(path) else {
        return false;
    };
    let mut last = [0u8; 1];
    file.seek(SeekFrom::End(-1)).is_ok() && file.read_exact(&mut last).is_ok() && last[0] == b'\n'
}
