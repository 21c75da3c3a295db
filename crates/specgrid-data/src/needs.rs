//! What the plan needs from the data file: which source columns, and whether each is used as a
//! number (and so must hold only numbers).

use specgrid_study::{Condition, Plan, Term, Value};

/// One needed source column and how the plan uses it.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ColumnNeed {
    /// Column name.
    pub name: String,
    /// Used as a number: numeric term, outcome, numeric comparison or quantile drop.
    pub numeric: bool,
}

/// Needed columns in first-use order (outcomes, terms, sample conditions, cluster columns).
pub fn column_needs(plan: &Plan) -> Vec<ColumnNeed> {
    let mut needs: Vec<ColumnNeed> = Vec::new();
    let mut add = |name: &str, numeric: bool| {
        if let Some(n) = needs.iter_mut().find(|n| n.name == name) {
            n.numeric |= numeric;
        } else {
            needs.push(ColumnNeed {
                name: name.to_string(),
                numeric,
            });
        }
    };
    for outcome in &plan.outcomes {
        add(&outcome.column, true);
    }
    for term in &plan.terms {
        term_columns(term, &mut add);
    }
    for sample in &plan.samples {
        for condition in &sample.conditions {
            match condition {
                Condition::Compare { column, value, .. } => {
                    add(column, matches!(value, Value::Number(_)))
                }
                Condition::InSet { column, .. } | Condition::NotInSet { column, .. } => {
                    add(column, false)
                }
                Condition::DropAboveQuantile { column, .. }
                | Condition::DropBelowQuantile { column, .. } => add(column, true),
            }
        }
    }
    for column in cluster_columns(plan) {
        add(&column, false);
    }
    needs
}

fn term_columns(term: &Term, add: &mut impl FnMut(&str, bool)) {
    match term {
        Term::Numeric { column, .. } => add(column, true),
        Term::Categorical { column, .. } | Term::Absorbed { column } => add(column, false),
        Term::Weights { column, .. } => add(column, true),
        Term::Product(a, b) => {
            term_columns(a, add);
            term_columns(b, add);
        }
    }
}

/// Clustering columns in the order the plan's error choices first name them, then the joint
/// test's clustering column; this order is the index of each clustering dimension in every
/// design's `clusters`.
pub fn cluster_columns(plan: &Plan) -> Vec<String> {
    let mut out: Vec<String> = Vec::new();
    let mut add = |c: &str| {
        if !out.iter().any(|o| o == c) {
            out.push(c.to_string());
        }
    };
    for choice in &plan.errors {
        choice.cluster_columns().into_iter().for_each(&mut add);
    }
    if let Some(column) = plan
        .inference
        .joint_test
        .as_ref()
        .and_then(|j| j.cluster.as_deref())
    {
        add(column);
    }
    out
}
