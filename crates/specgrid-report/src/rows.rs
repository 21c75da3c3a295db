//! Building a [`ReportInput`] from the rows of `models.csv`, so a results folder can be
//! re-rendered without re-estimating. Effects are then raw coefficients (scale `coefficient`)
//! of each model's first tracked term.

use std::collections::HashMap;

use crate::effect::{Effect, Scale};
use crate::effects_csv::StoredEffects;
use crate::input::{DimensionInfo, ReportInput};
use crate::models::{FitStats, Models, NewModel};
use crate::ReportError;

/// One row of `models.csv` (one model × covariance choice × tracked term), as plain values.
/// Empty cells are `None` / empty strings.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct ResultRow {
    /// `model_id`.
    pub model_id: String,
    /// The option names of the dimension columns, in the order of the dimensions passed to
    /// [`ReportInput::from_rows`].
    pub choices: Vec<String>,
    /// `errors`.
    pub errors: String,
    /// `term`.
    pub term: String,
    /// `estimate`.
    pub estimate: Option<f64>,
    /// `std_error`.
    pub std_error: Option<f64>,
    /// `df`.
    pub df: Option<f64>,
    /// `n_obs`.
    pub n_obs: Option<u64>,
    /// `n_params`.
    pub n_params: Option<u64>,
    /// `r_squared`.
    pub r_squared: Option<f64>,
    /// `resid_sd`.
    pub resid_sd: Option<f64>,
    /// `het_test_p_value`.
    pub het_test_p_value: Option<f64>,
    /// `p_value` (the wild bootstrap's for a wild-bootstrap choice).
    pub p_value: Option<f64>,
    /// `outcome`.
    pub outcome: String,
    /// `status` (`ok` or `failed`).
    pub status: String,
    /// `message`.
    pub message: String,
}

/// The parts of a report that `models.csv` does not hold.
#[derive(Debug, Clone, PartialEq)]
pub struct ReportHeader {
    /// Study title.
    pub title: String,
    /// Significance level.
    pub significance_level: f64,
    /// Confidence level.
    pub confidence_level: f64,
    /// Baseline named by the study, if any.
    pub baseline_model_id: Option<String>,
    /// Text of the study file.
    pub study_text: String,
    /// Data fingerprint.
    pub data_fingerprint: String,
}

/// Decisions with their options in order of first appearance in the rows (the run writes
/// models in grid order, so this is the study's option order whenever the grid is complete).
pub fn dimensions_from_rows(names: &[String], rows: &[ResultRow]) -> Vec<DimensionInfo> {
    names
        .iter()
        .enumerate()
        .map(|(d, name)| {
            let mut options: Vec<String> = Vec::new();
            for r in rows {
                if let Some(o) = r.choices.get(d) {
                    if !options.contains(o) {
                        options.push(o.clone());
                    }
                }
            }
            DimensionInfo::new(name.clone(), options)
        })
        .collect()
}

/// What a coefficient-scale report calls its effect, given each model's first tracked term:
/// that term when every model's is the same, else "the first focus term".
pub fn lead_term_label<'a>(terms: impl IntoIterator<Item = &'a str>) -> String {
    let mut distinct: Vec<&str> = Vec::new();
    for t in terms {
        if !distinct.contains(&t) {
            distinct.push(t);
            if distinct.len() > 1 {
                break;
            }
        }
    }
    match distinct.as_slice() {
        [one] => (*one).to_string(),
        _ => "the first focus term".to_string(),
    }
}

