//! The forecast engine: the stacked VAR system per parameter draw, pins and corridors on
//! observables and on structural shocks, drivers, and the parallel sampling loop.
//!
//! - [`theta`]: the θ-level cache (coefficients, impact matrix, mean path) and the
//!   recursions for the shock map `M` and its transpose;
//! - [`conditions`]: pins, corridors and drivers in engine form;
//! - [`rows`]: conditions as scaled rows for one θ, with dependencies resolved;
//! - [`polytope`]: whether dependent corridors leave room to hold together;
//! - [`corridor`]: the truncated law of the corridor quantities;
//! - [`factor`]: the thin QR of the conditions in shock space;
//! - [`plan`]: conditioning one θ (kriging, or the drivers construction) and drawing paths;
//! - [`reach`]: the rank condition for drivers;
//! - [`preview`]: paths at one θ that follow every edit at the least cost;
//! - [`engine`]: posterior draws and paths over all θ, in parallel and reproducibly;
//! - [`random`]: per-draw random streams.

pub mod conditions;
pub mod corridor;
pub mod engine;
pub mod factor;
pub mod plan;
pub mod polytope;
pub mod preview;
pub mod product;
pub mod random;
pub mod reach;
pub mod rows;
pub mod theta;

pub use conditions::{Bounded, Conditions, Corridor, Driver, Pin, Target};
pub use engine::{
    DrawSpec, Failure, ParamSource, PathSet, PlanBasis, RootSummary, Sampling, ThetaSet,
    build_thetas, normalise, path_weights, sample_paths,
};
pub use plan::Plan;
pub use rows::{PathRow, path_rows};
pub use theta::Theta;

/// Everything that can go wrong while forecasting. Every variant that is about conditions
/// names them by their labels.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ForecastError {
    #[error("{0} is singular or not positive definite")]
    Singular(String),
    /// A target on the distribution that cannot be met (scenario `targets`).
    #[error("target {field} ({label}): {why}")]
    Target {
        field: String,
        label: String,
        why: String,
    },
    #[error(
        "{} cannot be reached by the drivers ({drivers}){}: the moving shocks have no effect on {}. Add drivers or let them move over more periods, move the condition later, or loosen it",
        list(conditions), at_draw(*draw), if conditions.len() == 1 { "it" } else { "this combination" }
    )]
    Unreachable {
        conditions: Vec<String>,
        drivers: String,
        draw: Option<usize>,
    },
    #[error("pins contradict each other{}: {} cannot hold together", at_draw(*draw), list(pins))]
    Contradictory {
        pins: Vec<String>,
        draw: Option<usize>,
    },
    #[error(
        "corridor '{corridor}' cannot hold: {} {} that quantity outside its bounds",
        list(pins), if pins.len() == 1 { "fixes" } else { "fix" }
    )]
    CorridorFixedByPins { corridor: String, pins: Vec<String> },
    #[error(
        "corridors cannot hold together: {} leave no room between their bounds",
        list(rows)
    )]
    CorridorsContradict { rows: Vec<String> },
    #[error("corridor '{corridor}' is empty: its lower bound is not below its upper bound")]
    EmptyCorridor { corridor: String },
    #[error(
        "{} {} (nearly) a combination of the others{}; remove the condition that repeats the rest",
        list(conditions), if conditions.len() == 1 { "is" } else { "are" }, at_draw(*draw)
    )]
    NearlyDependent {
        conditions: Vec<String>,
        draw: Option<usize>,
    },
    #[error(
        "the corridors {} are too improbable to sample{}: the exact sampler would accept about {acceptance:.1e} of its proposals. Widen them or move them towards the forecast",
        list(corridors), at_draw(*draw)
    )]
    TooImprobable {
        corridors: Vec<String>,
        acceptance: f64,
        draw: Option<usize>,
    },
    #[error(
        "the paths overflow{}: their values leave the range of numbers, in the model's units or in a series' display units (explosive parameters over this horizon, or conditions far outside the data's range)",
        at_draw(*draw)
    )]
    NotFinite { draw: Option<usize> },
    #[error("{}", not_stationary(*kept, *tried, *limit, *needed, *fixed_root))]
    NotStationary {
        kept: usize,
        tried: usize,
        limit: f64,
        /// The share of draws tried that must be kept.
        needed: f64,
        /// For fixed coefficients: their largest root.
        fixed_root: Option<f64>,
    },
    #[error(
        "{failed} of {attempted} {} ({:.1}%) could not be used, more than the {:.1}% the scenario allows (checks.max_failed_share); the first, {}: {}. {}",
        if *fixed { "paths" } else { "posterior draws" },
        100.0 * *failed as f64 / (*attempted).max(1) as f64,
        100.0 * allowed,
        if *fixed { format!("path {}", first.index) } else { format!("draw {}", first.index) },
        first.error,
        remedy(&first.error)
    )]
    TooManyFailed {
        failed: usize,
        attempted: usize,
        allowed: f64,
        fixed: bool,
        first: Box<engine::Failure>,
    },
    #[error("the {engine} engine {what}; use the main engine (--engine main)")]
    Unsupported { engine: String, what: String },
    #[error(
        "naive rejection gave up after {proposals} proposals without a path inside the corridors{}: their probability is too small for this engine; the main engine samples them exactly",
        at_draw(*draw)
    )]
    GaveUp {
        proposals: usize,
        draw: Option<usize>,
    },
    #[error(
        "the corridor sampler's bound was exceeded{} (by {by:.2e} in log terms): its saddle point is not the maximum, so the draw would be biased; it is set aside",
        at_draw(*draw)
    )]
    SamplerBound { by: f64, draw: Option<usize> },
    #[error("cancelled")]
    Cancelled,
}

