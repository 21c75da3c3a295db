//! The grid's models as the report keeps them: one column per field instead of one record per
//! model. At two million models a record with its own id, choices, effects and label strings
//! was about 470 bytes and four allocations a model, and first touches of that gigabyte were
//! most of a run's system time; the columns take about 131 bytes a model, allocated a few
//! times per run, and the aggregates read only the columns they need (docs/performance.md,
//! session 8).

use crate::effect::{Derived, Effect};
use crate::input::{ModelEntry, ModelStatus};
use crate::ReportError;

/// Every model of the grid, failed ones included, in plan order.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Models {
    /// Decisions per model (the length of every model's choices).
    dims: usize,
    /// Covariance choices per model (the length of every model's effects).
    errors: usize,
    /// The ids one after another; model i's is `id_text[id_ends[i - 1]..id_ends[i]]`.
    id_text: String,
    id_ends: Vec<usize>,
    /// Model i's option numbers at `i·dims .. (i + 1)·dims`.
    choices: Vec<u32>,
    /// (model index, message) of the failed models, in model order.
    failures: Vec<(usize, String)>,
    /// One column set per covariance choice.
    effects: Vec<EffectColumn>,
    /// Which of the statistics below model i has ([`N_OBS`], [`N_PARAMS`], …): a byte of
    /// flags beside plain values, where `Option`s doubled each column.
    stat_flags: Vec<u8>,
    n_obs: Vec<u64>,
    n_params: Vec<u64>,
    r_squared: Vec<f64>,
    resid_sd: Vec<f64>,
    het_p_value: Vec<f64>,
    /// Index into `outcome_labels` per model (a grid has a handful of outcome forms).
    outcome: Vec<u32>,
    outcome_labels: Vec<String>,
}

/// The tracked effect of every model under one covariance choice.
#[derive(Debug, Clone, PartialEq, Default)]
struct EffectColumn {
    /// Per model [`PRESENT`], [`HAS_STD_ERROR`] and [`HAS_P_VALUE`] flags (the values of a
    /// missing part are zero and never read).
    flags: Vec<u8>,
    estimate: Vec<f64>,
    std_error: Vec<f64>,
    df: Vec<f64>,
    p_value: Vec<f64>,
    /// The derived quantities of a few scales; empty until some effect carries one, so a grid
    /// that never has them pays nothing.
    derived: Vec<Derivations>,
}

/// Effect flag: the model has a number under this covariance choice.
const PRESENT: u8 = 1;
/// Effect flag: its standard error is known.
const HAS_STD_ERROR: u8 = 2;
/// Effect flag: it carries a p-value of its own.
const HAS_P_VALUE: u8 = 4;
/// Statistic flags.
const N_OBS: u8 = 1;
const N_PARAMS: u8 = 2;
const R_SQUARED: u8 = 4;
const RESID_SD: u8 = 8;
const HET_P_VALUE: u8 = 16;

/// The flag `bit` when `value` is there, and the value or a placeholder (zero) that is never
/// read.
fn split<T: Copy>(value: Option<T>, bit: u8, placeholder: T) -> (u8, T) {
    match value {
        Some(v) => (bit, v),
        None => (0, placeholder),
    }
}

/// `value` when `flags` has `bit`.
fn joined<T>(flags: u8, bit: u8, value: T) -> Option<T> {
    (flags & bit != 0).then_some(value)
}

/// The optional parts of an [`Effect`] that only some scales fill.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
struct Derivations {
    proportional_change: Option<Derived>,
    turning_point: Option<Derived>,
}

/// Fit statistics of one model, as [`Models::push`] takes them (all `None` for a failed model).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct FitStats {
    /// Rows used.
    pub n_obs: Option<u64>,
    /// Coefficients estimated.
    pub n_params: Option<u64>,
    /// R² of the fit.
    pub r_squared: Option<f64>,
    /// Residual standard deviation, √(RSS / (n − k)).
    pub resid_sd: Option<f64>,
    /// p-value of the studentized Breusch–Pagan test, when the engine computed it.
    pub het_p_value: Option<f64>,
}

