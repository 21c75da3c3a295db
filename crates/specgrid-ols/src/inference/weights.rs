//! Wild-bootstrap weights: seeded draws and the full enumeration for few clusters.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha20Rng;

/// Distribution of the wild-bootstrap multipliers.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BootstrapWeights {
    /// ±1 with probability 1/2 each (Rademacher).
    Rademacher,
    /// Webb's six-point distribution: ±√(1/2), ±1, ±√(3/2), each with probability 1/6
    /// (Webb 2023), for very few clusters where the 2^G Rademacher draws are too coarse.
    Webb,
}

/// Webb's six values, in a fixed order.
const WEBB: [f64; 6] = [
    -1.224_744_871_391_589, // −√(3/2)
    -1.0,
    -std::f64::consts::FRAC_1_SQRT_2,
    std::f64::consts::FRAC_1_SQRT_2,
    1.0,
    1.224_744_871_391_589,
];

impl BootstrapWeights {
    /// Number of support points.
    fn points(self) -> usize {
        match self {
            BootstrapWeights::Rademacher => 2,
            BootstrapWeights::Webb => 6,
        }
    }

    /// Support point `i` (`i < points()`).
    fn value(self, i: usize) -> f64 {
        match self {
            BootstrapWeights::Rademacher => {
                if i == 0 {
                    1.0
                } else {
                    -1.0
                }
            }
            BootstrapWeights::Webb => WEBB[i],
        }
    }

    /// Number of distinct weight vectors over `groups` groups, if it fits in `usize`.
    pub(crate) fn support_size(self, groups: usize) -> Option<usize> {
        self.points().checked_pow(u32::try_from(groups).ok()?)
    }

    /// Weight vector number `index` of the full enumeration (mixed-radix digits), written into
    /// `out` (one per group). Index 0 is all +1 for Rademacher.
    pub(crate) fn enumerated(self, mut index: usize, out: &mut [f64]) {
        let b = self.points();
        for o in out.iter_mut() {
            *o = self.value(index % b);
            index /= b;
        }
    }

    /// Draw number `draw` of a seeded stream: each draw has its own ChaCha20 stream, so the
    /// weights do not depend on how draws are split among threads.
    pub(crate) fn seeded(self, seed: u64, draw: u64, out: &mut [f64]) {
        let mut rng = ChaCha20Rng::seed_from_u64(seed);
        rng.set_stream(draw);
        let b = self.points();
        for o in out.iter_mut() {
            *o = self.value(rng.random_range(0..b));
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn webb_points_have_mean_zero_and_unit_variance() {
        // Webb (2023): the six-point distribution has E v = 0, E v² = 1 (as Rademacher does).
        let mean: f64 = WEBB.iter().sum::<f64>() / 6.0;
        let var: f64 = WEBB.iter().map(|v| v * v).sum::<f64>() / 6.0;
        assert!(mean.abs() < 1e-15);
        assert!((var - 1.0).abs() < 1e-15);
        assert!((WEBB[5] - 1.5f64.sqrt()).abs() < 1e-15);
    }

    #[test]
    fn enumeration_covers_every_sign_pattern_once() {
        let w = BootstrapWeights::Rademacher;
        let mut seen = std::collections::HashSet::new();
        let mut v = [0.0; 3];
        for i in 0..w.support_size(3).unwrap() {
            w.enumerated(i, &mut v);
            seen.insert(v.map(|x| x > 0.0));
        }
        assert_eq!(seen.len(), 8);
    }

    #[test]
    fn seeded_draws_repeat_and_differ_between_streams() {
        let w = BootstrapWeights::Rademacher;
        let (mut a, mut b, mut c) = ([0.0; 64], [0.0; 64], [0.0; 64]);
        w.seeded(7, 3, &mut a);
        w.seeded(7, 3, &mut b);
        w.seeded(7, 4, &mut c);
        assert_eq!(a, b);
        assert_ne!(a, c);
    }
}
