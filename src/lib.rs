//! Tiltyard's engine: datasets, the Bayesian VAR, and exact conditional forecasts
//! under pins and drivers. Nothing here depends on a window; the headless commands
//! and (later) the window both drive this library.

pub mod banded;
pub mod dataset;
pub mod forecast;
pub mod model;
pub mod report;
pub mod run;
pub mod scenario;
pub mod truncnorm;
