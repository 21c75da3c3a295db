//! What the residual pass must compute for one call, derived once from the options, including
//! the intersection clustering that two-way errors need.

use std::collections::HashMap;

use crate::api::{Covariance, Design, FitOptions};

/// One way of grouping rows into clusters (a design dimension or the intersection of two).
#[derive(Debug, Clone)]
pub(crate) struct Grouping {
    /// Which clustering: a design dimension, or the intersection of two (lower index first).
    pub key: (usize, Option<usize>),
    /// Name for errors.
    pub name: String,
    /// Dense code per row.
    pub codes: Vec<u32>,
    /// Size of the code range.
    pub range: usize,
    /// Clusters that actually hold rows (G).
    pub occupied: usize,
}

/// The groupings one covariance choice uses.
#[derive(Debug, Clone, Copy)]
pub(crate) enum CovGroups {
    /// Not clustered.
    None,
    /// One-way: index into [`Plan::groupings`].
    One(usize),
    /// Two-way: first, second, intersection.
    Two(usize, usize, usize),
}

/// Row-pass requirements of one call.
#[derive(Debug, Clone)]
pub(crate) struct Plan {
    /// Any heteroskedasticity- or cluster-robust choice (needs wᵢ = a'xᵢ and eᵢ).
    pub need_w: bool,
    /// Σ w²e² (HC0/HC1).
    pub need_hc0: bool,
    /// Σ w²e²/(1 − h).
    pub need_hc2: bool,
    /// Σ w²e²/(1 − h)².
    pub need_hc3: bool,
    /// Two-way requested: w over every kept coefficient (the full matrix is repaired).
    pub all_coefs: bool,
    /// Clusterings used.
    pub groupings: Vec<Grouping>,
    /// Per covariance choice (options order).
    pub cov_groups: Vec<CovGroups>,
    /// Per grouping: absorbed parameters counted in k of its cluster-robust factor (empty when
    /// nothing is absorbed).
    pub absorbed_in_k: Vec<usize>,
}

impl Plan {
    /// Derives the plan; options must already be validated against the design.
    pub fn new(design: &Design, opts: &FitOptions) -> Plan {
        let mut plan = Plan {
            need_w: false,
            need_hc0: false,
            need_hc2: false,
            need_hc3: false,
            all_coefs: false,
            groupings: Vec::new(),
            cov_groups: Vec::new(),
            absorbed_in_k: Vec::new(),
        };
        let mut keys: Vec<(usize, Option<usize>)> = Vec::new();
        let mut group_of = |a: usize, b: Option<usize>, plan: &mut Plan| -> usize {
            if let Some(i) = keys.iter().position(|&k| k == (a, b)) {
                return i;
            }
            keys.push((a, b));
            plan.groupings.push(match b {
                None => one_dimension(design, a),
                Some(b) => intersection(design, a, b),
            });
            keys.len() - 1
        };
        for cov in &opts.covariances {
            let groups = match *cov {
                Covariance::Classical => CovGroups::None,
                Covariance::Hc0 | Covariance::Hc1 => {
                    plan.need_hc0 = true;
                    CovGroups::None
                }
                Covariance::Hc2 => {
                    plan.need_hc2 = true;
                    CovGroups::None
                }
                Covariance::Hc3 => {
                    plan.need_hc3 = true;
                    CovGroups::None
                }
                Covariance::Cluster { dim } => CovGroups::One(group_of(dim, None, &mut plan)),
                Covariance::TwoWayCluster { first, second } => {
                    plan.all_coefs = true;
                    let a = group_of(first, None, &mut plan);
                    let b = group_of(second, None, &mut plan);
                    let (lo, hi) = (first.min(second), first.max(second));
                    let ab = group_of(lo, Some(hi), &mut plan);
                    CovGroups::Two(a, b, ab)
                }
            };
            plan.need_w |= !matches!(cov, Covariance::Classical);
            plan.cov_groups.push(groups);
        }
        plan
    }

    /// Whether leverages hᵢ are needed.
    pub fn need_leverage(&self) -> bool {
        self.need_hc2 || self.need_hc3
    }
}

fn occupied(codes: &[u32], range: usize) -> usize {
    let mut seen = vec![false; range];
    codes.iter().for_each(|&g| seen[g as usize] = true);
    seen.iter().filter(|&&s| s).count()
}

fn one_dimension(design: &Design, d: usize) -> Grouping {
    let c = &design.clusters[d];
    Grouping {
        key: (d, None),
        name: c.name.clone(),
        codes: c.codes.clone(),
        range: c.count,
        occupied: occupied(&c.codes, c.count),
    }
}

/// Cells of the cross-classification of two dimensions, numbered in order of first appearance.
fn intersection(design: &Design, a: usize, b: usize) -> Grouping {
    let (ca, cb) = (&design.clusters[a], &design.clusters[b]);
    let mut ids: HashMap<(u32, u32), u32> = HashMap::new();
    let codes: Vec<u32> = ca
        .codes
        .iter()
        .zip(&cb.codes)
        .map(|(&x, &y)| {
            let next = ids.len() as u32;
            *ids.entry((x, y)).or_insert(next)
        })
        .collect();
    let range = ids.len();
    Grouping {
        key: (a, Some(b)),
        name: format!("{} × {}", ca.name, cb.name),
        codes,
        range,
        occupied: range,
    }
}
