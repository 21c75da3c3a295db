//! Putting every model's tracked effect on the study's common scale (`[report] scale`).
//!
//! The planner knows each model's outcome form and terms; the data layer knows the rows; the
//! engine gives the focus coefficients and their covariance under every covariance choice.
//! This module joins the three and calls [`specgrid_report::effect`], which holds the
//! formulas (docs/methods.md, part 2). Whether a model's effect can be converted is decided
//! from the plan before any estimation, so an unsupported study fails at once.

use std::collections::HashMap;

use specgrid_data::{LoadedData, SampleDesign};
use specgrid_ols::ModelFit;
use specgrid_report::{
    effect, Effect, EffectInputs, EvaluationPoint, FocusForm, OutcomeForm, Scale,
};
use specgrid_study::{EffectScale, Plan, PlannedModel, Term, Transform};

use crate::exit::Failure;

/// How one model's effect is computed.
#[derive(Debug, Clone, PartialEq)]
pub struct Recipe {
    /// Outcome form.
    outcome: OutcomeForm,
    /// Focus form.
    focus: FocusForm,
    /// Plan terms of the focus form, in order (x, then x², … for a polynomial).
    focus_terms: Vec<usize>,
    /// The tracked product of the raw focus with a moderator.
    interaction: Option<Interaction>,
}

/// A tracked product of the raw focus with a moderator.
#[derive(Debug, Clone, PartialEq)]
struct Interaction {
    /// Plan term of the product.
    product: usize,
    /// The moderator side.
    moderator: Term,
    /// The plan term equal to the moderator, when some model uses it on its own (its column
    /// gives the moderator's mean); found once here, not per model.
    moderator_term: Option<usize>,
}

/// The report scale for a study scale.
pub fn report_scale(scale: EffectScale) -> Scale {
    match scale {
        EffectScale::Coefficient => Scale::Coefficient,
        EffectScale::Elasticity => Scale::Elasticity,
        EffectScale::SemiElasticity => Scale::SemiElasticity,
        EffectScale::MarginalEffect => Scale::MarginalEffect,
    }
}

/// One recipe per planned model, or a study failure naming the first model whose effect cannot
/// be put on the chosen scale and why.
pub fn recipes(plan: &Plan) -> Result<Vec<Recipe>, Failure> {
    plan.models
        .iter()
        .map(|m| {
            recipe(plan, m).map_err(|why| {
                let choices: Vec<String> = plan
                    .choice_names(m)
                    .iter()
                    .map(|(d, o)| format!("{d}={o}"))
                    .collect();
                Failure::Study(format!(
                    "the effect of model {} ({}) cannot be put on the `{}` scale: {why}; choose `scale = \"coefficient\"` in [report] or change the study",
                    m.id,
                    choices.join(", "),
                    plan.report.scale.word()
                ))
            })
        })
        .collect()
}

fn is_raw_focus(term: &Term, focus: &str) -> bool {
    matches!(term, Term::Numeric { column, transform: Transform::Level } if column == focus)
}

fn recipe(plan: &Plan, model: &PlannedModel) -> Result<Recipe, String> {
    let focus = plan.focus_column.as_str();
    let outcome = match plan.outcomes[model.outcome].transform {
        Transform::Level => OutcomeForm::Level,
        Transform::Log => OutcomeForm::Log,
        Transform::Log1p => OutcomeForm::Log1p,
        Transform::Asinh => OutcomeForm::Asinh,
        ref other => return Err(format!("the outcome form {other:?} has no conversion")),
    };
    // The planner lists the focus form's terms first among the tracked terms.
    let focus_terms: Vec<usize> = model
        .tracked
        .iter()
        .copied()
        .take_while(|&t| matches!(&plan.terms[t], Term::Numeric { column, .. } if column == focus))
        .collect();
    let transforms: Vec<&Transform> = focus_terms
        .iter()
        .map(|&t| match &plan.terms[t] {
            Term::Numeric { transform, .. } => transform,
            _ => unreachable!("focus terms are numeric (filtered above)"),
        })
        .collect();
    let focus_form = focus_form(&transforms)
        .ok_or_else(|| format!("its focus terms {transforms:?} are not one of the forms level, log, log1p, asinh, polynomial, standardized or winsorized"))?;
    let mut interaction = None;
    for &t in &model.terms {
        if focus_terms.contains(&t) || !plan.terms[t].columns().contains(&focus) {
            continue;
        }
        let moderator = match &plan.terms[t] {
            Term::Product(a, b) if is_raw_focus(a, focus) && !b.columns().contains(&focus) => b,
            Term::Product(a, b) if is_raw_focus(b, focus) && !a.columns().contains(&focus) => a,
            other => {
                return Err(format!(
                    "the term `{}` also uses the focus; only one product of the raw focus with a moderator can be converted",
                    other.label()
                ))
            }
        };
        if !model.tracked.contains(&t) {
            return Err(format!(
                "the product `{}` is in the model but not tracked; add it to `also_track` in [focus]",
                plan.terms[t].label()
            ));
        }
        if interaction.is_some() {
            return Err("it has more than one product with the focus".into());
        }
        let wanted = moderator.canonical();
        interaction = Some(Interaction {
            product: t,
            moderator_term: plan.terms.iter().position(|u| u.canonical() == wanted),
            moderator: (**moderator).clone(),
        });
    }
    Ok(Recipe {
        outcome,
        focus: focus_form,
        focus_terms,
        interaction,
    })
}

