//! The "Compared with the earlier run" section of `report.html` (and `comparison.html`), and
//! the terminal table of a comparison.

use serde_json::Value;

use crate::comparison::{Comparison, ModelChange};
use crate::text::{count, html_escape as esc, num};

/// Longest list of models shown per table; the full lists are in `comparison.json`.
const SHOWN: usize = 25;

/// One verdict rule as the section shows it: what it checks and whether it passed.
#[derive(Debug, Clone, PartialEq)]
pub struct VerdictLine {
    /// The rule and the observed value, in words.
    pub text: String,
    /// Whether the rule holds.
    pub passed: bool,
}

/// The HTML section (a `<section>` element) for a comparison and, when the study has a
/// `[verdict]`, its rules.
pub fn render_section(c: &Comparison, verdict: &[VerdictLine]) -> String {
    let mut h =
        String::from("<section id=\"comparison\">\n<h2>Compared with the earlier run</h2>\n");
    h.push_str(&format!(
        "<p>Models matched by id under <code>{}</code> errors: {} in both runs, {} added, {} removed. {} sign flips, {} changes of significance at level {}, {} moved by more than {}% and {} standard errors.</p>\n",
        esc(&c.errors),
        count(c.matched),
        count(c.added.len()),
        count(c.removed.len()),
        count(c.sign_flips.len()),
        count(c.significance_changes.len()),
        c.significance_level,
        count(c.moved.len()),
        num(Some(100.0 * c.tolerance.relative), 3),
        num(Some(c.tolerance.std_errors), 3),
    ));
    if !verdict.is_empty() {
        h.push_str("<h3>Verdict</h3>\n<ul>\n");
        for line in verdict {
            let mark = if line.passed { "holds" } else { "FAILS" };
            h.push_str(&format!("<li><b>{mark}</b>: {}</li>\n", esc(&line.text)));
        }
        h.push_str("</ul>\n");
    }
    for (title, list) in [
        ("Sign flips", &c.sign_flips),
        ("Changes of significance", &c.significance_changes),
        ("Moved estimates", &c.moved),
    ] {
        if !list.is_empty() {
            h.push_str(&model_table(title, list));
        }
    }
    let changed: Vec<_> = c.changed_aggregates().collect();
    h.push_str(&format!(
        "<h3>Aggregates that changed</h3>\n<p>{} of {} aggregates of <code>summary.json</code> changed.</p>\n",
        count(changed.len()),
        count(c.aggregates.len())
    ));
    if !changed.is_empty() {
        h.push_str("<table>\n<thead><tr><th>aggregate</th><th>earlier</th><th>new</th><th>change</th></tr></thead>\n<tbody>\n");
        for a in changed {
            h.push_str(&format!(
                "<tr><td><code>{}</code></td><td>{}</td><td>{}</td><td>{}</td></tr>\n",
                esc(&a.path),
                esc(&value_text(&a.old)),
                esc(&value_text(&a.new)),
                num(a.change, 4)
            ));
        }
        h.push_str("</tbody>\n</table>\n");
    }
    h.push_str("</section>\n");
    h
}

fn model_table(title: &str, list: &[ModelChange]) -> String {
    let mut h = format!(
        "<h3>{title} ({})</h3>\n<table>\n<thead><tr><th>model</th><th>earlier</th><th>new</th><th>earlier SE</th><th>new SE</th><th>change in SEs</th><th>significant</th></tr></thead>\n<tbody>\n",
        count(list.len())
    );
    for m in list.iter().take(SHOWN) {
        h.push_str(&format!(
            "<tr><td><code>{}</code></td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{} → {}</td></tr>\n",
            esc(&m.model_id),
            num(Some(m.old_estimate), 4),
            num(Some(m.new_estimate), 4),
            num(m.old_std_error, 3),
            num(m.new_std_error, 3),
            num(m.change_in_std_errors, 3),
            yes_no(m.old_significant),
            yes_no(m.new_significant),
        ));
    }
    h.push_str("</tbody>\n</table>\n");
    if list.len() > SHOWN {
        h.push_str(&format!(
            "<p>{} more in <code>comparison.json</code>.</p>\n",
            count(list.len() - SHOWN)
        ));
    }
    h
}

