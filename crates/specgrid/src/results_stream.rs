//! Writing the results table in chunks: `models.csv` appended chunk by chunk and
//! `models.parquet` as one row group per chunk, so a run with `--chunk N` holds the rows of at
//! most N models at a time however large the grid (docs/cli.md). Without `--chunk` the whole
//! table is one chunk and the files are exactly those of [`crate::results::write_csv`] and
//! [`crate::results::write_parquet`].

use std::fs::File;
use std::path::{Path, PathBuf};

use polars::io::parquet::write::BatchedWriter;
use polars::prelude::*;

use crate::exit::Failure;
use crate::results::{write_csv, write_parquet, ResultsTable};

/// Where one results table goes: a CSV file and, optionally, a Parquet file.
pub struct ChunkWriter {
    csv_path: Option<PathBuf>,
    parquet_path: Option<PathBuf>,
    streaming: bool,
    csv: Option<File>,
    parquet: Option<BatchedWriter<File>>,
}

fn failed(path: &Path, e: impl std::fmt::Display) -> Failure {
    Failure::Output(format!("{}: {e}", path.display()))
}

impl ChunkWriter {
    /// A writer for `csv_path` and `parquet_path` (either may be left out); `streaming` false
    /// means exactly one chunk will be written, with the one-shot writers.
    pub fn new(
        csv_path: Option<PathBuf>,
        parquet_path: Option<PathBuf>,
        streaming: bool,
    ) -> ChunkWriter {
        ChunkWriter {
            csv_path,
            parquet_path,
            streaming,
            csv: None,
            parquet: None,
        }
    }

    /// Writes one chunk of rows.
    pub fn write(&mut self, table: &ResultsTable) -> Result<(), Failure> {
        let mut frame = table.to_frame()?;
        if !self.streaming {
            if let Some(path) = &self.csv_path {
                write_csv(&mut frame, path)?;
            }
            if let Some(path) = &self.parquet_path {
                write_parquet(&mut frame, path)?;
            }
            return Ok(());
        }
        if let Some(csv_path) = &self.csv_path {
            let first = self.csv.is_none();
            if first {
                self.csv = Some(File::create(csv_path).map_err(|e| failed(csv_path, e))?);
            }
            if let Some(file) = self.csv.as_mut() {
                CsvWriter::new(file)
                    .include_header(first)
                    .finish(&mut frame)
                    .map_err(|e| failed(csv_path, e))?;
            }
        }
        if let Some(path) = &self.parquet_path {
            if self.parquet.is_none() {
                let file = File::create(path).map_err(|e| failed(path, e))?;
                self.parquet = Some(
                    ParquetWriter::new(file)
                        .with_compression(crate::results::parquet_compression())
                        .batched(frame.schema())
                        .map_err(|e| failed(path, e))?,
                );
            }
            if let Some(writer) = self.parquet.as_mut() {
                writer.write_batch(&frame).map_err(|e| failed(path, e))?;
            }
        }
        Ok(())
    }

    /// Closes the files (the Parquet footer is written here).
    pub fn finish(self) -> Result<(), Failure> {
        if let (Some(writer), Some(path)) = (self.parquet, &self.parquet_path) {
            writer.finish().map_err(|e| failed(path, e))?;
        }
        Ok(())
    }
}