impl ReportInput {
    /// Builds a coefficient-scale report input from `models.csv` rows. Each model's effect is
    /// its first tracked term (the first `term` listed for it: the run writes focus terms
    /// first); covariance choices are taken in order of first appearance.
    pub fn from_rows(
        header: ReportHeader,
        dimensions: Vec<DimensionInfo>,
        rows: &[ResultRow],
    ) -> Result<ReportInput, ReportError> {
        let mut error_labels: Vec<String> = Vec::new();
        for r in rows {
            if !error_labels.contains(&r.errors) {
                error_labels.push(r.errors.clone());
            }
        }
        let mut models = Models::new(dimensions.len(), error_labels.len());
        let option_index: Vec<HashMap<&str, usize>> = dimensions
            .iter()
            .map(|d| {
                d.options
                    .iter()
                    .enumerate()
                    .map(|(i, o)| (o.as_str(), i))
                    .collect()
            })
            .collect();
        let mut index: HashMap<&str, usize> = HashMap::new();
        let mut lead_term: Vec<String> = Vec::new();
        for (n, r) in rows.iter().enumerate() {
            let row = n + 1;
            let bad = |message: String| ReportError::Row { row, message };
            let i = match index.get(r.model_id.as_str()) {
                Some(&i) => i,
                None => {
                    if r.choices.len() != dimensions.len() {
                        return Err(bad(format!(
                            "{} decision columns, expected {}",
                            r.choices.len(),
                            dimensions.len()
                        )));
                    }
                    let choices = r
                        .choices
                        .iter()
                        .zip(dimensions.iter().zip(&option_index))
                        .map(|(o, (d, lookup))| {
                            lookup.get(o.as_str()).copied().ok_or_else(|| {
                                bad(format!(
                                    "option `{o}` is not one of the options of `{}`; re-render with the study the results came from",
                                    d.name
                                ))
                            })
                        })
                        .collect::<Result<Vec<usize>, _>>()?;
                    let failure = (r.status != "ok").then_some(r.message.as_str());
                    models
                        .push(
                            NewModel {
                                id: &r.model_id,
                                choices: &choices,
                                failure,
                                stats: FitStats {
                                    n_obs: r.n_obs,
                                    n_params: r.n_params,
                                    r_squared: r.r_squared,
                                    resid_sd: r.resid_sd,
                                    het_p_value: r.het_test_p_value,
                                },
                                outcome_label: &r.outcome,
                            },
                            std::iter::repeat_n(None, error_labels.len()),
                        )
                        .map_err(|e| bad(e.to_string()))?;
                    lead_term.push(r.term.clone());
                    index.insert(&r.model_id, models.len() - 1);
                    models.len() - 1
                }
            };
            if r.status != "ok" || r.term != lead_term[i] {
                continue;
            }
            let e = error_labels
                .iter()
                .position(|l| *l == r.errors)
                .unwrap_or(0);
            let estimate = r.estimate.ok_or_else(|| {
                bad(
                    "status is `ok` but `estimate` is empty; the file is damaged, re-run the study"
                        .into(),
                )
            })?;
            let mut effect =
                Effect::coefficient(estimate, r.std_error, r.df.unwrap_or(f64::INFINITY));
            effect.p_value = r.p_value;
            models.set_effect(i, e, Some(effect));
        }
        let effect_label = lead_term_label(lead_term.iter().map(String::as_str));
        Ok(ReportInput::from_entries(
            header,
            dimensions,
            error_labels,
            models,
            effect_label,
        ))
    }

    /// A coefficient-scale report input from model entries already made (by `run`, straight
    /// from the fits; [`ReportInput::from_rows`] makes the same entries from `models.csv`).
    pub fn from_entries(
        header: ReportHeader,
        dimensions: Vec<DimensionInfo>,
        error_labels: Vec<String>,
        models: Models,
        effect_label: String,
    ) -> ReportInput {
        ReportInput {
            title: header.title,
            scale: Scale::Coefficient,
            effect_label,
            dimensions,
            error_labels,
            significance_level: header.significance_level,
            confidence_level: header.confidence_level,
            baseline_model_id: header.baseline_model_id,
            models,
            study_text: header.study_text,
            data_fingerprint: header.data_fingerprint,
            baseline_residuals: None,
            across_grid: None,
        }
    }
}

impl ReportInput {
    /// Puts every model on the study's scale: its effect under each covariance choice is taken
    /// from `effects` (model id → covariance label → effect); a model or choice missing there
    /// has no number (failed models, or a conversion undefined at the evaluation point).
    pub fn set_effects(&mut self, scale: Scale, effect_label: String, effects: &StoredEffects) {
        self.scale = scale;
        self.effect_label = effect_label;
        for i in 0..self.models.len() {
            let stored = effects.get(self.models.id(i));
            for (e, label) in self.error_labels.iter().enumerate() {
                let effect = stored.and_then(|s| s.get(label)).copied();
                self.models.set_effect(i, e, effect);
            }
        }
    }
}
