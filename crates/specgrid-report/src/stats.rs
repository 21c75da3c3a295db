//! Small order statistics and distribution helpers shared by the aggregates.

use statrs::distribution::{ContinuousCDF, Normal, StudentsT};

/// Quantile `q` in [0, 1] of already sorted values by linear interpolation between order
/// statistics (definition 7 of Hyndman & Fan 1996, The American Statistician 50:361; also
/// numpy's default). `None` for an empty slice.
pub fn quantile_sorted(sorted: &[f64], q: f64) -> Option<f64> {
    if sorted.is_empty() {
        return None;
    }
    let h = (sorted.len() - 1) as f64 * q.clamp(0.0, 1.0);
    let lo = h.floor() as usize;
    let hi = h.ceil() as usize;
    Some(sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo]))
}

/// Median of unsorted values (works on a copy).
pub fn median(values: &[f64]) -> Option<f64> {
    median_in_place(&mut values.to_vec())
}

/// Median of `values`, reordering them: the number [`quantile_sorted`] gives at 0.5 on the
/// sorted values, found by selection instead of a full sort (linear time; at millions of models
/// the per-option medians were sorts of millions of numbers). The order statistics under
/// `total_cmp` are the same numbers bit for bit however they are found.
pub fn median_in_place(values: &mut [f64]) -> Option<f64> {
    if values.is_empty() {
        return None;
    }
    let h = (values.len() - 1) as f64 * 0.5;
    let (lo, hi) = (h.floor() as usize, h.ceil() as usize);
    let (_, at_lo, above) = values.select_nth_unstable_by(lo, f64::total_cmp);
    let at_lo = *at_lo;
    let at_hi = if hi == lo {
        at_lo
    } else {
        // The next order statistic is the smallest of those above.
        above.iter().copied().min_by(f64::total_cmp)?
    };
    Some(at_lo + (h - lo as f64) * (at_hi - at_lo))
}

/// Arithmetic mean; `None` when empty.
pub fn mean(values: &[f64]) -> Option<f64> {
    if values.is_empty() {
        None
    } else {
        Some(values.iter().sum::<f64>() / values.len() as f64)
    }
}

/// Two-sided p-value of `t` against Student's t with `df` degrees of freedom; the standard
/// normal when `df` is not a finite positive number.
pub fn two_sided_p(t: f64, df: f64) -> f64 {
    let upper = if df.is_finite() && df > 0.0 {
        match StudentsT::new(0.0, 1.0, df) {
            Ok(dist) => dist.sf(t.abs()),
            Err(_) => standard_normal_cdf(-t.abs()),
        }
    } else {
        standard_normal_cdf(-t.abs())
    };
    (2.0 * upper).min(1.0)
}

/// Φ(x), the standard normal distribution function.
pub fn standard_normal_cdf(x: f64) -> f64 {
    Normal::standard().cdf(x)
}

/// Distinct (level, df) pairs remembered per thread by [`interval_multiplier`]; a grid has a
/// handful of df values, and past this many the oldest is forgotten.
const REMEMBERED_MULTIPLIERS: usize = 64;

thread_local! {
    /// ((level bits, df bits), multiplier), most recent last.
    static MULTIPLIERS: std::cell::RefCell<Vec<((u64, u64), f64)>> =
        const { std::cell::RefCell::new(Vec::new()) };
}

/// Half-width multiplier of a two-sided interval at `level`: the Student t quantile with `df`
/// degrees of freedom, or the standard normal one when `df` is not a finite positive number.
/// Remembered per (level, df): the quantile is an iterative inversion of the incomplete beta
/// function, and a grid of two million models asks for the same few df values millions of
/// times (it was a quarter of a 2,048,200-model run's CPU time before).
pub fn interval_multiplier(level: f64, df: f64) -> f64 {
    let key = (level.to_bits(), df.to_bits());
    if let Some(q) = MULTIPLIERS.with(|m| {
        m.borrow()
            .iter()
            .rev()
            .find(|(k, _)| *k == key)
            .map(|&(_, q)| q)
    }) {
        return q;
    }
    let q = multiplier_uncached(level, df);
    MULTIPLIERS.with(|m| {
        let mut m = m.borrow_mut();
        if m.len() == REMEMBERED_MULTIPLIERS {
            m.remove(0);
        }
        m.push((key, q));
    });
    q
}

fn multiplier_uncached(level: f64, df: f64) -> f64 {
    let p = 0.5 + level / 2.0;
    if df.is_finite() && df > 0.0 {
        if let Ok(t) = StudentsT::new(0.0, 1.0, df) {
            return t.inverse_cdf(p);
        }
    }
    Normal::standard().inverse_cdf(p)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn multipliers_match_scipy() {
        // scipy.stats.t.ppf(0.975, 100) = 1.9839715185235518 and norm.ppf(0.975) =
        // 1.959963984540054 (run with scipy from the reference venv).
        assert!((interval_multiplier(0.95, 100.0) - 1.9839715185235518).abs() < 1e-9);
        assert!((interval_multiplier(0.95, f64::INFINITY) - 1.959963984540054).abs() < 1e-9);
        // 2 * scipy.stats.t.sf(4, 100) = 0.00012152364430076177.
        assert!((two_sided_p(4.0, 100.0) - 0.00012152364430076177).abs() < 1e-12);
    }

    #[test]
    fn selected_median_is_the_sorted_median() {
        // Against the definition: sort, then interpolate between the two middle values
        // (quantile_sorted). Odd and even lengths, ties, signed zeros, wide magnitudes.
        let mut state = 0x2545_f491_4f6c_dd1du64;
        let mut next = || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            state
        };
        for len in 1..200 {
            let values: Vec<f64> = (0..len)
                .map(|_| match next() % 7 {
                    0 => 0.0,
                    1 => -0.0,
                    2 => (next() % 5) as f64,
                    _ => {
                        ((next() >> 11) as f64 / (1u64 << 53) as f64 - 0.5)
                            * 10f64.powi((next() % 20) as i32 - 10)
                    }
                })
                .collect();
            let mut sorted = values.clone();
            sorted.sort_by(f64::total_cmp);
            let expected = quantile_sorted(&sorted, 0.5).unwrap();
            let got = median(&values).unwrap();
            assert_eq!(got.to_bits(), expected.to_bits(), "length {len}");
        }
        assert_eq!(median(&[]), None);
    }
}
