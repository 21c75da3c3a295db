//! `report.md`: the report as plain Markdown tables for a repository.

use crate::terminal::signed;
use crate::text::{count, md_escape as esc, num, pct};
use crate::Report;

/// Renders the Markdown report.
pub fn render(report: &Report) -> String {
    let s = &report.summary;
    let mut m = format!("# {}\n\n", esc(&s.title));
    m.push_str(&format!(
        "Effect of `{}` on the **{}** scale across {} models ({} failed); significance level {}. \
The specification curve is drawn in `report.html`; every figure is explained in specgrid's docs/report.md.\n\n",
        s.effect_label,
        s.scale,
        count(s.models.planned),
        count(s.models.failed),
        s.significance_level
    ));
    m.push_str(&format!(
        "Baseline model: `{}` ({}): {}.\n\n",
        s.baseline.model_id.as_deref().unwrap_or("none"),
        s.baseline.chosen_as,
        s.baseline
            .choices
            .iter()
            .map(|c| format!("{} = {}", esc(&c.dimension), esc(&c.option)))
            .collect::<Vec<_>>()
            .join("; ")
    ));
    m.push_str("## Aggregates by covariance choice\n\n");
    m.push_str("| errors | models | baseline (SE) | rank | median | IQR | min | max | same sign | sig. + | sig. − | extreme bounds | CDF(0) |\n");
    m.push_str("|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|\n");
    for e in &s.by_errors {
        m.push_str(&format!(
            "| {} | {} | {} ({}) | {} | {} | [{}, {}] | {} | {} | {} | {} | {} | {} | {} |\n",
            esc(&e.errors),
            count(e.models),
            num(e.baseline_estimate, 4),
            num(e.baseline_std_error, 3),
            e.baseline_rank.map_or("–".into(), |r| format!(
                "{} of {}",
                count(r),
                count(e.models)
            )),
            num(e.median, 4),
            num(e.quartile_1, 4),
            num(e.quartile_3, 4),
            num(e.min.as_ref().map(|v| v.value), 4),
            num(e.max.as_ref().map(|v| v.value), 4),
            pct(e.share_baseline_sign),
            pct(e.share_significant_positive),
            pct(e.share_significant_negative),
            e.extreme_bounds.as_ref().map_or("–".into(), |b| format!(
                "[{}, {}]",
                num(Some(b.lower.value), 4),
                num(Some(b.upper.value), 4)
            )),
            e.cdf_zero
                .as_ref()
                .map_or("–".into(), |c| num(Some(c.larger_side), 3)),
        ));
    }
    m.push_str("\n## Decisions, by share of the variance of the estimates each explains\n\n");
    m.push_str("| rank | decision | option | models | mean | median | shift vs first option | variance share |\n");
    m.push_str("|---:|---|---|---:|---:|---:|---:|---:|\n");
    for d in &s.decisions {
        for (i, o) in d.options.iter().enumerate() {
            let (rank, name, share) = if i == 0 {
                (
                    d.rank.to_string(),
                    esc(&d.dimension),
                    pct(Some(d.variance_share)),
                )
            } else {
                (String::new(), String::new(), String::new())
            };
            m.push_str(&format!(
                "| {rank} | {name} | {} | {} | {} | {} | {} | {share} |\n",
                esc(&o.option),
                count(o.models),
                num(o.mean, 4),
                num(o.median, 4),
                if i == 0 && !d.per_candidate {
                    "reference".into()
                } else if d.per_candidate {
                    format!("{} (with − without)", signed(o.shift_vs_reference))
                } else {
                    signed(o.shift_vs_reference)
                },
            ));
        }
    }
    let dg = &s.diagnostics;
    m.push_str(&format!(
        "\n## Diagnostics\n\nBreusch–Pagan rejects constant variance in {} of {} tested models.",
        pct(dg.het_share_rejecting),
        count(dg.het_tested_models)
    ));
    for r in &dg.se_ratios {
        m.push_str(&format!(
            " Median {} SE ÷ classical SE: {}.",
            esc(&r.errors),
            num(r.median, 3)
        ));
    }
    m.push_str("\n\n");
    m.push_str(&crate::across_grid::markdown_section(
        s.across_grid.as_ref(),
    ));
    m.push_str("## Cautions\n\n");
    for c in &s.cautions {
        m.push_str(&format!("- {c}\n"));
    }
    m.push_str(&format!(
        "\nData fingerprint (SHA-256 of the data file): `{}`\n",
        report.input.data_fingerprint
    ));
    m
}
