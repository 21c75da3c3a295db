//! The machine's floor: the faer matrix-product rate on a block of the union design's shape.
//!
//! Times `C = X · B` with X n × p and B p × m (default 100,000 × 40 times 40 × 2,000, the shape
//! the issue names for the union design against a batch of models) on 1 thread and on 2 threads
//! (a rayon pool of that size), fastest of `reps` runs each, and prints GFLOP/s (2·n·p·m flops
//! per product). The comparison suite (`bench/run.sh`) prints these next to its phases, so a
//! phase's time can be read against what the hardware does at best on this shape.
//!
//! Sizes from the environment: SPECGRID_FLOOR_N (100000), SPECGRID_FLOOR_P (40),
//! SPECGRID_FLOOR_M (2000), SPECGRID_FLOOR_REPS (3). Output lines are `floor threads=T
//! seconds=S gflops=G` so scripts can read them.
//!
//! Run: cargo bench -p specgrid-ols --bench floor

use std::time::Instant;

use faer::linalg::matmul::matmul;
use faer::{Accum, Mat, Par};

fn env(name: &str, default: usize) -> usize {
    std::env::var(name)
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
        .max(1)
}

/// Fastest of `reps` products with the given parallelism, in seconds.
fn fastest(x: &Mat<f64>, b: &Mat<f64>, out: &mut Mat<f64>, par: Par, reps: usize) -> f64 {
    (0..reps)
        .map(|_| {
            let start = Instant::now();
            matmul(
                out.as_mut(),
                Accum::Replace,
                x.as_ref(),
                b.as_ref(),
                1.0,
                par,
            );
            start.elapsed().as_secs_f64()
        })
        .fold(f64::INFINITY, f64::min)
}

fn main() {
    let n = env("SPECGRID_FLOOR_N", 100_000);
    let p = env("SPECGRID_FLOOR_P", 40);
    let m = env("SPECGRID_FLOOR_M", 2_000);
    let reps = env("SPECGRID_FLOOR_REPS", 3);
    // Deterministic, non-trivial values; the product's value does not matter, only its speed.
    let x = Mat::from_fn(n, p, |i, j| ((i * 31 + j * 17) % 97) as f64 / 97.0 - 0.5);
    let b = Mat::from_fn(p, m, |i, j| ((i * 13 + j * 7) % 89) as f64 / 89.0 - 0.5);
    let mut out = Mat::<f64>::zeros(n, m);
    let flops = 2.0 * n as f64 * p as f64 * m as f64;
    println!(
        "floor shape: {n} x {p} times {p} x {m} ({flops:.3e} flops per product), fastest of {reps}"
    );
    for threads in [1usize, 2] {
        let par = if threads == 1 {
            Par::Seq
        } else {
            Par::rayon(threads)
        };
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .expect("a rayon pool of 1 or 2 threads");
        let seconds = pool.install(|| fastest(&x, &b, &mut out, par, reps));
        // Read one entry so the product cannot be treated as dead code.
        let probe = out[(n / 2, m / 2)];
        assert!(probe.is_finite(), "product produced a non-finite value");
        println!(
            "floor threads={threads} seconds={seconds:.4} gflops={:.2}",
            flops / seconds / 1e9
        );
    }
}
