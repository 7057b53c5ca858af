//! The law of the corridor quantities `z = S y` given the pins, truncated to the corridors
//! (ALGORITHMS §6.1–6.3 and §5.4).
//!
//! `z ~ N(m₀ + A ε_J̄, Σ_z)` restricted to `a ≤ z ≤ b` (and to the extra inequalities of
//! dependent corridor rows). With every shock free `A` is absent and one tilted sampler
//! serves every path; with drivers the mean moves with the non-driver shocks `ε_J̄` of each
//! path, and the saddle point is solved again for the shifted box (warm-started, same variable
//! order). Draws come from [`crate::truncnorm::TruncatedNormal`], so they are exact.

use std::{borrow::Cow, sync::Arc};

use nalgebra::{DMatrix, DVector};
use rand::Rng;

use super::{ForecastError, rows::Extra};
use crate::truncnorm::{Probability, SolveStatus, TruncError, TruncatedNormal, multivariate::Keep};

/// Work allowed for one path (multiply–adds, about a second on one core) before the corridors
/// count as too improbable to sample; a proposal costs about `d²/2 + 20 d`.
const MAX_WORK: f64 = 2e9;

/// Proposals allowed per path for `d` corridor quantities.
fn budget(d: usize) -> usize {
    let per = (d * d) as f64 / 2.0 + 20.0 * d as f64;
    ((MAX_WORK / per) as usize).clamp(10_000, 2_000_000)
}

#[derive(Debug, Clone)]
pub struct CorridorLaw {
    /// Bounds `a`, `b`, extra inequalities, labels: the same for every θ of a run.
    rows: Arc<LawRows>,
    /// `m₀` and `A` (q × |J̄|, drivers only).
    mean: DVector<f64>,
    shift: Option<DMatrix<f64>>,
    /// The truncated normal at mean `m₀`.
    base: TruncatedNormal,
}

/// The rows of a corridor law: bounds, extra inequalities, each row's label, and the
/// corridors they belong to (each once).
#[derive(Debug)]
pub struct LawRows {
    pub lower: DVector<f64>,
    pub upper: DVector<f64>,
    pub extra: Vec<Extra>,
    pub labels: Vec<String>,
    pub names: Vec<String>,
}

impl CorridorLaw {
    pub fn new(
        cov: DMatrix<f64>,
        mean: DVector<f64>,
        shift: Option<DMatrix<f64>>,
        rows: Arc<LawRows>,
        like: Option<&CorridorLaw>,
    ) -> Result<CorridorLaw, ForecastError> {
        let sym = (&cov + cov.transpose()) * 0.5;
        let lo: Vec<f64> = (0..mean.len()).map(|i| rows.lower[i] - mean[i]).collect();
        let hi: Vec<f64> = (0..mean.len()).map(|i| rows.upper[i] - mean[i]).collect();
        // Laid out like a nearby law (the same corridors under another θ) when one is given and
        // fits; the order only affects efficiency.
        let base = like
            .filter(|l| l.mean.len() == mean.len())
            .and_then(|l| l.base.like(&sym, &lo, &hi).ok())
            .map_or_else(|| TruncatedNormal::new(&sym, &lo, &hi), Ok)
            .map_err(|e| explain(e, &rows.labels, &rows.names, None))?;
        Ok(CorridorLaw {
            rows,
            mean,
            shift,
            base,
        })
    }

    /// The sampler for the mean `m₀ + A ε_J̄` and that mean.
    fn at(
        &self,
        nondrivers: &[f64],
    ) -> Result<(Cow<'_, TruncatedNormal>, Cow<'_, DVector<f64>>), TruncError> {
        let Some(a) = &self.shift else {
            return Ok((Cow::Borrowed(&self.base), Cow::Borrowed(&self.mean)));
        };
        let mean = &self.mean + a * DVector::from_column_slice(nondrivers);
        let lo: Vec<f64> = (0..mean.len())
            .map(|i| self.rows.lower[i] - mean[i])
            .collect();
        let hi: Vec<f64> = (0..mean.len())
            .map(|i| self.rows.upper[i] - mean[i])
            .collect();
        Ok((
            Cow::Owned(self.base.with_bounds(&lo, &hi)?),
            Cow::Owned(mean),
        ))
    }

