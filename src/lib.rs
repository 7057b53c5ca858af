//! Tiltyard's engine: datasets, the Bayesian VAR, exact conditional forecasts under pins,
//! corridors and drivers, and the scenario checks. Nothing here depends on a window; the headless commands
//! and (later) the window both drive this library.

pub mod banded;
pub mod checks;
pub mod dataset;
pub mod forecast;
pub mod model;
pub mod report;
pub mod run;
pub mod scenario;
pub mod truncnorm;
