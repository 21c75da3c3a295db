//! The `[study]`, `[outcome]`, `[focus]` and `[[controls]]` sections, and assembling the study.

use std::collections::HashSet;
use std::path::{Path, PathBuf};

use toml::de::DeTable;

use super::forms::{read_form, read_terms, Form, FormKind};
use super::values::{Reader, Val};
use super::{inference, pick_block, report, samples, settings, verdict};
use crate::plan::{OutcomeForm, RowPolicy, Term, Transform};
use crate::problem::suggestion;
use crate::study::{
    ControlBlock, ControlRole, FocusChoices, GridMode, NamedTerms, OutcomeChoices, Spots, Study,
};

/// Dimension names the planner uses itself; control blocks may not take them.
pub(crate) const RESERVED_DIMENSIONS: &[&str] = &["outcome", "focus", "sample", "controls"];

/// Read every section; `None` when any part failed (the problems are in the reader).
pub(crate) fn read_study(r: &mut Reader<'_>, doc: &DeTable<'_>) -> Option<Study> {
    let header = section(
        r,
        doc,
        "study",
        &["title", "data", "seed", "rows", "intercept", ALLOW_OUTSIDE],
    );
    let outcome_t = section(r, doc, "outcome", &["column", "forms"]);
    let focus_t = section(r, doc, "focus", &["column", "forms", "also_track"]);

    let settings = header.and_then(|(t, at)| read_header(r, t, at));
    let outcome = outcome_t.and_then(|(t, at)| read_outcome(r, t, at));
    let focus = focus_t.and_then(|(t, at)| read_focus(r, t, at));
    let controls = read_controls(r, doc.get("controls"));
    let samples = samples::read_samples(r, doc.get("samples"));
    let errors = settings::read_errors(r, doc.get("errors"));
    let grid = settings::read_grid(r, doc.get("grid"));
    let verdict = verdict::read_verdict(
        r,
        doc.get("verdict"),
        errors.as_ref().map(|e| e.0.as_slice()),
    );
    let report = report::read_report(r, doc.get("report"));
    let inference = inference::read_inference(r, doc.get("inference"));

    let header = settings?;
    let (grid, skips, spots) = grid?;
    let (errors, confidence_level, significance_level) = errors?;
    let mut study = Study {
        source_path: r.source().path.clone(),
        title: header.title,
        data_path: header.data_path,
        seed: header.seed,
        row_policy: header.row_policy,
        intercept: header.intercept,
        outcome: outcome?,
        focus: focus?,
        controls: controls?,
        samples: samples?,
        errors,
        confidence_level,
        significance_level,
        grid,
        verdict: verdict?,
        report: Default::default(),
        inference: Default::default(),
        source: r.source().clone(),
        spots: Spots { ..spots },
    };
    let outcome_at = outcome_t.map(|(_, at)| at).unwrap_or(0);
    let also_track_at = focus_t
        .and_then(|(t, _)| t.get("also_track"))
        .map(|v| v.span().start)
        .unwrap_or(0);
    if !check_block_names(r, &study, doc)
        || !check_outcome_not_regressor(r, &study, outcome_at)
        || !check_also_tracked_exist(r, &study, also_track_at)
    {
        return None;
    }
    study.grid.skip = settings::check_skips(r, &study, skips)?;
    study.report = report::check_report(r, &study, report?)?;
    study.inference = inference::check_inference(r, &study, inference?)?;
    Some(study)
}

/// A required top-level table and its offset.
fn section<'v, 'i>(
    r: &mut Reader<'_>,
    doc: &'v DeTable<'i>,
    name: &str,
    keys: &[&str],
) -> Option<(&'v DeTable<'i>, usize)> {
    let Some(value) = doc.get(name) else {
        r.report(
            0,
            format!("missing section [{name}]"),
            Some(format!("add a [{name}] table (see docs/study-file.md)")),
        );
        return None;
    };
    let table = r.table(value, &format!("[{name}]"))?;
    r.check_keys(table, keys, &format!("[{name}]"));
    Some((table, value.span().start))
}

