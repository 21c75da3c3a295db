//! Which control block brought each term of a planned model: what the short model of the
//! stability bounds keeps and what the decomposition attributes the movement to.

use crate::grid::Layout;
use crate::plan::{Plan, PlannedModel};
use crate::study::Study;

/// The terms one control block brings into one model.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct BlockTerms {
    /// The block's name.
    pub name: String,
    /// Indices into [`Plan::terms`] of the terms this block brings (a term already brought by
    /// the focus or an earlier block counts there, as in the model itself); empty when the
    /// block is out of the model.
    pub terms: Vec<usize>,
}

/// Resolves the blocks of planned models; built once per plan.
pub struct BlockResolver {
    layout: Layout,
    names: Vec<String>,
    /// Plan term index of each study term number, when some planned model uses it.
    to_plan: Vec<Option<usize>>,
}

impl BlockResolver {
    /// Prepares the resolver for `plan`, which must have been planned from `study`.
    pub fn new(study: &Study, plan: &Plan) -> BlockResolver {
        let layout = Layout::new(study);
        let to_plan = layout
            .table
            .keys
            .iter()
            .map(|key| plan.terms.iter().position(|t| t.canonical() == *key))
            .collect();
        BlockResolver {
            layout,
            names: study.controls.iter().map(|b| b.name.clone()).collect(),
            to_plan,
        }
    }

    /// Plan term indices of the model's focus form.
    pub fn focus_terms(&self, model: &PlannedModel) -> Vec<usize> {
        self.plan_terms(self.layout.focus_terms(&model.choices))
    }

    /// Every control block of the study, in file order, with the terms it brings into `model`.
    pub fn blocks(&self, model: &PlannedModel) -> Vec<BlockTerms> {
        let mut seen: Vec<usize> = self.layout.focus_terms(&model.choices).to_vec();
        self.layout
            .chosen_block_terms(&model.choices)
            .into_iter()
            .zip(&self.names)
            .map(|(list, name)| {
                let fresh: Vec<usize> =
                    list.iter().copied().filter(|t| !seen.contains(t)).collect();
                seen.extend(&fresh);
                BlockTerms {
                    name: name.clone(),
                    terms: self.plan_terms(&fresh),
                }
            })
            .collect()
    }

    fn plan_terms(&self, list: &[usize]) -> Vec<usize> {
        list.iter().filter_map(|&t| self.to_plan[t]).collect()
    }
}
