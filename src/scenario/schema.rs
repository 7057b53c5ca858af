//! The scenario file: a RON document, read with `implicit_some` so optional fields are
//! written plainly. Unknown fields are errors naming the field.
//!
//! ```ron
//! (
//!     name: "Baseline",
//!     narrative: "Growth slows, unemployment edges up.",
//!     dataset: "economy.csv",              // relative to the scenario file
//!     series: [
//!         (name: "output", transform: log100, centre: random_walk, display: year_on_year),
//!         (name: "unemployment"),
//!     ],
//!     model: minnesota((lags: 4, tightness: auto)),
//!     ordering: ["output", "unemployment"], // recursive identification (default: series order)
//!     drivers: ["output",                   // shocks allowed to move (default: all), at every
//!               (shock: "unemployment", from: "2026Q1", to: "2026Q2")], // or some periods
//!     horizon: 12, draws: 1000, seed: 7,
//!     pins: [
//!         (series: "unemployment", period: "2027Q2", units: level, value: 6.5),
//!         (shock: "output", period: "2026Q1", value: -1.0),
//!     ],
//!     corridors: [
//!         (series: "unemployment", from: "2026Q1", to: "2026Q4", lower: 5.0, upper: [6, 6.5, 7, 7.5]),
//!         (shock: "output", from: "2026Q2", to: "2026Q3", lower: -2.0),
//!     ],
//! )
//! ```

use serde::{Deserialize, Serialize};

use crate::dataset::Transform;
use crate::model::{FlatSettings, MinnesotaSettings};

/// A scenario as written in its file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ScenarioFile {
    pub name: String,
    #[serde(default)]
    pub narrative: String,
    /// Path of the dataset CSV, relative to the scenario file.
    pub dataset: String,
    /// Series of the model, in model order.
    pub series: Vec<SeriesSpec>,
    pub model: ModelSpec,
    /// Recursive identification order of the shocks (series names).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ordering: Option<Vec<String>>,
    /// Shocks allowed to move so that the pins hold (at every period, or at some); all when
    /// absent.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub drivers: Option<Vec<DriverSpec>>,
    /// Forecast horizon in periods after the last observation.
    pub horizon: usize,
    /// Posterior draws of the parameters (paths, for fixed coefficients).
    #[serde(default = "default_draws")]
    pub draws: usize,
    /// Conditional paths per posterior draw.
    #[serde(default = "one")]
    pub paths_per_draw: usize,
    #[serde(default)]
    pub seed: u64,
    #[serde(default)]
    pub pins: Vec<PinSpec>,
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub corridors: Vec<CorridorSpec>,
    /// Targets on the distribution, met by tilting the paths' weights.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub targets: Vec<TargetSpec>,
    /// Thresholds of the scenario checks.
    #[serde(default, skip_serializing_if = "CheckSettings::is_default")]
    pub checks: CheckSettings,
    /// Reweight posterior draws by the scenario's probability under each (importance
    /// weights); off by default.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub reweight: bool,
    /// Which posterior draws to keep by their largest companion root.
    #[serde(default, skip_serializing_if = "LargestRoot::is_keep")]
    pub largest_root: LargestRoot,
}

/// The stationarity filter on posterior draws.
#[derive(Debug, Clone, Copy, PartialEq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum LargestRoot {
    /// Keep every draw (level series have unit roots on purpose).
    #[default]
    Keep,
    /// Keep only draws whose largest root has modulus below this bound (common practice: 1).
    Below(f64),
}

impl LargestRoot {
    pub fn is_keep(&self) -> bool {
        *self == LargestRoot::Keep
    }

    pub fn bound(self) -> Option<f64> {
        match self {
            LargestRoot::Keep => None,
            LargestRoot::Below(b) => Some(b),
        }
    }
}

fn default_draws() -> usize {
    1000
}

fn one() -> usize {
    1
}

fn yes() -> bool {
    true
}

fn as_is() -> Transform {
    Transform::AsIs
}