struct Header {
    title: String,
    data_path: PathBuf,
    seed: u64,
    row_policy: RowPolicy,
    intercept: bool,
}

fn read_header(r: &mut Reader<'_>, t: &DeTable<'_>, at: usize) -> Option<Header> {
    let title = r
        .required(t, "title", at, "[study]")
        .and_then(|v| r.name(v, "`title` in [study]"));
    let allow_outside = match t.get(ALLOW_OUTSIDE) {
        Some(v) => r.boolean(v, &format!("`{ALLOW_OUTSIDE}` in [study]")),
        None => Some(false),
    };
    let data_path = r
        .required(t, "data", at, "[study]")
        .and_then(|v| data_path(r, v, allow_outside.unwrap_or(true)));
    let seed = match t.get("seed") {
        Some(v) => r
            .integer_in(v, "`seed` in [study]", 0, u64::MAX as i128)
            .map(|n| n as u64),
        None => Some(0),
    };
    let row_policy = match t.get("rows") {
        Some(v) => match r.string(v, "`rows` in [study]")?.as_str() {
            "shared" => Some(RowPolicy::SharedRows),
            "per-model" => Some(RowPolicy::PerModel),
            other => {
                r.report(
                    v.span().start,
                    format!("unknown row policy `{other}` in [study]"),
                    Some(suggestion(other, &["shared", "per-model"])),
                );
                None
            }
        },
        None => Some(RowPolicy::SharedRows),
    };
    let intercept = match t.get("intercept") {
        Some(v) => r.boolean(v, "`intercept` in [study]"),
        None => Some(true),
    };
    Some(Header {
        title: title?,
        data_path: data_path?,
        seed: seed?,
        row_policy: row_policy?,
        intercept: intercept?,
    })
}

/// The `[study]` key that lets the data path leave the study file's folder.
const ALLOW_OUTSIDE: &str = "allow_data_outside_folder";

/// The data path, resolved against the study file's folder; must end in .csv or .parquet, and
/// must stay inside that folder unless the study says `allow_data_outside_folder = true` (so a
/// study file from elsewhere cannot make an unattended run read any file on the machine).
fn data_path(r: &mut Reader<'_>, v: &Val<'_>, allow_outside: bool) -> Option<PathBuf> {
    let written = r.name(v, "`data` in [study]")?;
    if !allow_outside && leaves_folder(Path::new(&written)) {
        r.report(
            v.span().start,
            format!("data file `{written}` is outside the study file's folder"),
            Some(format!(
                "move the data beside the study, or add `{ALLOW_OUTSIDE} = true` to [study] if this path is intended"
            )),
        );
        return None;
    }
    let extension = Path::new(&written)
        .extension()
        .and_then(|e| e.to_str())
        .map(|e| e.to_ascii_lowercase());
    if !matches!(extension.as_deref(), Some("csv") | Some("parquet")) {
        r.report(
            v.span().start,
            format!("data file `{written}` must end in .csv or .parquet"),
            Some("the extension chooses the reader; rename or convert the file".into()),
        );
        return None;
    }
    let folder = r
        .source()
        .path
        .parent()
        .map(Path::to_path_buf)
        .unwrap_or_default();
    Some(folder.join(written))
}

/// Whether a path written in the study leaves the study's folder: absolute, or more `..` steps
/// than folders at some point. Judged on the text alone (symbolic links are not followed).
fn leaves_folder(path: &Path) -> bool {
    use std::path::Component;
    let mut depth: i64 = 0;
    for component in path.components() {
        match component {
            Component::Prefix(_) | Component::RootDir => return true,
            Component::CurDir => {}
            Component::ParentDir => {
                depth -= 1;
                if depth < 0 {
                    return true;
                }
            }
            Component::Normal(_) => depth += 1,
        }
    }
    false
}

