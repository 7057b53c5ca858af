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
    /// True for fixed coefficients (one θ, no parameter uncertainty); messages then name no
    /// posterior draw.
    pub fixed: bool,
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
        fixed: matches!(source, ParamSource::Fixed(_)),
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
    /// Largest relative corridor violation over all conditional paths (0: all held).
    pub max_corridor_violation: f64,
    /// With reweighting: `ln ω_i` per θ (unnormalised), else empty.
    pub log_weights: Vec<f64>,
    /// Notes from the conditions (redundant pins, merged corridors), without repeats.
    pub notes: Vec<String>,
}

/// How many paths, and whether to reweight θ by the scenario (ALGORITHMS §8.4).
#[derive(Debug, Clone, Copy)]
pub struct Sampling {
    pub paths_per_theta: usize,
    pub seed: u64,
    pub reweight: bool,
    /// Refuse a θ whose corridor sampler would accept fewer than this share of its proposals.
    pub min_acceptance: f64,
}

/// Proposals behind each θ's acceptance estimate before its paths are drawn.
pub const ACCEPTANCE_PROPOSALS: usize = 256;

/// Proposals behind each θ's corridor-probability estimate when reweighting.
pub const WEIGHT_PROPOSALS: usize = 500;

/// Draw `paths_per_theta` conditional paths for every θ in `range` of the set.
pub fn sample_paths(
    set: &ThetaSet,
    range: std::ops::Range<usize>,
    cond: &Conditions,
    how: Sampling,
    cancel: &AtomicBool,
) -> Result<PathSet, ForecastError> {
    let per = how.paths_per_theta;
    let blocks = range
        .into_par_iter()
        .map(|i| {
            if cancel.load(Ordering::Relaxed) {
                return Err(ForecastError::Cancelled);
            }
            let theta = &set.thetas[i];
            let draw = (!set.fixed).then_some(i);
            let name = |e: ForecastError| if set.fixed { e } else { e.in_draw(i) };
            let plan = Plan::new(theta, cond, draw).map_err(name)?;
            // Fail fast, naming the draw, rather than spend the path budget on a hopeless θ.
            let mut rng = stream(how.seed, Purpose::Acceptance, i as u64);
            if let Some(acceptance) = plan.acceptance(&mut rng, ACCEPTANCE_PROPOSALS)?
                && acceptance < how.min_acceptance
            {
                return Err(ForecastError::TooImprobable {
                    corridors: plan.corridor_names(),
                    acceptance,
                    draw,
                });
            }
            let mut out = PathSet {
                notes: plan.notes().to_vec(),
                ..PathSet::default()
            };
            if how.reweight {
                out.log_weights.push(log_weight(&plan, how.seed, i)?);
            }
            for j in 0..per {
                let index = (i * per + j) as u64;
                let (y, ystar) =
                    plan.sample(theta, &mut stream(how.seed, Purpose::Paths, index))?;
                out.max_pin_error = out.max_pin_error.max(plan.pin_error(&y));
                out.max_corridor_violation =
                    out.max_corridor_violation.max(plan.corridor_violation(&y));
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
        all.max_corridor_violation = all.max_corridor_violation.max(b.max_corridor_violation);
        all.conditional.extend(b.conditional);
        all.unconditional.extend(b.unconditional);
        all.log_weights.extend(b.log_weights);
        for note in b.notes {
            if !all.notes.contains(&note) {
                all.notes.push(note);
            }
        }
    }
    Ok(all)
}

/// `ln ω_i = ln p(r | θ_i) + ln ℓ̂_i`: the density of the pins and the estimated probability
/// of the corridors given them, every shock free (ALGORITHMS §8.4). The unbiased `ℓ̂` keeps
/// weighted averages consistent (pseudo-marginal importance sampling).
fn log_weight(plan: &Plan, seed: u64, i: usize) -> Result<f64, ForecastError> {
    let mut lw = plan.pin_log_density();
    if let Some(law) = plan.model_law()? {
        let mut rng = stream(seed, Purpose::Weights, i as u64);
        lw += law.probability(&[], &mut rng, WEIGHT_PROPOSALS)?.ln;
    }
    Ok(lw)
}

/// Normalised weights from log weights, and the effective sample size
/// `(Σ ω)² / Σ ω²` (Kish).
pub fn normalise(log_weights: &[f64]) -> (Vec<f64>, f64) {
    let top = log_weights
        .iter()
        .copied()
        .fold(f64::NEG_INFINITY, f64::max);
    if !top.is_finite() {
        return (vec![0.0; log_weights.len()], 0.0);
    }
    let w: Vec<f64> = log_weights.iter().map(|l| (l - top).exp()).collect();
    let sum: f64 = w.iter().sum();
    let sq: f64 = w.iter().map(|x| x * x).sum();
    (w.iter().map(|x| x / sum).collect(), sum * sum / sq)
}

/// With reweighting: each path's weight (its θ's normalised weight shared by the θ's
/// `paths_per_theta` paths) and the effective number of θ draws; `None` without weights.
pub fn path_weights(log_weights: &[f64], paths_per_theta: usize) -> Option<(Vec<f64>, f64)> {
    if log_weights.is_empty() {
        return None;
    }
    let (w, ess) = normalise(log_weights);
    let per = paths_per_theta.max(1);
    let per_path = w
        .iter()
        .flat_map(|&wi| std::iter::repeat_n(wi / per as f64, per))
        .collect();
    Some((per_path, ess))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Kish's effective sample size: `n` for equal weights, 1 when one weight dominates, and
    /// `(Σω)²/Σω²` in between (here ω = (1, 1, 2): 16/6).
    #[test]
    fn effective_sample_size() {
        let (w, ess) = normalise(&[0.3; 5]);
        assert!((ess - 5.0).abs() < 1e-12 && w.iter().all(|x| (x - 0.2).abs() < 1e-15));
        let (_, ess) = normalise(&[0.0, -800.0, -900.0]);
        assert!((ess - 1.0).abs() < 1e-12);
        let (w, ess) = normalise(&[0.0, 0.0, 2f64.ln()]);
        assert!((ess - 16.0 / 6.0).abs() < 1e-12 && (w[2] - 0.5).abs() < 1e-15);
    }
}
