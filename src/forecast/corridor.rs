//! The law of the corridor quantities `z = S y` given the pins, truncated to the corridors
//! (ALGORITHMS §6.1–6.3 and §5.4).
//!
//! `z ~ N(m₀ + A ε_J̄, Σ_z)` restricted to `a ≤ z ≤ b` (and to the extra inequalities of
//! dependent corridor rows). With every shock free `A` is absent and one tilted sampler
//! serves every path; with drivers the mean moves with the non-driver shocks `ε_J̄` of each
//! path, and the saddle point is solved again for the shifted box (warm-started, same variable
//! order). Draws come from [`crate::truncnorm::TruncatedNormal`], so they are exact.

use nalgebra::{DMatrix, DVector};
use rand::Rng;

use super::{ForecastError, rows::Extra};
use crate::truncnorm::{Probability, TruncError, TruncatedNormal};

/// Proposals allowed for one path before the corridors count as too improbable to sample.
pub const MAX_PROPOSALS: usize = 2_000_000;

#[derive(Debug, Clone)]
pub struct CorridorLaw {
    lower: DVector<f64>,
    upper: DVector<f64>,
    /// `m₀` and `A` (q × |J̄|, drivers only).
    mean: DVector<f64>,
    shift: Option<DMatrix<f64>>,
    /// The truncated normal at mean `m₀`.
    base: TruncatedNormal,
    extra: Vec<Extra>,
    labels: Vec<String>,
}

impl CorridorLaw {
    pub fn new(
        cov: DMatrix<f64>,
        mean: DVector<f64>,
        shift: Option<DMatrix<f64>>,
        (lower, upper): (DVector<f64>, DVector<f64>),
        extra: Vec<Extra>,
        labels: Vec<String>,
    ) -> Result<CorridorLaw, ForecastError> {
        let sym = (&cov + cov.transpose()) * 0.5;
        let lo: Vec<f64> = (0..mean.len()).map(|i| lower[i] - mean[i]).collect();
        let hi: Vec<f64> = (0..mean.len()).map(|i| upper[i] - mean[i]).collect();
        let base = TruncatedNormal::new(&sym, &lo, &hi).map_err(|e| explain(e, &labels, None))?;
        Ok(CorridorLaw {
            lower,
            upper,
            mean,
            shift,
            base,
            extra,
            labels,
        })
    }

    /// The sampler for the mean `m₀ + A ε_J̄` and that mean.
    fn at(&self, nondrivers: &[f64]) -> Result<(TruncatedNormal, DVector<f64>), TruncError> {
        let Some(a) = &self.shift else {
            return Ok((self.base.clone(), self.mean.clone()));
        };
        let mean = &self.mean + a * DVector::from_column_slice(nondrivers);
        let lo: Vec<f64> = (0..mean.len()).map(|i| self.lower[i] - mean[i]).collect();
        let hi: Vec<f64> = (0..mean.len()).map(|i| self.upper[i] - mean[i]).collect();
        Ok((self.base.with_bounds(&lo, &hi)?, mean))
    }

    /// One exact draw of `z` given the non-driver shocks (empty with every shock free).
    pub fn draw<R: Rng + ?Sized>(
        &self,
        nondrivers: &[f64],
        rng: &mut R,
        draw: Option<usize>,
    ) -> Result<DVector<f64>, ForecastError> {
        let fail = |e| explain(e, &self.labels, draw);
        let (tn, mean) = if self.shift.is_some() {
            self.at(nondrivers).map_err(fail)?
        } else {
            (self.base.clone(), self.mean.clone())
        };
        let keep = |x: &[f64]| {
            let z = &mean + DVector::from_column_slice(x);
            self.extra.iter().all(|e| e.holds(&z))
        };
        let x = tn.sample_where(rng, MAX_PROPOSALS, keep).map_err(fail)?;
        Ok(mean + DVector::from_vec(x))
    }

    /// `P(a ≤ z ≤ b)` at the mean `m₀ + A ε_J̄` (the extra inequalities are not counted), by
    /// `n` proposals.
    pub fn probability<R: Rng + ?Sized>(
        &self,
        nondrivers: &[f64],
        rng: &mut R,
        n: usize,
    ) -> Result<Probability, ForecastError> {
        let (tn, _) = self
            .at(nondrivers)
            .map_err(|e| explain(e, &self.labels, None))?;
        Ok(tn.probability(rng, n))
    }

    pub fn has_extra(&self) -> bool {
        !self.extra.is_empty()
    }
}

/// Name the corridor rows in a truncated-normal failure.
fn explain(e: TruncError, labels: &[String], draw: Option<usize>) -> ForecastError {
    let name = |i: usize| labels.get(i).cloned().unwrap_or_else(|| format!("row {i}"));
    match e {
        TruncError::Singular { index } => ForecastError::NearlyDependent {
            condition: name(index),
        },
        TruncError::EmptyInterval { index, .. } => ForecastError::EmptyCorridor {
            corridor: name(index),
        },
        TruncError::TooImprobable { proposals } => ForecastError::TooImprobable {
            corridors: labels.to_vec(),
            proposals,
            draw,
        },
        other => ForecastError::Singular(format!("the corridor covariance ({other})")),
    }
}
