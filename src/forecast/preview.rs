//! The first tier of a live edit (ALGORITHMS §8.2–8.3): paths at one θ (the posterior mean,
//! or the fixed coefficients) that follow every edit at the least cost.
//!
//! What an edit recomputes depends on what it changed:
//!
//! - *randomness* (made once): each path's shocks `ε*` from its stream `(seed, Paths, j)`, the
//!   unconditional paths `y* = μ + M ε*`, and where each stream stands after its shocks;
//! - *structure* (made again when the conditions' rows change: a condition added, removed,
//!   moved to another period or other units, the drivers): the plan — rows, factor, gain `W` —
//!   and `𝒢 y*`;
//! - *values* (every edit): `r̃`, the corridor law's mean and bounds ([`Plan::revalue`]), the
//!   corridor quantities drawn again from each path's stream where its shocks left it, and
//!   `y = y* + W((r; z) − 𝒢 y*)` — one matrix product for all the paths.
//!
//! Dragging a pin therefore costs `N k` per path, and the fans move smoothly because the random
//! numbers are common across edits. The paths are exactly those of a fresh computation (the
//! same streams, the same formulas), whatever was cached.

use std::sync::{
    Arc,
    atomic::{AtomicBool, Ordering},
};

use nalgebra::DMatrix;
use rand_distr::{Distribution, StandardNormal};
use rayon::prelude::*;

use crate::attribution::Part;

use super::{
    ForecastError,
    conditions::Conditions,
    engine::{ACCEPTANCE_PROPOSALS, Failure, PathSet, Sampling},
    plan::Plan,
    random::{Purpose, stream},
    rows::Rows,
    theta::Theta,
};

/// Paths per piece of parallel work.
const CHUNK: usize = 64;

/// One chunk's paths (each conditional with its unconditional, or why it was set aside) and
/// its largest pin error and corridor violation.
struct Chunk {
    errors: (f64, f64),
    paths: Vec<Result<PathPair, Failure>>,
}

/// A conditional path and the unconditional path it was made from.
type PathPair = (Vec<f64>, Vec<f64>);

/// Paths at one θ, with what later edits reuse.
#[derive(Debug)]
pub struct Preview {
    theta: Theta,
    seed: u64,
    /// `ε*` (N × P) and `y*` (N × P).
    eps: DMatrix<f64>,
    ystar: DMatrix<f64>,
    /// Each stream's word position after its shocks.
    positions: Vec<u128>,
    /// The last plan, and `𝒢 y*` under it.
    prepared: Option<(Plan, DMatrix<f64>)>,
}

impl Preview {
    /// Draw the randomness of `count` paths at `theta`.
    pub fn new(theta: Theta, count: usize, seed: u64) -> Preview {
        let big_n = theta.len();
        let mut eps = DMatrix::zeros(big_n, count);
        let mut positions = Vec::with_capacity(count);
        for j in 0..count {
            let mut rng = stream(seed, Purpose::Paths, j as u64);
            for i in 0..big_n {
                eps[(i, j)] = StandardNormal.sample(&mut rng);
            }
            positions.push(rng.get_word_pos());
        }
        let mut ystar = eps.clone();
        theta.shocks_to_paths(&mut ystar);
        for mut col in ystar.column_iter_mut() {
            for (v, mu) in col.iter_mut().zip(&theta.mean) {
                *v += mu;
            }
        }
        Preview {
            theta,
            seed,
            eps,
            ystar,
            positions,
            prepared: None,
        }
    }

    pub fn theta(&self) -> &Theta {
        &self.theta
    }

