//! A content fingerprint of the data file for manifests and reports.

use std::fs::File;
use std::io::Read;
use std::path::Path;

use sha2::{Digest, Sha256};

use crate::error::DataError;

/// SHA-256 of the file's bytes as 64 lowercase hex digits. Reads the file in chunks, so large
/// files need little memory.
pub fn fingerprint(path: &Path) -> Result<String, DataError> {
    let unreadable = |e: std::io::Error| DataError::Unreadable {
        path: path.to_path_buf(),
        format: "data",
        detail: e.to_string(),
    };
    let mut file = File::open(path).map_err(unreadable)?;
    let mut hasher = Sha256::new();
    let mut buffer = vec![0u8; 1 << 16];
    loop {
        let n = file.read(&mut buffer).map_err(unreadable)?;
        if n == 0 {
            break;
        }
        hasher.update(&buffer[..n]);
    }
    Ok(hasher
        .finalize()
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect())
}