    /// One exact draw of `z` given the non-driver shocks (empty with every shock free).
    pub fn draw<R: Rng + ?Sized>(
        &self,
        nondrivers: &[f64],
        rng: &mut R,
        draw: Option<usize>,
    ) -> Result<DVector<f64>, ForecastError> {
        let fail = |e| explain(e, &self.rows.labels, &self.rows.names, draw);
        let (tn, mean) = self.at(nondrivers).map_err(fail)?;
        // With extra inequalities, each accepted box draw is kept only inside them.
        let keep = |x: &[f64]| {
            let z = mean.as_ref() + DVector::from_column_slice(x);
            self.rows.extra.iter().all(|e| e.holds(&z))
        };
        let x = tn
            .sample_where(rng, budget(self.mean.len()), keep)
            .map_err(fail)?;
        Ok(mean.into_owned() + DVector::from_vec(x))
    }

    /// `P(a ≤ z ≤ b)` at the mean `m₀ + A ε_J̄` (and inside the extra inequalities of
    /// dependent corridor rows), by `n` proposals.
    pub fn probability<R: Rng + ?Sized>(
        &self,
        nondrivers: &[f64],
        rng: &mut R,
        n: usize,
    ) -> Result<Probability, ForecastError> {
        let (tn, mean) = self
            .at(nondrivers)
            .map_err(|e| explain(e, &self.rows.labels, &self.rows.names, None))?;
        if self.rows.extra.is_empty() {
            return Ok(tn.probability(rng, n));
        }
        Ok(tn.probability_where(rng, n, |x| {
            let z = mean.as_ref() + DVector::from_column_slice(x);
            self.rows.extra.iter().all(|e| e.holds(&z))
        }))
    }

    /// The sampler's acceptance rate at the mean `m₀ + A ε_J̄`, estimated by `n` proposals
    /// (inside the extra inequalities too), when it is below `floor`; `None` when it is not
    /// (often known after the first proposals: [`TruncatedNormal::acceptance_below`]).
    pub fn acceptance_below<R: Rng + ?Sized>(
        &self,
        nondrivers: &[f64],
        rng: &mut R,
        n: usize,
        floor: f64,
    ) -> Result<Option<f64>, ForecastError> {
        let (tn, mean) = self
            .at(nondrivers)
            .map_err(|e| explain(e, &self.rows.labels, &self.rows.names, None))?;
        let keep = |x: &[f64]| {
            let z = mean.as_ref() + DVector::from_column_slice(x);
            self.rows.extra.iter().all(|e| e.holds(&z))
        };
        let keep: Keep = (!self.rows.extra.is_empty()).then_some(&keep);
        Ok(tn.acceptance_below(rng, n, floor, keep))
    }

    /// How the saddle point of the sampler at `m₀` was found.
    pub fn status(&self) -> SolveStatus {
        self.base.status()
    }

    /// The corridors of this law (each once), for messages.
    pub fn names(&self) -> &[String] {
        &self.rows.names
    }
}

/// Name the corridors in a truncated-normal failure.
fn explain(
    e: TruncError,
    labels: &[String],
    names: &[String],
    draw: Option<usize>,
) -> ForecastError {
    let name = |i: usize| labels.get(i).cloned().unwrap_or_else(|| format!("row {i}"));
    match e {
        TruncError::Singular { index } => ForecastError::NearlyDependent {
            conditions: vec![name(index)],
            draw,
        },
        TruncError::EmptyInterval { index, .. } => ForecastError::EmptyCorridor {
            corridor: name(index),
        },
        TruncError::TooImprobable { proposals } => ForecastError::TooImprobable {
            corridors: names.to_vec(),
            acceptance: 1.0 / proposals as f64,
            draw,
        },
        TruncError::BoundExceeded { by } => ForecastError::SamplerBound { by, draw },
        other => ForecastError::Singular(format!("the corridor covariance ({other})")),
    }
}