/// One series of the model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SeriesSpec {
    /// Column name in the dataset.
    pub name: String,
    #[serde(default = "as_is")]
    pub transform: Transform,
    #[serde(default)]
    pub centre: Centre,
    /// Units in which fans and tables show this series.
    #[serde(default)]
    pub display: Units,
    /// The series as people name it ("Unemployment rate"); the column name when absent.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub label: Option<String>,
    /// The unit of its level as people say it ("%", "index", "% a year"); shown on the
    /// charts and tables in levels.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub unit: Option<String>,
}

impl SeriesSpec {
    /// The name shown to people: the label, else the column name.
    pub fn shown(&self) -> &str {
        self.label.as_deref().unwrap_or(&self.name)
    }

    /// What values in `units` are measured in, in words: the level's unit for levels and
    /// averages (when the file gives one), else the units' own words.
    pub fn measure(&self, units: Units) -> String {
        match (units, &self.unit) {
            (Units::Level, Some(u)) => u.clone(),
            (Units::Average(k), Some(u)) => format!("{u}, average over {k} periods"),
            (Units::Difference, Some(u)) => format!("change on the previous period, {u}"),
            _ => units.words(),
        }
    }
}

/// Prior mean of a series' first own lag.
#[derive(Debug, Clone, Copy, PartialEq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Centre {
    /// Levels: first own lag 1.
    #[default]
    RandomWalk,
    /// Growth rates and other stationary series: first own lag 0.
    WhiteNoise,
    /// A value in [0, 1].
    OwnLag(f64),
}

impl Centre {
    pub fn delta(self) -> f64 {
        match self {
            Centre::RandomWalk => 1.0,
            Centre::WhiteNoise => 0.0,
            Centre::OwnLag(d) => d,
        }
    }
}

/// How the model's parameters are obtained.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ModelSpec {
    /// Estimate under the Minnesota-type prior.
    Minnesota(MinnesotaSettings),
    /// Estimate under the flat prior (OLS limit).
    Flat(FlatSettings),
    /// Coefficients given by the user: no estimation, no parameter uncertainty.
    Fixed(FixedSpec),
}

/// Fixed coefficients: `y_t = intercept + Σ_l lags[l−1] y_{t−l} + u_t`, `u_t ~ N(0, sigma)`,
/// with `lags[l−1][i][j]` the effect of series `j` at lag `l` on series `i`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FixedSpec {
    pub intercept: Vec<f64>,
    pub lags: Vec<Vec<Vec<f64>>>,
    pub sigma: Vec<Vec<f64>>,
}

/// People's units for a pin or a display.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Units {
    /// The level of the series.
    #[default]
    Level,
    /// Percent change on the previous period.
    PctChange,
    /// Period-on-period growth, annualised by compounding, percent.
    Annualised,
    /// Percent change on a year earlier.
    YearOnYear,
    /// Change on the previous period in the series' own units (as-is series).
    Difference,
    /// Average of the level over this many periods ending at the period
    /// (geometric for log series).
    Average(usize),
    /// Percent change since the last observation: the cumulative change over the forecast
    /// up to the period ("output 5% below its last level by 2028Q4").
    Cumulative,
}

impl Units {
    /// The units as people say them ("% on a year earlier"), for the window and the pack;
    /// [`Units::label`] is the scenario file's spelling.
    pub fn words(self) -> String {
        match self {
            Units::Level => "level".into(),
            Units::PctChange => "% change on the previous period".into(),
            Units::Annualised => "annualised % change".into(),
            Units::YearOnYear => "% on a year earlier".into(),
            Units::Difference => "change on the previous period".into(),
            Units::Average(k) => format!("average over {k} periods"),
            Units::Cumulative => "% change since the last observation".into(),
        }
    }

    pub fn label(self) -> String {
        match self {
            Units::Level => "level".into(),
            Units::PctChange => "pct_change".into(),
            Units::Annualised => "annualised".into(),
            Units::YearOnYear => "year_on_year".into(),
            Units::Difference => "difference".into(),
            Units::Average(k) => format!("average({k})"),
            Units::Cumulative => "cumulative".into(),
        }
    }
}

/// A shock allowed to move: by name, at every period; or over periods `from` to `to` (the
/// shock keeps its usual distribution at the others).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum DriverSpec {
    Always(String),
    Timed {
        shock: String,
        from: String,
        to: String,
    },
}

