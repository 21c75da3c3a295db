//! The decision dimensions of a study and the mixed-radix grid over them: counting (never by
//! enumerating a large grid), skip rules, and seeded random draws.

use std::collections::BTreeSet;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha20Rng;

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

    pub fn matches(&self, choices: &[usize]) -> bool {
        self.0
            .iter()
            .zip(choices)
            .all(|(set, &c)| set.as_ref().is_none_or(|s| s[c]))
    }

    /// Number of grid points in the box (saturating).
    fn size(&self, radices: &[u128]) -> u128 {
        self.0.iter().zip(radices).fold(1u128, |acc, (set, &r)| {
            let n = match set {
                Some(s) => s.iter().filter(|b| **b).count() as u128,
                None => r,
            };
            acc.saturating_mul(n)
        })
    }

    fn intersect(&self, other: &SkipBox) -> SkipBox {
        SkipBox(
            self.0
                .iter()
                .zip(&other.0)
                .map(|(a, b)| match (a, b) {
                    (None, x) | (x, None) => x.clone(),
                    (Some(a), Some(b)) => Some(a.iter().zip(b).map(|(x, y)| *x && *y).collect()),
                })
                .collect(),
        )
    }
}

/// Product of the radices, saturating at `u128::MAX`.
pub(crate) fn full_size(radices: &[u128]) -> u128 {
    radices.iter().fold(1u128, |acc, &r| acc.saturating_mul(r))
}

/// Most intersections inclusion–exclusion may visit before giving up.
const INTERSECTION_BUDGET: usize = 1 << 20;

/// Number of grid points matched by at least one skip box, by inclusion–exclusion over the
/// boxes (an intersection of boxes is a box; empty intersections prune the search).
/// `None` if the search would exceed its budget.
pub(crate) fn count_skipped(boxes: &[SkipBox], radices: &[u128]) -> Option<u128> {
    // Union size = Σ over non-empty subsets S of (−1)^(|S|+1)·|∩S|; keep the two signs apart.
    let mut added = 0u128;
    let mut removed = 0u128;
    let mut visited = 0usize;
    // Depth-first over subsets in index order: (next index, intersection, subset size).
    let mut stack: Vec<(usize, SkipBox, usize)> = Vec::new();
    for (i, b) in boxes.iter().enumerate() {
        stack.push((i + 1, b.clone(), 1));
    }
    while let Some((next, current, depth)) = stack.pop() {
        visited += 1;
        if visited > INTERSECTION_BUDGET {
            return None;
        }
        let size = current.size(radices);
        if size == 0 {
            continue;
        }
        if depth % 2 == 1 {
            added = added.saturating_add(size);
        } else {
            removed = removed.saturating_add(size);
        }
        for (j, b) in boxes.iter().enumerate().skip(next) {
            stack.push((j + 1, current.intersect(b), depth + 1));
        }
    }
    Some(added.saturating_sub(removed))
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

/// Every grid point not skipped, in grid order. Call only on a grid small enough to walk.
pub(crate) fn enumerate_kept(radices: &[u128], boxes: &[SkipBox]) -> Vec<u128> {
    let full = full_size(radices);
    (0..full)
        .filter(|&i| {
            let c = decode(i, radices);
            !boxes.iter().any(|b| b.matches(&c))
        })
        .collect()
}

/// Largest grid walked point by point (to count or to draw from).
pub(crate) const WALK_LIMIT: u128 = 2_000_000;

/// Smallest share of a huge grid that skip rules may leave for rejection sampling to work in
/// reasonable time.
pub(crate) const MIN_KEPT_SHARE: f64 = 1e-3;

/// Why a random draw failed.
#[derive(Debug)]
pub(crate) enum DrawError {
    /// Skip rules leave too small a share of a huge grid to find kept points by chance.
    TooSparse,
}

/// `count` distinct kept grid indices drawn uniformly at random with a seeded ChaCha20
/// generator (same seed → same draw on every machine), in increasing order.
/// `kept` is the number of kept points; requires `count < kept`.
pub(crate) fn draw(
    radices: &[u128],
    boxes: &[SkipBox],
    kept: u128,
    count: u64,
    seed: u64,
) -> Result<Vec<u128>, DrawError> {
    let mut rng = ChaCha20Rng::seed_from_u64(seed);
    let full = full_size(radices);
    if full <= WALK_LIMIT {
        // Partial Fisher–Yates over the kept points: exact, no rejection.
        let mut pool = enumerate_kept(radices, boxes);
        let count = (count as usize).min(pool.len());
        for i in 0..count {
            let j = rng.random_range(i..pool.len());
            pool.swap(i, j);
        }
        pool.truncate(count);
        pool.sort_unstable();
        return Ok(pool);
    }
    // Rejection: a uniform index, kept only if no rule skips it and it is new. Each accepted
    // draw is uniform over the kept points not yet drawn, so the set is a uniform sample.
    let mut chosen = BTreeSet::new();
    let kept_share = kept as f64 / full as f64;
    if kept_share < MIN_KEPT_SHARE {
        return Err(DrawError::TooSparse);
    }
    let budget = ((count as f64 / kept_share.max(1e-300)) * 20.0).min(1e9) as u64 + 100_000;
    let mut tries = 0u64;
    while (chosen.len() as u64) < count {
        tries += 1;
        if tries > budget {
            return Err(DrawError::TooSparse);
        }
        let i = rng.random_range(0..full);
        if boxes.iter().any(|b| b.matches(&decode(i, radices))) {
            continue;
        }
        chosen.insert(i);
    }
    Ok(chosen.into_iter().collect())
}
