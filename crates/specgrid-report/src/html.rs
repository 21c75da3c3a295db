//! `report.html`: one self-contained page (inline CSS and SVG, no script, no network).

use crate::summary::ErrorSummary;
use crate::svg;
use crate::terminal::signed;
use crate::text::{count, html_escape as esc, num, pct};
use crate::Report;

const PAGE_CSS: &str = concat!(
    "body { font-family: system-ui, 'DejaVu Sans', sans-serif; color: #111; background: #fff; margin: 0 auto; max-width: 1000px; padding: 16px 20px 40px; line-height: 1.45; }\n",
    "h1 { font-size: 1.5em; margin-bottom: 0.2em; } h2 { font-size: 1.15em; margin-top: 1.8em; border-bottom: 2px solid #111; padding-bottom: 2px; }\n",
    ".lede { color: #333; margin-top: 0; }\n",
    ".headline { display: flex; flex-wrap: wrap; gap: 10px; margin: 14px 0; }\n",
    ".headline div { border: 1px solid #888; padding: 6px 10px; min-width: 140px; }\n",
    ".headline b { display: block; font-size: 1.3em; }\n",
    "table { border-collapse: collapse; font-size: 0.9em; margin: 8px 0; }\n",
    "th, td { border-bottom: 1px solid #ccc; padding: 3px 8px; text-align: right; vertical-align: top; }\n",
    "th:first-child, td:first-child { text-align: left; }\n",
    "thead th { border-bottom: 2px solid #111; }\n",
    ".key { font-size: 0.9em; } .key span { display: inline-block; margin-right: 18px; }\n",
    ".swatch { display: inline-block; width: 10px; height: 10px; border-radius: 50%; vertical-align: middle; margin-right: 4px; }\n",
    ".swatch.sig { background: #0072B2; border: 1px solid #0072B2; } .swatch.nonsig { background: #fff; border: 1.5px solid #D55E00; }\n",
    "pre { background: #f4f4f4; border: 1px solid #ccc; padding: 10px; overflow-x: auto; font-size: 0.85em; }\n",
    ".cautions { border-left: 4px solid #111; padding: 4px 12px; background: #f7f7f7; }\n",
    "code { font-size: 0.92em; }\n",
);