fn read_outcome(r: &mut Reader<'_>, t: &DeTable<'_>, at: usize) -> Option<OutcomeChoices> {
    let column = r
        .required(t, "column", at, "[outcome]")
        .and_then(|v| r.name(v, "`column` in [outcome]"));
    let forms = read_forms(r, t.get("forms"), "[outcome]")?;
    let mut out = Vec::new();
    let mut ok = true;
    for (form, offset) in forms {
        match form.kind.outcome_transform() {
            Some(transform) => out.push((form.name, transform)),
            None => {
                r.report(
                    offset,
                    format!("form `{}` is not available for the outcome", form.name),
                    Some("outcome forms: `level`, `log`, `log1p`, `asinh`".into()),
                );
                ok = false;
            }
        }
    }
    let column = column?;
    if !ok {
        return None;
    }
    Some(OutcomeChoices {
        forms: out
            .into_iter()
            .map(|(name, transform)| {
                (
                    name,
                    OutcomeForm {
                        column: column.clone(),
                        transform,
                    },
                )
            })
            .collect(),
        column,
    })
}

/// The `forms` list (default `["level"]`), with unique option names.
fn read_forms(
    r: &mut Reader<'_>,
    value: Option<&Val<'_>>,
    place: &str,
) -> Option<Vec<(Form, usize)>> {
    let Some(value) = value else {
        return Some(vec![(
            Form {
                name: "level".into(),
                kind: FormKind::Single(Transform::Level),
            },
            0,
        )]);
    };
    let what = format!("`forms` in {place}");
    let items = r.non_empty_array(value, &what, "list at least one form, e.g. [\"level\"]")?;
    let before = r.problem_count();
    let mut forms = Vec::new();
    let mut seen = HashSet::new();
    for (i, item) in items.iter().enumerate() {
        if let Some(form) = read_form(r, item, &format!("form {} of {what}", i + 1)) {
            if !seen.insert(form.name.clone()) {
                r.report(
                    item.span().start,
                    format!("form name `{}` appears twice in {what}", form.name),
                    Some("give one of them a different `name`".into()),
                );
            }
            forms.push((form, item.span().start));
        }
    }
    (r.problem_count() == before).then_some(forms)
}

fn read_focus(r: &mut Reader<'_>, t: &DeTable<'_>, at: usize) -> Option<FocusChoices> {
    let column = r
        .required(t, "column", at, "[focus]")
        .and_then(|v| r.name(v, "`column` in [focus]"));
    let forms = read_forms(r, t.get("forms"), "[focus]");
    let also_track = match t.get("also_track") {
        Some(v) => term_list(r, v, "`also_track` in [focus]").and_then(|terms| {
            if terms.iter().any(Term::is_design_setting) {
                r.report(
                    v.span().start,
                    "`also_track` lists absorbed effects or weights, which have no coefficient",
                    Some("track an explicit term instead".into()),
                );
                return None;
            }
            Some(terms)
        }),
        None => Some(Vec::new()),
    };
    let column = column?;
    let forms = forms?
        .into_iter()
        .map(|(form, _)| NamedTerms {
            terms: form.kind.terms(&column),
            name: form.name,
        })
        .collect();
    Some(FocusChoices {
        column,
        forms,
        also_track: also_track?,
    })
}

/// A list of term specifications, flattened, duplicates removed.
pub(super) fn term_list(r: &mut Reader<'_>, value: &Val<'_>, what: &str) -> Option<Vec<Term>> {
    let items = r.array(value, what)?;
    let before = r.problem_count();
    let mut terms: Vec<Term> = Vec::new();
    for (i, item) in items.iter().enumerate() {
        if let Some(ts) = read_terms(r, item, &format!("term {} of {what}", i + 1)) {
            for t in ts {
                if !terms.contains(&t) {
                    terms.push(t);
                }
            }
        }
    }
    (r.problem_count() == before).then_some(terms)
}

fn read_controls(r: &mut Reader<'_>, value: Option<&Val<'_>>) -> Option<Vec<ControlBlock>> {
    let Some(value) = value else {
        return Some(Vec::new());
    };
    let items = r.table_array(value, "controls")?;
    let before = r.problem_count();
    let mut blocks = Vec::new();
    for (i, item) in items.iter().enumerate() {
        let place = format!("control block {}", i + 1);
        if let Some(table) = r.table(item, &place) {
            if let Some(block) = read_block(r, table, item.span().start, &place) {
                blocks.push(block);
            }
        }
    }
    (r.problem_count() == before).then_some(blocks)
}

