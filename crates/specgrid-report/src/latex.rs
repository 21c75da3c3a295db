//! `appendix.tex`: a table of the aggregates and the specification curve as TikZ, to `\input`
//! into a paper (needs `\usepackage{tikz}`; no PDF or image files).

use crate::aggregate::baseline_index;
use crate::curve::{curve, group, nice_ticks};
use crate::text::{count, num as plain_num, pct, tex_escape as esc};

/// A number for LaTeX text: a leading minus becomes a math minus sign.
fn num(v: Option<f64>, sig: usize) -> String {
    let s = plain_num(v, sig);
    match s.strip_prefix('-') {
        Some(rest) => format!("$-${rest}"),
        None => s.replace('–', "--"),
    }
}
use crate::Report;

/// At most this many marks in the TikZ curve, so the file stays small enough to compile fast.
const TEX_MARKS: usize = 200;

/// Renders the LaTeX appendix.
pub fn render(report: &Report) -> String {
    let s = &report.summary;
    let mut t = String::from("% specgrid appendix: needs \\usepackage{tikz} in the preamble.\n");
    t.push_str(&format!(
        "\\subsection*{{Robustness across specifications: {}}}\n",
        esc(&s.title)
    ));
    t.push_str(&format!(
        "Effect of \\texttt{{{}}} on the {} scale across {} models ({} failed); significance level {}.\n\n",
        esc(&s.effect_label),
        s.scale,
        count(s.models.planned),
        count(s.models.failed),
        s.significance_level
    ));
    t.push_str("\\begin{table}[htbp]\n\\centering\\small\n\\begin{tabular}{lrrrrrrr}\n\\hline\n");
    t.push_str("errors & models & baseline & median & IQR & same sign & sig.\\ $+$ / $-$ & extreme bounds \\\\\n\\hline\n");
    for e in &s.by_errors {
        t.push_str(&format!(
            "{} & {} & {} & {} & [{}, {}] & {} & {} / {} & {} \\\\\n",
            esc(&e.errors),
            count(e.models),
            num(e.baseline_estimate, 4),
            num(e.median, 4),
            num(e.quartile_1, 4),
            num(e.quartile_3, 4),
            esc(&pct(e.share_baseline_sign)),
            esc(&pct(e.share_significant_positive)),
            esc(&pct(e.share_significant_negative)),
            e.extreme_bounds.as_ref().map_or("--".into(), |b| format!(
                "[{}, {}]",
                num(Some(b.lower.value), 4),
                num(Some(b.upper.value), 4)
            ))
        ));
    }
    t.push_str("\\hline\n\\end{tabular}\n");
    t.push_str(&format!(
        "\\caption{{Aggregates of the effect over the specification grid. Extreme bounds: lowest estimate $-$ 2 SE and highest $+$ 2 SE (Leamer 1983). Baseline: model {}.}}\n\\end{{table}}\n\n",
        esc(s.baseline.model_id.as_deref().unwrap_or("none"))
    ));
    t.push_str(&figure(report));
    t.push_str("\\paragraph{Cautions.}\n");
    for c in &s.cautions {
        t.push_str(&format!("{} ", esc(c)));
    }
    t.push('\n');
    t
}

fn figure(report: &Report) -> String {
    let drawn = curve(report);
    let pts = &drawn.points;
    if pts.is_empty() {
        return String::new();
    }
    let baseline = baseline_index(&report.input).map(|(i, _)| i);
    let marks = group(report, drawn, baseline, TEX_MARKS);
    let lo = pts
        .iter()
        .map(|p| p.low.unwrap_or(p.estimate))
        .fold(0.0, f64::min);
    let hi = pts
        .iter()
        .map(|p| p.high.unwrap_or(p.estimate))
        .fold(0.0, f64::max);
    let span = (hi - lo).max(1e-12);
    // Curve 12 cm wide and 5 cm tall; y in cm above the panel.
    let width = 12.0;
    let xs = |k: usize| (k as f64 + 0.5) * width / marks.len() as f64;
    let ys = |v: f64| 5.0 * (v - lo) / span;
    let mut f = String::from(
        "\\begin{figure}[htbp]\n\\centering\n\\begin{tikzpicture}[x=1cm,y=1cm,font=\\scriptsize]\n",
    );
    for tick in nice_ticks(lo, hi, 5) {
        f.push_str(&format!(
            "\\draw[gray!30] (0,{0:.3}) -- ({width},{0:.3}); \\node[left] at (0,{0:.3}) {{{1}}};\n",
            ys(tick),
            num(Some(tick), 3)
        ));
    }
    f.push_str(&format!(
        "\\draw[dashed] (0,{0:.3}) -- ({width},{0:.3});\n",
        ys(0.0)
    ));
    for (k, m) in marks.iter().enumerate() {
        if let (Some(l), Some(h)) = (m.low, m.high) {
            f.push_str(&format!(
                "\\draw[gray!60] ({0:.3},{1:.3}) -- ({0:.3},{2:.3});\n",
                xs(k),
                ys(l),
                ys(h)
            ));
        }
        let style = if m.share_known && m.share_significant >= 0.5 {
            "fill=black"
        } else {
            "fill=white,draw=black"
        };
        f.push_str(&format!(
            "\\filldraw[{style}] ({:.3},{:.3}) circle (0.045);\n",
            xs(k),
            ys(m.estimate)
        ));
        if m.has_baseline {
            f.push_str(&format!(
                "\\draw[densely dotted] ({0:.3},0) -- ({0:.3},5.2) node[above] {{baseline}};\n",
                xs(k)
            ));
        }
    }
    // Option panel: one row per option, below the curve.
    let mut row = -0.5;
    for (d, dim) in report.input.dimensions.iter().enumerate() {
        let panel = dim.panel();
        f.push_str(&format!(
            "\\node[left,font=\\scriptsize\\bfseries] at (0,{row:.2}) {{{}{}}};\n",
            esc(&dim.name),
            if panel.per_candidate {
                " (candidate terms)"
            } else {
                ""
            }
        ));
        row -= 0.3;
        for (o, option) in panel.labels.iter().enumerate() {
            f.push_str(&format!(
                "\\node[left] at (0,{row:.2}) {{{}}};\n",
                esc(option)
            ));
            for (k, m) in marks.iter().enumerate() {
                let share = m.option_shares[d][o];
                if share >= 0.05 {
                    f.push_str(&format!(
                        "\\fill[black,opacity={:.1}] ({:.3},{:.2}) rectangle ({:.3},{:.2});\n",
                        (share * 10.0).round() / 10.0,
                        xs(k) - 0.45 * width / marks.len() as f64,
                        row - 0.1,
                        xs(k) + 0.45 * width / marks.len() as f64,
                        row + 0.1
                    ));
                }
            }
            row -= 0.3;
        }
    }
    f.push_str("\\end{tikzpicture}\n");
    f.push_str(&format!(
        "\\caption{{Specification curve: every model's effect ({}, {} errors), sorted, with {}\\% confidence intervals; filled marks are significant at {}. Beneath, the options each model takes{}.}}\n\\end{{figure}}\n\n",
        report.input.scale.label(),
        esc(&report.input.error_labels[0]),
        num(Some(100.0 * report.input.confidence_level), 3),
        report.input.significance_level,
        if pts.len() > TEX_MARKS {
            format!("; each column groups about {} neighbouring models, darker = more of them", pts.len() / marks.len())
        } else {
            String::new()
        }
    ));
    f
}
