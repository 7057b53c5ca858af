//! Cross-check engines, selectable in `tiltyard run --engine` and compared side by side with
//! the main engine in the tests and the benchmark (ALGORITHMS §11):
//!
//! - [`dense`]: dense Gaussian conditioning with the full forecast covariance;
//! - [`kalman`]: the Kalman filter and simulation smoother in companion form (pins only);
//! - [`rejection`]: naive acceptance–rejection for corridors.
//!
//! Each conditions one θ on the same rows as the main engine ([`crate::forecast::rows`]) and
//! draws from the same per-path random streams, so any difference is the method's.

pub mod dense;
pub mod kalman;
pub mod rejection;

use std::sync::Arc;

use rand::Rng;

use crate::forecast::{ForecastError, Plan, Theta, conditions::Conditions, rows::Rows};

/// One drawn path with the proposals it took.
pub type Tried = Result<(Vec<f64>, Vec<f64>, usize), ForecastError>;

/// Which engine draws the paths.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum EngineKind {
    /// Precision-free recursions and one QR per θ (the default).
    #[default]
    Main,
    Dense,
    Kalman,
    /// Naive rejection, giving up after this many proposals for one path.
    Rejection {
        cap: usize,
    },
}

impl EngineKind {
    pub fn name(self) -> &'static str {
        match self {
            EngineKind::Main => "main",
            EngineKind::Dense => "dense",
            EngineKind::Kalman => "kalman",
            EngineKind::Rejection { .. } => "rejection",
        }
    }
}

/// One θ conditioned by one of the engines.
#[derive(Debug, Clone)]
pub enum Conditioner {
    Main(Box<Plan>),
    Dense(Box<dense::DensePlan>),
    Kalman(Box<kalman::KalmanPlan>),
    Rejection(Box<rejection::RejectionPlan>),
}

impl Conditioner {
    /// Condition `theta` on `rows` (made from `cond`) with the chosen cross-check engine (the
    /// main engine's plan is built by the caller, which gives it more).
    pub fn cross_check(
        kind: EngineKind,
        theta: &Theta,
        rows: Rows,
        cond: &Conditions,
        draw: Option<usize>,
    ) -> Result<Conditioner, ForecastError> {
        Ok(match kind {
            EngineKind::Main => Conditioner::Main(Box::new(Plan::with_rows(
                theta,
                Arc::new(rows),
                cond,
                draw,
                None,
            )?)),
            EngineKind::Dense => {
                Conditioner::Dense(Box::new(dense::DensePlan::new(theta, rows, cond, draw)?))
            }
            EngineKind::Kalman => {
                Conditioner::Kalman(Box::new(kalman::KalmanPlan::new(theta, rows, cond, draw)?))
            }
            EngineKind::Rejection { cap } => Conditioner::Rejection(Box::new(
                rejection::RejectionPlan::new(theta, rows, cond, cap, draw)?,
            )),
        })
    }

    /// The conditions' rows, which measure how well a path meets them.
    pub fn rows(&self) -> &Rows {
        match self {
            Conditioner::Main(p) => p.rows(),
            Conditioner::Dense(p) => p.rows(),
            Conditioner::Kalman(p) => p.rows(),
            Conditioner::Rejection(p) => p.rows(),
        }
    }

    /// One path per random stream: the conditional path, the unconditional path it was made
    /// from, and the proposals it took (1 except for naive rejection).
    pub fn sample_many<R: Rng + ?Sized>(&self, theta: &Theta, rngs: &mut [&mut R]) -> Vec<Tried> {
        let one = |r: crate::forecast::plan::Drawn| r.map(|(y, s)| (y, s, 1));
        match self {
            Conditioner::Main(p) => p.sample_many(theta, rngs).into_iter().map(one).collect(),
            Conditioner::Dense(p) => p.sample_many(rngs).into_iter().map(one).collect(),
            Conditioner::Kalman(p) => p.sample_many(theta, rngs).into_iter().map(one).collect(),
            Conditioner::Rejection(p) => rngs.iter_mut().map(|r| p.sample_one(theta, *r)).collect(),
        }
    }
}
