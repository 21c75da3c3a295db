//! The optional `[inference]` table: the joint test over the whole curve, coefficient-stability
//! bounds and the decomposition of the focus movement over control blocks.

use toml::de::{DeTable, DeValue};

use super::report::{apply_option_pairs, read_option_pairs, OptionPairs};
use super::values::{Reader, Val};
use crate::plan::{
    BootstrapDraws, DecompositionSettings, DimensionKind, InferenceSettings, JointTestSettings,
    StabilitySettings,
};
use crate::problem::suggestion;
use crate::study::{ControlRole, Study};

const KEYS: &[&str] = &["short_model", "joint_test", "stability", "decomposition"];
/// Draws of the joint test when the study does not say (Simonsohn, Simmons & Nelson 2020).
pub const DEFAULT_JOINT_DRAWS: usize = 500;
/// R_max as a multiple of the long model's R² (Oster 2019's suggestion).
pub const DEFAULT_R_MAX_FACTOR: f64 = 1.3;

/// `[inference]` as written; block and decision names are checked once the study is known.
pub(crate) struct RawInference {
    settings: InferenceSettings,
    /// Short-model block names with their offsets.
    short_at: Vec<(String, usize)>,
    /// The long model's (decision, offset, option, offset) pairs.
    long_pairs: Option<OptionPairs>,
}

/// Reads `[inference]`; an absent table asks for nothing.
pub(crate) fn read_inference(r: &mut Reader<'_>, value: Option<&Val<'_>>) -> Option<RawInference> {
    let mut raw = RawInference {
        settings: InferenceSettings::default(),
        short_at: Vec::new(),
        long_pairs: None,
    };
    let Some(value) = value else {
        return Some(raw);
    };
    let t = r.table(value, "[inference]")?;
    r.check_keys(t, KEYS, "[inference]");
    let before = r.problem_count();
    if let Some(v) = t.get("short_model") {
        if let Some(items) = r.array(v, "`short_model` in [inference]") {
            for item in items {
                if let Some(name) = r.string(item, "a block of `short_model` in [inference]") {
                    raw.short_at.push((name, item.span().start));
                }
            }
        }
    }
    if let Some(v) = t.get("joint_test") {
        raw.settings.joint_test = read_joint(r, v);
    }
    if let Some(v) = t.get("stability") {
        raw.settings.stability = read_stability(r, v);
    }
    if let Some(v) = t.get("decomposition") {
        if let Some(table) = switch_or_table(r, v, "`decomposition` in [inference]") {
            raw.long_pairs = Some(Vec::new());
            if let Some(table) = table {
                r.check_keys(table, &["long_model"], "`decomposition` in [inference]");
                if let Some(lm) = table.get("long_model") {
                    if let Some(lm) = r.table(lm, "`long_model` of `decomposition`") {
                        raw.long_pairs = Some(read_option_pairs(
                            r,
                            lm,
                            "`long_model` in [inference]",
                            "long_model = { \"plot size\" = \"in\" }",
                        ));
                    }
                }
            }
        }
    }
    (r.problem_count() == before).then_some(raw)
}

/// `true` (defaults), `false` (off) or a table of settings: `Some(None)` for `true`,
/// `Some(Some(table))` for a table, `None` when off or wrong.
fn switch_or_table<'v, 'i>(
    r: &mut Reader<'_>,
    v: &'v Val<'i>,
    what: &str,
) -> Option<Option<&'v DeTable<'i>>> {
    match v.get_ref() {
        DeValue::Boolean(true) => Some(None),
        DeValue::Boolean(false) => None,
        DeValue::Table(_) => r.table(v, what).map(Some),
        _ => {
            r.report(
                v.span().start,
                format!(
                    "{what} must be true, false or a table of settings, found {}",
                    super::values::a_type(v.get_ref())
                ),
                None,
            );
            None
        }
    }
}

