//! Assembling the union design of each sample (or each group of models with identical rows) for
//! the engine.

use std::collections::HashMap;
use std::ops::Range;
use std::path::PathBuf;

use specgrid_ols::{ClusterIds, Covariance, Design, ModelSpec};
use specgrid_study::{ErrorChoice, Plan, PlannedModel, RowPolicy, Term};

use crate::atoms::{push_unique, term_atoms, validity_class, Atom};
use crate::column::Levels;
use crate::error::{fmt_rows, DataError, DataWarning};
use crate::expand::{Expander, NamedColumn};
use crate::loaded::LoadedData;
use crate::needs::cluster_columns;
use crate::sample::sample_mask;
use crate::transform::{apply, label, undefined_rule};

/// Name of the intercept column.
pub const INTERCEPT: &str = "(intercept)";

/// Why rows of a sample were left out of a design. A row can have several reasons, so the
/// counts may overlap.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum DropReason {
    /// The row does not meet the sample's conditions.
    SampleConditions,
    /// A needed column is missing in the row.
    Missing {
        /// Column name.
        column: String,
    },
    /// A transform is undefined at the row's value (the value is present).
    Undefined {
        /// Term label, e.g. `log(visits)`.
        term: String,
        /// Source column.
        column: String,
        /// The rule, e.g. `visits ≤ 0`.
        rule: String,
    },
    /// The row is alone in a level of an absorbed effect (dropped repeatedly until none is).
    Singleton,
    /// The row's weight is zero.
    ZeroWeight,
}

/// Rows dropped for one reason.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct DropCount {
    /// The reason.
    pub reason: DropReason,
    /// Rows dropped for it (sample-condition drops count rows of the file; the others count
    /// rows of the sample).
    pub rows: usize,
}

/// How the rows of a design came about.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct RowAccount {
    /// Rows in the data file.
    pub rows_read: usize,
    /// Rows meeting the sample's conditions.
    pub rows_in_sample: usize,
    /// Rows in the design.
    pub rows_kept: usize,
    /// Drops by reason (only reasons with at least one row).
    pub dropped: Vec<DropCount>,
}

/// One union design: the rows, columns and outcomes shared by a set of models of one sample.
#[derive(Debug, Clone)]
pub struct SampleDesign {
    /// The data file (for messages).
    pub path: PathBuf,
    /// Index into `Plan::samples`.
    pub sample: usize,
    /// The sample option name.
    pub sample_name: String,
    /// Indices into `Plan::models` of the models this design serves.
    pub models: Vec<usize>,
    /// The design handed to the engine.
    pub design: Design,
    /// Whether column 0 is the intercept.
    pub intercept: bool,
    /// Per plan term: its union columns, or `None` when no model of this design uses the term
    /// (possible only with the per-model row policy). An empty range is a term that adds no
    /// columns here (a categorical with a single level).
    pub term_columns: Vec<Option<Range<usize>>>,
    /// Per plan outcome: its column in `design.y`, or `None` when no model of this design uses it.
    pub outcome_columns: Vec<Option<usize>>,
    /// Zero-based data rows of the file, one per design row.
    pub rows: Vec<usize>,
    /// Row counts and drop reasons.
    pub account: RowAccount,
    /// The design after absorbing fixed effects and applying weights, when the models of this
    /// design take any; `design` then holds the same rows untransformed (for means and labels).
    pub absorbed: Option<specgrid_ols::AbsorbedDesign>,
    /// Plan terms that absorb effects or give weights (empty for a plain design).
    pub settings: Vec<usize>,
}

impl SampleDesign {
    /// The engine request for one planned model: intercept (if the model has one) and the
    /// columns of its terms in model order; tracked = the columns of its tracked terms.
    pub fn model_spec(&self, model: &PlannedModel) -> Result<ModelSpec, DataError> {
        let mismatch = |detail: String| DataError::PlanMismatch {
            path: self.path.clone(),
            detail,
        };
        let range_of = |t: usize| -> Result<Range<usize>, DataError> {
            self.term_columns
                .get(t)
                .cloned()
                .flatten()
                .ok_or_else(|| mismatch(format!("term {t} is not part of this design")))
        };
        // Sized for one column per term (most terms), so the usual model allocates once.
        let mut columns = Vec::with_capacity(usize::from(model.intercept) + model.terms.len());
        if model.intercept {
            if !self.intercept {
                return Err(mismatch("the design has no intercept column".into()));
            }
            columns.push(0);
        }
        for &t in &model.terms {
            columns.extend(range_of(t)?);
        }
        let mut tracked = Vec::with_capacity(model.tracked.len());
        for &t in &model.tracked {
            tracked.extend(range_of(t)?);
        }
        let outcome = self
            .outcome_columns
            .get(model.outcome)
            .copied()
            .flatten()
            .ok_or_else(|| {
                mismatch(format!(
                    "outcome {} is not part of this design",
                    model.outcome
                ))
            })?;
        Ok(ModelSpec {
            columns,
            outcome,
            tracked,
        })
    }
}

