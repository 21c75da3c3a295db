//! Writes the invented orchard demo data as CSV.
//!
//! `make-orchards [--plots N] [--seasons N] [--villages N] [--districts N] [--seed N] --out PATH`
//! (`--out -` writes to standard output). Defaults give the committed 6,000-row demo set.
//! The file appears only when complete: it is written to a temporary file beside the target
//! and renamed into place.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

use specgrid_demo::{generate, OrchardConfig};

const USAGE: &str = "usage: make-orchards [--plots N] [--seasons N] [--villages N] [--districts N] [--seed N] --out PATH
  writes the invented orchard demo data as CSV; --out - writes to standard output.
  defaults: --plots 3000 --seasons 2 --villages 150 --districts 8 (6,000 rows) and a fixed seed.";

fn main() -> ExitCode {
    match run(std::env::args().skip(1).collect()) {
        Ok(()) => ExitCode::SUCCESS,
        Err(message) => {
            eprintln!("make-orchards: {message}");
            ExitCode::from(2)
        }
    }
}

fn run(args: Vec<String>) -> Result<(), String> {
    if args.iter().any(|a| a == "--help" || a == "-h") {
        println!("{USAGE}");
        return Ok(());
    }
    let (cfg, out) = parse_args(&args)?;
    let table = generate(&cfg).map_err(|e| e.to_string())?;
    if out.as_os_str() == "-" {
        let stdout = std::io::stdout();
        return table
            .write_csv(stdout.lock())
            .map_err(|e| format!("writing to standard output failed: {e}"));
    }
    write_atomically(&out, |file| table.write_csv(file))?;
    eprintln!(
        "make-orchards: wrote {} rows to {}",
        table.len(),
        out.display()
    );
    Ok(())
}

fn parse_args(args: &[String]) -> Result<(OrchardConfig, PathBuf), String> {
    let mut cfg = OrchardConfig::default();
    let mut out = None;
    let mut it = args.iter();
    while let Some(flag) = it.next() {
        // A following option name is not a value ("-" alone is: it means standard output).
        let value = it
            .next()
            .filter(|v| !v.starts_with("--"))
            .ok_or_else(|| format!("{flag} needs a value\n{USAGE}"))?;
        let number = || {
            value.parse::<u64>().map_err(|_| {
                format!("{flag} {value}: expected a whole number ≥ 0, for example {flag} 3000")
            })
        };
        let count = || number().and_then(|n| usize::try_from(n).map_err(|e| e.to_string()));
        match flag.as_str() {
            "--plots" => cfg.plots = count()?,
            "--seasons" => cfg.seasons = count()?,
            "--villages" => cfg.villages = count()?,
            "--districts" => cfg.districts = count()?,
            "--seed" => cfg.seed = number()?,
            "--out" => out = Some(PathBuf::from(value)),
            other => return Err(format!("unknown option {other}\n{USAGE}")),
        }
    }
    let out = out.ok_or_else(|| format!("--out PATH is required\n{USAGE}"))?;
    cfg.validate().map_err(|e| e.to_string())?;
    Ok((cfg, out))
}

/// Writes via a temporary file in the target's folder, then renames, so a failure never
/// leaves a half-written file at `path`.
fn write_atomically(
    path: &Path,
    write: impl FnOnce(&mut std::fs::File) -> std::io::Result<()>,
) -> Result<(), String> {
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    let fail = |what: &str, e: std::io::Error| {
        format!(
            "{}: {what} failed: {e}; check that the folder exists and is writable",
            path.display()
        )
    };
    let mut tmp =
        tempfile::NamedTempFile::new_in(dir).map_err(|e| fail("creating a temporary file", e))?;
    write(tmp.as_file_mut()).map_err(|e| fail("writing", e))?;
    tmp.as_file_mut().flush().map_err(|e| fail("flushing", e))?;
    // Temporary files are created owner-only; the data file should be readable like any other.
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        let readable = std::fs::Permissions::from_mode(0o644);
        std::fs::set_permissions(tmp.path(), readable)
            .map_err(|e| fail("setting permissions", e))?;
    }
    tmp.persist(path)
        .map_err(|e| fail("renaming into place", e.error))?;
    Ok(())
}