/// One model to add: everything borrowed, so adding a model allocates nothing of its own.
#[derive(Debug, Clone, Copy)]
pub struct NewModel<'a> {
    /// Stable model id.
    pub id: &'a str,
    /// Option index per decision dimension.
    pub choices: &'a [usize],
    /// Why the model failed; `None` when it was estimated.
    pub failure: Option<&'a str>,
    /// Its statistics.
    pub stats: FitStats,
    /// Label of the outcome form (e.g. `log(yield_t_ha)`).
    pub outcome_label: &'a str,
}

impl Models {
    /// An empty table for models with `dims` decisions and `errors` covariance choices.
    pub fn new(dims: usize, errors: usize) -> Models {
        Models {
            dims,
            errors,
            effects: vec![EffectColumn::default(); errors],
            ..Models::default()
        }
    }

    /// [`Models::new`] with room for `models` models whose ids take about `id_bytes` bytes in
    /// all, so the columns are allocated once rather than grown by doubling.
    pub fn with_capacity(dims: usize, errors: usize, models: usize, id_bytes: usize) -> Models {
        let mut table = Models::new(dims, errors);
        table.id_text.reserve(id_bytes);
        table.id_ends.reserve(models);
        table.choices.reserve(models * dims);
        for column in &mut table.effects {
            column.flags.reserve(models);
            column.estimate.reserve(models);
            column.std_error.reserve(models);
            column.df.reserve(models);
            column.p_value.reserve(models);
        }
        table.stat_flags.reserve(models);
        table.n_obs.reserve(models);
        table.n_params.reserve(models);
        table.r_squared.reserve(models);
        table.resid_sd.reserve(models);
        table.het_p_value.reserve(models);
        table.outcome.reserve(models);
        table
    }

    /// The table of `entries`, whose shape (decisions and covariance choices) is taken from the
    /// first; an entry of another shape is an error naming it.
    pub fn from_entries(entries: Vec<ModelEntry>) -> Result<Models, ReportError> {
        let (dims, errors) = entries
            .first()
            .map_or((0, 0), |m| (m.choices.len(), m.effects.len()));
        let mut table = Models::with_capacity(dims, errors, entries.len(), 0);
        for entry in &entries {
            table.push_entry(entry)?;
        }
        Ok(table)
    }

    /// Adds one model with its effect under each covariance choice (`None` where there is no
    /// number). Fails, adding nothing, when the choices or effects do not have the table's
    /// lengths.
    pub fn push<E>(&mut self, model: NewModel<'_>, effects: E) -> Result<(), ReportError>
    where
        E: IntoIterator<Item = Option<Effect>>,
        E::IntoIter: ExactSizeIterator,
    {
        if model.choices.len() != self.dims {
            return Err(ReportError::Input(format!(
                "model {} has {} choices for {} decisions",
                model.id,
                model.choices.len(),
                self.dims
            )));
        }
        let effects = effects.into_iter();
        if effects.len() != self.errors {
            return Err(ReportError::Input(format!(
                "model {} has effects for {} covariance choices, the report has {}",
                model.id,
                effects.len(),
                self.errors
            )));
        }
        let index = self.len();
        for (column, effect) in self.effects.iter_mut().zip(effects) {
            column.push(effect);
        }
        self.id_text.push_str(model.id);
        self.id_ends.push(self.id_text.len());
        // Option numbers are below the grid's model limit, far inside u32.
        self.choices.extend(model.choices.iter().map(|&c| c as u32));
        if let Some(message) = model.failure {
            self.failures.push((index, message.to_string()));
        }
        let s = model.stats;
        let (f1, n_obs) = split(s.n_obs, N_OBS, 0);
        let (f2, n_params) = split(s.n_params, N_PARAMS, 0);
        let (f3, r_squared) = split(s.r_squared, R_SQUARED, 0.0);
        let (f4, resid_sd) = split(s.resid_sd, RESID_SD, 0.0);
        let (f5, het_p_value) = split(s.het_p_value, HET_P_VALUE, 0.0);
        self.stat_flags.push(f1 | f2 | f3 | f4 | f5);
        self.n_obs.push(n_obs);
        self.n_params.push(n_params);
        self.r_squared.push(r_squared);
        self.resid_sd.push(resid_sd);
        self.het_p_value.push(het_p_value);
        let label = match self
            .outcome_labels
            .iter()
            .rposition(|l| l == model.outcome_label)
        {
            Some(l) => l,
            None => {
                self.outcome_labels.push(model.outcome_label.to_string());
                self.outcome_labels.len() - 1
            }
        };
        self.outcome.push(label as u32);
        Ok(())
    }

    /// Adds one model given as an owned record.
    pub fn push_entry(&mut self, entry: &ModelEntry) -> Result<(), ReportError> {
        let failure = match &entry.status {
            ModelStatus::Ok => None,
            ModelStatus::Failed(message) => Some(message.as_str()),
        };
        self.push(
            NewModel {
                id: &entry.model_id,
                choices: &entry.choices,
                failure,
                stats: FitStats {
                    n_obs: entry.n_obs,
                    n_params: entry.n_params,
                    r_squared: entry.r_squared,
                    resid_sd: entry.resid_sd,
                    het_p_value: entry.het_p_value,
                },
                outcome_label: &entry.outcome_label,
            },
            entry.effects.iter().copied(),
        )
    }

    /// Every model as an owned record (for tests and small tables).
    pub fn to_entries(&self) -> Vec<ModelEntry> {
        self.iter().map(|m| m.to_entry()).collect()
    }

    /// Number of models.
    pub fn len(&self) -> usize {
        self.id_ends.len()
    }

    /// Whether there are no models.
    pub fn is_empty(&self) -> bool {
        self.id_ends.is_empty()
    }

    /// Decisions per model.
    pub fn dims(&self) -> usize {
        self.dims
    }

    /// Covariance choices per model.
    pub fn errors(&self) -> usize {
        self.errors
    }

    /// Model `i` (panics when out of range, like indexing a slice).
    pub fn get(&self, i: usize) -> ModelRef<'_> {
        assert!(i < self.len(), "model {i} of {}", self.len());
        ModelRef { table: self, i }
    }

