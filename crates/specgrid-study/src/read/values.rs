//! Typed access to TOML values that records a positioned problem instead of failing.

use toml::de::{DeTable, DeValue};
use toml::Spanned;

use crate::problem::{suggestion, Source, StudyProblem};

/// A TOML value with its byte span.
pub(crate) type Val<'i> = Spanned<DeValue<'i>>;

/// Collects problems while the sections are read.
pub(crate) struct Reader<'s> {
    source: &'s Source,
    problems: Vec<StudyProblem>,
}

impl<'s> Reader<'s> {
    pub fn new(source: &'s Source) -> Self {
        Reader {
            source,
            problems: Vec::new(),
        }
    }

    pub fn source(&self) -> &'s Source {
        self.source
    }

    pub fn into_problems(self) -> Vec<StudyProblem> {
        self.problems
    }

    /// Number of problems so far (to tell whether a part read cleanly).
    pub fn problem_count(&self) -> usize {
        self.problems.len()
    }

    /// Record a problem at a byte offset.
    pub fn report(&mut self, offset: usize, message: impl Into<String>, hint: Option<String>) {
        let problem = self.source.problem(offset, message, hint);
        self.problems.push(problem);
    }

    /// Report every key of `table` not in `allowed`, with a did-you-mean suggestion.
    pub fn check_keys(&mut self, table: &DeTable<'_>, allowed: &[&str], place: &str) {
        for key in table.keys() {
            let name: &str = key.get_ref();
            if !allowed.contains(&name) {
                self.report(
                    key.span().start,
                    format!("unknown key `{name}` in {place}"),
                    Some(suggestion(name, allowed)),
                );
            }
        }
    }

    fn wrong_type(&mut self, value: &Val<'_>, what: &str, expected: &str) {
        self.report(
            value.span().start,
            format!(
                "{what} must be {expected}, found {}",
                a_type(value.get_ref())
            ),
            None,
        );
    }

    /// A required key; reports it missing at `table_offset`.
    pub fn required<'v, 'i>(
        &mut self,
        table: &'v DeTable<'i>,
        key: &str,
        table_offset: usize,
        place: &str,
    ) -> Option<&'v Val<'i>> {
        let value = table.get(key);
        if value.is_none() {
            self.report(
                table_offset,
                format!("missing key `{key}` in {place}"),
                Some(format!("add `{key} = ...` (see docs/study-file.md)")),
            );
        }
        value
    }

    pub fn string(&mut self, value: &Val<'_>, what: &str) -> Option<String> {
        match value.get_ref() {
            DeValue::String(s) => Some(s.to_string()),
            _ => {
                self.wrong_type(value, what, "a string");
                None
            }
        }
    }

    /// A non-empty string (names and column names).
    pub fn name(&mut self, value: &Val<'_>, what: &str) -> Option<String> {
        let s = self.string(value, what)?;
        if s.trim().is_empty() {
            self.report(
                value.span().start,
                format!("{what} must not be empty"),
                None,
            );
            return None;
        }
        Some(s)
    }

    pub fn integer(&mut self, value: &Val<'_>, what: &str) -> Option<i128> {
        match value.get_ref() {
            DeValue::Integer(i) => {
                let digits = i.as_str().replace('_', "");
                match i128::from_str_radix(&digits, i.radix()) {
                    Ok(n) => Some(n),
                    Err(_) => {
                        self.report(value.span().start, format!("{what} is out of range"), None);
                        None
                    }
                }
            }
            _ => {
                self.wrong_type(value, what, "an integer");
                None
            }
        }
    }

    /// An integer within `[low, high]`.
    pub fn integer_in(
        &mut self,
        value: &Val<'_>,
        what: &str,
        low: i128,
        high: i128,
    ) -> Option<i128> {
        let n = self.integer(value, what)?;
        if n < low || n > high {
            self.report(
                value.span().start,
                format!("{what} must be between {low} and {high}, found {n}"),
                None,
            );
            return None;
        }
        Some(n)
    }

    /// A finite number, written as an integer or a float.
    pub fn number(&mut self, value: &Val<'_>, what: &str) -> Option<f64> {
        let parsed = match value.get_ref() {
            DeValue::Integer(_) => self.integer(value, what).map(|n| n as f64),
            DeValue::Float(f) => f.as_str().replace('_', "").parse::<f64>().ok(),
            _ => {
                self.wrong_type(value, what, "a number");
                return None;
            }
        };
        match parsed {
            Some(x) if x.is_finite() => Some(x),
            Some(_) => {
                self.report(
                    value.span().start,
                    format!("{what} must be a finite number"),
                    None,
                );
                None
            }
            None => None,
        }
    }

    pub fn boolean(&mut self, value: &Val<'_>, what: &str) -> Option<bool> {
        match value.get_ref() {
            DeValue::Boolean(b) => Some(*b),
            _ => {
                self.wrong_type(value, what, "true or false");
                None
            }
        }
    }

    pub fn table<'v, 'i>(&mut self, value: &'v Val<'i>, what: &str) -> Option<&'v DeTable<'i>> {
        match value.get_ref() {
            DeValue::Table(t) => Some(t),
            _ => {
                self.wrong_type(value, what, "a table");
                None
            }
        }
    }

    /// An array of tables written with `[[name]]`; a single `[name]` table gets a hint.
    pub fn table_array<'v, 'i>(&mut self, value: &'v Val<'i>, name: &str) -> Option<&'v [Val<'i>]> {
        match value.get_ref() {
            DeValue::Array(a) => Some(a),
            other => {
                self.report(
                    value.span().start,
                    format!(
                        "[[{name}]] must be a list of tables, found {}",
                        a_type(other)
                    ),
                    Some(format!(
                        "write each entry under its own [[{name}]] header (double brackets)"
                    )),
                );
                None
            }
        }
    }

    pub fn array<'v, 'i>(&mut self, value: &'v Val<'i>, what: &str) -> Option<&'v [Val<'i>]> {
        match value.get_ref() {
            DeValue::Array(a) => Some(a),
            _ => {
                self.wrong_type(value, what, "an array");
                None
            }
        }
    }

    /// An array with at least one item; an empty one is reported as "`what` is empty" with
    /// `hint`.
    pub fn non_empty_array<'v, 'i>(
        &mut self,
        value: &'v Val<'i>,
        what: &str,
        hint: &str,
    ) -> Option<&'v [Val<'i>]> {
        let items = self.array(value, what)?;
        if items.is_empty() {
            self.report(
                value.span().start,
                format!("{what} is empty"),
                Some(hint.into()),
            );
            return None;
        }
        Some(items)
    }
}

/// "a string", "an integer", … for messages.
pub(crate) fn a_type(value: &DeValue<'_>) -> &'static str {
    match value {
        DeValue::String(_) => "a string",
        DeValue::Integer(_) => "an integer",
        DeValue::Float(_) => "a float",
        DeValue::Boolean(_) => "a boolean",
        DeValue::Datetime(_) => "a date-time",
        DeValue::Array(_) => "an array",
        DeValue::Table(_) => "a table",
    }
}