    /// The paths under `cond`, reusing the plan when only values changed. A plan that cannot
    /// be made, or a hopeless corridor sampler, is an error (one θ: nothing to set aside); a
    /// path whose corridor draw fails or that overflows is set aside.
    pub fn update(
        &mut self,
        cond: &Conditions,
        how: Sampling,
        cancel: &AtomicBool,
    ) -> Result<PathSet, ForecastError> {
        let rows = Arc::new(Rows::new(&self.theta, cond, None)?);
        let reused = self
            .prepared
            .as_ref()
            .and_then(|(plan, gy)| plan.revalue(&self.theta, rows.clone()).map(|p| (p, gy)));
        let (plan, gy) = match reused {
            Some((plan, gy)) => (plan?, gy.clone()),
            None => {
                let plan = Plan::with_rows(&self.theta, rows, cond, None, None)?;
                let gy = plan.stacked_times(&self.ystar);
                (plan, gy)
            }
        };
        plan.expect_paths(&self.theta, self.ystar.ncols());
        let mut rng = stream(self.seed, Purpose::Acceptance, 0);
        if let Some(acceptance) =
            plan.acceptance_below(&mut rng, ACCEPTANCE_PROPOSALS, how.min_acceptance)?
        {
            return Err(ForecastError::TooImprobable {
                corridors: plan.corridor_names(),
                acceptance,
                draw: None,
            });
        }
        let count = self.ystar.ncols();
        // Each chunk is finished where it is made (corrected, checked, split into paths), so
        // nothing per path is left to one thread.
        let chunks: Vec<Chunk> = (0..count.div_ceil(CHUNK))
            .into_par_iter()
            .map(|c| {
                if cancel.load(Ordering::Relaxed) {
                    return Err(ForecastError::Cancelled);
                }
                let (start, end) = (c * CHUNK, ((c + 1) * CHUNK).min(count));
                let k = gy.nrows();
                let mut target = DMatrix::zeros(k, end - start);
                let mut failed = vec![None; end - start];
                for j in start..end {
                    let mut rng = stream(self.seed, Purpose::Paths, j as u64);
                    rng.set_word_pos(self.positions[j]);
                    match plan.target(&self.eps, j, &mut rng) {
                        Ok(t) => target.set_column(j - start, &t),
                        Err(e) => failed[j - start] = Some(e),
                    }
                }
                let ystar = self.ystar.columns(start, end - start);
                let y = plan.correct(&self.theta, ystar, gy.columns(start, end - start), &target);
                let kept: Vec<usize> = (0..failed.len()).filter(|&k| failed[k].is_none()).collect();
                let errors = if kept.len() == failed.len() {
                    plan.rows().errors(&y)
                } else {
                    plan.rows().errors(&y.select_columns(&kept))
                };
                let paths = failed
                    .into_iter()
                    .enumerate()
                    .map(|(k, f)| {
                        let path: Vec<f64> = y.column(k).as_slice().to_vec();
                        let ystar: Vec<f64> = ystar.column(k).as_slice().to_vec();
                        let error = f.or_else(|| {
                            let finite = path.iter().chain(&ystar).all(|v| v.is_finite());
                            (!finite).then_some(ForecastError::NotFinite { draw: None })
                        });
                        match error {
                            Some(error) => Err(Failure {
                                index: start + k,
                                error,
                            }),
                            None => Ok((path, ystar)),
                        }
                    })
                    .collect();
                Ok(Chunk { errors, paths })
            })
            .collect::<Result<_, _>>()?;
        let mut out = PathSet {
            notes: plan.notes().to_vec(),
            fixed: true,
            attempted: count,
            ..PathSet::default()
        };
        for chunk in chunks {
            out.max_pin_error = out.max_pin_error.max(chunk.errors.0);
            out.max_corridor_violation = out.max_corridor_violation.max(chunk.errors.1);
            for path in chunk.paths {
                match path {
                    Err(failure) => out.failures.push(failure),
                    Ok((path, ystar)) => {
                        out.proposals += 1;
                        out.conditional.push(path);
                        out.unconditional.push(ystar);
                        out.sources.push(0);
                    }
                }
            }
        }
        out.parts.extend(Part::of_paths(
            0,
            &self.theta,
            &plan,
            cond,
            &out.conditional,
            None,
        ));
        self.prepared = Some((plan, gy));
        Ok(out)
    }
}
