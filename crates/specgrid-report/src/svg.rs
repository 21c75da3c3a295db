//! Inline SVG figures: the specification curve with its option panel, the decision-influence
//! chart and the residual scatter. Coordinates are written with one decimal so the same input
//! gives the same bytes. Marks are shape-coded (filled = significant, hollow = not) so the
//! figures read in greyscale; the two colours are from the Okabe–Ito palette, which stays
//! distinct for the common forms of colour blindness.

use crate::aggregate::baseline_index;
use crate::curve::{curve, group, nice_ticks, Mark};
use crate::text::{html_escape as esc, num};
use crate::Report;

/// Above this many models the curve draws one mark per group of neighbouring models.
pub const MAX_MARKS: usize = 500;
const WIDTH: f64 = 960.0;
const LEFT: f64 = 230.0;
const RIGHT: f64 = 20.0;

/// Linear map from data to pixels.
#[derive(Clone, Copy)]
struct Axis {
    d0: f64,
    d1: f64,
    p0: f64,
    p1: f64,
}

impl Axis {
    fn at(&self, v: f64) -> f64 {
        if self.d1 == self.d0 {
            return (self.p0 + self.p1) / 2.0;
        }
        self.p0 + (v - self.d0) / (self.d1 - self.d0) * (self.p1 - self.p0)
    }
}

