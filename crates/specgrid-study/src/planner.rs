//! Expanding a study into its planned models.

use std::cmp::Ordering;

use rayon::prelude::*;

use crate::grid::{decode, full_size, ContentScratch, Layout, SkipBox};
use crate::ids::{canonical_text, id_bits, model_id, outcome_text, sample_text};
use crate::kept::Kept;
use crate::plan::{Dimension, OutcomeForm, Plan, PlannedModel, RowPolicy, Term, Transform};
use crate::problem::StudyProblem;
use crate::study::Study;

/// Grid sizes, computed without enumerating the grid.
#[derive(Debug, Clone, PartialEq)]
pub struct GridCount {
    /// Decision dimensions with their options.
    pub dimensions: Vec<Dimension>,
    /// Size of the full expansion (product of option counts, saturating at `u128::MAX`).
    pub before_exclusions: u128,
    /// Size after skip rules.
    pub after_exclusions: u128,
}

/// Count the grid before and after skip rules, without walking it (see `kept.rs`).
pub fn count_grid(study: &Study) -> Result<GridCount, Vec<StudyProblem>> {
    let (layout, kept) = kept_grid(study)?;
    let before = full_size(&layout.radices());
    Ok(GridCount {
        dimensions: layout.dimensions,
        before_exclusions: before,
        after_exclusions: kept.total(),
    })
}

/// The layout and the kept part of the grid.
fn kept_grid(study: &Study) -> Result<(Layout, Kept), Vec<StudyProblem>> {
    let layout = Layout::new(study);
    let radices = layout.radices();
    let boxes = skip_boxes(study, &layout);
    match Kept::new(&radices, &boxes) {
        Some(kept) => Ok((layout, kept)),
        None => Err(vec![study.source.problem(
            study.spots.grid,
            format!(
                "the skip rules overlap in too many ways to count a grid of {} models",
                count_text(full_size(&radices))
            ),
            Some("merge skip rules (a rule may list several options per decision)".into()),
        )]),
    }
}

fn skip_boxes(study: &Study, layout: &Layout) -> Vec<SkipBox> {
    study
        .grid
        .skip
        .iter()
        .map(|rule| SkipBox::new(rule, &layout.dimensions))
        .collect()
}

/// Expand a study into its models: count, refuse past the limit, apply skip rules, draw the
/// random sample if asked, and describe every model with its terms and stable id.
pub fn plan(study: &Study) -> Result<Plan, Vec<StudyProblem>> {
    let (layout, kept_points) = kept_grid(study)?;
    let count = GridCount {
        dimensions: layout.dimensions.clone(),
        before_exclusions: full_size(&layout.radices()),
        after_exclusions: kept_points.total(),
    };
    let kept = count.after_exclusions;
    if kept == 0 {
        return Err(vec![study.source.problem(
            study.spots.grid,
            format!(
                "the skip rules leave none of the {} models",
                count_text(count.before_exclusions)
            ),
            Some("loosen the skip rules in [grid]".into()),
        )]);
    }
    let wanted = match study.grid.sample {
        Some(n) if (n as u128) < kept => n as u128,
        _ => kept,
    };
    if wanted > study.grid.limit {
        let (at, hint) = match study.grid.sample {
            Some(_) => (study.spots.sample, "lower `sample` or raise `limit` in [grid]".to_string()),
            None => (
                study.spots.limit,
                "raise `limit` in [grid], add skip rules, or set `sample = N` in [grid] to draw N models at random".to_string(),
            ),
        };
        return Err(vec![study.source.problem(
            at,
            format!(
                "the grid has {} models ({} before skip rules), more than the limit of {}",
                count_text(kept),
                count_text(count.before_exclusions),
                study.grid.limit
            ),
            Some(hint),
        )]);
    }
    let indices = if wanted == kept {
        kept_points.all()
    } else {
        kept_points.draw(wanted, study.seed)
    };
    build(study, &layout, &count, indices)
}

/// Counts past a trillion read better in scientific form, with the exact value too.
fn count_text(n: u128) -> String {
    if n == u128::MAX {
        "more than 3.4e38".into()
    } else if n >= 1_000_000_000_000 {
        format!("{n} (≈{:.3e})", n as f64)
    } else {
        n.to_string()
    }
}

