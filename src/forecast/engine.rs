//! The sampling loop over posterior draws (ALGORITHMS §8): build the θ-level caches once,
//! then, for a set of conditions, draw paths for every θ in parallel. Each θ `i` uses the
//! stream `(seed, Parameters, i)` and path `j` of it the stream `(seed, Paths, i·P + j)`.
//! Results are gathered in index order, so they are bit-identical on any number of threads;
//! every draw's result is collected before errors are looked at, so the error reported is
//! that of the lowest failing draw, the same on every run.

use std::sync::atomic::{AtomicBool, Ordering};

use rayon::prelude::*;

use super::{
    ForecastError,
    conditions::Conditions,
    plan::Plan,
    random::{Purpose, stream},
    theta::Theta,
};
use crate::model::{Params, Posterior};

/// Where the parameters come from.
#[derive(Debug, Clone)]
pub enum ParamSource {
    /// Exact draws from the posterior.
    Posterior(Posterior),
    /// Fixed coefficients: no estimation, no parameter uncertainty.
    Fixed(Params),
}

/// The θ-level caches of a run.
#[derive(Debug, Clone)]
pub struct ThetaSet {
    pub thetas: Vec<Theta>,
    /// Draws whose companion matrix has an eigenvalue of modulus above 1 (kept, reported).
    pub explosive: usize,
    /// Median over draws of the largest companion eigenvalue modulus.
    pub median_root: f64,
}

/// Threshold above which the largest companion root counts as explosive.
const EXPLOSIVE_MODULUS: f64 = 1.0 + 1e-8;

/// Build the caches: `count` posterior draws, or the one fixed θ.
pub fn build_thetas(
    source: &ParamSource,
    ordering: &[usize],
    tail: &[Vec<f64>],
    h: usize,
    count: usize,
    seed: u64,
    cancel: &AtomicBool,
) -> Result<ThetaSet, ForecastError> {
    let params: Vec<Params> = match source {
        ParamSource::Fixed(p) => vec![p.clone()],
        ParamSource::Posterior(post) => (0..count)
            .into_par_iter()
            .map(|i| post.draw(&mut stream(seed, Purpose::Parameters, i as u64)))
            .collect(),
    };
    let mut roots: Vec<f64> = params.par_iter().map(|p| p.spectral_radius()).collect();
    let explosive = roots.iter().filter(|&&r| r > EXPLOSIVE_MODULUS).count();
    roots.sort_by(f64::total_cmp);
    let median_root = roots.get(roots.len() / 2).copied().unwrap_or(f64::NAN);
    let thetas = params
        .into_par_iter()
        .enumerate()
        .map(|(i, p)| {
            if cancel.load(Ordering::Relaxed) {
                return Err(ForecastError::Cancelled);
            }
            Theta::new(p, ordering, tail, h).map_err(|e| e.in_draw(i))
        })
        .collect::<Vec<_>>()
        .into_iter()
        .collect::<Result<Vec<_>, _>>()?;
    Ok(ThetaSet {
        thetas,
        explosive,
        median_root,
    })
}

/// Pooled paths of a run, in (θ, path) order.
#[derive(Debug, Clone, Default)]
pub struct PathSet {
    pub conditional: Vec<Vec<f64>>,
    pub unconditional: Vec<Vec<f64>>,
    /// Largest relative pin error over all conditional paths.
    pub max_pin_error: f64,
}

/// Draw `paths_per_theta` conditional paths for every θ in `range` of the set.
pub fn sample_paths(
    set: &ThetaSet,
    range: std::ops::Range<usize>,
    cond: &Conditions,
    paths_per_theta: usize,
    seed: u64,
    cancel: &AtomicBool,
) -> Result<PathSet, ForecastError> {
    let fixed = set.thetas.len() == 1;
    let blocks = range
        .into_par_iter()
        .map(|i| {
            if cancel.load(Ordering::Relaxed) {
                return Err(ForecastError::Cancelled);
            }
            let theta = &set.thetas[i];
            let plan = Plan::new(theta, cond, (!fixed).then_some(i))?;
            let mut out = PathSet::default();
            for j in 0..paths_per_theta {
                let index = (i * paths_per_theta + j) as u64;
                let (y, ystar) = plan.sample(theta, &mut stream(seed, Purpose::Paths, index));
                out.max_pin_error = out.max_pin_error.max(plan.pin_error(&y));
                out.conditional.push(y);
                out.unconditional.push(ystar);
            }
            Ok(out)
        })
        .collect::<Vec<_>>()
        .into_iter()
        .collect::<Result<Vec<_>, _>>()?;
    let mut all = PathSet::default();
    for b in blocks {
        all.max_pin_error = all.max_pin_error.max(b.max_pin_error);
        all.conditional.extend(b.conditional);
        all.unconditional.extend(b.unconditional);
    }
    Ok(all)
}