/// Renders the HTML page.
pub fn render(report: &Report) -> String {
    let s = &report.summary;
    let input = &report.input;
    let first = s.by_errors.first();
    let mut h = String::new();
    h.push_str("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n");
    h.push_str("<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n");
    h.push_str(&format!(
        "<title>{} — specgrid report</title>\n",
        esc(&s.title)
    ));
    h.push_str(&format!(
        "<style>\n{PAGE_CSS}{}</style>\n</head>\n<body>\n",
        svg::FIGURE_CSS
    ));
    h.push_str(&format!("<h1>{}</h1>\n", esc(&s.title)));
    h.push_str(&format!(
        "<p class=\"lede\">Effect of <code>{}</code> on the <b>{}</b> scale across {} models ({} failed). Significance level {}; bands are {}% confidence intervals.</p>\n",
        esc(&s.effect_label),
        s.scale,
        count(s.models.planned),
        count(s.models.failed),
        s.significance_level,
        num(Some(100.0 * s.confidence_level), 3)
    ));
    if let Some(e) = first {
        h.push_str(&headline(e, report));
    }
    h.push_str("<h2>Specification curve</h2>\n");
    h.push_str(&format!(
        "<p>Every model's effect, lowest to highest, with its confidence interval, under <code>{}</code> errors. The panel beneath marks which option each model took on each decision.</p>\n",
        esc(input.error_labels.first().map_or("", String::as_str))
    ));
    h.push_str("<p class=\"key\"><span><i class=\"swatch sig\"></i>significant (filled)</span><span><i class=\"swatch nonsig\"></i>not significant (hollow)</span><span>grey: confidence interval</span><span>dashed vertical line: baseline model</span><span>dashed horizontal line: zero</span></p>\n");
    h.push_str(&svg::spec_curve(report));
    h.push_str("<h2>Which decisions move the estimate</h2>\n<p>Share of the variance of the estimates that each decision explains on its own, and the mean shift when the decision takes another option than its first, all else equal.</p>\n");
    h.push_str(&svg::influence_chart(report));
    h.push_str(&influence_table(report));
    h.push_str("<h2>Aggregates by covariance choice</h2>\n");
    h.push_str(&aggregate_table(report));
    h.push_str("<h2>Diagnostics</h2>\n");
    h.push_str(&diagnostics(report));
    h.push_str(&crate::across_grid::html_section(s.across_grid.as_ref()));
    h.push_str("<h2>Baseline model: residuals against fitted values</h2>\n");
    h.push_str(&format!(
        "<p>Baseline model <code>{}</code> ({}): {}.</p>\n",
        esc(s.baseline.model_id.as_deref().unwrap_or("none")),
        s.baseline.chosen_as,
        esc(&s
            .baseline
            .choices
            .iter()
            .map(|c| format!("{} = {}", c.dimension, c.option))
            .collect::<Vec<_>>()
            .join("; "))
    ));
    match &input.baseline_residuals {
        Some(pairs) => h.push_str(&svg::residual_scatter(pairs)),
        None => h.push_str("<p>Residuals are not stored in the results folder; re-run the study to draw this figure.</p>\n"),
    }
    h.push_str("<h2>Cautions</h2>\n<div class=\"cautions\">\n<ul>\n");
    for c in &s.cautions {
        h.push_str(&format!("<li>{}</li>\n", esc(c)));
    }
    h.push_str("</ul>\n</div>\n");
    h.push_str(&format!(
        "<h2>Data and study file</h2>\n<p>Data fingerprint (SHA-256 of the data file): <code>{}</code></p>\n<pre>{}</pre>\n",
        esc(&input.data_fingerprint),
        esc(&input.study_text)
    ));
    h.push_str("<p class=\"lede\">Written by specgrid. What every number means: docs/report.md.</p>\n</body>\n</html>\n");
    h
}

fn headline(e: &ErrorSummary, report: &Report) -> String {
    let bounds = e.extreme_bounds.as_ref().map_or("–".to_string(), |b| {
        format!(
            "[{}, {}]",
            num(Some(b.lower.value), 3),
            num(Some(b.upper.value), 3)
        )
    });
    let top = report
        .summary
        .decisions
        .first()
        .map_or("–".to_string(), |d| d.dimension.clone());
    format!(
        "<div class=\"headline\">\n<div>baseline effect<b>{}</b></div>\n<div>median [IQR]<b>{}</b>[{}, {}]</div>\n<div>same sign as baseline<b>{}</b></div>\n<div>significant + / −<b>{} / {}</b></div>\n<div>extreme bounds<b>{}</b></div>\n<div>most influential decision<b>{}</b></div>\n</div>\n<p class=\"key\">Headline figures under <code>{}</code> errors.</p>\n",
        num(e.baseline_estimate, 4),
        num(e.median, 4),
        num(e.quartile_1, 4),
        num(e.quartile_3, 4),
        pct(e.share_baseline_sign),
        pct(e.share_significant_positive),
        pct(e.share_significant_negative),
        bounds,
        esc(&top),
        esc(&e.errors)
    )
}

fn influence_table(report: &Report) -> String {
    let s = &report.summary;
    let mut h = String::from(
        "<table>\n<thead><tr><th>decision / option</th><th>models</th><th>mean</th><th>median</th>",
    );
    for e in &report.input.error_labels {
        h.push_str(&format!("<th>significant ({})</th>", esc(e)));
    }
    h.push_str("<th>shift vs first option</th><th>pairs</th></tr></thead>\n<tbody>\n");
    for d in &s.decisions {
        h.push_str(&format!(
            "<tr><th colspan=\"{}\">{}. {} — explains {} of the variance{}</th></tr>\n",
            6 + report.input.error_labels.len(),
            d.rank,
            esc(&d.dimension),
            pct(Some(d.variance_share)),
            if d.per_candidate {
                "; one row per candidate term: the models whose set contains it, and as shift their mean minus the mean of the models whose set does not (pairs: those models)"
            } else {
                ""
            }
        ));
        for o in &d.options {
            h.push_str(&format!(
                "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td>",
                esc(&o.option),
                count(o.models),
                num(o.mean, 4),
                num(o.median, 4)
            ));
            for share in &o.share_significant {
                h.push_str(&format!("<td>{}</td>", pct(*share)));
            }
            h.push_str(&format!(
                "<td>{}</td><td>{}</td></tr>\n",
                if o.shift_pairs == 0 {
                    "reference".to_string()
                } else {
                    signed(o.shift_vs_reference)
                },
                count(o.shift_pairs)
            ));
        }
    }
    h.push_str("</tbody>\n</table>\n");
    h
}