fn read_block(r: &mut Reader<'_>, t: &DeTable<'_>, at: usize, place: &str) -> Option<ControlBlock> {
    r.check_keys(
        t,
        &[
            "name",
            "role",
            "terms",
            "options",
            "include_none",
            "size",
            "sizes",
        ],
        place,
    );
    let name = r
        .required(t, "name", at, place)
        .and_then(|v| r.name(v, &format!("`name` of {place}")));
    let place = match &name {
        Some(n) => format!("control block `{n}`"),
        None => place.to_string(),
    };
    let role_value = r.required(t, "role", at, &place)?;
    let role_word = r.string(role_value, &format!("`role` of {place}"))?;
    let misplaced = |r: &mut Reader<'_>, key: &str, role: &str| {
        if let Some(v) = t.get(key) {
            let hint = match key {
                "options" => "use `terms` for an always, optional or pick block",
                "size" | "sizes" => "use `size` or `sizes` only with role = \"pick\"",
                "terms" => "list the terms of each option inside `options`",
                _ => "use `include_none` only with role = \"alternatives\" or \"pick\"",
            };
            r.report(
                v.span().start,
                format!("`{key}` does not apply to a block with role `{role}` ({place})"),
                Some(hint.into()),
            );
        }
    };
    let role = match role_word.as_str() {
        "always" | "optional" => {
            for key in ["options", "include_none", "size", "sizes"] {
                misplaced(r, key, &role_word);
            }
            let terms = r
                .required(t, "terms", at, &place)
                .and_then(|v| non_empty_terms(r, v, &format!("`terms` of {place}")))?;
            if role_word == "always" {
                ControlRole::Always(terms)
            } else {
                ControlRole::Optional(terms)
            }
        }
        "alternatives" => {
            for key in ["terms", "size", "sizes"] {
                misplaced(r, key, "alternatives");
            }
            let include_none = match t.get("include_none") {
                Some(v) => r.boolean(v, &format!("`include_none` of {place}"))?,
                None => false,
            };
            let options = r
                .required(t, "options", at, &place)
                .and_then(|v| read_alternatives(r, v, &place, include_none))?;
            ControlRole::Alternatives {
                options,
                include_none,
            }
        }
        "pick" => {
            misplaced(r, "options", "pick");
            pick_block::read_pick(r, t, at, &place)?
        }
        other => {
            r.report(
                role_value.span().start,
                format!("unknown role `{other}` of {place}"),
                Some(suggestion(
                    other,
                    &["always", "optional", "alternatives", "pick"],
                )),
            );
            return None;
        }
    };
    Some(ControlBlock { name: name?, role })
}

pub(super) fn non_empty_terms(r: &mut Reader<'_>, v: &Val<'_>, what: &str) -> Option<Vec<Term>> {
    let terms = term_list(r, v, what)?;
    if terms.is_empty() {
        r.report(
            v.span().start,
            format!("{what} is empty"),
            Some("list at least one term".into()),
        );
        return None;
    }
    Some(terms)
}

