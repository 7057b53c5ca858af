//! The model: a VAR(p) with intercept, estimated under a Minnesota-type natural-conjugate
//! prior (or the flat-prior OLS limit), or given as fixed coefficients.
//!
//! - [`data`]: the regression form `Y = X B + U`;
//! - [`prior`]: prior moments, residual scales and dummy observations;
//! - [`posterior`]: the closed-form posterior and exact draws;
//! - [`marglik`]: the marginal likelihood and the choice of the overall tightness;
//! - [`params`]: one parameter set θ = (B, Σ);
//! - [`roots`]: the companion matrix's eigenvalues (the largest root).

pub mod data;
pub mod marglik;
pub mod params;
pub mod posterior;
pub mod prior;
pub mod roots;

pub use data::Regression;
pub use marglik::{TightnessChoice, choose_tightness, log_ml, posterior_and_log_ml};
pub use params::Params;
pub use posterior::Posterior;
pub use prior::{MinnesotaPrior, Tightness, residual_scales};

use serde::{Deserialize, Serialize};

/// Everything that can go wrong in estimation or with fixed coefficients.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ModelError {
    #[error("{what} has the wrong shape: expected {expected}")]
    Shape { what: String, expected: String },
    #[error("{what} contains a value that is not a finite number")]
    NotFinite { what: String },
    #[error("the fixed residual covariance sigma is not symmetric")]
    SigmaNotSymmetric,
    #[error("{what} is not positive definite")]
    SigmaNotPositiveDefinite { what: String },
    #[error("too few observations: {why} (have {rows}, need {needed})")]
    TooFewObservations {
        rows: usize,
        needed: usize,
        why: String,
    },
    #[error(
        "the regressors are collinear (a series is constant or a copy of another over the estimation window)"
    )]
    Collinear,
    #[error("model setting {field}: {why}")]
    BadSetting { field: String, why: String },
}

/// Settings of the Minnesota-type prior, as written in a scenario file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct MinnesotaSettings {
    /// Number of lags `p`.
    pub lags: usize,
    /// Overall tightness `λ`: `auto` or `fixed(0.2)`.
    pub tightness: Tightness,
    /// Lag decay `α` (prior s.d. of lag `l` scales as `1 / l^α`).
    pub lag_decay: f64,
    /// Prior s.d. of the intercept relative to the residual scale (`κ0`).
    pub intercept_scale: f64,
    /// Sum-of-coefficients dummy tightness `μ_soc`, off when absent.
    pub sum_of_coefficients: Option<f64>,
    /// Single-unit-root dummy tightness `δ_sur`, off when absent.
    pub single_unit_root: Option<f64>,
    /// Estimation window (periods as labels); the whole dataset when absent.
    pub window: Option<Window>,
}

/// Estimation window: first and last period used (presample rows included), either open.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct Window {
    pub from: Option<String>,
    pub to: Option<String>,
}

/// Settings of the flat-prior (OLS) model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FlatSettings {
    pub lags: usize,
    #[serde(default)]
    pub window: Option<Window>,
}

impl Default for MinnesotaSettings {
    fn default() -> Self {
        MinnesotaSettings {
            lags: 4,
            tightness: Tightness::Auto,
            lag_decay: 1.0,
            intercept_scale: 100.0,
            sum_of_coefficients: None,
            single_unit_root: None,
            window: None,
        }
    }
}

/// Largest lag decay accepted: `4^(2·10) ≈ 10¹²`, a prior variance ratio beyond which the
/// longer lags are pinned at zero for any data.
const MAX_LAG_DECAY: f64 = 10.0;

impl MinnesotaSettings {
    /// Reject values the prior cannot use, naming the field.
    pub fn validate(&self) -> Result<(), ModelError> {
        let bad = |field: &str, why: &str| {
            Err(ModelError::BadSetting {
                field: field.into(),
                why: why.into(),
            })
        };
        if self.lags == 0 {
            return bad("lags", "must be at least 1");
        }
        if let Tightness::Fixed(l) = self.tightness
            && !(l.is_finite() && l > 0.0)
        {
            return bad("tightness", "must be a positive number or auto");
        }
        if !(0.0..=MAX_LAG_DECAY).contains(&self.lag_decay) {
            return bad(
                "lag_decay",
                "must be a number from 0 to 10 (common practice: 1 or 2; beyond 10 the prior of the longer lags is zero to machine precision)",
            );
        }
        if !(self.intercept_scale.is_finite() && self.intercept_scale > 0.0) {
            return bad("intercept_scale", "must be a positive number");
        }
        for (field, v) in [
            ("sum_of_coefficients", self.sum_of_coefficients),
            ("single_unit_root", self.single_unit_root),
        ] {
            if let Some(v) = v
                && !(v.is_finite() && v > 0.0)
            {
                return bad(field, "must be a positive number (smaller is tighter)");
            }
        }
        Ok(())
    }
}

/// How the posterior was obtained, for the run summary.
#[derive(Debug, Clone, PartialEq)]
pub struct FitSummary {
    /// Tightness used, with the marginal likelihood when it was chosen automatically.
    pub lambda: Option<f64>,
    pub log_ml: Option<f64>,
    pub lambda_on_boundary: bool,
    /// Usable observations T.
    pub observations: usize,
    /// Series whose residual scale was floored (constant over the window).
    pub floored_scales: Vec<usize>,
}

/// Estimate the Minnesota-prior posterior on `reg` with prior centres `delta`.
pub fn estimate_minnesota(
    reg: &Regression,
    settings: &MinnesotaSettings,
    delta: &[f64],
) -> Result<(Posterior, FitSummary), ModelError> {
    settings.validate()?;
    if reg.t() < 3 {
        return Err(ModelError::TooFewObservations {
            rows: reg.t(),
            needed: 3,
            why: format!(
                "the residual scales need at least 3 rows after the {} presample rows",
                reg.p
            ),
        });
    }
    let (s2, floored) = residual_scales(reg);
    let mut prior = MinnesotaPrior {
        lambda: 0.2,
        lag_decay: settings.lag_decay,
        intercept_scale: settings.intercept_scale,
        delta: delta.to_vec(),
        s2,
        sum_of_coefficients: settings.sum_of_coefficients,
        single_unit_root: settings.single_unit_root,
    };
    let mut on_boundary = false;
    match settings.tightness {
        Tightness::Fixed(l) => prior.lambda = l,
        Tightness::Auto => {
            let choice = choose_tightness(reg, &prior)?;
            prior.lambda = choice.lambda;
            on_boundary = choice.on_boundary;
        }
    }
    let (log_ml, post) = posterior_and_log_ml(reg, &prior)?;
    Ok((
        post,
        FitSummary {
            lambda: Some(prior.lambda),
            log_ml: Some(log_ml),
            lambda_on_boundary: on_boundary,
            observations: reg.t(),
            floored_scales: floored,
        },
    ))
}
