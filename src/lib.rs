//! Tiltyard's engine: datasets, the Bayesian VAR, exact conditional forecasts under pins,
//! corridors and drivers, and the scenario checks; and, with the `gui` feature, the scenario
//! window ([`app`]), which only uses the engine (nothing in the engine depends on it).

#[cfg(feature = "gui")]
pub mod app;
pub mod attribution;
pub mod checks;
pub mod compare;
pub mod crosscheck;
pub mod dataset;
pub mod entropic;
pub mod forecast;
pub mod least_norm;
pub mod model;
pub mod pipeline;
pub mod report;
pub mod reverse;
pub mod run;
pub mod scenario;
pub mod targets;
pub mod truncnorm;
