//! Student-t reference distribution: two-sided p-values and interval quantiles.

use statrs::distribution::{ContinuousCDF, StudentsT};
use statrs::function::beta::beta_reg;
use statrs::function::gamma::ln_gamma;

use crate::lockstep::advance_pair;

/// Caches t quantiles, and the log-beta prefix of the p-value, by degrees of freedom (a call
/// sees only a few distinct values).
#[derive(Debug)]
pub(crate) struct TQuantiles {
    /// Upper tail probability of the interval's upper end, (1 − level)/2.
    tail: f64,
    cache: Vec<(f64, f64)>,
    /// (df, ln Γ(df/2 + 1/2) − ln Γ(df/2) − ln Γ(1/2)).
    log_beta: Vec<(f64, f64)>,
}

impl TQuantiles {
    /// Quantiles for two-sided intervals at `confidence_level`.
    pub fn new(confidence_level: f64) -> Self {
        TQuantiles {
            tail: (1.0 - confidence_level) / 2.0,
            cache: Vec::new(),
            log_beta: Vec::new(),
        }
    }

    /// [`two_sided_p`] with the incomplete beta function's log-gamma prefix computed once per
    /// df: the same value bit for bit (tested against `statrs`), at about half the cost, which
    /// matters when millions of models share a handful of df values.
    pub fn p_value(&mut self, t: f64, df: f64) -> f64 {
        self.prepare(t, df).finish()
    }

    /// [`Self::p_value`] for two statistics at once, each the same double as alone: the two
    /// continued fractions advance in lockstep, so the processor overlaps their chains of
    /// divisions (each step waits on the one before; the fraction was most of the per-model
    /// finish, docs/performance.md, session 7).
    pub fn p_value_pair(&mut self, first: (f64, f64), second: (f64, f64)) -> (f64, f64) {
        match (
            self.prepare(first.0, first.1),
            self.prepare(second.0, second.1),
        ) {
            (Prepared::Fraction(a), Prepared::Fraction(b)) => {
                let mut lanes = [a, b];
                advance_pair(&mut lanes, [false; 2], STEPS, Fraction::step);
                (lanes[0].value(), lanes[1].value())
            }
            (a, b) => (a.finish(), b.finish()),
        }
    }

