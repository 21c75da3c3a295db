//! The decision dimensions of a study and the mixed-radix grid over them: counting (never by
//! enumerating a large grid), skip rules, and seeded random draws.

use std::collections::HashMap;

use crate::picks;
use crate::plan::{Dimension, DimensionKind, Term};
use crate::study::{ControlRole, GridMode, SkipRule, Study};

/// Every distinct regressor term of a study, numbered once, with its canonical text, so that
/// expanding many models never formats or compares terms again.
#[derive(Debug, Clone, Default)]
pub(crate) struct TermTable {
    /// Distinct terms.
    pub terms: Vec<Term>,
    /// Canonical text of each term.
    pub keys: Vec<String>,
    /// Position of each term when the keys are sorted (orders a model's terms for its id).
    pub rank: Vec<usize>,
    by_key: HashMap<String, usize>,
}

impl TermTable {
    fn intern(&mut self, term: &Term) -> usize {
        let key = term.canonical();
        if let Some(&i) = self.by_key.get(&key) {
            return i;
        }
        self.terms.push(term.clone());
        self.keys.push(key.clone());
        self.by_key.insert(key, self.terms.len() - 1);
        self.terms.len() - 1
    }

    /// Intern a list, dropping repeats within it.
    fn intern_all(&mut self, terms: &[Term]) -> Vec<usize> {
        let mut out = Vec::with_capacity(terms.len());
        for t in terms {
            let i = self.intern(t);
            if !out.contains(&i) {
                out.push(i);
            }
        }
        out
    }

    fn finish_ranks(&mut self) {
        let mut order: Vec<usize> = (0..self.keys.len()).collect();
        order.sort_by(|&a, &b| self.keys[a].cmp(&self.keys[b]));
        self.rank = vec![0; order.len()];
        for (position, &i) in order.iter().enumerate() {
            self.rank[i] = position;
        }
    }
}

/// How one control block is resolved from a model's choices.
#[derive(Debug, Clone)]
enum BlockSource {
    /// Always in.
    Always,
    /// Optional block with its own dimension: option 0 = out, 1 = in.
    Optional { dim: usize },
    /// Alternatives with their own dimension; `none_first` when option 0 is "none".
    Alternatives { dim: usize, none_first: bool },
    /// Optional block in nested mode: in when the `controls` choice is at least `step`.
    Nested { dim: usize, step: usize },
    /// Pick block with its own dimension: the option number is unranked into a set of term
    /// positions when a model is expanded, so no set is stored (`picks.rs`).
    Pick { dim: usize, sets: picks::Unranker },
}

/// The decision dimensions of a study and how choices map to model content.
#[derive(Debug, Clone)]
pub(crate) struct Layout {
    /// Dimensions in grid order (the first varies slowest).
    pub dimensions: Vec<Dimension>,
    /// Every regressor term of the study.
    pub table: TermTable,
    blocks: Vec<BlockSource>,
    /// Term numbers of each focus form.
    focus_terms: Vec<Vec<usize>>,
    /// Term numbers of each block: one list for always/optional/pick blocks, one per option
    /// for alternatives (without the `none` option).
    block_terms: Vec<Vec<Vec<usize>>>,
    /// Whether each term is listed in `also_track`.
    also_tracked: Vec<bool>,
    outcome_dim: usize,
    focus_dim: usize,
    sample_dim: usize,
}

/// Working space of [`Layout::content_with`], reused from one model to the next.
#[derive(Debug, Default)]
pub(crate) struct ContentScratch {
    /// Per study term, whether the model being built has it (all false between calls).
    present: Vec<bool>,
    terms: Vec<usize>,
    set: Vec<usize>,
    picked: Vec<usize>,
}

/// The content of one model, with terms numbered in [`Layout::table`].
pub(crate) struct ModelContent {
    /// Index into the study's outcome forms.
    pub outcome: usize,
    /// Index into the study's samples.
    pub sample: usize,
    /// Terms in model order, deduplicated.
    pub terms: Vec<usize>,
    /// Tracked terms, in model order.
    pub tracked: Vec<usize>,
}