fn build(
    study: &Study,
    layout: &Layout,
    count: &GridCount,
    indices: Vec<u128>,
) -> Result<Plan, Vec<StudyProblem>> {
    let radices = layout.radices();
    let table = &layout.table;
    // Study term number → plan term number, assigned in first-use order.
    let mut plan_term: Vec<Option<usize>> = vec![None; table.terms.len()];
    let mut terms: Vec<Term> = Vec::new();
    let mut plan_outcome: Vec<Option<usize>> = vec![None; study.outcome.forms.len()];
    let mut outcomes: Vec<OutcomeForm> = Vec::new();
    let sample_texts: Vec<String> = study.samples.iter().map(sample_text).collect();
    let outcome_texts: Vec<String> = study
        .outcome
        .forms
        .iter()
        .map(|(_, f)| outcome_text(f))
        .collect();
    // (id as a number, model position): sorted afterwards to find repeated ids.
    let mut id_order: Vec<(u64, usize)> = Vec::with_capacity(indices.len());
    let mut two_weights: Option<usize> = None;
    // Decoding, content and id of each model are independent, so they run on the rayon
    // threads (the id's SHA-256 was most of the planner's time at millions of models). The
    // models come out with the study's term and outcome numbers, renumbered below in plan order
    // and in place (at millions of models a second copy of every list was hundreds of megabytes
    // of fresh memory).
    let mut models: Vec<PlannedModel> = indices
        .par_iter()
        .map_init(
            || (String::new(), ContentScratch::default()),
            |(text, scratch), &index| {
                let choices = decode(index, &radices);
                let content = layout.content_with(&choices, scratch);
                canonical_text(
                    table,
                    &content,
                    &outcome_texts[content.outcome],
                    &sample_texts[content.sample],
                    study.intercept,
                    text,
                );
                PlannedModel {
                    id: model_id(text),
                    choices,
                    outcome: content.outcome,
                    sample: content.sample,
                    terms: content.terms,
                    tracked: content.tracked,
                    intercept: study.intercept,
                }
            },
        )
        .collect();
    drop(indices);
    for (position, model) in models.iter_mut().enumerate() {
        let mut number = |t: &mut usize| {
            *t = *plan_term[*t].get_or_insert_with(|| {
                terms.push(table.terms[*t].clone());
                terms.len() - 1
            })
        };
        model.terms.iter_mut().for_each(&mut number);
        model.tracked.iter_mut().for_each(&mut number);
        let form = &study.outcome.forms[model.outcome].1;
        model.outcome = *plan_outcome[model.outcome].get_or_insert_with(|| {
            outcomes.push(form.clone());
            outcomes.len() - 1
        });
        id_order.push((id_bits(&model.id), position));
        let absorbs = model
            .terms
            .iter()
            .any(|&t| matches!(terms[t], Term::Absorbed { .. }));
        let weight_terms = model
            .terms
            .iter()
            .filter(|&&t| matches!(terms[t], Term::Weights { .. }))
            .count();
        if weight_terms > 1 && two_weights.is_none() {
            two_weights = Some(position);
        }
        // Absorbed effects span the constant, so the model has none of its own.
        model.intercept = study.intercept && !absorbs;
    }
    let mut plan = Plan {
        title: study.title.clone(),
        focus_column: study.focus.column.clone(),
        report: study.report.clone(),
        inference: study.inference.clone(),
        data_path: study.data_path.clone(),
        seed: study.seed,
        dimensions: layout.dimensions.clone(),
        terms,
        outcomes,
        samples: study.samples.clone(),
        errors: study.errors.clone(),
        confidence_level: study.confidence_level,
        significance_level: study.significance_level,
        row_policy: study.row_policy,
        size_before_exclusions: count.before_exclusions,
        size_after_exclusions: count.after_exclusions,
        random_sample: study
            .grid
            .sample
            .filter(|&n| (n as u128) < count.after_exclusions),
        baseline: None,
        factorisations: 0,
        models,
    };
    let duplicates = repeated_ids(id_order);
    if !duplicates.is_empty() {
        return Err(duplicate_problems(study, &plan, &duplicates));
    }
    if let Some(m) = two_weights {
        let choices: Vec<String> = plan
            .choice_names(&plan.models[m])
            .iter()
            .map(|(d, o)| format!("{d}={o}"))
            .collect();
        return Err(vec![study.source.problem(
            study.spots.grid,
            format!(
                "the model [{}] would use two weights columns at once",
                choices.join(", ")
            ),
            Some("put every weights option in one control block (one decision), or skip the combination in [grid]".into()),
        )]);
    }
    plan.baseline = match &study.report.baseline {
        Some(named) => plan.models.iter().position(|m| &m.choices == named),
        None => plan
            .models
            .iter()
            .position(|m| m.choices.iter().all(|&c| c == 0)),
    };
    if plan.baseline.is_none() && plan.random_sample.is_none() && study.report.baseline.is_some() {
        return Err(vec![study.source.problem(
            study.spots.grid,
            "the baseline named in [report] is excluded by a skip rule of [grid]",
            Some("name a baseline the grid contains, or narrow the skip rule".into()),
        )]);
    }
    plan.factorisations = count_factorisations(&plan);
    Ok(plan)
}

