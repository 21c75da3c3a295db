//! The specification curve's data: every model sorted by effect, and groups of neighbouring
//! models when there are too many to draw one by one. Shared by the SVG and TikZ renderers.

use crate::aggregate::significance;
use crate::Report;

/// One model as drawn: estimate, band, significance, and its position in the input (to mark
/// the baseline); its option numbers are in [`Curve`].
#[derive(Debug, Clone)]
pub(crate) struct Point {
    pub(crate) estimate: f64,
    pub(crate) low: Option<f64>,
    pub(crate) high: Option<f64>,
    pub(crate) significant: Option<bool>,
    pub(crate) model: usize,
}

/// A group of neighbouring models drawn as one mark.
pub(crate) struct Mark {
    pub(crate) estimate: f64,
    pub(crate) est_low: f64,
    pub(crate) est_high: f64,
    pub(crate) low: Option<f64>,
    pub(crate) high: Option<f64>,
    pub(crate) share_significant: f64,
    pub(crate) share_known: bool,
    pub(crate) has_baseline: bool,
    /// Per dimension, per panel row (an option, or a pick block's candidate term): share of
    /// the group's models taking it.
    pub(crate) option_shares: Vec<Vec<f64>>,
}

/// Round tick values covering [lo, hi] (about `n` of them), steps of 1, 2 or 5 × 10^k.
pub(crate) fn nice_ticks(lo: f64, hi: f64, n: usize) -> Vec<f64> {
    if hi.partial_cmp(&lo) != Some(std::cmp::Ordering::Greater)
        || !lo.is_finite()
        || !hi.is_finite()
    {
        return vec![lo];
    }
    let raw = (hi - lo) / n.max(1) as f64;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * mag);
    let start = (lo / step).ceil() as i64;
    let end = (hi / step).floor() as i64;
    (start..=end).map(|i| i as f64 * step).collect()
}

/// The curve's points in drawing order, with each point's option numbers beside them.
#[derive(Debug, Clone)]
pub(crate) struct Curve {
    /// Every estimated model under the first covariance choice, sorted by effect (ties by id).
    pub(crate) points: Vec<Point>,
    /// Point i's option number in each dimension at `i·dims .. (i + 1)·dims`, gathered while
    /// the points are made: the figures' groups then read them in order, where reading each
    /// model's entry in sorted order cost cache misses twice over (once per figure).
    choices: Vec<u32>,
    /// Dimensions per point in `choices`.
    dims: usize,
}

impl Curve {
    /// The option numbers of point `i`, one per dimension.
    fn choices_of(&self, i: usize) -> &[u32] {
        &self.choices[i * self.dims..(i + 1) * self.dims]
    }
}

/// The curve, computed once per report and shared by the SVG and TikZ figures (at millions of
/// models the sort is a second or two).
pub(crate) fn curve(report: &Report) -> &Curve {
    report.curve.get_or_init(|| sorted_curve(report))
}

fn sorted_curve(report: &Report) -> Curve {
    let input = &report.input;
    let level = input.confidence_level;
    let dims = input.dimensions.len();
    let mut points = Vec::with_capacity(report.curve_order.len());
    let mut choices = Vec::with_capacity(report.curve_order.len() * dims);
    // The summary already sorted these models (those with a finite estimate under the first
    // choice) by estimate, ties by id; the curve draws them in that order.
    for &(_, i) in &report.curve_order {
        let Some(f) = input.models.effect(i, 0) else {
            continue;
        };
        let half = f.std_error.filter(|s| s.is_finite() && *s > 0.0).map(|se| {
            let q = crate::stats::interval_multiplier(level, f.df);
            q * se
        });
        points.push(Point {
            estimate: f.estimate,
            low: half.map(|h| f.estimate - h),
            high: half.map(|h| f.estimate + h),
            significant: significance(&f, input.significance_level),
            model: i,
        });
        choices.extend_from_slice(input.models.choices(i));
    }
    Curve {
        points,
        choices,
        dims,
    }
}

/// At most `max_marks` groups of neighbouring sorted models (one model per group when few).
pub(crate) fn group(
    report: &Report,
    curve: &Curve,
    baseline: Option<usize>,
    max_marks: usize,
) -> Vec<Mark> {
    let pts = &curve.points;
    let n = pts.len();
    let groups = n.min(max_marks).max(1);
    let panels: Vec<_> = report.input.dimensions.iter().map(|d| d.panel()).collect();
    (0..groups)
        .filter_map(|g| {
            let (a, b) = (g * n / groups, (g + 1) * n / groups);
            let members = &pts[a..b];
            if members.is_empty() {
                return None;
            }
            let mut option_shares: Vec<Vec<f64>> =
                panels.iter().map(|p| vec![0.0; p.labels.len()]).collect();
            // Every member adds the same share (computed once: the same double each time).
            let share = 1.0 / members.len() as f64;
            for i in a..b {
                for (d, &c) in curve.choices_of(i).iter().enumerate() {
                    for row in panels[d].row_indices(c as usize) {
                        option_shares[d][row] += share;
                    }
                }
            }
            let known: Vec<bool> = members.iter().filter_map(|p| p.significant).collect();
            let lows: Vec<f64> = members.iter().filter_map(|p| p.low).collect();
            let highs: Vec<f64> = members.iter().filter_map(|p| p.high).collect();
            Some(Mark {
                estimate: members[members.len() / 2].estimate,
                est_low: members[0].estimate,
                est_high: members[members.len() - 1].estimate,
                low: lows.iter().cloned().reduce(f64::min),
                high: highs.iter().cloned().reduce(f64::max),
                share_significant: known.iter().filter(|s| **s).count() as f64
                    / known.len().max(1) as f64,
                share_known: !known.is_empty(),
                has_baseline: members.iter().any(|p| Some(p.model) == baseline),
                option_shares,
            })
        })
        .collect()
}
