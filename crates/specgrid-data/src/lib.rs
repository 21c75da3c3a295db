//! The data layer of specgrid: reads the columns a [`Plan`](specgrid_study::Plan) needs from a
//! CSV or Parquet file ([`load`]), applies sample conditions and transforms, and builds the union
//! designs the engine fits ([`assemble`]). See docs/data-layer.md for the row policy, the
//! transforms and the errors.

// `DataError` variants carry the file, column, sample and counts their messages need; an error
// ends the run, so its size never matters for speed.
#![allow(clippy::result_large_err)]

pub mod assemble;
pub mod atoms;
pub mod column;
pub mod error;
pub mod expand;
pub mod fingerprint;
pub mod loaded;
pub mod needs;
pub mod read;
pub mod sample;
mod settings;
pub mod transform;

pub use assemble::{
    assemble, Assembly, DropCount, DropReason, RowAccount, SampleDesign, INTERCEPT,
};
pub use column::{ColumnValues, LoadedColumn};
pub use error::{DataError, DataWarning, RowPosition};
pub use fingerprint::fingerprint;
pub use loaded::{load, LoadedData};
pub use needs::cluster_columns;
pub use read::FileFormat;