/// The specification curve and, beneath it, the panel of options each model took.
pub fn spec_curve(report: &Report) -> String {
    let input = &report.input;
    let drawn = curve(report);
    let pts = &drawn.points;
    if pts.is_empty() {
        return "<p>No model has an estimate, so there is no curve to draw.</p>".into();
    }
    let baseline = baseline_index(input).map(|(i, _)| i);
    let marks = group(report, drawn, baseline, MAX_MARKS);
    let grouped = pts.len() > MAX_MARKS;

    let curve_top = 20.0;
    let curve_bottom = 300.0;
    let row_h = 14.0;
    let gap = 10.0;
    let panel_top = curve_bottom + 40.0;
    let panels: Vec<_> = input.dimensions.iter().map(|d| d.panel()).collect();
    let rows: usize = panels.iter().map(|p| p.labels.len()).sum();
    let height = panel_top + rows as f64 * row_h + input.dimensions.len() as f64 * gap + 30.0;

    let mut lo = pts
        .iter()
        .map(|p| p.low.unwrap_or(p.estimate))
        .fold(0.0, f64::min);
    let mut hi = pts
        .iter()
        .map(|p| p.high.unwrap_or(p.estimate))
        .fold(0.0, f64::max);
    let pad = (hi - lo).max(1e-12) * 0.05;
    lo -= pad;
    hi += pad;
    let y = Axis {
        d0: lo,
        d1: hi,
        p0: curve_bottom,
        p1: curve_top,
    };
    let slots = marks.len() as f64;
    let x = Axis {
        d0: 0.0,
        d1: slots,
        p0: LEFT,
        p1: WIDTH - RIGHT,
    };
    let slot_w = (WIDTH - LEFT - RIGHT) / slots;
    let cx = |k: usize| x.at(k as f64 + 0.5);

    let mut s = format!(
        "<svg class=\"figure\" viewBox=\"0 0 {WIDTH} {height:.1}\" width=\"{WIDTH}\" height=\"{height:.1}\" role=\"img\" aria-labelledby=\"curve-title\" xmlns=\"http://www.w3.org/2000/svg\">\n<title id=\"curve-title\">Specification curve of {} under {} errors: {} models sorted by effect</title>\n",
        esc(&input.effect_label),
        esc(&input.error_labels[0]),
        pts.len()
    );
    // Axis, gridlines and zero line.
    for t in nice_ticks(lo, hi, 6) {
        let py = y.at(t);
        s.push_str(&format!(
            "<line class=\"grid\" x1=\"{LEFT}\" x2=\"{:.1}\" y1=\"{py:.1}\" y2=\"{py:.1}\"/><text class=\"tick\" x=\"{:.1}\" y=\"{:.1}\" text-anchor=\"end\">{}</text>\n",
            WIDTH - RIGHT,
            LEFT - 6.0,
            py + 4.0,
            num(Some(t), 3)
        ));
    }
    s.push_str(&format!(
        "<line class=\"zero\" x1=\"{LEFT}\" x2=\"{:.1}\" y1=\"{:.1}\" y2=\"{:.1}\"/>\n",
        WIDTH - RIGHT,
        y.at(0.0),
        y.at(0.0)
    ));
    s.push_str(&format!(
        "<text class=\"axis-label\" x=\"14\" y=\"{:.1}\" transform=\"rotate(-90 14 {:.1})\" text-anchor=\"middle\">{} ({})</text>\n",
        (curve_top + curve_bottom) / 2.0,
        (curve_top + curve_bottom) / 2.0,
        esc(&input.effect_label),
        input.scale.label()
    ));
    // Baseline marker.
    if let Some(k) = marks.iter().position(|m| m.has_baseline) {
        let px = cx(k);
        s.push_str(&format!(
            "<line class=\"baseline\" x1=\"{px:.1}\" x2=\"{px:.1}\" y1=\"{curve_top:.1}\" y2=\"{:.1}\"/><text class=\"baseline-label\" x=\"{px:.1}\" y=\"{:.1}\" text-anchor=\"middle\">baseline ▼</text>\n",
            panel_top + rows as f64 * row_h + input.dimensions.len() as f64 * gap,
            curve_top - 6.0
        ));
    }
    // Bands, then marks.
    s.push_str("<g class=\"bands\">\n");
    for (k, m) in marks.iter().enumerate() {
        if let (Some(l), Some(h)) = (m.low, m.high) {
            if grouped {
                s.push_str(&format!(
                    "<rect x=\"{:.1}\" y=\"{:.1}\" width=\"{:.1}\" height=\"{:.1}\"/>\n",
                    x.at(k as f64),
                    y.at(h),
                    slot_w,
                    (y.at(l) - y.at(h)).max(0.5)
                ));
            } else {
                s.push_str(&format!(
                    "<line x1=\"{0:.1}\" x2=\"{0:.1}\" y1=\"{1:.1}\" y2=\"{2:.1}\"/>\n",
                    cx(k),
                    y.at(h),
                    y.at(l)
                ));
            }
        }
    }
    s.push_str("</g>\n<g class=\"marks\">\n");
    let r = (slot_w * 0.4).clamp(0.8, 3.5);
    for (k, m) in marks.iter().enumerate() {
        if grouped && m.est_high > m.est_low {
            s.push_str(&format!(
                "<line class=\"spread\" x1=\"{0:.1}\" x2=\"{0:.1}\" y1=\"{1:.1}\" y2=\"{2:.1}\"/>\n",
                cx(k),
                y.at(m.est_high),
                y.at(m.est_low)
            ));
        }
        let class = if !m.share_known {
            "unknown"
        } else if m.share_significant >= 0.5 {
            "sig"
        } else {
            "nonsig"
        };
        s.push_str(&format!(
            "<circle class=\"{class}\" cx=\"{:.1}\" cy=\"{:.1}\" r=\"{r:.1}\"/>\n",
            cx(k),
            y.at(m.estimate)
        ));
    }
    s.push_str("</g>\n");
    // Option panel.
    let mut row_y = panel_top;
    s.push_str(&format!(
        "<text class=\"axis-label\" x=\"{LEFT}\" y=\"{:.1}\">Options each model takes (models sorted as above{})</text>\n",
        panel_top - 12.0,
        if grouped {
            format!("; each column is a group of about {} models, darker = more of them", pts.len() / marks.len())
        } else {
            String::new()
        }
    ));
    for (d, dim) in input.dimensions.iter().enumerate() {
        s.push_str(&format!(
            "<text class=\"dim-label\" x=\"4\" y=\"{:.1}\">{}{}</text>\n",
            row_y + row_h - 3.0,
            esc(&dim.name),
            if panels[d].per_candidate {
                " (rows: candidate terms)"
            } else {
                ""
            }
        ));
        for (o, option) in panels[d].labels.iter().enumerate() {
            let label_y = row_y + row_h - 3.0;
            s.push_str(&format!(
                "<text class=\"opt-label\" x=\"{:.1}\" y=\"{label_y:.1}\" text-anchor=\"end\">{}</text>\n<line class=\"row-rule\" x1=\"{LEFT}\" x2=\"{:.1}\" y1=\"{:.1}\" y2=\"{:.1}\"/>\n",
                LEFT - 6.0,
                esc(&shorten(option, 24)),
                WIDTH - RIGHT,
                row_y + row_h / 2.0,
                row_y + row_h / 2.0
            ));
            s.push_str(&option_row(&marks, d, o, &x, row_y, row_h, grouped));
            row_y += row_h;
        }
        row_y += gap;
    }
    s.push_str(&format!(
        "<text class=\"tick\" x=\"{LEFT}\" y=\"{:.1}\">lowest effect</text><text class=\"tick\" x=\"{:.1}\" y=\"{:.1}\" text-anchor=\"end\">highest effect</text>\n",
        row_y + 10.0,
        WIDTH - RIGHT,
        row_y + 10.0
    ));
    s.push_str("</svg>\n");
    s
}