    /// The p-value of t at df, or the continued fraction that gives it.
    fn prepare(&mut self, t: f64, df: f64) -> Prepared {
        if t.is_nan() || df.is_nan() || df <= 0.0 {
            return Prepared::Done(f64::NAN);
        }
        if t.is_infinite() {
            return Prepared::Done(0.0);
        }
        let x = (df / (df + t * t)).clamp(0.0, 1.0);
        // Where statrs takes its special branch (x at 0 or within 1e-15 of 1), ask statrs.
        if x == 0.0 || x > 1.0 - 1e-12 {
            return Prepared::Done(beta_reg(df / 2.0, 0.5, x));
        }
        let prefix = match self.log_beta.iter().find(|(d, _)| *d == df) {
            Some(&(_, c)) => c,
            None => {
                let (a, b) = (df / 2.0, 0.5);
                let c = ln_gamma(a + b) - ln_gamma(a) - ln_gamma(b);
                self.log_beta.push((df, c));
                c
            }
        };
        Prepared::Fraction(Fraction::start(df / 2.0, 0.5, x, prefix))
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

/// A p-value found at once, or the continued fraction still to evaluate.
enum Prepared {
    Done(f64),
    Fraction(Fraction),
}

impl Prepared {
    /// The p-value, evaluating the fraction alone if there is one.
    fn finish(self) -> f64 {
        match self {
            Prepared::Done(p) => p,
            Prepared::Fraction(f) => f.evaluate(),
        }
    }
}

/// The fraction's step numbers (statrs stops after step 140 whether or not it converged).
const STEPS: std::ops::Range<i32> = 1..141;

/// statrs' F64_PREC.
const F64_PREC: f64 = 0.000_000_000_000_000_111_022_302_462_515_65;

/// The fraction's floor against division by zero (statrs' `fpmin`).
const FPMIN: f64 = f64::MIN_POSITIVE / F64_PREC;

/// The regularised incomplete beta function I_x(a, b) for 0 < x < 1, given the prefix
/// ln Γ(a + b) − ln Γ(a) − ln Γ(b): the continued fraction of Numerical Recipes (3rd ed.,
/// sec. 6.4, `betacf`, modified Lentz) exactly as `statrs::function::beta::checked_beta_reg`
/// 0.19 evaluates it (MIT licence), operation for operation, so the result is the same double.
/// Only the prefix is hoisted out: statrs recomputes three log-gammas on every call. Split into
/// [`Fraction::start`], [`Fraction::step`] and [`Fraction::value`] so two fractions can
/// advance side by side ([`TQuantiles::p_value_pair`]) doing the same operations as one alone.
struct Fraction {
    bt: f64,
    symm_transform: bool,
    a: f64,
    b: f64,
    x: f64,
    qab: f64,
    qap: f64,
    qam: f64,
    c: f64,
    d: f64,
    h: f64,
}

impl Fraction {
    /// The fraction for I_x(a, b) before its first step.
    fn start(a: f64, b: f64, x: f64, prefix: f64) -> Fraction {
        let bt = (prefix + a * x.ln() + b * (1.0 - x).ln()).exp();
        let symm_transform = x >= (a + 1.0) / (a + b + 2.0);
        let (a, b, x) = if symm_transform {
            (b, a, 1.0 - x)
        } else {
            (a, b, x)
        };
        let qab = a + b;
        let qap = a + 1.0;
        let qam = a - 1.0;
        let c = 1.0;
        let mut d = 1.0 - qab * x / qap;
        if d.abs() < FPMIN {
            d = FPMIN;
        }
        d = 1.0 / d;
        Fraction {
            bt,
            symm_transform,
            a,
            b,
            x,
            qab,
            qap,
            qam,
            c,
            d,
            h: d,
        }
    }

    /// Step `m` (one of [`STEPS`]) of the fraction; true when it has converged (statrs'
    /// `break`).
    fn step(&mut self, m: i32) -> bool {
        let (a, b, x) = (self.a, self.b, self.x);
        let m = f64::from(m);
        let m2 = m * 2.0;
        let mut aa = m * (b - m) * x / ((self.qam + m2) * (a + m2));
        lentz_update(aa, FPMIN, &mut self.c, &mut self.d);
        self.h = self.h * self.d * self.c;
        aa = -(a + m) * (self.qab + m) * x / ((a + m2) * (self.qap + m2));
        lentz_update(aa, FPMIN, &mut self.c, &mut self.d);
        let del = self.d * self.c;
        self.h *= del;
        (del - 1.0).abs() <= F64_PREC
    }

    /// I_x(a, b) from the fraction as far as it went.
    fn value(&self) -> f64 {
        if self.symm_transform {
            1.0 - self.bt * self.h / self.a
        } else {
            self.bt * self.h / self.a
        }
    }

    /// Runs the fraction alone to convergence (or its last step) and returns its value.
    fn evaluate(mut self) -> f64 {
        for m in STEPS {
            if self.step(m) {
                break;
            }
        }
        self.value()
    }
}

/// One modified-Lentz update of the continued fraction's C and D by the partial numerator
/// `aa` (both kept away from zero by `fpmin`), in statrs' order of operations; the caller
/// multiplies h by D·C in its own order, which the two half-steps of `betacf` differ in.
fn lentz_update(aa: f64, fpmin: f64, c: &mut f64, d: &mut f64) {
    *d = 1.0 + aa * *d;
    if d.abs() < fpmin {
        *d = fpmin;
    }
    *c = 1.0 + aa / *c;
    if c.abs() < fpmin {
        *c = fpmin;
    }
    *d = 1.0 / *d;
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

    #[test]
    fn cached_prefix_p_values_equal_statrs_bit_for_bit() {
        // The reference is statrs' own incomplete beta (a general-purpose library from the
        // registry): the hoisted prefix must not change a single bit.
        let mut q = TQuantiles::new(0.95);
        let dfs = [
            1.0, 2.0, 3.0, 7.0, 29.0, 142.0, 143.0, 1_000.0, 99_960.0, 2.5,
        ];
        let ts = [
            0.0, 1e-8, 0.01, 0.3, 1.0, 1.96, 2.5, 4.0, 8.0, 30.0, 1e3, 1e8, -2.0, -40.0,
        ];
        for &df in &dfs {
            for &t in &ts {
                let ours = q.p_value(t, df);
                let reference = two_sided_p(t, df);
                assert_eq!(ours.to_bits(), reference.to_bits(), "t = {t}, df = {df}");
            }
        }
        assert!(q.p_value(f64::NAN, 3.0).is_nan());
        assert_eq!(q.p_value(f64::INFINITY, 3.0), 0.0);
    }

    #[test]
    fn paired_p_values_equal_single_ones_bit_for_bit() {
        // Every pair of (t, df), special branches included (NaN, infinite t, x at 1), against
        // the single evaluation, which the test above ties to statrs.
        let mut q = TQuantiles::new(0.95);
        let cases: Vec<(f64, f64)> = [1.0, 7.0, 143.0, 99_960.0]
            .iter()
            .flat_map(|&df| {
                [
                    0.0,
                    1e-8,
                    0.3,
                    1.96,
                    4.0,
                    30.0,
                    1e8,
                    f64::NAN,
                    f64::INFINITY,
                ]
                .map(|t| (t, df))
            })
            .collect();
        for &first in &cases {
            for &second in &cases {
                let (a, b) = q.p_value_pair(first, second);
                let (ra, rb) = (q.p_value(first.0, first.1), q.p_value(second.0, second.1));
                assert_eq!(a.to_bits(), ra.to_bits(), "{first:?} beside {second:?}");
                assert_eq!(b.to_bits(), rb.to_bits(), "{second:?} beside {first:?}");
            }
        }
    }
}
