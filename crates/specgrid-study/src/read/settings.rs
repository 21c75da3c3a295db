//! `[errors]` and `[grid]`, and checking skip rules against the decisions.

use toml::de::{DeTable, DeValue};

use super::values::{Reader, Val};
use crate::plan::ErrorChoice;
use crate::problem::{closest, quoted_list, suggestion};
use crate::study::{GridMode, GridSettings, SkipRule, Spots, Study, DEFAULT_LIMIT};

const ERROR_WORDS: &[&str] = &["classical", "hc0", "hc1", "hc2", "hc3"];

/// Covariance choices, confidence level, significance level.
pub(crate) type ErrorSettings = (Vec<ErrorChoice>, f64, f64);

pub(crate) fn read_errors(r: &mut Reader<'_>, value: Option<&Val<'_>>) -> Option<ErrorSettings> {
    let Some(value) = value else {
        return Some((vec![ErrorChoice::Classical], 0.95, 0.05));
    };
    let t = r.table(value, "[errors]")?;
    r.check_keys(t, &["choices", "confidence", "significance"], "[errors]");
    let before = r.problem_count();
    let mut choices = Vec::new();
    match t.get("choices") {
        None => choices.push(ErrorChoice::Classical),
        Some(v) => {
            if let Some(items) = r.array(v, "`choices` in [errors]") {
                if items.is_empty() {
                    r.report(
                        v.span().start,
                        "`choices` in [errors] is empty",
                        Some("list at least one, e.g. [\"hc1\"]".into()),
                    );
                }
                for (i, item) in items.iter().enumerate() {
                    if let Some(choice) =
                        error_choice(r, item, &format!("choice {} in [errors]", i + 1))
                    {
                        if choices.contains(&choice) {
                            r.report(
                                item.span().start,
                                format!("error choice `{}` is listed twice", choice.label()),
                                None,
                            );
                        }
                        choices.push(choice);
                    }
                }
            }
        }
    }
    let confidence = match t.get("confidence") {
        Some(v) => level(r, v, "`confidence` in [errors]", "e.g. 0.95"),
        None => Some(0.95),
    };
    let significance = match t.get("significance") {
        Some(v) => level(r, v, "`significance` in [errors]", "e.g. 0.05"),
        // Rounded to 12 decimals so 1 − 0.95 reads 0.05, not 0.050000000000000044.
        None => confidence.map(|c| ((1.0 - c) * 1e12).round() / 1e12),
    };
    if r.problem_count() != before {
        return None;
    }
    Some((choices, confidence?, significance?))
}

fn level(r: &mut Reader<'_>, v: &Val<'_>, what: &str, example: &str) -> Option<f64> {
    let x = r.number(v, what)?;
    if !(x > 0.0 && x < 1.0) {
        let hint = if x > 1.0 && x < 100.0 {
            format!("write a fraction, not a per cent: {}", x / 100.0)
        } else {
            example.to_string()
        };
        r.report(
            v.span().start,
            format!("{what} must be strictly between 0 and 1, found {x}"),
            Some(hint),
        );
        return None;
    }
    Some(x)
}

fn error_choice(r: &mut Reader<'_>, v: &Val<'_>, what: &str) -> Option<ErrorChoice> {
    match v.get_ref() {
        DeValue::String(word) => match word.as_ref() {
            "classical" => Some(ErrorChoice::Classical),
            "hc0" => Some(ErrorChoice::Hc0),
            "hc1" => Some(ErrorChoice::Hc1),
            "hc2" => Some(ErrorChoice::Hc2),
            "hc3" => Some(ErrorChoice::Hc3),
            other => {
                let hint = if other.starts_with("cluster") {
                    "write clustering as { cluster = \"COLUMN\" } or { cluster = [\"A\", \"B\"] }"
                        .to_string()
                } else {
                    suggestion(&other.to_ascii_lowercase(), ERROR_WORDS)
                };
                r.report(
                    v.span().start,
                    format!("unknown error choice `{other}` in {what}"),
                    Some(hint),
                );
                None
            }
        },
        DeValue::Table(t) if t.contains_key("wild_bootstrap") => wild(r, t, what),
        DeValue::Table(t) => {
            r.check_keys(t, &["cluster"], what);
            let c = r.required(t, "cluster", v.span().start, what)?;
            cluster(r, c, what)
        }
        _ => {
            r.report(
                v.span().start,
                format!(
                    "{what} must be a word or {{ cluster = ... }}, found {}",
                    super::values::a_type(v.get_ref())
                ),
                Some(format!("words: {}", quoted_list(ERROR_WORDS))),
            );
            None
        }
    }
}