/// Every design of a plan, and the warnings raised while building them.
#[derive(Debug, Clone)]
pub struct Assembly {
    /// Designs in sample order (and, within a sample, in order of their first model).
    pub designs: Vec<SampleDesign>,
    /// Warnings (rows dropped, single-level categoricals), without duplicates.
    pub warnings: Vec<DataWarning>,
    /// Clustering columns; position = index in every design's `clusters`.
    pub cluster_columns: Vec<String>,
}

impl Assembly {
    /// The design that serves a plan model (by index into `Plan::models`).
    pub fn design_for_model(&self, model: usize) -> Option<&SampleDesign> {
        self.designs.iter().find(|d| d.models.contains(&model))
    }

    /// The engine covariance for an error choice; `None` for a cluster column the plan's errors
    /// did not name.
    pub fn covariance(&self, choice: &ErrorChoice) -> Option<Covariance> {
        let dim = |c: &String| self.cluster_columns.iter().position(|x| x == c);
        Some(match choice {
            ErrorChoice::Classical => Covariance::Classical,
            ErrorChoice::Hc0 => Covariance::Hc0,
            ErrorChoice::Hc1 => Covariance::Hc1,
            ErrorChoice::Hc2 => Covariance::Hc2,
            ErrorChoice::Hc3 => Covariance::Hc3,
            // The wild bootstrap replaces the p-value and interval of the CR1 errors.
            ErrorChoice::Cluster { column } | ErrorChoice::WildCluster { column, .. } => {
                Covariance::Cluster { dim: dim(column)? }
            }
            ErrorChoice::TwoWayCluster { first, second } => Covariance::TwoWayCluster {
                first: dim(first)?,
                second: dim(second)?,
            },
        })
    }
}

/// Builds the designs of a plan from loaded data, following the plan's row policy: one design
/// per sample (shared rows) or one per distinct row set within a sample (per-model rows).
/// Samples that no model uses get no design.
pub fn assemble(plan: &Plan, data: &LoadedData) -> Result<Assembly, DataError> {
    let clusters = cluster_columns(plan);
    let mut levels: HashMap<String, Levels> = HashMap::new();
    let mut categorical = Vec::new();
    for term in &plan.terms {
        categorical_columns(term, &mut categorical);
    }
    for column in categorical.iter().chain(&clusters) {
        if !levels.contains_key(column) {
            levels.insert(column.clone(), data.column(column)?.levels());
        }
    }
    let cluster_atoms: Vec<Atom> = clusters
        .iter()
        .map(|c| Atom::Present { column: c.clone() })
        .collect();
    let mut warnings = Vec::new();
    let mut designs = Vec::new();
    // Each sample's models in plan order, in one pass (a pass per sample over millions of
    // models was most of this function).
    let mut by_sample: Vec<Vec<usize>> = vec![Vec::new(); plan.samples.len()];
    for (m, model) in plan.models.iter().enumerate() {
        by_sample[model.sample].push(m);
    }
    for ((s, sample), models) in plan.samples.iter().enumerate().zip(by_sample) {
        if models.is_empty() {
            continue;
        }
        let in_sample = sample_mask(data, sample)?;
        let mut all_atoms = Vec::new();
        for o in &plan.outcomes {
            push_unique(&mut all_atoms, outcome_atom(&o.column, &o.transform));
        }
        for term in &plan.terms {
            term_atoms(term, &mut all_atoms);
        }
        for atom in &cluster_atoms {
            push_unique(&mut all_atoms, atom.clone());
        }
        let valid = AtomRows::new(data, &all_atoms)?;
        sample_warnings(
            &sample.name,
            &all_atoms,
            &valid,
            data,
            &in_sample,
            &mut warnings,
        )?;

        let groups: Vec<Group> = match plan.row_policy {
            RowPolicy::SharedRows => vec![Group {
                settings: Vec::new(),
                models: models.clone(),
                terms: (0..plan.terms.len()).collect(),
                outcomes: (0..plan.outcomes.len()).collect(),
                atoms: (0..all_atoms.len()).collect(),
                mask: valid.mask(&in_sample, 0..all_atoms.len()),
            }],
            RowPolicy::PerModel => per_model_groups(
                plan,
                &models,
                &all_atoms,
                &cluster_atoms,
                &valid,
                &in_sample,
            )?,
        };
        for group in groups.into_iter().flat_map(|g| split_by_settings(plan, g)) {
            let context = DesignContext {
                plan,
                data,
                sample: s,
                in_sample: &in_sample,
                all_atoms: &all_atoms,
                valid: &valid,
                levels: &levels,
                clusters: &clusters,
            };
            let settings = group.settings.clone();
            let design = context.build(group, &mut warnings)?;
            designs.push(crate::settings::prepare(
                plan, data, design, &settings, &levels,
            )?);
        }
    }
    Ok(Assembly {
        designs,
        warnings,
        cluster_columns: clusters,
    })
}

