//! Applying the study's `[verdict]` rules to a run's aggregates (and to its comparison with the
//! earlier run), and writing `verdict.json`. The figures come from specgrid-report; this module
//! only compares them with the thresholds.

use serde::Serialize;
use specgrid_report::{baseline_index, significance, Comparison, Report, VerdictLine};
use specgrid_study::Verdict;

use crate::exit::Failure;

/// Format tag of `verdict.json`.
pub const VERDICT_FORMAT: &str = "specgrid-verdict-1";

/// File name of the verdict inside a results folder.
pub const VERDICT_FILE: &str = "verdict.json";

/// The judged rules.
#[derive(Debug, Clone, Serialize)]
pub struct Outcome {
    /// Format tag ([`VERDICT_FORMAT`]).
    pub format: &'static str,
    /// Covariance choice the rules were judged under.
    pub errors: String,
    /// Whether every checked rule holds.
    pub holds: bool,
    /// Each checked rule, in words, and whether it holds.
    pub rules: Vec<Rule>,
    /// Rules of the study that could not be checked, and why.
    pub not_checked: Vec<String>,
}

/// One checked rule.
#[derive(Debug, Clone, Serialize)]
pub struct Rule {
    /// The rule and the observed value.
    pub text: String,
    /// Whether it holds.
    pub holds: bool,
}

impl Outcome {
    /// The rules as the HTML section shows them.
    pub fn lines(&self) -> Vec<VerdictLine> {
        self.rules
            .iter()
            .map(|r| VerdictLine {
                text: r.text.clone(),
                passed: r.holds,
            })
            .collect()
    }

    /// Terminal lines.
    pub fn terminal(&self) -> String {
        let mut t = format!(
            "verdict under `{}`: {}\n",
            self.errors,
            if self.holds {
                "the finding holds"
            } else {
                "the finding does NOT hold"
            }
        );
        for r in &self.rules {
            let mark = if r.holds { "ok  " } else { "FAIL" };
            t.push_str(&format!("  {mark} {}\n", r.text));
        }
        for n in &self.not_checked {
            t.push_str(&format!("  --   {n}\n"));
        }
        t
    }

    /// `verdict.json`.
    pub fn to_json(&self) -> Result<String, Failure> {
        serde_json::to_string_pretty(self)
            .map(|s| s + "\n")
            .map_err(|e| Failure::Output(format!("{VERDICT_FILE}: {e}")))
    }

    /// The failure a scheduler alerts on, when a rule fails.
    pub fn failure(&self) -> Option<Failure> {
        (!self.holds).then(|| {
            let failed: Vec<&str> = self
                .rules
                .iter()
                .filter(|r| !r.holds)
                .map(|r| r.text.as_str())
                .collect();
            Failure::Verdict(failed.join("; "))
        })
    }
}

/// Judges the rules on `report`, and the flip rule on `comparison` when there is one.
pub fn judge(
    rules: &Verdict,
    report: &Report,
    comparison: Option<&Comparison>,
) -> Result<Outcome, Failure> {
    let labels = &report.input.error_labels;
    let e = match &rules.errors {
        Some(label) => labels.iter().position(|l| l == label).ok_or_else(|| {
            Failure::Data(format!(
                "the [verdict] names the covariance choice `{label}`, which the results do not have ({})",
                labels.join(", ")
            ))
        })?,
        None => 0,
    };
    let errors = labels.get(e).cloned().unwrap_or_default();
    let summary = report.summary.by_errors.get(e);
    let baseline = summary.and_then(|s| s.baseline_estimate);
    let mut checked = Vec::new();
    let mut not_checked = Vec::new();
    let share_text = |v: Option<f64>| v.map_or("none".to_string(), |x| format!("{x:.4}"));
    if let Some(min) = rules.min_share_baseline_sign {
        let share = summary.and_then(|s| s.share_baseline_sign);
        checked.push(Rule {
            text: format!(
                "share of models with the baseline's sign {} ≥ {min}",
                share_text(share)
            ),
            holds: share.is_some_and(|s| s >= min),
        });
    }
    if let Some(min) = rules.min_share_significant {
        let share = summary.and_then(|s| match baseline {
            Some(b) if b > 0.0 => s.share_significant_positive,
            Some(b) if b < 0.0 => s.share_significant_negative,
            _ => None,
        });
        checked.push(Rule {
            text: format!(
                "share of models significant with the baseline's sign {} ≥ {min}",
                share_text(share)
            ),
            holds: share.is_some_and(|s| s >= min),
        });
    }
    if rules.baseline_significant {
        let significant = baseline_index(&report.input)
            .and_then(|(i, _)| report.input.models.get(i).effects().nth(e).flatten())
            .and_then(|effect| significance(&effect, report.input.significance_level));
        checked.push(Rule {
            text: format!(
                "baseline significant at {}: {}",
                report.input.significance_level,
                match significant {
                    Some(true) => "yes",
                    Some(false) => "no",
                    None => "no estimate or standard error",
                }
            ),
            holds: significant == Some(true),
        });
    }
    if let Some(max) = rules.max_sign_flips {
        match comparison {
            Some(c) => checked.push(Rule {
                text: format!(
                    "sign flips against the earlier run {} ≤ {max}",
                    c.sign_flips.len()
                ),
                holds: c.sign_flips.len() as u64 <= max,
            }),
            None => not_checked.push(format!(
                "sign flips ≤ {max}: no earlier run to compare with (use --against)"
            )),
        }
    }
    Ok(Outcome {
        format: VERDICT_FORMAT,
        errors,
        holds: checked.iter().all(|r| r.holds),
        rules: checked,
        not_checked,
    })
}