/// Draws of the wild cluster bootstrap when the study does not say (common practice: enough
/// that the simulation error of a p-value near 0.05 is about 0.002).
pub const DEFAULT_WILD_DRAWS: usize = 9_999;

/// `{ wild_bootstrap = "COLUMN", weights = "rademacher" | "webb", draws = N }`.
fn wild(r: &mut Reader<'_>, t: &toml::de::DeTable<'_>, what: &str) -> Option<ErrorChoice> {
    r.check_keys(t, &["wild_bootstrap", "weights", "draws"], what);
    let column = r.name(&t["wild_bootstrap"], &format!("`wild_bootstrap` of {what}"))?;
    let weights = match t.get("weights") {
        Some(w) => super::inference::bootstrap_draws(r, w, &format!("`weights` of {what}"))?,
        None => Default::default(),
    };
    let draws = match t.get("draws") {
        Some(d) => r.integer_in(d, &format!("`draws` of {what}"), 99, 1_000_000)? as usize,
        None => DEFAULT_WILD_DRAWS,
    };
    Some(ErrorChoice::WildCluster {
        column,
        weights,
        draws,
    })
}

fn cluster(r: &mut Reader<'_>, c: &Val<'_>, what: &str) -> Option<ErrorChoice> {
    let place = format!("`cluster` of {what}");
    match c.get_ref() {
        DeValue::String(_) => Some(ErrorChoice::Cluster {
            column: r.name(c, &place)?,
        }),
        DeValue::Array(items) => {
            if items.len() == 1 {
                return Some(ErrorChoice::Cluster {
                    column: r.name(&items[0], &place)?,
                });
            }
            if items.len() != 2 {
                r.report(
                    c.span().start,
                    format!(
                        "{place} lists {} columns; one or two are supported",
                        items.len()
                    ),
                    None,
                );
                return None;
            }
            let first = r.name(&items[0], &place)?;
            let second = r.name(&items[1], &place)?;
            if first == second {
                r.report(
                    c.span().start,
                    format!("{place} names `{first}` twice"),
                    Some("use { cluster = \"COLUMN\" } for one-way clustering".into()),
                );
                return None;
            }
            Some(ErrorChoice::TwoWayCluster { first, second })
        }
        _ => {
            r.report(
                c.span().start,
                format!(
                    "{place} must be a column name or a list of two, found {}",
                    super::values::a_type(c.get_ref())
                ),
                None,
            );
            None
        }
    }
}

/// A skip rule as written: (dimension, its offset, [(option, its offset)]).
pub(crate) struct RawSkip {
    offset: usize,
    pairs: SkipPairs,
}

/// Grid settings (skip rules still unchecked), the raw skip rules, and positions.
pub(crate) type GridParts = (GridSettings, Vec<RawSkip>, Spots);

pub(crate) fn read_grid(r: &mut Reader<'_>, value: Option<&Val<'_>>) -> Option<GridParts> {
    let mut settings = GridSettings {
        mode: GridMode::Full,
        limit: DEFAULT_LIMIT,
        sample: None,
        skip: Vec::new(),
    };
    let Some(value) = value else {
        return Some((settings, Vec::new(), Spots::default()));
    };
    let t = r.table(value, "[grid]")?;
    let at = value.span().start;
    let mut spots = Spots {
        grid: at,
        limit: at,
        sample: at,
    };
    r.check_keys(t, &["mode", "limit", "sample", "skip"], "[grid]");
    let before = r.problem_count();
    if let Some(v) = t.get("mode") {
        if let Some(word) = r.string(v, "`mode` in [grid]") {
            match word.as_str() {
                "full" => settings.mode = GridMode::Full,
                "nested" => settings.mode = GridMode::Nested,
                other => r.report(
                    v.span().start,
                    format!("unknown grid mode `{other}`"),
                    Some(suggestion(other, &["full", "nested"])),
                ),
            }
        }
    }
    if let Some(v) = t.get("limit") {
        spots.limit = v.span().start;
        if let Some(n) = r.integer_in(v, "`limit` in [grid]", 1, i64::MAX as i128) {
            settings.limit = n as u128;
        }
    }
    if let Some(v) = t.get("sample") {
        spots.sample = v.span().start;
        if let Some(n) = r.integer_in(v, "`sample` in [grid]", 1, 10_000_000) {
            settings.sample = Some(n as u64);
        }
    }
    let skips = match t.get("skip") {
        Some(v) => read_skips(r, v),
        None => Vec::new(),
    };
    (r.problem_count() == before).then_some((settings, skips, spots))
}

