//! `specgrid demo-data`: the invented orchard data at any scale, as CSV or Parquet.

use std::fs::File;
use std::io::BufWriter;
use std::path::Path;

use polars::prelude::*;
use specgrid_demo::{generate, ColumnValues, OrchardConfig, OrchardTable};

use crate::exit::Failure;
use crate::results::write_parquet;

/// Generates the table and writes it to `out` (format chosen by extension), atomically.
pub fn run(
    plots: usize,
    seasons: usize,
    villages: Option<usize>,
    seed: Option<u64>,
    out: &Path,
) -> Result<(), Failure> {
    let defaults = OrchardConfig::default();
    let config = OrchardConfig {
        plots,
        seasons,
        villages: villages.unwrap_or_else(|| (plots / 20).max(defaults.districts)),
        seed: seed.unwrap_or(defaults.seed),
        ..defaults
    };
    let table = generate(&config).map_err(|e| Failure::Data(format!("demo data: {e}")))?;
    let extension = out
        .extension()
        .map(|e| e.to_string_lossy().to_lowercase())
        .unwrap_or_default();
    let partial = out.with_extension(format!("{extension}.partial"));
    let written = match extension.as_str() {
        "csv" => write_csv(&table, &partial),
        "parquet" => write_parquet(&mut to_frame(&table)?, &partial),
        _ => {
            return Err(Failure::Output(format!(
                "{}: choose a file name ending in .csv or .parquet",
                out.display()
            )))
        }
    };
    if let Err(e) = written {
        let _ = std::fs::remove_file(&partial);
        return Err(e);
    }
    std::fs::rename(&partial, out)
        .map_err(|e| Failure::Output(format!("{}: {e}", out.display())))?;
    eprintln!("wrote {} rows to {}", table.len(), out.display());
    Ok(())
}

fn write_csv(table: &OrchardTable, path: &Path) -> Result<(), Failure> {
    let file =
        File::create(path).map_err(|e| Failure::Output(format!("{}: {e}", path.display())))?;
    table
        .write_csv(BufWriter::new(file))
        .map_err(|e| Failure::Output(format!("{}: {e}", path.display())))
}

/// The demo table as a polars frame, column for column.
fn to_frame(table: &OrchardTable) -> Result<DataFrame, Failure> {
    let columns = table
        .columns()
        .into_iter()
        .map(|c| match c.values {
            ColumnValues::Float(v) => Column::new(c.name.into(), v),
            ColumnValues::FloatOpt(v) => Column::new(c.name.into(), v),
            ColumnValues::Int(v) => Column::new(c.name.into(), v),
            ColumnValues::Text(coded) => {
                Column::new(c.name.into(), coded.iter().collect::<Vec<&str>>())
            }
        })
        .collect();
    DataFrame::new(table.len(), columns)
        .map_err(|e| Failure::Output(format!("cannot build the demo frame: {e}")))
}