impl DriverSpec {
    /// The shock's name.
    pub fn shock(&self) -> &str {
        match self {
            DriverSpec::Always(name) | DriverSpec::Timed { shock: name, .. } => name,
        }
    }

    /// "output", or "output (2026Q1–2026Q2)".
    pub fn describe(&self) -> String {
        match self {
            DriverSpec::Always(name) => name.clone(),
            DriverSpec::Timed { shock, from, to } if from == to => format!("{shock} ({from} only)"),
            DriverSpec::Timed { shock, from, to } => format!("{shock} ({from}–{to})"),
        }
    }
}

/// A target on the distribution of one series at one period, in chosen units: its mean, its
/// standard deviation (the mean held where it is unless also targeted), or the probability
/// that it is at or below `below` (or at or above `above`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TargetSpec {
    pub series: String,
    pub period: String,
    #[serde(default)]
    pub units: Units,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub mean: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sd: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub probability: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub below: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub above: Option<f64>,
    /// A switched-off target stays in the file but does not tilt the paths.
    #[serde(default = "yes")]
    pub active: bool,
}

/// The drivers in words: "output, unemployment (2026Q1 only)".
pub fn describe_drivers(list: &[DriverSpec]) -> String {
    list.iter()
        .map(DriverSpec::describe)
        .collect::<Vec<_>>()
        .join(", ")
}

/// A pin: one series (or shock) at one future period equals a value, in chosen units.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PinSpec {
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub series: Option<String>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub shock: Option<String>,
    pub period: String,
    #[serde(default)]
    pub units: Units,
    pub value: f64,
    /// A switched-off pin stays in the file but does not condition the forecast.
    #[serde(default = "yes")]
    pub active: bool,
}

/// A bound of a corridor: one value for every period, or one per period (`None` leaves that
/// period open on this side).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum Bound {
    Same(f64),
    Each(Vec<Option<f64>>),
}

/// A corridor: one series (or shock) lies between bounds over a range of future periods.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CorridorSpec {
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub series: Option<String>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub shock: Option<String>,
    /// First and last period, inclusive.
    pub from: String,
    pub to: String,
    #[serde(default)]
    pub units: Units,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub lower: Option<Bound>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub upper: Option<Bound>,
    /// A switched-off corridor stays in the file but does not condition the forecast.
    #[serde(default = "yes")]
    pub active: bool,
}

/// Thresholds of the scenario checks (defaults are common practice; tune them with users).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct CheckSettings {
    /// Strain when the corridors' probability given the pins is below this.
    pub corridor_probability: f64,
    /// Strain when the pins' joint tail probability `P(χ²_m ≥ d²)` is below this.
    pub pin_tail: f64,
    /// A single pin is flagged when its z-score exceeds this in absolute value.
    pub pin_z: f64,
    /// Refuse to sample when the corridor sampler would accept fewer than this share of
    /// its proposals (the scenario is then reported as too improbable to sample).
    pub min_acceptance: f64,
    /// Most sub-scenarios a blame search may evaluate.
    pub blame_budget: usize,
    /// A run fails when more than this share of its posterior draws (or, for fixed
    /// coefficients, paths) cannot be conditioned; below it they are set aside and reported.
    pub max_failed_share: f64,
    /// With `largest_root: below(…)`: refuse when fewer than this share of the draws tried
    /// are kept.
    pub min_kept_share: f64,
    /// With targets: refuse when the tilted weights' effective number of paths falls below
    /// this share of the paths.
    pub min_tilted_share: f64,
}

impl Default for CheckSettings {
    fn default() -> Self {
        CheckSettings {
            corridor_probability: 1e-3,
            pin_tail: 0.01,
            pin_z: 3.0,
            min_acceptance: 1e-5,
            blame_budget: 64,
            max_failed_share: 0.05,
            min_kept_share: 0.05,
            min_tilted_share: 0.01,
        }
    }
}

impl CheckSettings {
    pub fn is_default(&self) -> bool {
        *self == CheckSettings::default()
    }
}
