//! The forecast engine: the stacked VAR system per parameter draw, pins and corridors on
//! observables and on structural shocks, drivers, and the parallel sampling loop.
//!
//! - [`theta`]: the θ-level cache (mean path, shock map, banded precision and its factor);
//! - [`conditions`]: pins, corridors and drivers in engine form;
//! - [`rows`]: conditions as scaled rows for one θ, with dependencies resolved;
//! - [`polytope`]: whether dependent corridors leave room to hold together;
//! - [`corridor`]: the truncated law of the corridor quantities;
//! - [`plan`]: conditioning one θ (kriging, or the drivers construction) and drawing paths;
//! - [`reach`]: the rank condition for drivers;
//! - [`engine`]: posterior draws and paths over all θ, in parallel and reproducibly;
//! - [`random`]: per-draw random streams.

pub mod conditions;
pub mod corridor;
pub mod engine;
pub mod plan;
pub mod polytope;
pub mod random;
pub mod reach;
pub mod rows;
pub mod theta;

pub use conditions::{Bounded, Conditions, Corridor, Pin, Target};
pub use engine::{
    ParamSource, PathSet, Sampling, ThetaSet, build_thetas, normalise, path_weights, sample_paths,
};
pub use plan::Plan;
pub use theta::Theta;

/// Everything that can go wrong while forecasting. Every variant that is about conditions
/// names them by their labels.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ForecastError {
    #[error("{0} is singular or not positive definite")]
    Singular(String),
    #[error(
        "{} cannot be reached by the drivers ({drivers}){}: the moving shocks have no effect on {}. Add drivers, move the condition later, or loosen it",
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
    #[error("cancelled")]
    Cancelled,
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
