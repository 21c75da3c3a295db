//! Forms of a numeric column (level, log, polynomial, …) and control term specifications.

use toml::de::DeValue;

use super::values::{Reader, Val};
use crate::plan::{Term, Transform, WeightKind};
use crate::problem::{quoted_list, suggestion};

/// Highest polynomial degree accepted (numerical accuracy of high powers degrades quickly).
pub(crate) const MAX_DEGREE: u32 = 10;

/// Plain-word forms written as a bare string.
const SIMPLE_FORMS: &[&str] = &[
    "level",
    "log",
    "log1p",
    "asinh",
    "quadratic",
    "standardized",
];

/// Keys of a form written as a table.
const FORM_TABLE_KEYS: &[&str] = &["form", "polynomial", "winsorized", "name"];

/// What a form does to a column, before it is turned into terms.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum FormKind {
    /// One term under this transform.
    Single(Transform),
    /// Powers 1..=degree (quadratic is degree 2).
    Powers(u32),
}

/// A form with its option name.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Form {
    pub name: String,
    pub kind: FormKind,
}

impl FormKind {
    /// The terms this form makes of `column`.
    pub fn terms(&self, column: &str) -> Vec<Term> {
        match self {
            FormKind::Single(t) => vec![numeric(column, t.clone())],
            FormKind::Powers(d) => (1..=*d)
                .map(|p| {
                    let t = if p == 1 {
                        Transform::Level
                    } else {
                        Transform::Power(p)
                    };
                    numeric(column, t)
                })
                .collect(),
        }
    }

    /// Whether the form is allowed for an outcome (one term, no data-dependent rescaling).
    pub fn outcome_transform(&self) -> Option<Transform> {
        match self {
            FormKind::Single(
                t @ (Transform::Level | Transform::Log | Transform::Log1p | Transform::Asinh),
            ) => Some(t.clone()),
            _ => None,
        }
    }
}

fn numeric(column: &str, transform: Transform) -> Term {
    Term::Numeric {
        column: column.to_string(),
        transform,
    }
}

/// Read one form: a bare word (`"log"`) or a table (`{ polynomial = 3 }`,
/// `{ winsorized = [0.01, 0.99] }`, `{ form = "log", name = "log visits" }`).
pub(crate) fn read_form(r: &mut Reader<'_>, value: &Val<'_>, what: &str) -> Option<Form> {
    match value.get_ref() {
        DeValue::String(word) => simple_form(r, value, word, what),
        DeValue::Table(table) => {
            r.check_keys(table, FORM_TABLE_KEYS, what);
            let given_name = match table.get("name") {
                Some(v) => Some(r.name(v, &format!("`name` of {what}"))?),
                None => None,
            };
            let kinds: Vec<&str> = ["form", "polynomial", "winsorized"]
                .into_iter()
                .filter(|k| table.contains_key(*k))
                .collect();
            if kinds.len() != 1 {
                r.report(
                    value.span().start,
                    format!("{what} must have exactly one of `form`, `polynomial`, `winsorized`"),
                    Some(
                        "e.g. { polynomial = 3 } or { form = \"log\", name = \"log visits\" }"
                            .into(),
                    ),
                );
                return None;
            }
            let v = &table[kinds[0]];
            let mut form = match kinds[0] {
                "form" => {
                    let word = r.string(v, &format!("`form` of {what}"))?;
                    simple_form(r, v, &word, what)?
                }
                "polynomial" => {
                    let degree =
                        r.integer_in(v, &format!("`polynomial` of {what}"), 2, MAX_DEGREE as i128)?
                            as u32;
                    Form {
                        name: format!("polynomial {degree}"),
                        kind: FormKind::Powers(degree),
                    }
                }
                _ => winsorized(r, v, what)?,
            };
            if let Some(name) = given_name {
                form.name = name;
            }
            Some(form)
        }
        _ => {
            r.report(
                value.span().start,
                format!(
                    "{what} must be a form name or a table, found {}",
                    super::values::a_type(value.get_ref())
                ),
                Some(format!(
                    "forms: {}, {{ polynomial = D }}, {{ winsorized = [LOW, HIGH] }}",
                    quoted_list(SIMPLE_FORMS)
                )),
            );
            None
        }
    }
}