fn categorical_columns(term: &Term, out: &mut Vec<String>) {
    match term {
        Term::Numeric { .. } => {}
        Term::Categorical { column, .. } | Term::Absorbed { column } => {
            if !out.contains(column) {
                out.push(column.clone());
            }
        }
        Term::Weights { .. } => {}
        Term::Product(a, b) => {
            categorical_columns(a, out);
            categorical_columns(b, out);
        }
    }
}

fn outcome_atom(column: &str, transform: &specgrid_study::Transform) -> Atom {
    Atom::Numeric {
        column: column.to_string(),
        transform: validity_class(transform),
    }
}

/// Groups a sample's models by the rows they can use. Models with the same atoms share a row set
/// without comparing masks; distinct atom sets whose masks coincide are merged afterwards.
fn per_model_groups(
    plan: &Plan,
    models: &[usize],
    all_atoms: &[Atom],
    cluster_atoms: &[Atom],
    valid: &AtomRows,
    in_sample: &[bool],
) -> Result<Vec<Group>, DataError> {
    let mut groups: Vec<Group> = Vec::new();
    let mut by_atoms: HashMap<Vec<usize>, usize> = HashMap::new();
    let mut by_mask: HashMap<Vec<bool>, usize> = HashMap::new();
    for &m in models {
        let model = &plan.models[m];
        let mut atoms = model_atoms(plan, model, all_atoms, cluster_atoms)?;
        atoms.sort_unstable();
        let g = match by_atoms.get(&atoms) {
            Some(&g) => g,
            None => {
                let mask = valid.mask(in_sample, atoms.iter().copied());
                let g = *by_mask.entry(mask.clone()).or_insert_with(|| {
                    groups.push(Group {
                        settings: Vec::new(),
                        models: Vec::new(),
                        terms: Vec::new(),
                        outcomes: Vec::new(),
                        atoms: Vec::new(),
                        mask,
                    });
                    groups.len() - 1
                });
                by_atoms.insert(atoms.clone(), g);
                g
            }
        };
        groups[g].add(model, m, atoms);
    }
    Ok(groups)
}

/// Indices into `all_atoms` of one model's atoms: outcome, terms and cluster columns.
fn model_atoms(
    plan: &Plan,
    model: &PlannedModel,
    all_atoms: &[Atom],
    cluster_atoms: &[Atom],
) -> Result<Vec<usize>, DataError> {
    let outcome = plan
        .outcomes
        .get(model.outcome)
        .ok_or_else(|| DataError::PlanMismatch {
            path: plan.data_path.clone(),
            detail: format!(
                "model {} names outcome {} of {}",
                model.id,
                model.outcome,
                plan.outcomes.len()
            ),
        })?;
    let mut atoms = vec![outcome_atom(&outcome.column, &outcome.transform)];
    for &t in &model.terms {
        let term = plan.terms.get(t).ok_or_else(|| DataError::PlanMismatch {
            path: plan.data_path.clone(),
            detail: format!(
                "model {} names term {} of {}",
                model.id,
                t,
                plan.terms.len()
            ),
        })?;
        term_atoms(term, &mut atoms);
    }
    for atom in cluster_atoms {
        push_unique(&mut atoms, atom.clone());
    }
    Ok(atoms
        .iter()
        .filter_map(|a| all_atoms.iter().position(|b| b == a))
        .collect())
}