/// One option row: a dark cell where models take the option; grouped columns are shaded by
/// the share (in tenths), with runs of equal shade merged into one rectangle.
fn option_row(
    marks: &[Mark],
    d: usize,
    o: usize,
    x: &Axis,
    top: f64,
    h: f64,
    grouped: bool,
) -> String {
    let mut s = String::new();
    if !grouped {
        // One model per column: a separate cell per model, so neighbours stay distinguishable.
        let slot = x.at(1.0) - x.at(0.0);
        let w = (slot * 0.7).max(0.6);
        for (k, m) in marks.iter().enumerate() {
            if m.option_shares[d][o] > 0.5 {
                s.push_str(&format!(
                    "<rect class=\"cell\" x=\"{:.1}\" y=\"{:.1}\" width=\"{w:.1}\" height=\"{:.1}\"/>\n",
                    x.at(k as f64 + 0.5) - w / 2.0,
                    top + 2.0,
                    h - 4.0
                ));
            }
        }
        return s;
    }
    let mut k = 0;
    while k < marks.len() {
        let level = (marks[k].option_shares[d][o] * 10.0).round() as u32;
        let mut end = k + 1;
        while end < marks.len() && (marks[end].option_shares[d][o] * 10.0).round() as u32 == level {
            end += 1;
        }
        if level > 0 {
            s.push_str(&format!(
                "<rect class=\"cell\" x=\"{:.1}\" y=\"{:.1}\" width=\"{:.1}\" height=\"{:.1}\" fill-opacity=\"{:.1}\"/>\n",
                x.at(k as f64),
                top + 2.0,
                (x.at(end as f64) - x.at(k as f64)).max(0.6),
                h - 4.0,
                f64::from(level) / 10.0
            ));
        }
        k = end;
    }
    s
}

fn shorten(s: &str, max: usize) -> String {
    if s.chars().count() <= max {
        s.to_string()
    } else {
        let mut t: String = s.chars().take(max - 1).collect();
        t.push('…');
        t
    }
}

