//! The part of the grid that skip rules keep, as disjoint boxes no rule touches. Counting,
//! listing and random draws all work on these boxes, so none of them walks a large grid.
//!
//! The boxes come from splitting: a box that no rule touches is kept whole, a box that a rule
//! covers is dropped, and otherwise the box is cut along a dimension where the rule allows only
//! part of the box's options, into the part inside the rule and the part outside it. Each cut
//! settles one dimension of one rule, so the splitting ends; for the usual handful of rules it
//! makes a few boxes.

use std::collections::HashSet;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha20Rng;

use crate::grid::SkipBox;

/// Most boxes the splitting may visit before giving up (pathological sets of rules).
const SPLIT_BUDGET: usize = 1 << 18;

/// One box: the allowed options (ascending) of every dimension.
type Region = Vec<Vec<usize>>;

/// The kept grid points as disjoint boxes.
#[derive(Debug, Clone)]
pub(crate) struct Kept {
    radices: Vec<u128>,
    regions: Vec<Region>,
    /// Number of points in regions before each one; the last entry is the total.
    starts: Vec<u128>,
}

fn region_size(region: &Region) -> u128 {
    region
        .iter()
        .fold(1u128, |acc, o| acc.saturating_mul(o.len() as u128))
}

impl Kept {
    /// Split the grid by the skip rules; `None` if the rules need more boxes than the budget.
    pub fn new(radices: &[u128], rules: &[SkipBox]) -> Option<Kept> {
        let whole: Region = radices.iter().map(|&r| (0..r as usize).collect()).collect();
        let mut regions = Vec::new();
        let mut stack: Vec<(Region, Vec<usize>)> = vec![(whole, (0..rules.len()).collect())];
        let mut visited = 0usize;
        while let Some((region, active)) = stack.pop() {
            visited += 1;
            if visited > SPLIT_BUDGET {
                return None;
            }
            let active: Vec<usize> = active
                .into_iter()
                .filter(|&r| rules[r].touches(&region))
                .collect();
            if active.is_empty() {
                regions.push(region);
                continue;
            }
            if active.iter().any(|&r| rules[r].covers(&region)) {
                continue;
            }
            let Some((dim, inside)) = rules[active[0]].split_of(&region) else {
                continue; // unreachable: a rule that touches but does not cover has a split
            };
            let (ins, outs): (Vec<usize>, Vec<usize>) =
                region[dim].iter().partition(|&&o| inside[o]);
            let mut outside_part = region.clone();
            outside_part[dim] = outs;
            let mut inside_part = region;
            inside_part[dim] = ins;
            // Pushed so that the inside part (lower options first is not guaranteed) is handled
            // next; the order only affects how ranks map to points, which stays deterministic.
            stack.push((outside_part, active.clone()));
            stack.push((inside_part, active));
        }
        let mut starts = Vec::with_capacity(regions.len() + 1);
        let mut total = 0u128;
        starts.push(0);
        for r in &regions {
            total = total.saturating_add(region_size(r));
            starts.push(total);
        }
        Some(Kept {
            radices: radices.to_vec(),
            regions,
            starts,
        })
    }

    /// Number of kept points.
    pub fn total(&self) -> u128 {
        *self.starts.last().unwrap_or(&0)
    }

    /// Grid index of the kept point of rank `rank` (`rank < total`).
    fn nth(&self, rank: u128) -> u128 {
        // The region holding the rank: the last start ≤ rank.
        let r = self.starts.partition_point(|&s| s <= rank) - 1;
        let region = &self.regions[r];
        let mut within = rank - self.starts[r];
        let mut choices = vec![0usize; region.len()];
        for (slot, options) in choices.iter_mut().zip(region).rev() {
            let n = options.len() as u128;
            *slot = options[(within % n) as usize];
            within /= n;
        }
        choices
            .iter()
            .zip(&self.radices)
            .fold(0u128, |acc, (&c, &radix)| acc * radix + c as u128)
    }

    /// Every kept grid index, ascending. Call only when `total` is small enough to list.
    /// Each box is walked like an odometer (no division per point); a box that is the whole
    /// grid (no skip rules) is simply 0..total.
    pub fn all(&self) -> Vec<u128> {
        if let [only] = self.regions.as_slice() {
            if only
                .iter()
                .zip(&self.radices)
                .all(|(o, &r)| o.len() as u128 == r)
            {
                return (0..self.total()).collect();
            }
        }
        let mut out: Vec<u128> = Vec::with_capacity(self.total() as usize);
        for region in &self.regions {
            if region.iter().any(Vec::is_empty) {
                continue;
            }
            let mut digits = vec![0usize; region.len()];
            loop {
                out.push(
                    digits
                        .iter()
                        .zip(region)
                        .zip(&self.radices)
                        .fold(0u128, |acc, ((&d, options), &radix)| {
                            acc * radix + options[d] as u128
                        }),
                );
                // Advance the last digit, carrying leftwards; done when the first overflows.
                let Some(d) = (0..region.len())
                    .rev()
                    .find(|&d| digits[d] + 1 < region[d].len())
                else {
                    break;
                };
                digits[d] += 1;
                digits[d + 1..].fill(0);
            }
        }
        out.sort_unstable();
        out
    }

    /// `count` distinct kept grid indices drawn uniformly at random (Floyd's algorithm for a
    /// sample without repeats, on a ChaCha20 generator seeded with `seed`: the same seed draws
    /// the same points on every machine), ascending. Takes all when `count ≥ total`.
    pub fn draw(&self, count: u128, seed: u64) -> Vec<u128> {
        let n = self.total();
        if count >= n {
            return self.all();
        }
        let mut rng = ChaCha20Rng::seed_from_u64(seed);
        let mut ranks: HashSet<u128> = HashSet::with_capacity(count as usize);
        // Floyd: for j from n − count to n − 1, take a uniform t in 0..=j, or j if t is taken.
        // Every count-subset of 0..n comes out with the same probability.
        for j in (n - count)..n {
            let t = rng.random_range(0..=j);
            if !ranks.insert(t) {
                ranks.insert(j);
            }
        }
        let mut out: Vec<u128> = ranks.into_iter().map(|rank| self.nth(rank)).collect();
        out.sort_unstable();
        out
    }
}
