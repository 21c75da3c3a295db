//! The true parameters of the invented data-generating process. `demo-data/README.md`
//! repeats every value; change both together.
//!
//! Model for plot `i` in village `v`, district `d`, season `s` (log = natural log):
//!
//! ```text
//! log(yield_t_ha) = INTERCEPT + BETA_VISITS·visits
//!                 + AGE_LINEAR·tree_age + AGE_SQUARED·tree_age²
//!                 + IRRIGATED·irrigated + AREA_PER_HA·area_ha + ORGANIC·organic
//!                 + VARIETY[variety] + SOIL_PH_PER_UNIT·(soil_ph − SOIL_PH_CENTRE)
//!                 + SLOPE_PER_PCT·slope_pct + EXPERIENCE_PER_YEAR·experience_yrs
//!                 + DISTRICT[d] + u[v,s] + e[i,s]
//! u[v,s] ~ Normal(0, VILLAGE_SEASON_SD)            shared by every plot of village v in season s
//! e[i,s] ~ Normal(0, NOISE_SD_BASE + NOISE_SD_PER_HA·area_ha)
//! visits  = 0 with probability NEVER_ASKS_SHARE, else Poisson(λ),
//! log λ   = VISITS_LOG_BASE + VISITS_LOG_AREA·ln(area_ha) + VISITS_IRRIGATED·irrigated
//! ```
//!
//! Visits depend only on area and irrigation (plus chance), and both also raise yield, so a
//! regression that leaves out `area_ha` and `irrigated` overstates `BETA_VISITS`; one that
//! includes them linearly is unbiased for it. The covariates enter the model at the rounded
//! values written to the CSV, so the model holds exactly on the published columns (only the
//! yield itself is rounded after the fact, to 0.01 t/ha).

/// Intercept of log yield.
pub const INTERCEPT: f64 = 2.45;
/// True effect of one adviser visit on log yield (≈ +3% yield per visit). The focus.
pub const BETA_VISITS: f64 = 0.03;
/// Tree-age linear term; with [`AGE_SQUARED`] the peak is at `-AGE_LINEAR / (2·AGE_SQUARED)` = 20 years.
pub const AGE_LINEAR: f64 = 0.032;
/// Tree-age squared term.
pub const AGE_SQUARED: f64 = -0.0008;
/// Effect of irrigation (0/1) on log yield.
pub const IRRIGATED: f64 = 0.25;
/// Effect of one hectare of plot area on log yield (larger plots are better equipped).
pub const AREA_PER_HA: f64 = 0.05;
/// Effect of organic certification (0/1) on log yield.
pub const ORGANIC: f64 = -0.10;
/// Variety effects on log yield, in the order of [`crate::VARIETY_NAMES`]; the first is the reference.
pub const VARIETY: [f64; 5] = [0.0, 0.08, -0.05, 0.12, -0.10];
/// Population shares of the varieties, same order.
pub const VARIETY_SHARES: [f64; 5] = [0.30, 0.25, 0.20, 0.15, 0.10];
/// Effect of one pH unit on log yield, measured from [`SOIL_PH_CENTRE`].
pub const SOIL_PH_PER_UNIT: f64 = 0.06;
/// Centre of the soil-pH term.
pub const SOIL_PH_CENTRE: f64 = 6.5;
/// Effect of one percentage point of slope on log yield.
pub const SLOPE_PER_PCT: f64 = -0.008;
/// Effect of one year of grower experience on log yield (small on purpose).
pub const EXPERIENCE_PER_YEAR: f64 = 0.002;
/// District effects on log yield, in the order of [`crate::DISTRICT_NAMES`].
pub const DISTRICT: [f64; 8] = [0.0, 0.10, -0.08, 0.05, -0.12, 0.15, -0.03, 0.07];
/// Standard deviation of the village × season shock.
pub const VILLAGE_SEASON_SD: f64 = 0.15;
/// Plot-season noise sd at zero area; the sd grows with area (heteroskedastic on purpose).
pub const NOISE_SD_BASE: f64 = 0.10;
/// Growth of the plot-season noise sd per hectare.
pub const NOISE_SD_PER_HA: f64 = 0.05;

/// Share of plot-seasons whose grower never asks for a visit (structural zeros).
pub const NEVER_ASKS_SHARE: f64 = 0.35;
/// Log of the visit rate for a 1 ha, unirrigated plot among growers who do ask.
pub const VISITS_LOG_BASE: f64 = 0.20;
/// Elasticity of the visit rate with respect to plot area.
pub const VISITS_LOG_AREA: f64 = 0.45;
/// Shift of the log visit rate for irrigated plots.
pub const VISITS_IRRIGATED: f64 = 0.60;

/// Plot area: log-normal with this median (ha) ...
pub const AREA_MEDIAN_HA: f64 = 1.2;
/// ... and this sd of log area, then clipped to [`AREA_MIN_HA`, `AREA_MAX_HA`].
pub const AREA_LOG_SD: f64 = 0.6;
/// Smallest plot area after clipping.
pub const AREA_MIN_HA: f64 = 0.10;
/// Largest plot area after clipping.
pub const AREA_MAX_HA: f64 = 25.0;
/// Irrigation: logit of P(irrigated) = IRRIGATION_LOGIT_BASE + IRRIGATION_LOGIT_AREA·ln(area_ha).
pub const IRRIGATION_LOGIT_BASE: f64 = -0.30;
/// Slope of the irrigation logit in log area (larger plots are irrigated more often).
pub const IRRIGATION_LOGIT_AREA: f64 = 0.70;
/// Share of plots that are certified organic (independent of everything else).
pub const ORGANIC_SHARE: f64 = 0.12;
/// Tree age in the first season: uniform on this range (years); one year older each season.
pub const TREE_AGE_FIRST_SEASON: (f64, f64) = (3.0, 40.0);
/// Soil pH: normal with this mean ...
pub const SOIL_PH_MEAN: f64 = 6.4;
/// ... and this sd, clipped to [`SOIL_PH_RANGE`].
pub const SOIL_PH_SD: f64 = 0.5;
/// Clip range for soil pH.
pub const SOIL_PH_RANGE: (f64, f64) = (4.5, 8.5);
/// Share of rows whose soil pH is blanked, completely at random (the true value still drives yield).
pub const SOIL_PH_MISSING_SHARE: f64 = 0.02;
/// Slope: gamma with this shape ...
pub const SLOPE_GAMMA_SHAPE: f64 = 1.5;
/// ... and this scale (mean 6%), clipped at [`SLOPE_MAX_PCT`].
pub const SLOPE_GAMMA_SCALE: f64 = 4.0;
/// Largest slope after clipping.
pub const SLOPE_MAX_PCT: f64 = 45.0;
/// Grower experience in the first season: uniform integer on this inclusive range; +1 per season.
pub const EXPERIENCE_FIRST_SEASON: (i64, i64) = (0, 35);