    /// The models in order.
    pub fn iter(&self) -> impl ExactSizeIterator<Item = ModelRef<'_>> + Clone + '_ {
        (0..self.len()).map(move |i| ModelRef { table: self, i })
    }

    /// Model `i`'s id.
    pub fn id(&self, i: usize) -> &str {
        let start = if i == 0 { 0 } else { self.id_ends[i - 1] };
        &self.id_text[start..self.id_ends[i]]
    }

    /// Model `i`'s option numbers, one per decision.
    pub fn choices(&self, i: usize) -> &[u32] {
        &self.choices[i * self.dims..(i + 1) * self.dims]
    }

    /// Model `i`'s effect under covariance choice `e`.
    pub fn effect(&self, i: usize, e: usize) -> Option<Effect> {
        self.effects[e].get(i)
    }

    /// Model `i`'s estimate under covariance choice `e`, when it has an effect there (cheaper
    /// than [`Models::effect`] where only the estimate is read).
    pub fn estimate(&self, i: usize, e: usize) -> Option<f64> {
        let column = &self.effects[e];
        joined(column.flags[i], PRESENT, column.estimate[i])
    }

    /// Replaces model `i`'s effect under covariance choice `e`.
    pub fn set_effect(&mut self, i: usize, e: usize, effect: Option<Effect>) {
        self.effects[e].set(i, effect);
    }

    /// Number of failed models.
    pub fn failed(&self) -> usize {
        self.failures.len()
    }

    /// Why model `i` failed; `None` when it was estimated.
    pub fn failure(&self, i: usize) -> Option<&str> {
        self.failures
            .binary_search_by_key(&i, |(m, _)| *m)
            .ok()
            .map(|k| self.failures[k].1.as_str())
    }
}

/// What the columns hold for a model without an effect. The placeholders are zeros, not NaN,
/// so that tables with the same models compare equal.
const ABSENT: Effect = Effect {
    estimate: 0.0,
    std_error: None,
    df: 0.0,
    proportional_change: None,
    turning_point: None,
    p_value: None,
};

/// An effect's flags, standard error and p-value as stored (zero where missing).
fn effect_parts(present: bool, f: &Effect) -> (u8, f64, f64) {
    let (has_se, std_error) = split(f.std_error, HAS_STD_ERROR, 0.0);
    let (has_p, p_value) = split(f.p_value, HAS_P_VALUE, 0.0);
    let present = if present { PRESENT } else { 0 };
    (present | has_se | has_p, std_error, p_value)
}