#[cfg(test)]
mod tests {
    use specgrid_report::{
        DimensionInfo, Effect, ModelEntry, ModelStatus, Models, ReportInput, Scale,
    };

    use super::*;

    /// Four models on one decision with estimates 1, 2, −1, 3 and standard errors 0.25, 0.5,
    /// 0.25, 5 (t = 4, 4, −4, 0.6 with 100 df); the baseline is the first.
    fn report() -> Report {
        let model = |id: &str, choice: usize, estimate: f64, se: f64| ModelEntry {
            model_id: id.into(),
            choices: vec![choice],
            status: ModelStatus::Ok,
            effects: vec![Some(Effect::coefficient(estimate, Some(se), 100.0))],
            n_obs: Some(102),
            n_params: Some(2),
            r_squared: Some(0.5),
            resid_sd: Some(1.0),
            het_p_value: None,
            outcome_label: "y".into(),
        };
        Report::build(ReportInput {
            title: "t".into(),
            scale: Scale::Coefficient,
            effect_label: "x".into(),
            dimensions: vec![DimensionInfo::new(
                "d",
                vec!["a".into(), "b".into(), "c".into(), "e".into()],
            )],
            error_labels: vec!["hc1".into()],
            significance_level: 0.05,
            confidence_level: 0.95,
            baseline_model_id: None,
            models: Models::from_entries(vec![
                model("m1", 0, 1.0, 0.25),
                model("m2", 1, 2.0, 0.5),
                model("m3", 2, -1.0, 0.25),
                model("m4", 3, 3.0, 5.0),
            ])
            .unwrap(),
            study_text: String::new(),
            data_fingerprint: String::new(),
            baseline_residuals: None,
            across_grid: None,
        })
        .unwrap()
    }

    fn rules() -> Verdict {
        Verdict {
            errors: None,
            min_share_baseline_sign: None,
            min_share_significant: None,
            baseline_significant: false,
            max_sign_flips: None,
        }
    }

    #[test]
    fn shares_are_judged_against_their_thresholds() {
        // Baseline sign (+) in 3 of 4 models; significant and positive in 2 of 4 (|t| > 1.984
        // with 100 df, t table from memory): m1 and m2.
        let r = report();
        let judge_with = |v: Verdict| judge(&v, &r, None).unwrap();
        let sign = |min| Verdict {
            min_share_baseline_sign: Some(min),
            ..rules()
        };
        assert!(judge_with(sign(0.75)).holds);
        assert!(!judge_with(sign(0.76)).holds);
        let significant = |min| Verdict {
            min_share_significant: Some(min),
            ..rules()
        };
        assert!(judge_with(significant(0.5)).holds);
        let failed = judge_with(significant(0.51));
        assert!(!failed.holds);
        assert!(matches!(failed.failure(), Some(Failure::Verdict(_))));
        let baseline = judge_with(Verdict {
            baseline_significant: true,
            ..rules()
        });
        assert!(baseline.holds, "{:?}", baseline.rules);
    }

    #[test]
    fn the_flip_rule_needs_an_earlier_run() {
        let r = report();
        let v = Verdict {
            max_sign_flips: Some(0),
            ..rules()
        };
        let alone = judge(&v, &r, None).unwrap();
        assert!(alone.holds && alone.rules.is_empty());
        assert_eq!(alone.not_checked.len(), 1);
        let same = specgrid_report::compare(&r, &r, None, Default::default()).unwrap();
        let compared = judge(&v, &r, Some(&same)).unwrap();
        assert!(compared.holds && compared.rules.len() == 1);
        let unknown = Verdict {
            errors: Some("hc3".into()),
            ..rules()
        };
        assert!(matches!(judge(&unknown, &r, None), Err(Failure::Data(_))));
    }
}