fn read_skips(r: &mut Reader<'_>, v: &Val<'_>) -> Vec<RawSkip> {
    let mut rules = Vec::new();
    let Some(items) = r.array(v, "`skip` in [grid]") else {
        return rules;
    };
    for (i, item) in items.iter().enumerate() {
        let what = format!("skip rule {} in [grid]", i + 1);
        let Some(t) = r.table(item, &what) else {
            continue;
        };
        if t.is_empty() {
            r.report(
                item.span().start,
                format!("{what} is empty and would skip every model"),
                Some("remove it".into()),
            );
            continue;
        }
        if let Some(pairs) = skip_pairs(r, t, &what) {
            rules.push(RawSkip {
                offset: item.span().start,
                pairs,
            });
        }
    }
    rules
}

/// (dimension, its offset, [(option, its offset)]) as written in one skip rule.
type SkipPairs = Vec<(String, usize, Vec<(String, usize)>)>;

fn skip_pairs(r: &mut Reader<'_>, t: &DeTable<'_>, what: &str) -> Option<SkipPairs> {
    let mut pairs = Vec::new();
    for (key, value) in t.iter() {
        let place = format!("`{}` of {what}", key.get_ref());
        let options = match value.get_ref() {
            DeValue::Array(items) => {
                let mut names = Vec::new();
                for item in items.iter() {
                    names.push((r.string(item, &place)?, item.span().start));
                }
                if names.is_empty() {
                    r.report(value.span().start, format!("{place} is empty"), None);
                    return None;
                }
                names
            }
            _ => vec![(r.string(value, &place)?, value.span().start)],
        };
        pairs.push((key.get_ref().to_string(), key.span().start, options));
    }
    Some(pairs)
}

/// Check every skip rule names real decisions and options; turn them into [`SkipRule`]s.
pub(crate) fn check_skips(
    r: &mut Reader<'_>,
    study: &Study,
    raw: Vec<RawSkip>,
) -> Option<Vec<SkipRule>> {
    let dimensions = crate::grid::Layout::new(study).dimensions;
    let dim_names: Vec<&str> = dimensions.iter().map(|d| d.name.as_str()).collect();
    let before = r.problem_count();
    let mut rules = Vec::new();
    for rule in raw {
        let mut matches = Vec::new();
        for (dim, dim_at, options) in rule.pairs {
            let Some(d) = dimensions.iter().find(|d| d.name == dim) else {
                unknown_decision(r, dim_at, "skip rule", &dim, &dim_names);
                continue;
            };
            let option_names: Vec<&str> = d.options.iter().map(String::as_str).collect();
            let mut names = Vec::new();
            for (option, at) in options {
                if !option_names.contains(&option.as_str()) {
                    r.report(
                        at,
                        format!("`{option}` is not an option of decision `{dim}`"),
                        Some(option_hint(&option, &dim, &option_names)),
                    );
                }
                names.push(option);
            }
            matches.push((dim, names));
        }
        rules.push(SkipRule {
            matches,
            offset: rule.offset,
        });
    }
    (r.problem_count() == before).then_some(rules)
}

/// Most options a hint lists before it says how many more there are (a pick block may have
/// tens of thousands).
const LISTED_OPTIONS: usize = 12;

/// "did you mean" for a misspelt option, else the decision's options (the first few of a long
/// list, with the total).
pub(crate) fn option_hint(option: &str, dim: &str, options: &[&str]) -> String {
    if options.len() > LISTED_OPTIONS {
        if let Some(c) = closest(option, options) {
            return format!("did you mean `{c}`?");
        }
        return format!(
            "options of `{dim}` include {} … ({} in all; `specgrid plan` lists them)",
            quoted_list(&options[..LISTED_OPTIONS]),
            options.len()
        );
    }
    suggestion_or_list(option, dim, options)
}

/// A short list's hint: "did you mean" when close, else every option.
fn suggestion_or_list(option: &str, dim: &str, options: &[&str]) -> String {
    match closest(option, options) {
        Some(c) => format!(
            "did you mean `{c}`? (options of `{dim}`: {})",
            quoted_list(options)
        ),
        None => format!("options of `{dim}`: {}", quoted_list(options)),
    }
}

/// Reports a decision name that is not one of the study's, with a suggestion and the list.
pub(crate) fn unknown_decision(
    r: &mut Reader<'_>,
    at: usize,
    who: &str,
    dim: &str,
    dim_names: &[&str],
) {
    r.report(
        at,
        format!("{who} names `{dim}`, which is not a decision of this study"),
        Some(format!(
            "{} (decisions: {})",
            suggestion(dim, dim_names),
            quoted_list(dim_names)
        )),
    );
}