impl EffectColumn {
    /// Appends the next model's effect: an absent one's placeholders, then [`EffectColumn::set`].
    fn push(&mut self, effect: Option<Effect>) {
        self.flags.push(0);
        self.estimate.push(0.0);
        self.std_error.push(0.0);
        self.df.push(0.0);
        self.p_value.push(0.0);
        self.set(self.flags.len() - 1, effect);
    }

    fn get(&self, i: usize) -> Option<Effect> {
        let flags = self.flags[i];
        if flags & PRESENT == 0 {
            return None;
        }
        let d = self.derived.get(i).copied().unwrap_or_default();
        Some(Effect {
            estimate: self.estimate[i],
            std_error: joined(flags, HAS_STD_ERROR, self.std_error[i]),
            df: self.df[i],
            proportional_change: d.proportional_change,
            turning_point: d.turning_point,
            p_value: joined(flags, HAS_P_VALUE, self.p_value[i]),
        })
    }

    fn set(&mut self, i: usize, effect: Option<Effect>) {
        let f = effect.unwrap_or(ABSENT);
        let (flags, std_error, p_value) = effect_parts(effect.is_some(), &f);
        self.flags[i] = flags;
        self.estimate[i] = f.estimate;
        self.std_error[i] = std_error;
        self.df[i] = f.df;
        self.p_value[i] = p_value;
        let derivations = Derivations {
            proportional_change: f.proportional_change,
            turning_point: f.turning_point,
        };
        // `derived` stays empty (reads past its end are the default) until some effect carries
        // a derived quantity; from then on it is as long as the other columns.
        if derivations != Derivations::default() || !self.derived.is_empty() {
            if self.derived.len() < self.flags.len() {
                self.derived
                    .resize(self.flags.len(), Derivations::default());
            }
            self.derived[i] = derivations;
        }
    }
}

/// One model of a [`Models`] table: its fields by accessor.
#[derive(Debug, Clone, Copy)]
pub struct ModelRef<'a> {
    table: &'a Models,
    i: usize,
}

impl<'a> ModelRef<'a> {
    /// Position in the table.
    pub fn index(&self) -> usize {
        self.i
    }