/// The focus form for the transforms of the focus terms, in model order.
fn focus_form(transforms: &[&Transform]) -> Option<FocusForm> {
    match transforms {
        [Transform::Level] => Some(FocusForm::Level),
        [Transform::Log] => Some(FocusForm::Log),
        [Transform::Log1p] => Some(FocusForm::Log1p),
        [Transform::Asinh] => Some(FocusForm::Asinh),
        [Transform::Standardize] => Some(FocusForm::Standardized),
        [Transform::Winsorize { .. }] => Some(FocusForm::Winsorized),
        [Transform::Level, rest @ ..] if !rest.is_empty() => {
            let powers_in_order = rest
                .iter()
                .enumerate()
                .all(|(i, t)| **t == Transform::Power(i as u32 + 2));
            powers_in_order.then_some(FocusForm::Polynomial(rest.len() as u32 + 1))
        }
        _ => None,
    }
}

/// Means (and the focus sd) over one design's rows, computed once per design and outcome.
#[derive(Debug, Default)]
pub struct EvaluationCache {
    points: HashMap<(usize, usize, Option<usize>), EvaluationPoint>,
}

impl EvaluationCache {
    /// The evaluation point of a model fitted on `design` (index `design_index`): the study's
    /// values where it names them, else means over the design's rows.
    pub fn point(
        &mut self,
        plan: &Plan,
        data: &LoadedData,
        design_index: usize,
        design: &SampleDesign,
        model: &PlannedModel,
        recipe: &Recipe,
    ) -> Result<EvaluationPoint, Failure> {
        let moderator_column = match &recipe.interaction {
            Some(interaction) if plan.report.evaluate_at.moderator.is_none() => {
                Some(moderator_column(design, interaction)?)
            }
            _ => None,
        };
        let key = (design_index, model.outcome, moderator_column);
        if let Some(p) = self.points.get(&key) {
            return Ok(*p);
        }
        let at = &plan.report.evaluate_at;
        let raw = |column: &str| -> Result<Vec<f64>, Failure> {
            let values = data
                .numbers(column)
                .map_err(|e| Failure::Data(e.to_string()))?;
            design
                .rows
                .iter()
                .map(|&r| {
                    values[r].ok_or_else(|| {
                        Failure::Data(format!(
                            "column `{column}` has no value at data row {} although the design uses that row (internal error; please report it)",
                            r + 1
                        ))
                    })
                })
                .collect()
        };
        let focus_values = raw(&plan.focus_column)?;
        let outcome = match at.outcome {
            Some(y) => y,
            None => mean(&raw(&plan.outcomes[model.outcome].column)?),
        };
        let moderator = match (at.moderator, moderator_column) {
            (Some(z), _) => Some(z),
            (None, Some(c)) => Some(mean_of_column(design, c)),
            (None, None) => None,
        };
        let point = EvaluationPoint {
            focus: at.focus.unwrap_or_else(|| mean(&focus_values)),
            outcome,
            focus_sd: sample_sd(&focus_values),
            moderator,
        };
        self.points.insert(key, point);
        Ok(point)
    }
}