impl Layout {
    /// Build the dimensions: `outcome`, `focus`, the control decisions (in nested mode one
    /// `controls` decision, then each alternatives block), and `sample`.
    pub fn new(study: &Study) -> Layout {
        let mut dimensions = Vec::new();
        // (dimension, candidate labels) of each pick block, filled in once `push` is done.
        let mut pick_candidates: Vec<(usize, Vec<String>)> = Vec::new();
        let mut push = |name: &str, kind: DimensionKind, options: Vec<String>| {
            dimensions.push(Dimension {
                name: name.to_string(),
                kind,
                options,
                candidates: Vec::new(),
            });
            dimensions.len() - 1
        };
        let outcome_dim = push(
            "outcome",
            DimensionKind::Outcome,
            study.outcome.forms.iter().map(|(n, _)| n.clone()).collect(),
        );
        let focus_dim = push(
            "focus",
            DimensionKind::Focus,
            study.focus.forms.iter().map(|f| f.name.clone()).collect(),
        );
        let nested = study.grid.mode == GridMode::Nested;
        let optional_names: Vec<&str> = study
            .controls
            .iter()
            .filter(|b| matches!(b.role, ControlRole::Optional(_)))
            .map(|b| b.name.as_str())
            .collect();
        let nested_dim = if nested && !optional_names.is_empty() {
            let mut options = vec!["none".to_string()];
            for k in 1..=optional_names.len() {
                options.push(optional_names[..k].join(" + "));
            }
            Some(push("controls", DimensionKind::NestedControls, options))
        } else {
            None
        };
        let mut blocks = Vec::new();
        let mut step = 0;
        for block in &study.controls {
            let source = match &block.role {
                ControlRole::Always(_) => BlockSource::Always,
                ControlRole::Optional(_) => match nested_dim {
                    Some(dim) => {
                        step += 1;
                        BlockSource::Nested { dim, step }
                    }
                    None => BlockSource::Optional {
                        dim: push(
                            &block.name,
                            DimensionKind::OptionalBlock,
                            vec!["out".into(), "in".into()],
                        ),
                    },
                },
                ControlRole::Alternatives {
                    options,
                    include_none,
                } => {
                    let mut names: Vec<String> = Vec::new();
                    if *include_none {
                        names.push("none".into());
                    }
                    names.extend(options.iter().map(|o| o.name.clone()));
                    BlockSource::Alternatives {
                        dim: push(&block.name, DimensionKind::Alternatives, names),
                        none_first: *include_none,
                    }
                }
                ControlRole::Pick {
                    terms,
                    sizes,
                    include_none,
                } => {
                    // A pick block is one decision in either mode: nested mode stacks only
                    // optional blocks (docs/study-file.md).
                    let labels: Vec<String> = terms.iter().map(Term::label).collect();
                    let names = picks::option_names(&labels, sizes, *include_none);
                    let dim = push(&block.name, DimensionKind::Alternatives, names);
                    pick_candidates.push((dim, labels));
                    BlockSource::Pick {
                        dim,
                        sets: picks::Unranker::new(terms.len(), sizes, *include_none),
                    }
                }
            };
            blocks.push(source);
        }
        let sample_dim = push(
            "sample",
            DimensionKind::Sample,
            study.samples.iter().map(|s| s.name.clone()).collect(),
        );
        for (dim, labels) in pick_candidates {
            dimensions[dim].candidates = labels;
        }
        let mut table = TermTable::default();
        let focus_terms = study
            .focus
            .forms
            .iter()
            .map(|f| table.intern_all(&f.terms))
            .collect();
        let block_terms = study
            .controls
            .iter()
            .map(|b| match &b.role {
                ControlRole::Always(ts)
                | ControlRole::Optional(ts)
                | ControlRole::Pick { terms: ts, .. } => vec![table.intern_all(ts)],
                ControlRole::Alternatives { options, .. } => {
                    options.iter().map(|o| table.intern_all(&o.terms)).collect()
                }
            })
            .collect();
        let extra = table.intern_all(&study.focus.also_track);
        table.finish_ranks();
        let mut also_tracked = vec![false; table.terms.len()];
        for i in extra {
            also_tracked[i] = true;
        }
        Layout {
            dimensions,
            table,
            blocks,
            focus_terms,
            block_terms,
            also_tracked,
            outcome_dim,
            focus_dim,
            sample_dim,
        }
    }

    /// Option counts per dimension.
    pub fn radices(&self) -> Vec<u128> {
        self.dimensions
            .iter()
            .map(|d| d.options.len() as u128)
            .collect()
    }

    /// Term numbers of the focus form a choice vector takes.
    pub fn focus_terms(&self, choices: &[usize]) -> &[usize] {
        &self.focus_terms[choices[self.focus_dim]]
    }

    /// Per control block, in file order, the term numbers it brings under a choice vector
    /// (empty when the block is out), before removing terms an earlier place already brought.
    /// Owned lists, for the inference phase; `content` resolves the same choices without
    /// allocating, as the planner's hot loop must.
    pub fn chosen_block_terms(&self, choices: &[usize]) -> Vec<Vec<usize>> {
        let mut set = Vec::new();
        self.block_terms
            .iter()
            .zip(&self.blocks)
            .map(|(lists, source)| match *source {
                BlockSource::Always => lists[0].clone(),
                BlockSource::Optional { dim } if choices[dim] == 1 => lists[0].clone(),
                BlockSource::Nested { dim, step } if choices[dim] >= step => lists[0].clone(),
                BlockSource::Alternatives { dim, none_first } => match (none_first, choices[dim]) {
                    (true, 0) => Vec::new(),
                    (true, c) => lists[c - 1].clone(),
                    (false, c) => lists[c].clone(),
                },
                BlockSource::Pick { dim, ref sets } => {
                    sets.set(choices[dim], &mut set);
                    set.iter().map(|&p| lists[0][p]).collect()
                }
                _ => Vec::new(),
            })
            .collect()
    }

