//! Shared helpers for the data-layer tests: small files in a temporary folder and hand-built
//! plans (the planner is not needed to exercise the data layer).
#![allow(dead_code)]

use std::path::{Path, PathBuf};

use specgrid_study::{
    Condition, Dimension, DimensionKind, ErrorChoice, OutcomeForm, Plan, PlannedModel, RowPolicy,
    Sample, Term, Transform,
};

/// Writes `content` to `dir/name` and returns the path.
pub fn write(dir: &Path, name: &str, content: &str) -> PathBuf {
    let path = dir.join(name);
    std::fs::write(&path, content).unwrap();
    path
}

/// A numeric term.
pub fn num(column: &str, transform: Transform) -> Term {
    Term::Numeric {
        column: column.into(),
        transform,
    }
}

/// A categorical term.
pub fn cat(column: &str, reference: Option<&str>) -> Term {
    Term::Categorical {
        column: column.into(),
        reference: reference.map(str::to_string),
    }
}

/// An outcome form.
pub fn outcome(column: &str, transform: Transform) -> OutcomeForm {
    OutcomeForm {
        column: column.into(),
        transform,
    }
}

/// A sample.
pub fn sample(name: &str, conditions: Vec<Condition>) -> Sample {
    Sample {
        name: name.into(),
        conditions,
    }
}

/// A model with an intercept; the first term is tracked.
pub fn model(outcome: usize, sample: usize, terms: Vec<usize>) -> PlannedModel {
    PlannedModel {
        id: format!("m{outcome}-{sample}-{terms:?}"),
        choices: Vec::new(),
        outcome,
        sample,
        tracked: terms.first().copied().into_iter().collect(),
        terms,
        intercept: true,
    }
}

/// A plan over `path` with every sample in `samples` and the given models.
pub fn plan(
    path: &Path,
    outcomes: Vec<OutcomeForm>,
    terms: Vec<Term>,
    samples: Vec<Sample>,
    models: Vec<PlannedModel>,
) -> Plan {
    Plan {
        title: "orchard test".into(),
        focus_column: String::new(),
        report: Default::default(),
        inference: Default::default(),
        data_path: path.to_path_buf(),
        seed: 1,
        dimensions: vec![Dimension {
            name: "sample".into(),
            kind: DimensionKind::Sample,
            options: samples.iter().map(|s| s.name.clone()).collect(),
            candidates: Vec::new(),
        }],
        terms,
        outcomes,
        samples,
        errors: vec![ErrorChoice::Hc1],
        confidence_level: 0.95,
        significance_level: 0.05,
        row_policy: RowPolicy::SharedRows,
        size_before_exclusions: 1,
        size_after_exclusions: 1,
        random_sample: None,
        baseline: Some(0),
        factorisations: models.len(),
        models,
    }
}

/// A plan with one outcome (level), the given terms, one unconditioned sample and one model
/// using every term.
pub fn simple_plan(path: &Path, y: &str, terms: Vec<Term>) -> Plan {
    let all: Vec<usize> = (0..terms.len()).collect();
    plan(
        path,
        vec![outcome(y, Transform::Level)],
        terms,
        vec![sample("all", Vec::new())],
        vec![model(0, 0, all)],
    )
}

/// Column `j` of a design's x as a vector.
pub fn x_col(design: &specgrid_ols::Design, j: usize) -> Vec<f64> {
    (0..design.x.nrows()).map(|i| design.x[(i, j)]).collect()
}

/// Column `j` of a design's y as a vector.
pub fn y_col(design: &specgrid_ols::Design, j: usize) -> Vec<f64> {
    (0..design.y.nrows()).map(|i| design.y[(i, j)]).collect()
}