fn simple_form(r: &mut Reader<'_>, value: &Val<'_>, word: &str, what: &str) -> Option<Form> {
    let kind = match word {
        "level" => FormKind::Single(Transform::Level),
        "log" => FormKind::Single(Transform::Log),
        "log1p" => FormKind::Single(Transform::Log1p),
        "asinh" => FormKind::Single(Transform::Asinh),
        "standardized" => FormKind::Single(Transform::Standardize),
        "quadratic" => FormKind::Powers(2),
        _ => {
            let hint = if word.starts_with("poly") {
                "write a polynomial as { polynomial = D } with D from 2 to 10".to_string()
            } else if word.starts_with("winsor") {
                "write winsorizing as { winsorized = [LOW, HIGH] }, e.g. [0.01, 0.99]".to_string()
            } else {
                suggestion(word, SIMPLE_FORMS)
            };
            r.report(
                value.span().start,
                format!("unknown form `{word}` in {what}"),
                Some(hint),
            );
            return None;
        }
    };
    Some(Form {
        name: word.to_string(),
        kind,
    })
}

fn winsorized(r: &mut Reader<'_>, value: &Val<'_>, what: &str) -> Option<Form> {
    let place = format!("`winsorized` of {what}");
    let items = r.array(value, &place)?;
    if items.len() != 2 {
        r.report(
            value.span().start,
            format!("{place} must list two quantiles [LOW, HIGH]"),
            Some("e.g. winsorized = [0.01, 0.99]".into()),
        );
        return None;
    }
    let lower = r.number(&items[0], &format!("the lower quantile of {place}"))?;
    let upper = r.number(&items[1], &format!("the upper quantile of {place}"))?;
    let ordered = (0.0..0.5).contains(&lower) && upper > 0.5 && upper <= 1.0;
    if !ordered {
        r.report(
            value.span().start,
            format!("{place} needs 0 ≤ LOW < 0.5 < HIGH ≤ 1, found [{lower}, {upper}]"),
            Some(
                "quantiles are fractions, e.g. [0.01, 0.99] for the 1st and 99th percentiles"
                    .into(),
            ),
        );
        return None;
    }
    Some(Form {
        name: format!("winsorized {}–{}%", percent(lower), percent(upper)),
        kind: FormKind::Single(Transform::Winsorize { lower, upper }),
    })
}

/// 0.01 → "1", 0.025 → "2.5".
fn percent(q: f64) -> String {
    let p = (q * 100.0 * 1e6).round() / 1e6;
    format!("{p}")
}

/// Keys of a term written as a table.
const TERM_KEYS: &[&str] = &[
    "column",
    "form",
    "categorical",
    "reference",
    "product",
    "absorb",
    "weights",
    "kind",
];

