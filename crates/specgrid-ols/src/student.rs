//! Student-t reference distribution: two-sided p-values and interval quantiles.

use statrs::distribution::{ContinuousCDF, StudentsT};
use statrs::function::beta::beta_reg;

/// Caches t quantiles by degrees of freedom (a call sees only a few distinct values).
#[derive(Debug)]
pub(crate) struct TQuantiles {
    /// Upper tail probability of the interval's upper end, (1 − level)/2.
    tail: f64,
    cache: Vec<(f64, f64)>,
}

impl TQuantiles {
    /// Quantiles for two-sided intervals at `confidence_level`.
    pub fn new(confidence_level: f64) -> Self {
        TQuantiles {
            tail: (1.0 - confidence_level) / 2.0,
            cache: Vec::new(),
        }
    }

    /// The upper (1 + level)/2 quantile of Student t with `df` degrees of freedom.
    pub fn quantile(&mut self, df: f64) -> f64 {
        if let Some(&(_, q)) = self.cache.iter().find(|(d, _)| *d == df) {
            return q;
        }
        let q = match StudentsT::new(0.0, 1.0, df) {
            Ok(t) => t.inverse_cdf(1.0 - self.tail),
            Err(_) => f64::NAN,
        };
        self.cache.push((df, q));
        q
    }
}

/// Two-sided p-value P(|T| ≥ |t|) for Student t with `df` degrees of freedom, via the regularised
/// incomplete beta function, I_{df/(df+t²)}(df/2, 1/2), which keeps accuracy for tiny p-values
/// (Abramowitz & Stegun 26.7.1). NaN for a NaN statistic or df ≤ 0.
pub(crate) fn two_sided_p(t: f64, df: f64) -> f64 {
    if t.is_nan() || df.is_nan() || df <= 0.0 {
        return f64::NAN;
    }
    if t.is_infinite() {
        return 0.0;
    }
    let x = df / (df + t * t);
    beta_reg(df / 2.0, 0.5, x.clamp(0.0, 1.0))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn textbook_t_table_values() {
        // t tables (e.g. Abramowitz & Stegun table 26.10): t_{0.975, 10} = 2.228139, and
        // t_{0.975, 1} = 12.7062.
        let mut q = TQuantiles::new(0.95);
        assert!((q.quantile(10.0) - 2.228_138_85).abs() < 1e-6);
        assert!((q.quantile(1.0) - 12.706_204_7).abs() < 1e-5);
        assert!((two_sided_p(2.228_138_85, 10.0) - 0.05).abs() < 1e-8);
        assert!(two_sided_p(f64::NAN, 3.0).is_nan());
    }
}
