//! The data-generating process. Draw order is part of the output: changing it changes the
//! bytes for every seed, so keep it stable (the committed CSV test will notice).

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Gamma, Poisson, StandardNormal};

use crate::config::{ConfigError, OrchardConfig};
use crate::names::{village_code, DISTRICT_NAMES, FIRST_SEASON, VARIETY_NAMES};
use crate::table::{precision, round_to, Coded, OrchardTable};
use crate::truth as t;

/// Why generation failed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum DemoError {
    /// The configuration was rejected; the message says what to change.
    #[error("demo data settings: {0}")]
    Config(#[from] ConfigError),
    /// A sampling distribution refused its parameters (a bug in this crate; please report it).
    #[error("demo generator bug: {0}; please report it with the settings used")]
    Distribution(String),
}

/// Generates the demo table for `cfg`: `cfg.plots × cfg.seasons` rows, ordered by plot then season.
pub fn generate(cfg: &OrchardConfig) -> Result<OrchardTable, DemoError> {
    cfg.validate()?;
    let mut rng = ChaCha8Rng::seed_from_u64(cfg.seed);
    let villages = Villages::new(cfg.villages, cfg.districts);
    let slope_dist = Gamma::new(t::SLOPE_GAMMA_SHAPE, t::SLOPE_GAMMA_SCALE)
        .map_err(|e| DemoError::Distribution(format!("slope gamma: {e}")))?;

    // Village × season shocks first, so every plot of a village-season shares one draw.
    let shocks: Vec<f64> = (0..cfg.villages * cfg.seasons)
        .map(|_| t::VILLAGE_SEASON_SD * normal(&mut rng))
        .collect();

    let rows = cfg.rows();
    let mut out = empty_table(rows, cfg, &villages);
    for plot in 0..cfg.plots {
        let village = plot % cfg.villages;
        let p = PlotTraits::draw(&mut rng, &slope_dist);
        for season in 0..cfg.seasons {
            let tree_age = p.tree_age_first + season as f64;
            let experience = p.experience_first + season as i64;
            let visits = draw_visits(&mut rng, p.area_ha, p.irrigated)?;
            let ph_missing = rng.random_bool(t::SOIL_PH_MISSING_SHARE);
            let noise_sd = t::NOISE_SD_BASE + t::NOISE_SD_PER_HA * p.area_ha;
            let noise = noise_sd * normal(&mut rng);
            let district = villages.district_of[village];
            let log_yield = t::INTERCEPT
                + t::BETA_VISITS * visits as f64
                + t::AGE_LINEAR * tree_age
                + t::AGE_SQUARED * tree_age * tree_age
                + t::IRRIGATED * p.irrigated as f64
                + t::AREA_PER_HA * p.area_ha
                + t::ORGANIC * p.organic as f64
                + t::VARIETY[p.variety]
                + t::SOIL_PH_PER_UNIT * (p.soil_ph - t::SOIL_PH_CENTRE)
                + t::SLOPE_PER_PCT * p.slope_pct
                + t::EXPERIENCE_PER_YEAR * experience as f64
                + t::DISTRICT[district]
                + shocks[village * cfg.seasons + season]
                + noise;
            out.plot_id.push(plot as i64 + 1);
            out.season.codes.push(season as u32);
            out.district.codes.push(district as u32);
            out.village.codes.push(village as u32);
            out.yield_t_ha
                .push(round_to(log_yield.exp(), precision::YIELD));
            out.visits.push(visits);
            out.area_ha.push(p.area_ha);
            out.tree_age.push(round_to(tree_age, precision::TREE_AGE));
            out.soil_ph.push((!ph_missing).then_some(p.soil_ph));
            out.slope_pct.push(p.slope_pct);
            out.experience_yrs.push(experience);
            out.irrigated.push(p.irrigated);
            out.organic.push(p.organic);
            out.variety.codes.push(p.variety as u32);
        }
    }
    Ok(out)
}

/// One standard-normal draw.
fn normal(rng: &mut ChaCha8Rng) -> f64 {
    rng.sample(StandardNormal)
}

/// Zero-inflated Poisson visit count whose rate rises with area and irrigation.
fn draw_visits(rng: &mut ChaCha8Rng, area_ha: f64, irrigated: i64) -> Result<i64, DemoError> {
    // Both draws are always taken so the stream position does not depend on the outcome.
    let never_asks = rng.random_bool(t::NEVER_ASKS_SHARE);
    let rate = (t::VISITS_LOG_BASE
        + t::VISITS_LOG_AREA * area_ha.ln()
        + t::VISITS_IRRIGATED * irrigated as f64)
        .exp();
    let poisson = Poisson::new(rate)
        .map_err(|e| DemoError::Distribution(format!("visits Poisson rate {rate}: {e}")))?;
    let count = poisson.sample(rng) as i64;
    Ok(if never_asks { 0 } else { count })
}