/// Validity of every atom over every row of the file.
struct AtomRows {
    valid: Vec<Vec<bool>>,
}

impl AtomRows {
    fn new(data: &LoadedData, atoms: &[Atom]) -> Result<AtomRows, DataError> {
        let valid = atoms
            .iter()
            .map(|a| a.valid_rows(data))
            .collect::<Result<_, _>>()?;
        Ok(AtomRows { valid })
    }

    fn mask(&self, in_sample: &[bool], atoms: impl Iterator<Item = usize> + Clone) -> Vec<bool> {
        (0..in_sample.len())
            .map(|r| in_sample[r] && atoms.clone().all(|a| self.valid[a][r]))
            .collect()
    }
}

/// Rows of the sample where a column is missing, and rows where a present value is outside a
/// transform's domain.
fn drop_counts(
    atoms: impl Iterator<Item = usize>,
    all_atoms: &[Atom],
    valid: &AtomRows,
    data: &LoadedData,
    in_sample: &[bool],
) -> Result<Vec<DropCount>, DataError> {
    let mut missing: Vec<(String, usize)> = Vec::new();
    let mut undefined = Vec::new();
    for a in atoms {
        let atom = &all_atoms[a];
        let column = data.column(atom.column())?;
        let absent = (0..data.n_rows)
            .filter(|&r| in_sample[r] && !column.is_present(r))
            .count();
        if absent > 0 && !missing.iter().any(|(c, _)| c == atom.column()) {
            missing.push((atom.column().to_string(), absent));
        }
        if let Atom::Numeric {
            column: name,
            transform,
        } = atom
        {
            if let Some((rule, _)) = undefined_rule(name, transform) {
                let n = (0..data.n_rows)
                    .filter(|&r| in_sample[r] && column.is_present(r) && !valid.valid[a][r])
                    .count();
                if n > 0 {
                    undefined.push(DropCount {
                        reason: DropReason::Undefined {
                            term: label(name, transform),
                            column: name.clone(),
                            rule,
                        },
                        rows: n,
                    });
                }
            }
        }
    }
    let mut out: Vec<DropCount> = missing
        .into_iter()
        .map(|(column, rows)| DropCount {
            reason: DropReason::Missing { column },
            rows,
        })
        .collect();
    out.extend(undefined);
    Ok(out)
}

fn sample_warnings(
    sample: &str,
    all_atoms: &[Atom],
    valid: &AtomRows,
    data: &LoadedData,
    in_sample: &[bool],
    warnings: &mut Vec<DataWarning>,
) -> Result<(), DataError> {
    for count in drop_counts(0..all_atoms.len(), all_atoms, valid, data, in_sample)? {
        let warning = match count.reason {
            DropReason::Missing { column } => DataWarning::MissingValues {
                sample: sample.to_string(),
                column,
                rows: count.rows,
            },
            DropReason::Undefined { term, column, rule } => {
                let suggestion = all_atoms
                    .iter()
                    .find_map(|a| match a {
                        Atom::Numeric {
                            column: c,
                            transform,
                        } if *c == column => undefined_rule(c, transform).map(|(_, s)| s),
                        _ => None,
                    })
                    .unwrap_or("another transform");
                DataWarning::TransformDropsRows {
                    sample: sample.to_string(),
                    term,
                    column,
                    rows: count.rows,
                    rule,
                    suggestion,
                }
            }
            DropReason::SampleConditions | DropReason::Singleton | DropReason::ZeroWeight => {
                continue
            }
        };
        if !warnings.contains(&warning) {
            warnings.push(warning);
        }
    }
    Ok(())
}

/// Models sharing one row set, with the terms, outcomes and atoms they use.
struct Group {
    /// Plan terms that absorb effects or give weights, shared by every model of the group.
    settings: Vec<usize>,
    models: Vec<usize>,
    terms: Vec<usize>,
    outcomes: Vec<usize>,
    atoms: Vec<usize>,
    mask: Vec<bool>,
}

impl Group {
    fn add(&mut self, model: &PlannedModel, index: usize, atoms: Vec<usize>) {
        self.models.push(index);
        for &t in &model.terms {
            if !self.terms.contains(&t) {
                self.terms.push(t);
            }
        }
        if !self.outcomes.contains(&model.outcome) {
            self.outcomes.push(model.outcome);
        }
        for a in atoms {
            if !self.atoms.contains(&a) {
                self.atoms.push(a);
            }
        }
        self.terms.sort_unstable();
        self.outcomes.sort_unstable();
    }
}