fn aggregate_table(report: &Report) -> String {
    let mut h = String::from("<table>\n<thead><tr><th>errors</th><th>models</th><th>baseline (SE)</th><th>rank</th><th>median</th><th>IQR</th><th>min (model)</th><th>max (model)</th><th>same sign</th><th>sig. +</th><th>sig. −</th><th>extreme bounds</th><th>CDF(0)</th></tr></thead>\n<tbody>\n");
    for e in &report.summary.by_errors {
        let bounds = e.extreme_bounds.as_ref().map_or("–".to_string(), |b| {
            format!(
                "[{}, {}]{}",
                num(Some(b.lower.value), 4),
                num(Some(b.upper.value), 4),
                if b.same_sign {
                    " one sign"
                } else {
                    " crosses 0"
                }
            )
        });
        let cdf = e.cdf_zero.as_ref().map_or("–".to_string(), |c| {
            format!(
                "{} ({})",
                num(Some(c.larger_side), 3),
                esc(c.weights.split(' ').next().unwrap_or(""))
            )
        });
        h.push_str(&format!(
            "<tr><td>{}</td><td>{}</td><td>{} ({})</td><td>{}</td><td>{}</td><td>[{}, {}]</td><td>{} ({})</td><td>{} ({})</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>\n",
            esc(&e.errors),
            count(e.models),
            num(e.baseline_estimate, 4),
            num(e.baseline_std_error, 3),
            e.baseline_rank.map_or("–".into(), |r| format!("{} of {}", count(r), count(e.models))),
            num(e.median, 4),
            num(e.quartile_1, 4),
            num(e.quartile_3, 4),
            num(e.min.as_ref().map(|v| v.value), 4),
            esc(e.min.as_ref().map_or("–", |v| v.model_id.as_str())),
            num(e.max.as_ref().map(|v| v.value), 4),
            esc(e.max.as_ref().map_or("–", |v| v.model_id.as_str())),
            pct(e.share_baseline_sign),
            pct(e.share_significant_positive),
            pct(e.share_significant_negative),
            bounds,
            cdf
        ));
    }
    h.push_str("</tbody>\n</table>\n<p class=\"key\">Extreme bounds: lowest estimate − 2 SE and highest estimate + 2 SE over the models (Leamer 1983). CDF(0): the larger of the weighted normal masses on either side of zero (Sala-i-Martin 1997).</p>\n");
    h
}

fn diagnostics(report: &Report) -> String {
    let d = &report.summary.diagnostics;
    let mut h = format!(
        "<p>The studentized Breusch–Pagan test rejects constant error variance in <b>{}</b> of {} tested models at the {} level.</p>\n",
        pct(d.het_share_rejecting),
        count(d.het_tested_models),
        report.summary.significance_level
    );
    if d.se_ratios.is_empty() {
        h.push_str(
            "<p>The study has no classical covariance choice, so no SE ratios are shown.</p>\n",
        );
    } else {
        h.push_str("<table>\n<thead><tr><th>errors</th><th>models</th><th>median SE ÷ classical SE</th><th>min</th><th>max</th></tr></thead>\n<tbody>\n");
        for r in &d.se_ratios {
            h.push_str(&format!(
                "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>\n",
                esc(&r.errors),
                count(r.models),
                num(r.median, 3),
                num(r.min, 3),
                num(r.max, 3)
            ));
        }
        h.push_str("</tbody>\n</table>\n");
    }
    h
}