/// Horizontal bars: the share of the variance of the estimates each decision explains.
pub fn influence_chart(report: &Report) -> String {
    let decisions = &report.summary.decisions;
    let bar_h = 22.0;
    let height = 30.0 + decisions.len() as f64 * bar_h;
    let x = Axis {
        d0: 0.0,
        d1: 1.0,
        p0: LEFT,
        p1: WIDTH - 160.0,
    };
    let mut s = format!(
        "<svg class=\"figure\" viewBox=\"0 0 {WIDTH} {height:.1}\" width=\"{WIDTH}\" height=\"{height:.1}\" role=\"img\" aria-labelledby=\"influence-title\" xmlns=\"http://www.w3.org/2000/svg\">\n<title id=\"influence-title\">Share of the variance of the estimates each decision explains</title>\n"
    );
    for t in [0.0, 0.25, 0.5, 0.75, 1.0] {
        s.push_str(&format!(
            "<line class=\"grid\" x1=\"{0:.1}\" x2=\"{0:.1}\" y1=\"4\" y2=\"{1:.1}\"/><text class=\"tick\" x=\"{0:.1}\" y=\"{2:.1}\" text-anchor=\"middle\">{3:.0}%</text>\n",
            x.at(t),
            height - 22.0,
            height - 8.0,
            t * 100.0
        ));
    }
    for (i, d) in decisions.iter().enumerate() {
        let top = 6.0 + i as f64 * bar_h;
        s.push_str(&format!(
            "<text class=\"opt-label\" x=\"{:.1}\" y=\"{:.1}\" text-anchor=\"end\">{}. {}</text><rect class=\"bar\" x=\"{LEFT}\" y=\"{top:.1}\" width=\"{:.1}\" height=\"{:.1}\"/><text class=\"tick\" x=\"{:.1}\" y=\"{:.1}\">{:.1}%</text>\n",
            LEFT - 6.0,
            top + bar_h * 0.6,
            d.rank,
            esc(&shorten(&d.dimension, 28)),
            (x.at(d.variance_share.clamp(0.0, 1.0)) - LEFT).max(0.5),
            bar_h - 6.0,
            x.at(d.variance_share.clamp(0.0, 1.0)) + 6.0,
            top + bar_h * 0.6,
            100.0 * d.variance_share
        ));
    }
    s.push_str("</svg>\n");
    s
}

/// Residual against fitted value for the baseline model; at most 4,000 points, taking every
/// k-th pair so the same input gives the same picture.
pub fn residual_scatter(pairs: &[(f64, f64)]) -> String {
    let finite: Vec<(f64, f64)> = pairs
        .iter()
        .copied()
        .filter(|(f, r)| f.is_finite() && r.is_finite())
        .collect();
    if finite.is_empty() {
        return "<p>No residuals were passed for the baseline model.</p>".into();
    }
    let step = finite.len().div_ceil(4000);
    let shown: Vec<(f64, f64)> = finite.iter().copied().step_by(step).collect();
    let (w, h) = (560.0, 320.0);
    let (fmin, fmax) = min_max(shown.iter().map(|p| p.0));
    let (rmin, rmax) = min_max(shown.iter().map(|p| p.1).chain([0.0]));
    let x = Axis {
        d0: fmin,
        d1: fmax,
        p0: 60.0,
        p1: w - 10.0,
    };
    let y = Axis {
        d0: rmin,
        d1: rmax,
        p0: h - 40.0,
        p1: 10.0,
    };
    let mut s = format!(
        "<svg class=\"figure\" viewBox=\"0 0 {w} {h}\" width=\"{w}\" height=\"{h}\" role=\"img\" aria-labelledby=\"resid-title\" xmlns=\"http://www.w3.org/2000/svg\">\n<title id=\"resid-title\">Residuals against fitted values of the baseline model ({} of {} points)</title>\n",
        shown.len(),
        finite.len()
    );
    for t in nice_ticks(rmin, rmax, 5) {
        s.push_str(&format!(
            "<line class=\"grid\" x1=\"60\" x2=\"{:.1}\" y1=\"{1:.1}\" y2=\"{1:.1}\"/><text class=\"tick\" x=\"54\" y=\"{2:.1}\" text-anchor=\"end\">{3}</text>\n",
            w - 10.0,
            y.at(t),
            y.at(t) + 4.0,
            num(Some(t), 3)
        ));
    }
    for t in nice_ticks(fmin, fmax, 6) {
        s.push_str(&format!(
            "<text class=\"tick\" x=\"{:.1}\" y=\"{:.1}\" text-anchor=\"middle\">{}</text>\n",
            x.at(t),
            h - 24.0,
            num(Some(t), 3)
        ));
    }
    s.push_str(&format!(
        "<line class=\"zero\" x1=\"60\" x2=\"{:.1}\" y1=\"{:.1}\" y2=\"{:.1}\"/>\n<g class=\"dots\">\n",
        w - 10.0,
        y.at(0.0),
        y.at(0.0)
    ));
    // Fewer points can be drawn larger without hiding each other.
    let radius = if shown.len() < 500 { 3.0 } else { 1.6 };
    for (f, r) in &shown {
        s.push_str(&format!(
            "<circle cx=\"{:.1}\" cy=\"{:.1}\" r=\"{radius:.1}\"/>\n",
            x.at(*f),
            y.at(*r)
        ));
    }
    s.push_str(&format!(
        "</g>\n<text class=\"axis-label\" x=\"{:.1}\" y=\"{:.1}\" text-anchor=\"middle\">fitted value</text>\n<text class=\"axis-label\" x=\"12\" y=\"{:.1}\" transform=\"rotate(-90 12 {:.1})\" text-anchor=\"middle\">residual</text>\n</svg>\n",
        (60.0 + w - 10.0) / 2.0,
        h - 6.0,
        h / 2.0 - 20.0,
        h / 2.0 - 20.0
    ));
    s
}