    /// The model a choice vector describes, with working space kept between calls: the planner
    /// asks this for every model of the grid, and fresh and regrown small vectors per model were
    /// a tenth of its time at two million models. The result's lists are allocated once, at
    /// their length.
    pub fn content_with(&self, choices: &[usize], scratch: &mut ContentScratch) -> ModelContent {
        let focus = &self.focus_terms[choices[self.focus_dim]];
        let ContentScratch {
            present,
            terms,
            set,
            picked,
        } = scratch;
        present.resize(self.table.terms.len(), false);
        terms.clear();
        let mut add = |list: &[usize], terms: &mut Vec<usize>| {
            for &t in list {
                if !present[t] {
                    present[t] = true;
                    terms.push(t);
                }
            }
        };
        add(focus, terms);
        for (lists, source) in self.block_terms.iter().zip(&self.blocks) {
            let chosen: &[usize] = match *source {
                BlockSource::Always => &lists[0],
                BlockSource::Optional { dim } if choices[dim] == 1 => &lists[0],
                BlockSource::Nested { dim, step } if choices[dim] >= step => &lists[0],
                BlockSource::Alternatives { dim, none_first } => match (none_first, choices[dim]) {
                    (true, 0) => &[],
                    (true, c) => &lists[c - 1],
                    (false, c) => &lists[c],
                },
                BlockSource::Pick { dim, ref sets } => {
                    sets.set(choices[dim], set);
                    picked.clear();
                    picked.extend(set.iter().map(|&p| lists[0][p]));
                    picked
                }
                _ => &[],
            };
            add(chosen, terms);
        }
        for &t in terms.iter() {
            present[t] = false;
        }
        let tracked = terms
            .iter()
            .copied()
            .filter(|&t| self.also_tracked[t] || focus.contains(&t))
            .collect();
        ModelContent {
            outcome: choices[self.outcome_dim],
            sample: choices[self.sample_dim],
            terms: terms.to_vec(),
            tracked,
        }
    }
}

/// A skip rule as allowed option sets per dimension (`None` = any option).
#[derive(Debug, Clone)]
pub(crate) struct SkipBox(Vec<Option<Vec<bool>>>);

impl SkipBox {
    pub fn new(rule: &SkipRule, dims: &[Dimension]) -> SkipBox {
        let mut sets: Vec<Option<Vec<bool>>> = vec![None; dims.len()];
        for (name, options) in &rule.matches {
            if let Some(d) = dims.iter().position(|d| &d.name == name) {
                let mut set = vec![false; dims[d].options.len()];
                for (i, o) in dims[d].options.iter().enumerate() {
                    if options.contains(o) {
                        set[i] = true;
                    }
                }
                // A dimension named twice in one rule (impossible in TOML) would intersect.
                sets[d] = Some(match sets[d].take() {
                    Some(old) => old.iter().zip(&set).map(|(a, b)| *a && *b).collect(),
                    None => set,
                });
            }
        }
        SkipBox(sets)
    }

    /// Whether some point of `region` matches the rule.
    pub fn touches(&self, region: &[Vec<usize>]) -> bool {
        self.0
            .iter()
            .zip(region)
            .all(|(set, options)| set.as_ref().is_none_or(|s| options.iter().any(|&o| s[o])))
    }

    /// Whether every point of `region` matches the rule.
    pub fn covers(&self, region: &[Vec<usize>]) -> bool {
        self.0
            .iter()
            .zip(region)
            .all(|(set, options)| set.as_ref().is_none_or(|s| options.iter().all(|&o| s[o])))
    }

    /// A dimension on which `region` is partly inside and partly outside the rule, with the
    /// options of `region` inside the rule (requires `touches` and not `covers`).
    pub fn split_of(&self, region: &[Vec<usize>]) -> Option<(usize, Vec<bool>)> {
        self.0
            .iter()
            .zip(region)
            .enumerate()
            .find_map(|(d, (set, options))| {
                let s = set.as_ref()?;
                (!options.iter().all(|&o| s[o])).then(|| (d, s.clone()))
            })
    }
}

/// Product of the radices, saturating at `u128::MAX`.
pub(crate) fn full_size(radices: &[u128]) -> u128 {
    radices.iter().fold(1u128, |acc, &r| acc.saturating_mul(r))
}

/// Choices of the grid point with mixed-radix `index` (the last dimension varies fastest).
pub(crate) fn decode(mut index: u128, radices: &[u128]) -> Vec<usize> {
    let mut choices = vec![0usize; radices.len()];
    for (slot, &r) in choices.iter_mut().zip(radices).rev() {
        *slot = (index % r) as usize;
        index /= r;
    }
    choices
}