/// Splits a row group by the absorbed effects and weights its models take: each such set gets a
/// design of its own, demeaned and weighted once for all its models. Groups without settings
/// pass through unchanged.
fn split_by_settings(plan: &Plan, group: Group) -> Vec<Group> {
    // Without absorbed effects or weights every model has the same (empty) settings.
    if !plan.terms.iter().any(|t| t.is_design_setting()) {
        return if group.models.is_empty() {
            Vec::new()
        } else {
            vec![group]
        };
    }
    let mut parts: Vec<Group> = Vec::new();
    for &m in &group.models {
        let settings = plan.design_settings(&plan.models[m]);
        let g = match parts.iter().position(|p| p.settings == settings) {
            Some(g) => g,
            None => {
                // Each part keeps the row group's terms and outcomes (under shared rows: all of
                // the plan's), so splitting changes nothing for a grid without settings.
                parts.push(Group {
                    settings,
                    models: Vec::new(),
                    terms: group.terms.clone(),
                    outcomes: group.outcomes.clone(),
                    atoms: group.atoms.clone(),
                    mask: group.mask.clone(),
                });
                parts.len() - 1
            }
        };
        parts[g].models.push(m);
    }
    parts
}

struct DesignContext<'a> {
    plan: &'a Plan,
    data: &'a LoadedData,
    sample: usize,
    in_sample: &'a [bool],
    all_atoms: &'a [Atom],
    valid: &'a AtomRows,
    levels: &'a HashMap<String, Levels>,
    clusters: &'a [String],
}

impl DesignContext<'_> {
    fn build(
        &self,
        group: Group,
        warnings: &mut Vec<DataWarning>,
    ) -> Result<SampleDesign, DataError> {
        let plan = self.plan;
        let data = self.data;
        let sample_name = plan.samples[self.sample].name.clone();
        let rows: Vec<usize> = (0..group.mask.len()).filter(|&r| group.mask[r]).collect();
        let rows_in_sample = self.in_sample.iter().filter(|k| **k).count();
        let mut dropped = Vec::new();
        if rows_in_sample < data.n_rows {
            dropped.push(DropCount {
                reason: DropReason::SampleConditions,
                rows: data.n_rows - rows_in_sample,
            });
        }
        dropped.extend(drop_counts(
            group.atoms.iter().copied(),
            self.all_atoms,
            self.valid,
            data,
            self.in_sample,
        )?);
        if rows.is_empty() {
            return Err(DataError::EmptySample {
                path: data.path.clone(),
                sample: sample_name,
                rows_read: data.n_rows,
                reason: empty_reason(rows_in_sample, &dropped),
            });
        }

        let tracked: Vec<usize> = group
            .models
            .iter()
            .flat_map(|&m| plan.models[m].tracked.iter().copied())
            .collect();
        let intercept = group.models.iter().any(|&m| plan.models[m].intercept);
        let mut x: Vec<NamedColumn> = Vec::new();
        if intercept {
            x.push(NamedColumn {
                name: INTERCEPT.into(),
                sources: Vec::new(),
                values: vec![1.0; rows.len()],
            });
        }
        let mut term_columns = vec![None; plan.terms.len()];
        let mut expander = Expander {
            data,
            rows: &rows,
            sample: &sample_name,
            levels: self.levels,
            warnings,
        };
        for &t in &group.terms {
            let columns = expander.expand(&plan.terms[t], tracked.contains(&t))?;
            term_columns[t] = Some(x.len()..x.len() + columns.len());
            x.extend(columns);
        }

        let mut y: Vec<NamedColumn> = Vec::new();
        let mut outcome_columns = vec![None; plan.outcomes.len()];
        for &o in &group.outcomes {
            let form = &plan.outcomes[o];
            let values = data.numbers(&form.column)?;
            let raw: Vec<f64> = rows
                .iter()
                .map(|&r| values[r].unwrap_or(f64::NAN))
                .collect();
            let name = label(&form.column, &form.transform);
            let values =
                apply(&form.transform, &raw).map_err(|_| DataError::NoOutcomeVariance {
                    path: data.path.clone(),
                    outcome: name.clone(),
                    column: form.column.clone(),
                    sample: sample_name.clone(),
                    rows: rows.len(),
                    value: raw[0],
                })?;
            if values.iter().all(|v| *v == values[0]) {
                return Err(DataError::NoOutcomeVariance {
                    path: data.path.clone(),
                    outcome: name,
                    column: form.column.clone(),
                    sample: sample_name,
                    rows: rows.len(),
                    value: values[0],
                });
            }
            outcome_columns[o] = Some(y.len());
            y.push(NamedColumn {
                name,
                sources: vec![form.column.clone()],
                values,
            });
        }
        for column in x.iter().chain(&y) {
            self.check_finite(column, &rows, &sample_name)?;
        }

        let largest = group
            .models
            .iter()
            .map(|&m| {
                let model = &plan.models[m];
                usize::from(model.intercept)
                    + model
                        .terms
                        .iter()
                        .map(|&t| {
                            term_columns[t]
                                .as_ref()
                                .map_or(0, |r: &Range<usize>| r.len())
                        })
                        .sum::<usize>()
            })
            .max()
            .unwrap_or(0);
        if rows.len() <= largest {
            let names: Vec<&str> = x.iter().take(6).map(|c| c.name.as_str()).collect();
            return Err(DataError::TooFewRows {
                path: data.path.clone(),
                sample: sample_name,
                rows: rows.len(),
                columns: largest,
                names: names.join(", ") + if x.len() > 6 { ", …" } else { "" },
            });
        }

        let clusters = self
            .clusters
            .iter()
            .map(|c| dense_codes(c, &self.levels[c], &rows))
            .collect();
        let n = rows.len();
        let design = Design {
            x: faer::Mat::from_fn(n, x.len(), |i, j| x[j].values[i]),
            y: faer::Mat::from_fn(n, y.len(), |i, j| y[j].values[i]),
            x_names: x.into_iter().map(|c| c.name).collect(),
            y_names: y.into_iter().map(|c| c.name).collect(),
            clusters,
        };
        Ok(SampleDesign {
            path: data.path.clone(),
            sample: self.sample,
            sample_name,
            models: group.models,
            design,
            intercept,
            term_columns,
            outcome_columns,
            account: RowAccount {
                rows_read: data.n_rows,
                rows_in_sample,
                rows_kept: n,
                dropped,
            },
            rows,
            absorbed: None,
            settings: Vec::new(),
        })
    }

    fn check_finite(
        &self,
        column: &NamedColumn,
        rows: &[usize],
        sample: &str,
    ) -> Result<(), DataError> {
        let mut bad = column
            .values
            .iter()
            .enumerate()
            .filter(|(_, v)| !v.is_finite());
        if let Some((first, _)) = bad.next() {
            return Err(DataError::NonFiniteResult {
                path: self.data.path.clone(),
                term: column.name.clone(),
                column: column.sources.join(", "),
                sample: sample.to_string(),
                rows: 1 + bad.count(),
                first: self.data.position(rows[first]),
            });
        }
        Ok(())
    }
}

