//! Model grids shared by the engine benchmarks (seeded, invented).

use rand::Rng;
use rand_chacha::ChaCha8Rng;
use specgrid_ols::ModelSpec;

/// `count` models on outcome 0: the intercept (column 0) and distinct random columns from
/// 1..p up to a random size in `sizes`, tracking the first non-intercept column.
pub fn random_models(
    count: usize,
    p: usize,
    sizes: std::ops::RangeInclusive<usize>,
    rng: &mut ChaCha8Rng,
) -> Vec<ModelSpec> {
    (0..count)
        .map(|_| {
            let k = rng.random_range(sizes.clone()).min(p);
            let mut cols = vec![0];
            while cols.len() < k {
                let c = rng.random_range(1..p);
                if !cols.contains(&c) {
                    cols.push(c);
                }
            }
            let tracked = vec![cols[1]];
            ModelSpec {
                columns: cols,
                outcome: 0,
                tracked,
            }
        })
        .collect()
}