fn read_alternatives(
    r: &mut Reader<'_>,
    v: &Val<'_>,
    place: &str,
    include_none: bool,
) -> Option<Vec<NamedTerms>> {
    let what = format!("`options` of {place}");
    let items = r.array(v, &what)?;
    if items.len() + usize::from(include_none) < 2 {
        r.report(
            v.span().start,
            format!("{what} gives fewer than two choices"),
            Some("list at least two options, or one with include_none = true; or use role = \"optional\"".into()),
        );
        return None;
    }
    let before = r.problem_count();
    let mut options: Vec<NamedTerms> = Vec::new();
    for (i, item) in items.iter().enumerate() {
        let opt_place = format!("option {} of {what}", i + 1);
        let Some(table) = r.table(item, &opt_place) else {
            continue;
        };
        r.check_keys(table, &["name", "terms"], &opt_place);
        let name = r
            .required(table, "name", item.span().start, &opt_place)
            .and_then(|n| r.name(n, &format!("`name` of {opt_place}")));
        let terms = r
            .required(table, "terms", item.span().start, &opt_place)
            .and_then(|t| non_empty_terms(r, t, &format!("`terms` of {opt_place}")));
        if let (Some(name), Some(terms)) = (name, terms) {
            if name == "none" && include_none || options.iter().any(|o| o.name == name) {
                r.report(
                    item.span().start,
                    format!("option name `{name}` is used twice in {place}"),
                    Some("give every option its own name (`none` is taken by include_none)".into()),
                );
            }
            options.push(NamedTerms { name, terms });
        }
    }
    (r.problem_count() == before).then_some(options)
}

/// Decision names must be unique and must not clash with the planner's own dimensions.
fn check_block_names(r: &mut Reader<'_>, study: &Study, doc: &DeTable<'_>) -> bool {
    let before = r.problem_count();
    let offsets: Vec<usize> = doc
        .get("controls")
        .and_then(|v| v.get_ref().as_array())
        .map(|a| a.iter().map(|v| v.span().start).collect())
        .unwrap_or_default();
    let mut seen: HashSet<&str> = HashSet::new();
    for (i, block) in study.controls.iter().enumerate() {
        let at = offsets.get(i).copied().unwrap_or(0);
        let reserved = RESERVED_DIMENSIONS.contains(&block.name.as_str())
            && !(block.name == "controls" && study.grid.mode == GridMode::Full);
        if reserved {
            r.report(
                at,
                format!(
                    "control block name `{}` is reserved for a decision of its own",
                    block.name
                ),
                Some("rename the block".into()),
            );
        } else if !seen.insert(block.name.as_str()) {
            r.report(
                at,
                format!("control block name `{}` is used twice", block.name),
                Some("every block needs its own name; it names a column in the results".into()),
            );
        }
    }
    r.problem_count() == before
}

/// Every regressor term a study can put in a model, with duplicates.
fn all_regressors(study: &Study) -> Vec<&Term> {
    let focus = study.focus.forms.iter().flat_map(|f| &f.terms);
    let controls = study.controls.iter().flat_map(|b| match &b.role {
        ControlRole::Always(ts) | ControlRole::Optional(ts) => ts.iter().collect::<Vec<_>>(),
        ControlRole::Alternatives { options, .. } => {
            options.iter().flat_map(|o| &o.terms).collect()
        }
        ControlRole::Pick { terms, .. } => terms.iter().collect(),
    });
    focus.chain(controls).collect()
}

/// A tracked term that no model can contain is almost surely a typo; it would silently never
/// be reported.
fn check_also_tracked_exist(r: &mut Reader<'_>, study: &Study, at: usize) -> bool {
    let present: HashSet<String> = all_regressors(study)
        .iter()
        .map(|t| t.canonical())
        .collect();
    let mut ok = true;
    for term in &study.focus.also_track {
        if !present.contains(&term.canonical()) {
            r.report(
                at,
                format!(
                    "`also_track` lists `{}`, which no focus form or control block contains",
                    term.label()
                ),
                Some("add the term to a control block, or check its spelling and form".into()),
            );
            ok = false;
        }
    }
    ok
}

/// The outcome column may not also be a regressor: its coefficient would be exactly one.
fn check_outcome_not_regressor(r: &mut Reader<'_>, study: &Study, at: usize) -> bool {
    let outcome = study.outcome.column.as_str();
    let offending = all_regressors(study)
        .into_iter()
        .chain(&study.focus.also_track)
        .find(|t| t.columns().contains(&outcome));
    if let Some(term) = offending {
        r.report(
            at,
            format!(
                "the outcome column `{outcome}` is also used as a regressor (in `{}`)",
                term.label()
            ),
            Some(
                "remove it from the regressors; a lagged or other version needs its own column"
                    .into(),
            ),
        );
        return false;
    }
    true
}
