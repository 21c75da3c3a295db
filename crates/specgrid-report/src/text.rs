//! Deterministic number and text formatting shared by the renderers.

/// A number with `sig` significant digits in plain notation (scientific when very large or
/// small); `–` for a missing or non-finite value.
pub fn num(v: Option<f64>, sig: usize) -> String {
    match v {
        Some(x) if x.is_finite() => {
            if x == 0.0 {
                return "0".into();
            }
            let magnitude = x.abs().log10().floor() as i64;
            let decimals = sig as i64 - 1 - magnitude;
            if (0..=9).contains(&decimals) {
                format!("{:.*}", decimals as usize, x)
            } else if decimals < 0 && magnitude < 9 {
                format!("{x:.0}")
            } else {
                format!("{:.*e}", sig.saturating_sub(1), x)
            }
        }
        _ => "–".into(),
    }
}

/// A share as a percentage with one decimal, `–` when missing.
pub fn pct(v: Option<f64>) -> String {
    match v {
        Some(x) if x.is_finite() => format!("{:.1}%", 100.0 * x),
        _ => "–".into(),
    }
}

/// An integer with thin thousands separators (commas).
pub fn count(n: usize) -> String {
    let digits = n.to_string();
    let groups: Vec<&str> = digits
        .as_bytes()
        .rchunks(3)
        .rev()
        .map(|g| std::str::from_utf8(g).unwrap_or(""))
        .collect();
    groups.join(",")
}

/// Escapes text for HTML and SVG.
pub fn html_escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            _ => out.push(c),
        }
    }
    out
}

/// Escapes text for LaTeX.
pub fn tex_escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '\\' => out.push_str("\\textbackslash{}"),
            '&' | '%' | '$' | '#' | '_' | '{' | '}' => {
                out.push('\\');
                out.push(c);
            }
            '~' => out.push_str("\\textasciitilde{}"),
            '^' => out.push_str("\\textasciicircum{}"),
            '×' => out.push_str("$\\times$"),
            '–' => out.push_str("--"),
            '−' => out.push_str("$-$"),
            _ => out.push(c),
        }
    }
    out
}

/// Escapes text for a Markdown table cell.
pub fn md_escape(s: &str) -> String {
    s.replace('|', "\\|")
}
