//! Wall-clock seconds per phase of `specgrid run`, printed to stderr with `--timings`.
//!
//! The phases are accumulated in one process-wide table so the run code only wraps each phase in
//! [`time`] (a one-line change where the phase happens) instead of threading a timer through
//! every function. The comparison suite (`bench/run.sh`) reads the printed line to separate the
//! fixed cost per sample (load, factor) from the marginal cost per model (fit).

use std::sync::Mutex;
use std::time::{Duration, Instant};

/// Phases in the order they are printed; anything else a run does is reported as `other`.
pub const PHASES: [&str; 7] = [
    "plan",
    "load",
    "factor",
    "fit",
    "inference",
    "write",
    "report",
];

static SPENT: Mutex<[f64; PHASES.len()]> = Mutex::new([0.0; PHASES.len()]);

/// Runs `work`, adding its wall time to `phase` (one of [`PHASES`]; an unknown name is ignored).
pub fn time<T>(phase: &str, work: impl FnOnce() -> T) -> T {
    let start = Instant::now();
    let result = work();
    add(phase, start.elapsed());
    result
}

fn add(phase: &str, spent: Duration) {
    if let Some(i) = PHASES.iter().position(|p| *p == phase) {
        // A poisoned lock only means another thread panicked while adding; the sums stay usable.
        let mut table = SPENT.lock().unwrap_or_else(|e| e.into_inner());
        table[i] += spent.as_secs_f64();
    }
}

/// The line `--timings` prints: `timings plan=S load=S ... other=S total=S` (seconds), where
/// `other` is the part of `total` outside the named phases.
pub fn summary_line(total: Duration) -> String {
    let table = *SPENT.lock().unwrap_or_else(|e| e.into_inner());
    let total = total.as_secs_f64();
    let named: f64 = table.iter().sum();
    let mut line = String::from("timings");
    for (name, seconds) in PHASES.iter().zip(table) {
        line.push_str(&format!(" {name}={seconds:.3}"));
    }
    line.push_str(&format!(
        " other={:.3} total={total:.3}",
        (total - named).max(0.0)
    ));
    line
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn phases_add_up_and_unknown_names_are_ignored() {
        time("fit", || std::thread::sleep(Duration::from_millis(20)));
        time("no such phase", || ());
        let line = summary_line(Duration::from_secs(5));
        let fit: f64 = line
            .split(' ')
            .find_map(|kv| kv.strip_prefix("fit="))
            .and_then(|v| v.parse().ok())
            .expect("the line has a fit= field");
        assert!(
            fit >= 0.02,
            "fit phase {fit} s should include the 20 ms sleep"
        );
        assert!(line.ends_with("total=5.000"), "{line}");
    }
}
