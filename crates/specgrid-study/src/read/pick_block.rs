//! A `role = "pick"` control block: candidate `terms`, the set `size` (or `sizes`), and
//! `include_none`. Every problem is placed at the value that causes it.

use std::collections::HashMap;

use toml::de::DeTable;

use super::forms::read_terms;
use super::values::{Reader, Val};
use crate::picks::{option_count, MAX_PICK_OPTIONS};
use crate::plan::Term;
use crate::study::ControlRole;

/// Reads the pick-specific keys of a control block (`place` names it in messages).
pub(super) fn read_pick(
    r: &mut Reader<'_>,
    t: &DeTable<'_>,
    at: usize,
    place: &str,
) -> Option<ControlRole> {
    let include_none = match t.get("include_none") {
        Some(v) => r.boolean(v, &format!("`include_none` of {place}")),
        None => Some(false),
    };
    let terms_value = r.required(t, "terms", at, place);
    let terms = terms_value.and_then(|v| candidate_terms(r, v, place));
    let sizes = read_sizes(r, t, at, place, terms.as_ref().map(Vec::len));
    let (terms, sizes, include_none) = (terms?, sizes?, include_none?);
    let count = option_count(terms.len(), &sizes, include_none);
    let at_terms = terms_value.map(|v| v.span().start).unwrap_or(at);
    if count < 2 {
        r.report(
            at_terms,
            format!("{place} gives only one choice"),
            Some("list more terms, add `include_none = true`, or use role = \"always\"".into()),
        );
        return None;
    }
    if count > MAX_PICK_OPTIONS {
        r.report(
            at_terms,
            format!(
                "{place} makes {} sets, more than the {MAX_PICK_OPTIONS} one block may offer",
                if count == u128::MAX {
                    "more than 3.4e38".to_string()
                } else {
                    count.to_string()
                }
            ),
            Some(
                "use fewer terms or smaller sizes, or split the terms into several pick blocks"
                    .into(),
            ),
        );
        return None;
    }
    Some(ControlRole::Pick {
        terms,
        sizes,
        include_none,
    })
}

/// The candidate terms: each list item is exactly one term, no term twice, and no two terms
/// with the same label (the label names the term in option names).
fn candidate_terms(r: &mut Reader<'_>, v: &Val<'_>, place: &str) -> Option<Vec<Term>> {
    let what = format!("`terms` of {place}");
    let items = r.non_empty_array(v, &what, "list at least two terms")?;
    let before = r.problem_count();
    let mut terms: Vec<Term> = Vec::new();
    let mut by_label: HashMap<String, usize> = HashMap::new();
    for (i, item) in items.iter().enumerate() {
        let item_what = format!("term {} of {what}", i + 1);
        let Some(mut made) = read_terms(r, item, &item_what) else {
            continue;
        };
        if made.len() != 1 {
            r.report(
                item.span().start,
                format!("{item_what} makes {} terms; each candidate of a pick block must be one term", made.len()),
                Some("give this candidate a one-term form, or put the polynomial in an optional or alternatives block".into()),
            );
            continue;
        }
        let term = made.remove(0);
        if term.is_design_setting() {
            r.report(
                item.span().start,
                format!("{item_what} absorbs effects or gives weights, which a pick block cannot combine"),
                Some("put absorbed effects or weights in an alternatives block".into()),
            );
            continue;
        }
        let label = term.label();
        if let Some(&first) = by_label.get(&label) {
            let same = terms[first] == term;
            r.report(
                item.span().start,
                if same {
                    format!("{item_what} repeats term {} (`{label}`)", first + 1)
                } else {
                    format!(
                        "{item_what} has the same name `{label}` as term {}",
                        first + 1
                    )
                },
                Some("every candidate must appear once; remove the repeat".into()),
            );
            continue;
        }
        by_label.insert(label, terms.len());
        terms.push(term);
    }
    (r.problem_count() == before).then_some(terms)
}

/// `size = k` or `sizes = [k, …]` (exactly one of them): each between 1 and the number of
/// terms, no size twice. Returned ascending.
fn read_sizes(
    r: &mut Reader<'_>,
    t: &DeTable<'_>,
    at: usize,
    place: &str,
    term_count: Option<usize>,
) -> Option<Vec<usize>> {
    let written: Vec<(usize, &Val<'_>)> = match (t.get("size"), t.get("sizes")) {
        (Some(_), Some(v)) => {
            r.report(
                v.span().start,
                format!("{place} has both `size` and `sizes`"),
                Some("keep one: `size = 3`, or `sizes = [1, 2, 3]` for several".into()),
            );
            return None;
        }
        (None, None) => {
            r.report(
                at,
                format!(
                    "{place} needs `size` (or `sizes`): how many of its terms each model takes"
                ),
                Some("e.g. size = 3, or sizes = [1, 2, 3]".into()),
            );
            return None;
        }
        (Some(v), None) => vec![(0, v)],
        (None, Some(v)) => {
            let what = format!("`sizes` of {place}");
            let items = r.non_empty_array(v, &what, "e.g. sizes = [1, 2, 3]")?;
            items
                .iter()
                .enumerate()
                .map(|(i, item)| (i + 1, item))
                .collect()
        }
    };
    let before = r.problem_count();
    let mut sizes: Vec<usize> = Vec::new();
    for (i, v) in written {
        let what = if i == 0 {
            format!("`size` of {place}")
        } else {
            format!("size {i} of `sizes` of {place}")
        };
        let Some(k) = r.integer(v, &what) else {
            continue;
        };
        if k < 1 {
            r.report(
                v.span().start,
                format!("{what} is {k}; a set needs at least one term"),
                Some("for models without the block add `include_none = true`".into()),
            );
        } else if let Some(n) = term_count.filter(|&n| k as u128 > n as u128) {
            r.report(
                v.span().start,
                format!("{what} is {k}, more than the {n} terms of the block"),
                Some(format!("use a size between 1 and {n}")),
            );
        } else if sizes.contains(&(k as usize)) {
            r.report(
                v.span().start,
                format!("{what} repeats size {k}"),
                Some("list each size once".into()),
            );
        } else {
            sizes.push(k as usize);
        }
    }
    sizes.sort_unstable();
    (r.problem_count() == before && term_count.is_some()).then_some(sizes)
}
