//! The compact summary printed to the terminal.

use crate::summary::OptionInfluence;
use crate::text::{count, num, pct};
use crate::Report;

/// How many decisions the terminal summary lists.
const TOP_DECISIONS: usize = 5;

/// Renders the terminal summary.
pub fn render(report: &Report) -> String {
    let s = &report.summary;
    let mut out = format!("{}\n", s.title);
    out.push_str(&format!(
        "Effect of {} ({} scale); {} models, {} failed; significance level {}.\n",
        s.effect_label,
        s.scale,
        count(s.models.planned),
        count(s.models.failed),
        s.significance_level
    ));
    match &s.baseline.model_id {
        Some(id) => out.push_str(&format!(
            "Baseline model {id} ({}).\n\n",
            s.baseline.chosen_as
        )),
        None => out.push_str("No model has an estimate.\n\n"),
    }
    out.push_str(&format!(
        "{:<24} {:>8} {:>10} {:>11} {:>10} {:>22} {:>9} {:>8} {:>8}\n",
        "errors", "models", "baseline", "rank", "median", "IQR", "same sign", "sig. +", "sig. −"
    ));
    for e in &s.by_errors {
        let rank = e.baseline_rank.map_or("–".into(), |r| {
            format!("{}/{}", count(r), count(e.models))
        });
        out.push_str(&format!(
            "{:<24} {:>8} {:>10} {:>11} {:>10} {:>22} {:>9} {:>8} {:>8}\n",
            e.errors,
            count(e.models),
            num(e.baseline_estimate, 4),
            rank,
            num(e.median, 4),
            format!("[{}, {}]", num(e.quartile_1, 4), num(e.quartile_3, 4)),
            pct(e.share_baseline_sign),
            pct(e.share_significant_positive),
            pct(e.share_significant_negative),
        ));
    }
    out.push('\n');
    for e in &s.by_errors {
        if let Some(b) = &e.extreme_bounds {
            out.push_str(&format!(
                "{:<24} extreme bounds [{}, {}]{}",
                e.errors,
                num(Some(b.lower.value), 4),
                num(Some(b.upper.value), 4),
                if b.same_sign {
                    " (one sign)"
                } else {
                    " (cross zero)"
                }
            ));
        } else {
            out.push_str(&format!("{:<24} extreme bounds –", e.errors));
        }
        if let Some(c) = &e.cdf_zero {
            out.push_str(&format!(
                "; CDF(0) {} ({} weights)",
                num(Some(c.larger_side), 3),
                c.weights.split(' ').next().unwrap_or("")
            ));
        }
        out.push('\n');
    }
    out.push_str("\nDecisions, by share of the variance of the estimates each explains:\n");
    for d in s.decisions.iter().take(TOP_DECISIONS) {
        let compared = if d.per_candidate {
            &d.options[..]
        } else {
            d.options.get(1..).unwrap_or_default()
        };
        let shown = largest_shifts(compared, SHIFTS_SHOWN);
        let mut shifts: Vec<String> = shown
            .iter()
            .map(|o| format!("{} {}", o.option, signed(o.shift_vs_reference)))
            .collect();
        if shown.len() < compared.len() {
            shifts.push(format!(
                "… (largest {} of {}; all in summary.json)",
                shown.len(),
                count(compared.len())
            ));
        }
        if compared.is_empty() {
            shifts.push("one option, nothing to compare".to_string());
        }
        let against = if d.per_candidate {
            "with vs without each term".to_string()
        } else {
            let reference = d.options.first().map_or("", |o| o.option.as_str());
            format!("shift vs {reference}")
        };
        out.push_str(&format!(
            "  {}. {:<22} {:>6}  {against}: {}\n",
            d.rank,
            d.dimension,
            pct(Some(d.variance_share)),
            shifts.join(", ")
        ));
    }
    let dg = &s.diagnostics;
    out.push_str(&format!(
        "\nBreusch–Pagan rejects constant variance in {} of {} tested models.",
        pct(dg.het_share_rejecting),
        count(dg.het_tested_models)
    ));
    if !dg.se_ratios.is_empty() {
        let ratios: Vec<String> = dg
            .se_ratios
            .iter()
            .map(|r| format!("{} {}", r.errors, num(r.median, 3)))
            .collect();
        out.push_str(&format!(
            "\nMedian SE relative to classical: {}.",
            ratios.join(", ")
        ));
    }
    out.push_str("\n\n");
    out.push_str(&crate::across_grid::terminal_section(
        s.across_grid.as_ref(),
    ));
    for c in &s.cautions {
        out.push_str(&format!("• {c}\n"));
    }
    out
}

/// A shift with an explicit sign.
pub fn signed(v: Option<f64>) -> String {
    match v {
        Some(x) if x.is_finite() && x > 0.0 => format!("+{}", num(Some(x), 3)),
        other => num(other, 3),
    }
}

/// Most options (or candidate terms) listed per decision in the terminal summary.
const SHIFTS_SHOWN: usize = 8;

/// All of `options` when there are at most `limit`, else the `limit` with the largest absolute
/// shift, kept in study order.
fn largest_shifts(options: &[OptionInfluence], limit: usize) -> Vec<&OptionInfluence> {
    if options.len() <= limit {
        return options.iter().collect();
    }
    let mut order: Vec<usize> = (0..options.len()).collect();
    let size = |i: usize| options[i].shift_vs_reference.map_or(-1.0, f64::abs);
    order.sort_by(|&a, &b| size(b).total_cmp(&size(a)).then(a.cmp(&b)));
    order.truncate(limit);
    order.sort_unstable();
    order.into_iter().map(|i| &options[i]).collect()
}