/// Plot attributes that do not change between seasons (age and experience grow by one a season).
/// Values are rounded to their CSV precision before they enter the yield model.
struct PlotTraits {
    area_ha: f64,
    irrigated: i64,
    organic: i64,
    variety: usize,
    tree_age_first: f64,
    soil_ph: f64,
    slope_pct: f64,
    experience_first: i64,
}

impl PlotTraits {
    fn draw(rng: &mut ChaCha8Rng, slope_dist: &Gamma<f64>) -> Self {
        let raw_area = t::AREA_MEDIAN_HA * (t::AREA_LOG_SD * normal(rng)).exp();
        let area_ha = round_to(
            raw_area.clamp(t::AREA_MIN_HA, t::AREA_MAX_HA),
            precision::AREA,
        );
        let irrigation_logit = t::IRRIGATION_LOGIT_BASE + t::IRRIGATION_LOGIT_AREA * area_ha.ln();
        let irrigated = rng.random_bool(logistic(irrigation_logit)) as i64;
        let organic = rng.random_bool(t::ORGANIC_SHARE) as i64;
        let variety = pick_share(rng.random::<f64>(), &t::VARIETY_SHARES);
        let (age_lo, age_hi) = t::TREE_AGE_FIRST_SEASON;
        let tree_age_first = round_to(rng.random_range(age_lo..age_hi), precision::TREE_AGE);
        let (ph_lo, ph_hi) = t::SOIL_PH_RANGE;
        let soil_ph = round_to(
            (t::SOIL_PH_MEAN + t::SOIL_PH_SD * normal(rng)).clamp(ph_lo, ph_hi),
            precision::SOIL_PH,
        );
        let slope_pct = round_to(
            slope_dist.sample(rng).min(t::SLOPE_MAX_PCT),
            precision::SLOPE,
        );
        let (exp_lo, exp_hi) = t::EXPERIENCE_FIRST_SEASON;
        let experience_first = rng.random_range(exp_lo..=exp_hi);
        PlotTraits {
            area_ha,
            irrigated,
            organic,
            variety,
            tree_age_first,
            soil_ph,
            slope_pct,
            experience_first,
        }
    }
}

fn logistic(x: f64) -> f64 {
    1.0 / (1.0 + (-x).exp())
}

/// Index of the share bucket that `u` (uniform on [0, 1)) falls into; the last bucket absorbs rounding.
fn pick_share(u: f64, shares: &[f64]) -> usize {
    let mut cumulative = 0.0;
    for (i, share) in shares.iter().enumerate() {
        cumulative += share;
        if u < cumulative {
            return i;
        }
    }
    shares.len() - 1
}

/// Village → district map and village codes: districts take contiguous, near-equal runs of villages.
struct Villages {
    district_of: Vec<usize>,
    codes: Vec<String>,
}

impl Villages {
    fn new(villages: usize, districts: usize) -> Self {
        let district_of: Vec<usize> = (0..villages).map(|v| v * districts / villages).collect();
        let mut number_in_district = vec![0usize; districts];
        let codes = district_of
            .iter()
            .map(|&d| {
                number_in_district[d] += 1;
                village_code(DISTRICT_NAMES[d], number_in_district[d])
            })
            .collect();
        Villages { district_of, codes }
    }
}

/// Empty table with level lists filled in and room for `rows` rows.
fn empty_table(rows: usize, cfg: &OrchardConfig, villages: &Villages) -> OrchardTable {
    let coded = |levels: Vec<String>| Coded {
        levels,
        codes: Vec::with_capacity(rows),
    };
    OrchardTable {
        plot_id: Vec::with_capacity(rows),
        season: coded(
            (0..cfg.seasons)
                .map(|s| (FIRST_SEASON as usize + s).to_string())
                .collect(),
        ),
        district: coded(
            DISTRICT_NAMES[..cfg.districts]
                .iter()
                .map(|s| s.to_string())
                .collect(),
        ),
        village: coded(villages.codes.clone()),
        yield_t_ha: Vec::with_capacity(rows),
        visits: Vec::with_capacity(rows),
        area_ha: Vec::with_capacity(rows),
        tree_age: Vec::with_capacity(rows),
        soil_ph: Vec::with_capacity(rows),
        slope_pct: Vec::with_capacity(rows),
        experience_yrs: Vec::with_capacity(rows),
        irrigated: Vec::with_capacity(rows),
        organic: Vec::with_capacity(rows),
        variety: coded(VARIETY_NAMES.iter().map(|s| s.to_string()).collect()),
    }
}