/// Cluster codes 0..G over the design's rows, numbered in sorted level order.
pub(crate) fn dense_codes(name: &str, levels: &Levels, rows: &[usize]) -> ClusterIds {
    let mut new_code = vec![u32::MAX; levels.labels.len()];
    for &r in rows {
        if let Some(c) = levels.codes[r] {
            new_code[c as usize] = 0;
        }
    }
    let mut count = 0u32;
    for code in new_code.iter_mut().filter(|c| **c == 0) {
        *code = count;
        count += 1;
    }
    ClusterIds {
        name: name.to_string(),
        codes: rows
            .iter()
            .map(|&r| levels.codes[r].map_or(0, |c| new_code[c as usize]))
            .collect(),
        count: count as usize,
    }
}

fn empty_reason(rows_in_sample: usize, dropped: &[DropCount]) -> String {
    let mut parts: Vec<String> = dropped
        .iter()
        .filter_map(|d| match &d.reason {
            DropReason::SampleConditions => None,
            DropReason::Missing { column } => {
                Some(format!("`{column}` missing in {}", fmt_rows(d.rows)))
            }
            DropReason::Undefined { term, rule, .. } => Some(format!(
                "{term} undefined in {} with {rule}",
                fmt_rows(d.rows)
            )),
            DropReason::Singleton => Some(format!(
                "{} alone in a level of an absorbed effect",
                fmt_rows(d.rows)
            )),
            DropReason::ZeroWeight => Some(format!("{} with zero weight", fmt_rows(d.rows))),
        })
        .collect();
    parts.truncate(4);
    format!(
        "all {} meeting its conditions have a missing or undefined value: {}",
        fmt_rows(rows_in_sample),
        parts.join("; ")
    )
}