/// Places the section before the closing paragraph of a `report.html` page (or before
/// `</body>`); returns the page unchanged when it has neither.
pub fn insert_section(page: &str, section: &str) -> String {
    let at = page
        .rfind("<p class=\"lede\">Written by specgrid.")
        .or_else(|| page.rfind("</body>"));
    match at {
        Some(i) => format!("{}{}{}", &page[..i], section, &page[i..]),
        None => page.to_string(),
    }
}

/// A short standalone page holding only the section (for `specgrid compare`).
pub fn render_page(c: &Comparison, verdict: &[VerdictLine]) -> String {
    format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>specgrid comparison</title>\n<style>\nbody {{ font-family: system-ui, 'DejaVu Sans', sans-serif; max-width: 1000px; margin: 0 auto; padding: 16px 20px; }}\ntable {{ border-collapse: collapse; font-size: 0.9em; }}\nth, td {{ border-bottom: 1px solid #ccc; padding: 3px 8px; text-align: right; }}\nth:first-child, td:first-child {{ text-align: left; }}\n</style>\n</head>\n<body>\n{}</body>\n</html>\n",
        render_section(c, verdict)
    )
}

/// The terminal table: counts, then the models that flipped or changed significance and the
/// aggregates that changed (at most [`SHOWN`] lines each).
pub fn render_terminal(c: &Comparison) -> String {
    let mut t = format!(
        "compared under `{}`: {} models in both runs, {} added, {} removed\n  sign flips {:>6}\n  significance changes {:>6}\n  moved estimates {:>6}  (more than {}% and {} SEs)\n",
        c.errors,
        count(c.matched),
        count(c.added.len()),
        count(c.removed.len()),
        count(c.sign_flips.len()),
        count(c.significance_changes.len()),
        count(c.moved.len()),
        num(Some(100.0 * c.tolerance.relative), 3),
        num(Some(c.tolerance.std_errors), 3),
    );
    let mut listed = std::collections::BTreeSet::new();
    let interesting = c
        .sign_flips
        .iter()
        .chain(&c.significance_changes)
        .filter(|m| listed.insert(m.model_id.clone()))
        .take(SHOWN)
        .collect::<Vec<_>>();
    if !interesting.is_empty() {
        t.push_str(&format!(
            "\n  {:<14} {:>12} {:>12} {:>9} {:>11}\n",
            "model", "earlier", "new", "in SEs", "significant"
        ));
        for m in interesting {
            t.push_str(&format!(
                "  {:<14} {:>12} {:>12} {:>9} {:>5} → {}\n",
                m.model_id,
                num(Some(m.old_estimate), 4),
                num(Some(m.new_estimate), 4),
                num(m.change_in_std_errors, 3),
                yes_no(m.old_significant),
                yes_no(m.new_significant),
            ));
        }
    }
    let changed: Vec<_> = c.changed_aggregates().take(SHOWN).collect();
    if !changed.is_empty() {
        t.push_str(&format!(
            "\n  {:<50} {:>12} {:>12}\n",
            "aggregate", "earlier", "new"
        ));
        for a in changed {
            t.push_str(&format!(
                "  {:<50} {:>12} {:>12}\n",
                a.path,
                value_text(&a.old),
                value_text(&a.new)
            ));
        }
    }
    t
}

fn yes_no(v: Option<bool>) -> &'static str {
    match v {
        Some(true) => "yes",
        Some(false) => "no",
        None => "–",
    }
}

fn value_text(v: &Value) -> String {
    match v {
        Value::Null => "–".into(),
        Value::Number(n) => num(n.as_f64(), 4),
        Value::String(s) => s.clone(),
        other => other.to_string(),
    }
}
