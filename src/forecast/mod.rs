//! The forecast engine: the stacked VAR system per parameter draw, pins on observables and
//! on structural shocks, drivers, and the parallel sampling loop.
//!
//! - [`theta`]: the θ-level cache (mean path, shock map, banded precision and its factor);
//! - [`conditions`]: pins and drivers in engine form;
//! - [`plan`]: conditioning one θ (kriging, or the drivers construction) and drawing paths;
//! - [`reach`]: the rank condition and the diagnosis of pins that cannot be met;
//! - [`engine`]: posterior draws and paths over all θ, in parallel and reproducibly;
//! - [`random`]: per-draw random streams.

pub mod conditions;
pub mod engine;
pub mod plan;
pub mod random;
pub mod reach;
pub mod theta;

pub use conditions::{Conditions, Pin, PinTarget};
pub use engine::{ParamSource, PathSet, ThetaSet, build_thetas, sample_paths};
pub use plan::Plan;
pub use theta::Theta;

/// Everything that can go wrong while forecasting.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ForecastError {
    #[error("{0} is singular or not positive definite")]
    Singular(String),
    #[error(
        "{} cannot be reached by the drivers ({drivers}){}: the moving shocks have no effect on {}. Add drivers, move the pin later, or loosen it",
        list(pins), at_draw(*draw), if pins.len() == 1 { "it" } else { "this combination" }
    )]
    Unreachable {
        pins: Vec<String>,
        drivers: String,
        draw: Option<usize>,
    },
    #[error("pins contradict each other{}: {} cannot hold together", at_draw(*draw), list(pins))]
    Contradictory {
        pins: Vec<String>,
        draw: Option<usize>,
    },
    #[error("pins are redundant: {} say the same thing; remove one", list(pins))]
    Redundant { pins: Vec<String> },
    #[error("cancelled")]
    Cancelled,
}

impl ForecastError {
    /// Attach the posterior draw index to a θ-level error.
    pub fn in_draw(self, i: usize) -> ForecastError {
        match self {
            ForecastError::Singular(what) => {
                ForecastError::Singular(format!("{what} (posterior draw {i})"))
            }
            other => other,
        }
    }
}

fn list(pins: &[String]) -> String {
    match pins {
        [one] => format!("pin '{one}'"),
        many => format!(
            "pins {}",
            many.iter()
                .map(|p| format!("'{p}'"))
                .collect::<Vec<_>>()
                .join(", ")
        ),
    }
}

fn at_draw(draw: Option<usize>) -> String {
    draw.map(|d| format!(" in posterior draw {d}"))
        .unwrap_or_default()
}