fn not_stationary(
    kept: usize,
    tried: usize,
    limit: f64,
    needed: f64,
    fixed_root: Option<f64>,
) -> String {
    match fixed_root {
        Some(root) => format!(
            "the fixed coefficients' largest root has modulus {root:.4}, not below the bound {limit} set by largest_root; keep them (largest_root: keep) or supply stationary coefficients"
        ),
        None => format!(
            "only {kept} of {tried} posterior draws ({:.1}%) have their largest root below {limit}, fewer than the {:.1}% the scenario needs (checks.min_kept_share); raise the bound, keep every draw (largest_root: keep), or revisit the model (fewer lags, a tighter prior)",
            100.0 * kept as f64 / tried.max(1) as f64,
            100.0 * needed
        ),
    }
}

/// What to change when draws keep failing for this reason.
fn remedy(e: &ForecastError) -> &'static str {
    match e {
        ForecastError::NotFinite { .. } => {
            "Check the conditions' values and units, shorten the horizon, or keep only stationary draws (largest_root: below(1.0))"
        }
        ForecastError::TooImprobable { .. } => {
            "Widen the corridors or move them towards the forecast"
        }
        ForecastError::Unreachable { .. } => {
            "Add drivers or let them move over more periods, or loosen the conditions"
        }
        ForecastError::NearlyDependent { .. } => {
            "Remove the condition that (nearly) repeats the others"
        }
        _ => "Loosen the conditions, or raise checks.max_failed_share to accept the loss",
    }
}

impl ForecastError {
    /// Attach the posterior draw index to an error that lacks it.
    pub fn in_draw(self, i: usize) -> ForecastError {
        match self {
            ForecastError::Singular(what) if !what.contains("posterior draw") => {
                ForecastError::Singular(format!("{what} (posterior draw {i})"))
            }
            ForecastError::NearlyDependent {
                conditions,
                draw: None,
            } => ForecastError::NearlyDependent {
                conditions,
                draw: Some(i),
            },
            ForecastError::TooImprobable {
                corridors,
                acceptance,
                draw: None,
            } => ForecastError::TooImprobable {
                corridors,
                acceptance,
                draw: Some(i),
            },
            ForecastError::NotFinite { draw: None } => ForecastError::NotFinite { draw: Some(i) },
            ForecastError::SamplerBound { by, draw: None } => {
                ForecastError::SamplerBound { by, draw: Some(i) }
            }
            ForecastError::GaveUp {
                proposals,
                draw: None,
            } => ForecastError::GaveUp {
                proposals,
                draw: Some(i),
            },
            other => other,
        }
    }
}

fn list(names: &[String]) -> String {
    names
        .iter()
        .map(|p| format!("'{p}'"))
        .collect::<Vec<_>>()
        .join(", ")
}

fn at_draw(draw: Option<usize>) -> String {
    draw.map(|d| format!(" in posterior draw {d}"))
        .unwrap_or_default()
}