/// The union column holding the moderator's values: the moderator must enter the design as a
/// term of its own with exactly one column (as `irrigated` does beside `visits × irrigated`).
fn moderator_column(design: &SampleDesign, interaction: &Interaction) -> Result<usize, Failure> {
    let moderator = &interaction.moderator;
    interaction
        .moderator_term
        .and_then(|t| design.term_columns[t].clone())
        .filter(|r| r.len() == 1)
        .map(|r| r.start)
        .ok_or_else(|| {
            Failure::Study(format!(
                "the moderator `{}` of the interaction with the focus is not a one-column term of the models in sample `{}`, so its mean is unknown; give its value as `evaluate_at = {{ moderator = ... }}` in [report]",
                moderator.label(),
                design.sample_name
            ))
        })
}

fn mean_of_column(design: &SampleDesign, column: usize) -> f64 {
    let c = design.design.x.col(column);
    c.iter().sum::<f64>() / c.nrows() as f64
}

fn mean(values: &[f64]) -> f64 {
    values.iter().sum::<f64>() / values.len() as f64
}

/// Standard deviation with the n − 1 denominator, as the data layer standardizes.
fn sample_sd(values: &[f64]) -> Option<f64> {
    if values.len() < 2 {
        return None;
    }
    let m = mean(values);
    let ss: f64 = values.iter().map(|x| (x - m) * (x - m)).sum();
    Some((ss / (values.len() - 1) as f64).sqrt())
}

/// The model's effect under every covariance choice (`None` where the engine gave no number or
/// the conversion is undefined at the evaluation point; the reason goes to `problems`).
pub fn model_effects(
    recipe: &Recipe,
    design: &SampleDesign,
    fit: &ModelFit,
    point: EvaluationPoint,
    scale: Scale,
    problems: &mut Vec<String>,
) -> Vec<Option<Effect>> {
    let columns_of = |t: usize| design.term_columns[t].clone().into_iter().flatten();
    let mut wanted: Vec<usize> = recipe
        .focus_terms
        .iter()
        .flat_map(|&t| columns_of(t))
        .collect();
    let focus_count = wanted.len();
    if let Some(interaction) = &recipe.interaction {
        wanted.extend(columns_of(interaction.product));
    }
    let positions: Option<Vec<usize>> = wanted
        .iter()
        .map(|c| fit.coefficients.iter().position(|k| k.column == *c))
        .collect();
    let n_errors = fit.tracked_covariance.len();
    let Some(positions) = positions else {
        problems.push("a focus column has no reported coefficient".into());
        return vec![None; n_errors];
    };
    let t = fit.coefficients.len();
    let coefficients: Vec<f64> = positions[..focus_count]
        .iter()
        .map(|&p| fit.coefficients[p].estimate)
        .collect();
    let interaction =
        (positions.len() > focus_count).then(|| fit.coefficients[positions[focus_count]].estimate);
    (0..n_errors)
        .map(|e| {
            let cov = &fit.tracked_covariance[e];
            let covariance: Vec<Vec<f64>> = positions
                .iter()
                .map(|&i| positions.iter().map(|&j| cov[i * t + j]).collect())
                .collect();
            let std_errors: Vec<f64> = positions
                .iter()
                .map(|&p| fit.coefficients[p].inference[e].std_error)
                .collect();
            let inputs = EffectInputs {
                outcome: recipe.outcome,
                focus: recipe.focus,
                coefficients: &coefficients,
                interaction,
                std_errors: &std_errors,
                covariance: Some(&covariance),
                at: point,
                df: fit.coefficients[positions[0]].inference[e].df,
            };
            match effect(&inputs, scale) {
                Ok(mut value) => {
                    // One focus coefficient and no interaction: the effect is that coefficient
                    // times a fixed factor, so "effect = 0" is "coefficient = 0" and the
                    // coefficient's own p-value (the wild bootstrap's, for that choice) holds.
                    if focus_count == 1 && interaction.is_none() {
                        value.p_value = Some(fit.coefficients[positions[0]].inference[e].p_value);
                    }
                    Some(value)
                }
                Err(why) => {
                    problems.push(why.to_string());
                    None
                }
            }
        })
        .collect()
}
