//! The decision dimensions of a study and the mixed-radix grid over them: counting (never by
//! enumerating a large grid), skip rules, and seeded random draws.

use crate::plan::{Dimension, DimensionKind, OutcomeForm, Term};
use crate::study::{ControlRole, GridMode, SkipRule, Study};

/// How one control block is resolved from a model's choices.
#[derive(Debug, Clone, Copy)]
enum BlockSource {
    /// Always in.
    Always,
    /// Optional block with its own dimension: option 0 = out, 1 = in.
    Optional { dim: usize },
    /// Alternatives with their own dimension; `none_first` when option 0 is "none".
    Alternatives { dim: usize, none_first: bool },
    /// Optional block in nested mode: in when the `controls` choice is at least `step`.
    Nested { dim: usize, step: usize },
}

/// The decision dimensions of a study and how choices map to model content.
#[derive(Debug, Clone)]
pub(crate) struct Layout {
    /// Dimensions in grid order (the first varies slowest).
    pub dimensions: Vec<Dimension>,
    blocks: Vec<BlockSource>,
    outcome_dim: usize,
    focus_dim: usize,
    sample_dim: usize,
}

/// The content of one model, before terms are numbered.
pub(crate) struct ModelContent<'s> {
    pub outcome: &'s OutcomeForm,
    pub sample: usize,
    /// Terms in model order, deduplicated.
    pub terms: Vec<&'s Term>,
    /// Tracked terms, in model order.
    pub tracked: Vec<&'s Term>,
}

impl Layout {
    /// Build the dimensions: `outcome`, `focus`, the control decisions (in nested mode one
    /// `controls` decision, then each alternatives block), and `sample`.
    pub fn new(study: &Study) -> Layout {
        let mut dimensions = Vec::new();
        let mut push = |name: &str, kind: DimensionKind, options: Vec<String>| {
            dimensions.push(Dimension {
                name: name.to_string(),
                kind,
                options,
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
            };
            blocks.push(source);
        }
        let sample_dim = push(
            "sample",
            DimensionKind::Sample,
            study.samples.iter().map(|s| s.name.clone()).collect(),
        );
        Layout {
            dimensions,
            blocks,
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

    /// The model a choice vector describes.
    pub fn content<'s>(&self, study: &'s Study, choices: &[usize]) -> ModelContent<'s> {
        let outcome = &study.outcome.forms[choices[self.outcome_dim]].1;
        let focus_terms = &study.focus.forms[choices[self.focus_dim]].terms;
        let mut terms: Vec<&Term> = Vec::new();
        let mut keys: Vec<String> = Vec::new();
        let mut add = |t: &'s Term, terms: &mut Vec<&'s Term>| {
            let key = t.canonical();
            if !keys.contains(&key) {
                keys.push(key);
                terms.push(t);
            }
        };
        for t in focus_terms {
            add(t, &mut terms);
        }
        for (block, source) in study.controls.iter().zip(&self.blocks) {
            let chosen: &[Term] = match (&block.role, *source) {
                (ControlRole::Always(ts), _) => ts,
                (ControlRole::Optional(ts), BlockSource::Optional { dim }) if choices[dim] == 1 => {
                    ts
                }
                (ControlRole::Optional(ts), BlockSource::Nested { dim, step })
                    if choices[dim] >= step =>
                {
                    ts
                }
                (
                    ControlRole::Alternatives { options, .. },
                    BlockSource::Alternatives { dim, none_first },
                ) => {
                    let c = choices[dim];
                    match (none_first, c) {
                        (true, 0) => &[],
                        (true, c) => &options[c - 1].terms,
                        (false, c) => &options[c].terms,
                    }
                }
                _ => &[],
            };
            for t in chosen {
                add(t, &mut terms);
            }
        }
        let focus_keys: Vec<String> = focus_terms.iter().map(Term::canonical).collect();
        let extra_keys: Vec<String> = study.focus.also_track.iter().map(Term::canonical).collect();
        let tracked = terms
            .iter()
            .copied()
            .filter(|t| {
                let k = t.canonical();
                focus_keys.contains(&k) || extra_keys.contains(&k)
            })
            .collect();
        ModelContent {
            outcome,
            sample: choices[self.sample_dim],
            terms,
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
