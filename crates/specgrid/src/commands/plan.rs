//! `specgrid plan`: show the grid without reading data or estimating.

use std::path::Path;

use specgrid_study::{Plan, RowPolicy};

use super::thousands;
use crate::exit::Failure;

/// How many models `plan` prints without `--list`.
const FIRST_MODELS: usize = 10;

/// Prints the dimensions, sizes and models of a study.
pub fn run(study: &Path, list: bool) -> Result<(), Failure> {
    let plan = super::load_plan(study)?;
    print!("{}", describe(&plan, list));
    Ok(())
}

/// How many union QR factorisations the run needs: one per sample under shared rows; under
/// per-model rows one per distinct row set, which only the data can tell.
fn union_factorisations(plan: &Plan) -> String {
    // One per sample and set of absorbed effects and weights (each such set is its own
    // prepared design).
    let mut keys: Vec<(usize, Vec<usize>)> = plan
        .models
        .iter()
        .map(|m| (m.sample, plan.design_settings(m)))
        .collect();
    keys.sort_unstable();
    keys.dedup();
    let what = "one per sample and set of absorbed effects and weights";
    match plan.row_policy {
        RowPolicy::SharedRows => format!(
            "{} ({what}; every model of such a set reuses it)",
            keys.len()
        ),
        RowPolicy::PerModel => format!(
            "at least {} ({what}, and distinct row set; the data decide)",
            keys.len()
        ),
    }
}

/// The text `plan` prints.
fn describe(plan: &Plan, list: bool) -> String {
    let mut out = String::new();
    out.push_str(&format!(
        "study: {}\ndata:  {}\n\n",
        plan.title,
        plan.data_path.display()
    ));
    out.push_str("decision dimensions:\n");
    for d in &plan.dimensions {
        out.push_str(&format!(
            "  {} ({} options): {}\n",
            d.name,
            d.options.len(),
            d.options.join(" | ")
        ));
    }
    let errors: Vec<String> = plan.errors.iter().map(|e| e.label()).collect();
    out.push_str(&format!(
        "standard errors: {} (reported for every model; no extra estimation)\n\n",
        errors.join(", ")
    ));
    out.push_str(&format!(
        "grid size before exclusions: {}\n",
        thousands(plan.size_before_exclusions)
    ));
    out.push_str(&format!(
        "grid size after exclusions:  {}\n",
        thousands(plan.size_after_exclusions)
    ));
    if let Some(drawn) = plan.random_sample {
        out.push_str(&format!(
            "random sample drawn (seed {}): {}\n",
            plan.seed,
            thousands(drawn as u128)
        ));
    }
    out.push_str(&format!(
        "models to estimate:          {}\n",
        thousands(plan.models.len() as u128)
    ));
    out.push_str(&format!(
        "union factorisations:        {}\n",
        union_factorisations(plan)
    ));
    out.push_str(&format!(
        "row policy:                  {:?}\n\n",
        plan.row_policy
    ));
    let shown = if list {
        plan.models.len()
    } else {
        plan.models.len().min(FIRST_MODELS)
    };
    out.push_str(if list { "models:\n" } else { "first models:\n" });
    for model in &plan.models[..shown] {
        let choices: Vec<String> = plan
            .choice_names(model)
            .iter()
            .map(|(d, o)| format!("{d}={o}"))
            .collect();
        let terms: Vec<String> = model.terms.iter().map(|&t| plan.terms[t].label()).collect();
        out.push_str(&format!(
            "  {}  {}\n      outcome {}; regressors: {}{}\n",
            model.id,
            choices.join(", "),
            super::outcome_label(plan, model.outcome),
            if model.intercept { "intercept, " } else { "" },
            terms.join(", ")
        ));
    }
    if shown < plan.models.len() {
        out.push_str(&format!(
            "  … {} more (use --list)\n",
            thousands((plan.models.len() - shown) as u128)
        ));
    }
    out
}