/// Two choice combinations that give the same regression would count it twice in every
/// summary; refuse and say which.
fn duplicate_problems(
    study: &Study,
    plan: &Plan,
    duplicates: &[(usize, usize)],
) -> Vec<StudyProblem> {
    let describe = |m: usize| {
        plan.choice_names(&plan.models[m])
            .iter()
            .map(|(d, o)| format!("{d}={o}"))
            .collect::<Vec<_>>()
            .join(", ")
    };
    let shown: Vec<String> = duplicates
        .iter()
        .take(3)
        .map(|&(a, b)| format!("[{}] and [{}]", describe(a), describe(b)))
        .collect();
    vec![study.source.problem(
        study.spots.grid,
        format!(
            "{} pair(s) of choices give the same model, e.g. {}",
            duplicates.len(),
            shown.join("; ")
        ),
        Some("a term probably appears both in the focus and in a control block; remove the overlap or add a skip rule in [grid]".into()),
    )]
}

/// Pairs (first, later) of model positions with the same id (the same content planned
/// twice). Ids are 48 bits of SHA-256, so unrelated models share one with odds of about 2⁻⁴⁸
/// per pair.
fn repeated_ids(mut id_order: Vec<(u64, usize)>) -> Vec<(usize, usize)> {
    // Millions of ids: sorted on the rayon threads (the pairs are distinct, so the order is
    // the same as a sequential sort's).
    id_order.par_sort_unstable();
    id_order
        .windows(2)
        .filter(|w| w[0].0 == w[1].0)
        .map(|w| (w[0].1, w[1].1))
        .collect()
}

/// A model's factorisation key: sample, row domain, a 64-bit mix of its sorted terms (to sort
/// plain integers), and the sorted terms as a range of a shared list (to settle equal mixes).
type FactorKey = (usize, u8, u64, usize, usize);

/// Models of one sample with the same term set share one factorisation of their design; under
/// per-model rows the outcome's domain also shapes the rows. Counted by sorting the models'
/// keys, kept in one flat list (a set of per-model vectors costs too much at 2,000,000).
fn count_factorisations(plan: &Plan) -> usize {
    let mut terms: Vec<u32> = Vec::new();
    let mut keys: Vec<FactorKey> = Vec::with_capacity(plan.models.len());
    for m in &plan.models {
        let domain = match plan.row_policy {
            RowPolicy::SharedRows => 0,
            RowPolicy::PerModel => {
                let o = &plan.outcomes[m.outcome];
                // Different outcome columns may have different missing cells.
                let column_tag = plan
                    .outcomes
                    .iter()
                    .position(|x| x.column == o.column)
                    .unwrap_or(0) as u8;
                let domain = match o.transform {
                    Transform::Log => 1,
                    Transform::Log1p => 2,
                    _ => 0,
                };
                column_tag.wrapping_mul(3).wrapping_add(domain)
            }
        };
        let start = terms.len();
        terms.extend(m.terms.iter().map(|&t| t as u32));
        terms[start..].sort_unstable();
        // Any mix works: equal term lists always mix equally, and unequal ones that collide
        // are told apart by the comparison below.
        let mix = terms[start..]
            .iter()
            .fold(0xcbf2_9ce4_8422_2325u64, |h, &t| {
                (h ^ u64::from(t)).wrapping_mul(0x0100_0000_01b3)
            });
        keys.push((m.sample, domain, mix, start, terms.len()));
    }
    let compare = |a: &FactorKey, b: &FactorKey| -> Ordering {
        (a.0, a.1, a.2)
            .cmp(&(b.0, b.1, b.2))
            .then_with(|| terms[a.3..a.4].cmp(&terms[b.3..b.4]))
    };
    keys.sort_unstable_by(compare);
    let repeats = keys
        .windows(2)
        .filter(|w| compare(&w[0], &w[1]) == Ordering::Equal)
        .count();
    keys.len() - repeats
}