/// Read a term specification: `"col"` (level), `{ column, form }`, `{ categorical, reference }`
/// or `{ product = [A, B] }`. A polynomial form gives several terms.
pub(crate) fn read_terms(r: &mut Reader<'_>, value: &Val<'_>, what: &str) -> Option<Vec<Term>> {
    let table = match value.get_ref() {
        DeValue::String(_) => {
            let column = r.name(value, what)?;
            return Some(vec![numeric(&column, Transform::Level)]);
        }
        DeValue::Table(t) => t,
        _ => {
            r.report(
                value.span().start,
                format!("{what} must be a column name or a table, found {}", super::values::a_type(value.get_ref())),
                Some("e.g. { column = \"area_ha\", form = \"log\" } or { categorical = \"district\" }".into()),
            );
            return None;
        }
    };
    r.check_keys(table, TERM_KEYS, what);
    let kinds: Vec<&str> = ["column", "categorical", "product", "absorb", "weights"]
        .into_iter()
        .filter(|k| table.contains_key(*k))
        .collect();
    if kinds.len() != 1 {
        r.report(
            value.span().start,
            format!("{what} must have exactly one of `column`, `categorical`, `product`, `absorb`, `weights`"),
            None,
        );
        return None;
    }
    let misplaced = |key: &str| table.get(key).map(|v| (key.to_string(), v.span().start));
    if kinds[0] != "weights" {
        if let Some((key, at)) = misplaced("kind") {
            r.report(
                at,
                format!("`{key}` applies only to a `weights` term in {what}"),
                None,
            );
        }
    }
    match kinds[0] {
        "column" => {
            if let Some((key, at)) = misplaced("reference") {
                r.report(
                    at,
                    format!("`{key}` applies only to a categorical term in {what}"),
                    None,
                );
            }
            let column = r.name(&table["column"], &format!("`column` of {what}"))?;
            let form = match table.get("form") {
                Some(v) => read_form(r, v, &format!("`form` of {what}"))?,
                None => Form {
                    name: "level".into(),
                    kind: FormKind::Single(Transform::Level),
                },
            };
            Some(form.kind.terms(&column))
        }
        "categorical" => {
            if let Some((key, at)) = misplaced("form") {
                r.report(
                    at,
                    format!("`{key}` applies only to a numeric `column` term in {what}"),
                    None,
                );
            }
            let column = r.name(&table["categorical"], &format!("`categorical` of {what}"))?;
            let reference = match table.get("reference") {
                Some(v) => Some(reference_level(r, v, &format!("`reference` of {what}"))?),
                None => None,
            };
            Some(vec![Term::Categorical { column, reference }])
        }
        "absorb" | "weights" => {
            for key in ["form", "reference"] {
                if let Some((key, at)) = misplaced(key) {
                    r.report(
                        at,
                        format!("`{key}` does not apply to `{}` in {what}", kinds[0]),
                        None,
                    );
                }
            }
            let column = r.name(&table[kinds[0]], &format!("`{}` of {what}", kinds[0]))?;
            if kinds[0] == "absorb" {
                return Some(vec![Term::Absorbed { column }]);
            }
            let kind = match table.get("kind") {
                None => WeightKind::Analytic,
                Some(v) => match r.string(v, &format!("`kind` of {what}"))?.as_str() {
                    "analytic" => WeightKind::Analytic,
                    "frequency" => WeightKind::Frequency,
                    other => {
                        r.report(
                            v.span().start,
                            format!("unknown weights kind `{other}` in {what}"),
                            Some(suggestion(other, &["analytic", "frequency"])),
                        );
                        return None;
                    }
                },
            };
            Some(vec![Term::Weights { column, kind }])
        }
        _ => {
            for key in ["form", "reference"] {
                if let Some((key, at)) = misplaced(key) {
                    r.report(
                        at,
                        format!("`{key}` does not apply to a product in {what}; put it on a side"),
                        None,
                    );
                }
            }
            product(r, &table["product"], what).map(|t| vec![t])
        }
    }
}

/// A reference level written as text or as an integer (for 0/1 or coded columns).
fn reference_level(r: &mut Reader<'_>, value: &Val<'_>, what: &str) -> Option<String> {
    match value.get_ref() {
        DeValue::Integer(_) => r.integer(value, what).map(|n| n.to_string()),
        _ => r.name(value, what),
    }
}

fn product(r: &mut Reader<'_>, value: &Val<'_>, what: &str) -> Option<Term> {
    let place = format!("`product` of {what}");
    let sides = r.array(value, &place)?;
    if sides.len() != 2 {
        r.report(
            value.span().start,
            format!("{place} must list exactly two terms, found {}", sides.len()),
            Some("for a three-way product, nest one product inside another".into()),
        );
        return None;
    }
    let mut parts = Vec::with_capacity(2);
    for (i, side) in sides.iter().enumerate() {
        let side_place = format!("side {} of {place}", i + 1);
        let mut terms = read_terms(r, side, &side_place)?;
        if terms.iter().any(Term::is_design_setting) {
            r.report(
                side.span().start,
                format!(
                    "{side_place} is an absorbed effect or weights, which cannot enter a product"
                ),
                Some("interact with an explicit { categorical = ... } term instead".into()),
            );
            return None;
        }
        if terms.len() != 1 {
            r.report(
                side.span().start,
                format!(
                    "{side_place} gives {} terms; a product side must be a single term",
                    terms.len()
                ),
                Some("write one product per power instead of a polynomial side".into()),
            );
            return None;
        }
        parts.push(terms.remove(0));
    }
    let right = parts.pop()?;
    let left = parts.pop()?;
    if left == right {
        r.report(
            value.span().start,
            format!("{place} multiplies a term by itself"),
            Some("use { column = ..., form = \"quadratic\" } for a square".into()),
        );
        return None;
    }
    Some(Term::Product(Box::new(left), Box::new(right)))
}