fn min_max(values: impl Iterator<Item = f64>) -> (f64, f64) {
    let (lo, hi) = values.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
        (a.min(v), b.max(v))
    });
    let pad = ((hi - lo) * 0.05).max(1e-12);
    (lo - pad, hi + pad)
}

/// CSS for the figures, shared by the HTML page.
pub const FIGURE_CSS: &str = concat!(
    ".figure { max-width: 100%; height: auto; font-family: inherit; }\n",
    ".figure .grid { stroke: #e3e3e3; stroke-width: 1; }\n",
    ".figure .zero { stroke: #222; stroke-width: 1; stroke-dasharray: 4 3; }\n",
    ".figure .tick, .figure .opt-label { font-size: 11px; fill: #333; }\n",
    ".figure .dim-label { font-size: 11px; font-weight: 700; fill: #111; }\n",
    ".figure .axis-label { font-size: 12px; fill: #111; }\n",
    ".figure .bands line { stroke: #b8b8b8; stroke-width: 1.2; }\n",
    ".figure .bands rect { fill: #d9d9d9; }\n",
    ".figure .spread { stroke: #555; stroke-width: 1.5; }\n",
    ".figure circle.sig { fill: #0072B2; stroke: #0072B2; stroke-width: 1; }\n",
    ".figure circle.nonsig { fill: #fff; stroke: #D55E00; stroke-width: 1.4; }\n",
    ".figure circle.unknown { fill: #fff; stroke: #777; stroke-width: 1; stroke-dasharray: 1 1; }\n",
    ".figure .baseline { stroke: #000; stroke-width: 1.2; stroke-dasharray: 2 2; }\n",
    ".figure .baseline-label { font-size: 11px; font-weight: 700; }\n",
    ".figure .row-rule { stroke: #efefef; stroke-width: 1; }\n",
    ".figure .cell { fill: #1a1a1a; }\n",
    ".figure .bar { fill: #0072B2; }\n",
    ".figure .dots circle { fill: #333; fill-opacity: 0.45; }\n",
);

#[cfg(test)]
mod tests {
    use super::nice_ticks;

    #[test]
    fn ticks_are_round_and_inside() {
        // Range 0.074 over 6 ticks: raw step 0.0123 → 0.02; ticks −0.0, 0.02, …, 0.06.
        let t = nice_ticks(-0.013, 0.061, 6);
        assert_eq!(t.len(), 4);
        assert!((t[0] - 0.0).abs() < 1e-15 && (t[3] - 0.06).abs() < 1e-12);
        let t = nice_ticks(0.0, 1.0, 5);
        assert_eq!(t.len(), 6);
        assert!((t[5] - 1.0).abs() < 1e-12);
    }
}