fn read_joint(r: &mut Reader<'_>, v: &Val<'_>) -> Option<JointTestSettings> {
    let what = "`joint_test` in [inference]";
    let table = switch_or_table(r, v, what)?;
    let mut settings = JointTestSettings {
        draws: DEFAULT_JOINT_DRAWS,
        cluster: None,
        weights: BootstrapDraws::Rademacher,
    };
    if let Some(t) = table {
        r.check_keys(t, &["draws", "cluster", "weights"], what);
        if let Some(d) = t.get("draws") {
            settings.draws =
                r.integer_in(d, &format!("`draws` of {what}"), 19, 1_000_000)? as usize;
        }
        if let Some(c) = t.get("cluster") {
            settings.cluster = Some(r.name(c, &format!("`cluster` of {what}"))?);
        }
        if let Some(w) = t.get("weights") {
            settings.weights = bootstrap_draws(r, w, &format!("`weights` of {what}"))?;
        }
    }
    Some(settings)
}

fn read_stability(r: &mut Reader<'_>, v: &Val<'_>) -> Option<StabilitySettings> {
    let what = "`stability` in [inference]";
    let table = switch_or_table(r, v, what)?;
    let mut settings = StabilitySettings {
        r_max_factor: DEFAULT_R_MAX_FACTOR,
    };
    if let Some(t) = table {
        r.check_keys(t, &["r_max_factor"], what);
        if let Some(f) = t.get("r_max_factor") {
            let x = r.number(f, &format!("`r_max_factor` of {what}"))?;
            if !(x > 1.0 && x.is_finite()) {
                r.report(
                    f.span().start,
                    format!("`r_max_factor` of {what} must be a number above 1, found {x}"),
                    Some("the paper's suggestion is 1.3".into()),
                );
                return None;
            }
            settings.r_max_factor = x;
        }
    }
    Some(settings)
}

/// `"rademacher"` or `"webb"`.
pub(crate) fn bootstrap_draws(
    r: &mut Reader<'_>,
    v: &Val<'_>,
    what: &str,
) -> Option<BootstrapDraws> {
    let word = r.string(v, what)?;
    let words: Vec<&str> = BootstrapDraws::WORDS.iter().map(|(w, _)| *w).collect();
    match BootstrapDraws::WORDS.iter().find(|(w, _)| *w == word) {
        Some((_, d)) => Some(*d),
        None => {
            r.report(
                v.span().start,
                format!("unknown bootstrap weights `{word}` in {what}"),
                Some(suggestion(&word.to_ascii_lowercase(), &words)),
            );
            None
        }
    }
}

/// Checks the block and decision names against the study and fills in the long model: named
/// decisions take the named option; optional blocks are in, alternatives take their first
/// option other than `none`, nested controls take every step, and outcome, focus and sample
/// take the baseline's option.
pub(crate) fn check_inference(
    r: &mut Reader<'_>,
    study: &Study,
    raw: RawInference,
) -> Option<InferenceSettings> {
    let mut settings = raw.settings;
    let before = r.problem_count();
    let block_names: Vec<&str> = study.controls.iter().map(|b| b.name.as_str()).collect();
    for (name, at) in raw.short_at {
        if settings.short_model.contains(&name) {
            r.report(
                at,
                format!("`short_model` names block `{name}` twice"),
                None,
            );
        } else if !block_names.contains(&name.as_str()) {
            r.report(
                at,
                format!("`short_model` names `{name}`, which is not a control block of this study"),
                Some(suggestion(&name, &block_names)),
            );
        } else {
            settings.short_model.push(name);
        }
    }
    if let Some(pairs) = raw.long_pairs {
        let dimensions = crate::grid::Layout::new(study).dimensions;
        let baseline = study.report.baseline.clone();
        let mut long: Vec<usize> = dimensions
            .iter()
            .enumerate()
            .map(|(d, dim)| match dim.kind {
                DimensionKind::OptionalBlock => 1,
                DimensionKind::Alternatives => usize::from(has_none(study, &dim.name)),
                DimensionKind::NestedControls => dim.options.len() - 1,
                _ => baseline.as_ref().map_or(0, |b| b[d]),
            })
            .collect();
        apply_option_pairs(r, &dimensions, pairs, "the long model", &mut long);
        settings.decomposition = Some(DecompositionSettings { long_model: long });
    }
    (r.problem_count() == before).then_some(settings)
}

fn has_none(study: &Study, block: &str) -> bool {
    study.controls.iter().any(|b| {
        b.name == block
            && matches!(
                b.role,
                ControlRole::Alternatives {
                    include_none: true,
                    ..
                } | ControlRole::Pick {
                    include_none: true,
                    ..
                }
            )
    })
}