    /// Stable model id.
    pub fn id(&self) -> &'a str {
        self.table.id(self.i)
    }

    /// Option index per decision dimension.
    pub fn choices(&self) -> &'a [u32] {
        self.table.choices(self.i)
    }

    /// The option taken on decision `d`.
    pub fn choice(&self, d: usize) -> usize {
        self.table.choices[self.i * self.table.dims + d] as usize
    }

    /// The tracked effect under covariance choice `e`; `None` where there is no number.
    pub fn effect(&self, e: usize) -> Option<Effect> {
        self.table.effect(self.i, e)
    }

    /// The effects under every covariance choice, in order.
    pub fn effects(&self) -> impl Iterator<Item = Option<Effect>> + 'a {
        let (table, i) = (self.table, self.i);
        (0..table.errors).map(move |e| table.effect(i, e))
    }

    /// Whether the model has a number under some covariance choice.
    pub fn has_any_effect(&self) -> bool {
        self.table
            .effects
            .iter()
            .any(|c| c.flags[self.i] & PRESENT != 0)
    }

    /// Why the model failed; `None` when it was estimated.
    pub fn failure(&self) -> Option<&'a str> {
        self.table.failure(self.i)
    }

    /// The model as an owned record (for tests and small tables).
    pub fn to_entry(&self) -> ModelEntry {
        ModelEntry {
            model_id: self.id().to_string(),
            choices: self.choices().iter().map(|&c| c as usize).collect(),
            status: match self.failure() {
                None => ModelStatus::Ok,
                Some(message) => ModelStatus::Failed(message.to_string()),
            },
            effects: self.effects().collect(),
            n_obs: self.n_obs(),
            n_params: self.n_params(),
            r_squared: self.r_squared(),
            resid_sd: self.resid_sd(),
            het_p_value: self.het_p_value(),
            outcome_label: self.outcome_label().to_string(),
        }
    }

    /// Model's value in a statistic column, when its flag `bit` says it has one.
    fn stat<T: Copy>(&self, bit: u8, column: &[T]) -> Option<T> {
        joined(self.table.stat_flags[self.i], bit, column[self.i])
    }

    /// Rows used.
    pub fn n_obs(&self) -> Option<u64> {
        self.stat(N_OBS, &self.table.n_obs)
    }

    /// Coefficients estimated.
    pub fn n_params(&self) -> Option<u64> {
        self.stat(N_PARAMS, &self.table.n_params)
    }

    /// R² of the fit.
    pub fn r_squared(&self) -> Option<f64> {
        self.stat(R_SQUARED, &self.table.r_squared)
    }

    /// Residual standard deviation.
    pub fn resid_sd(&self) -> Option<f64> {
        self.stat(RESID_SD, &self.table.resid_sd)
    }

    /// p-value of the Breusch–Pagan test, when the engine computed it.
    pub fn het_p_value(&self) -> Option<f64> {
        self.stat(HET_P_VALUE, &self.table.het_p_value)
    }

    /// Label of the outcome form.
    pub fn outcome_label(&self) -> &'a str {
        &self.table.outcome_labels[self.table.outcome[self.i] as usize]
    }

    /// Index of the outcome form among the table's labels (equal labels, equal index).
    pub fn outcome_index(&self) -> u32 {
        self.table.outcome[self.i]
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn entry(id: &str, choices: Vec<usize>, effects: Vec<Option<Effect>>) -> ModelEntry {
        ModelEntry {
            model_id: id.into(),
            choices,
            status: ModelStatus::Ok,
            effects,
            n_obs: Some(10),
            n_params: Some(2),
            r_squared: Some(0.5),
            resid_sd: Some(1.5),
            het_p_value: None,
            outcome_label: "y".into(),
        }
    }

    #[test]
    fn entries_read_back_as_given() {
        let mut derived = Effect::coefficient(0.25, Some(0.1), 30.0);
        derived.turning_point = Some(Derived {
            value: 4.0,
            std_error: None,
        });
        derived.p_value = Some(0.02);
        let mut failed = entry("b", vec![1, 0], vec![None, None]);
        failed.status = ModelStatus::Failed("collinear".into());
        failed.outcome_label = "log(y)".into();
        let entries = vec![
            entry(
                "a",
                vec![0, 2],
                vec![Some(Effect::coefficient(1.0, None, 5.0)), None],
            ),
            failed,
            entry("c", vec![1, 1], vec![Some(derived), Some(derived)]),
        ];
        let table = Models::from_entries(entries.clone()).unwrap();
        assert_eq!(table.len(), 3);
        assert_eq!(table.failed(), 1);
        let back: Vec<ModelEntry> = table.iter().map(|m| m.to_entry()).collect();
        assert_eq!(back, entries);
        // Missing parts leave placeholders that do not spoil equality.
        assert_eq!(Models::from_entries(entries.clone()).unwrap(), table);
        assert_eq!(table.get(1).failure(), Some("collinear"));
        assert_eq!(table.get(2).outcome_index(), 0);
        assert_eq!(table.estimate(0, 1), None);
        assert_eq!(table.estimate(2, 1), Some(0.25));
    }

    #[test]
    fn a_model_of_another_shape_is_refused_whole() {
        let mut table = Models::new(2, 2);
        let one = entry("a", vec![0, 0], vec![None]);
        let three = entry("b", vec![0, 0], vec![None, None, None]);
        let short = entry("c", vec![0], vec![None, None]);
        for bad in [one, three, short] {
            let message = table.push_entry(&bad).unwrap_err().to_string();
            assert!(message.contains(&bad.model_id), "{message}");
            assert!(table.is_empty());
            assert!(table.effects.iter().all(|c| c.flags.is_empty()));
            assert!(table.id_text.is_empty() && table.stat_flags.is_empty());
        }
    }

    #[test]
    fn setting_an_effect_replaces_it_and_keeps_the_others() {
        let e = |v: f64| Some(Effect::coefficient(v, Some(1.0), 9.0));
        let mut table = Models::from_entries(vec![
            entry("a", vec![0], vec![e(1.0)]),
            entry("b", vec![0], vec![e(2.0)]),
        ])
        .unwrap();
        let mut with_change = Effect::coefficient(3.0, Some(1.0), 9.0);
        with_change.proportional_change = Some(Derived {
            value: 0.5,
            std_error: Some(0.1),
        });
        table.set_effect(1, 0, Some(with_change));
        table.set_effect(0, 0, None);
        assert_eq!(table.effect(0, 0), None);
        assert_eq!(table.effect(1, 0), Some(with_change));
        assert!(!table.get(0).has_any_effect());
    }
}
