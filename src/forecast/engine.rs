//! The sampling loop over posterior draws (ALGORITHMS §8): build the θ-level caches once,
//! then, for a set of conditions, draw paths for every θ in parallel. Each θ `i` uses the
//! stream `(seed, Parameters, i)` and path `j` of it the stream `(seed, Paths, i·P + j)`.
//! Work is split into fixed pieces — one θ, or a chunk of [`PATH_CHUNK`] paths of it — and
//! results are gathered in index order, so they are bit-identical on any number of threads,
//! and fixed coefficients (one θ, many paths) use every core too.
//!
//! A posterior draw that cannot be conditioned (its conditions nearly dependent or out of
//! the drivers' reach under that θ, its corridors too improbable, its paths overflowing) is
//! set aside and counted, not allowed to stop the run: [`PathSet::failures`] says which and
//! why, and [`PathSet::within`] fails the run only past the share the scenario allows.

use std::sync::{
    Arc,
    atomic::{AtomicBool, Ordering},
};

use rayon::prelude::*;

use crate::attribution::Part;

use super::{
    ForecastError,
    conditions::Conditions,
    corridor::CorridorLaw,
    plan::Plan,
    random::{Purpose, stream},
    rows::Rows,
    theta::Theta,
};
use crate::crosscheck::{Conditioner, EngineKind};
use crate::model::{Params, Posterior};

/// Where the parameters come from.
#[derive(Debug, Clone)]
pub enum ParamSource {
    /// Exact draws from the posterior.
    Posterior(Posterior),
    /// Fixed coefficients: no estimation, no parameter uncertainty.
    Fixed(Params),
}

/// How many posterior draws to make, and which to keep.
#[derive(Debug, Clone, Copy)]
pub struct DrawSpec {
    pub count: usize,
    pub seed: u64,
    /// Keep only draws whose largest companion root has modulus below this (common practice;
    /// `None`: keep every draw, the default, since level series have unit roots on purpose).
    pub below: Option<f64>,
    /// With `below`: refuse when fewer than this share of the draws tried are kept.
    pub min_kept_share: f64,
}

/// The largest companion roots behind a run's report.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct RootSummary {
    /// The stationarity filter's bound, if any.
    pub below: Option<f64>,
    /// Posterior draws made, and kept (all of them without a filter).
    pub tried: usize,
    pub kept: usize,
    /// Roots measured: every draw tried with a filter; without one, the first
    /// [`root_sample`] draws (an exact subsample, so the share is an estimate).
    pub measured: Vec<f64>,
}

impl RootSummary {
    /// Share of the measured roots above 1 (explosive), and its binomial standard error when
    /// the roots are a subsample of the draws kept.
    pub fn explosive_share(&self) -> (f64, Option<f64>) {
        let k = self.measured.len().max(1) as f64;
        let share = self
            .measured
            .iter()
            .filter(|&&r| r > EXPLOSIVE_MODULUS)
            .count() as f64
            / k;
        let sampled = self.below.is_none() && self.measured.len() < self.kept;
        (share, sampled.then(|| (share * (1.0 - share) / k).sqrt()))
    }

    /// Median of the measured roots.
    pub fn median(&self) -> f64 {
        let mut r = self.measured.clone();
        r.sort_by(f64::total_cmp);
        r.get(r.len() / 2).copied().unwrap_or(f64::NAN)
    }
}

/// The θ-level caches of a run.
#[derive(Debug, Clone)]
pub struct ThetaSet {
    pub thetas: Vec<Theta>,
    /// True for fixed coefficients (one θ, no parameter uncertainty); messages then name no
    /// posterior draw.
    pub fixed: bool,
    pub roots: RootSummary,
}

impl ThetaSet {
    /// One θ and its paths, with messages that name no posterior draw.
    pub fn single(theta: Theta) -> ThetaSet {
        ThetaSet {
            thetas: vec![theta],
            fixed: true,
            roots: RootSummary::default(),
        }
    }
}

/// Threshold above which the largest companion root counts as explosive.
const EXPLOSIVE_MODULUS: f64 = 1.0 + 1e-8;
/// Without a stationarity filter, roots are measured on a subsample of the draws sized to a
/// fixed budget of arithmetic: an exact eigenvalue decomposition of the `np × np` companion
/// matrix costs about `10 (np)³` flops (Golub and Van Loan 2013, §7.5.6) — more than the rest
/// of a draw at 40 series — and the share it reports is shown with its standard error. The
/// budget, 2·10⁹ flops (about 0.25 s of one core here at np = 160), gives 100 draws up to
/// np = 126 (standard error at most 5 percentage points), 48 at np = 160 (7 points), and one
/// at np ≥ 585 (a hundred lags), whose check would otherwise spend minutes on roots.
pub fn root_sample(np: usize) -> usize {
    const BUDGET: f64 = 2e9;
    let cost = 10.0 * (np as f64).powi(3);
    ((BUDGET / cost).floor() as usize).clamp(1, 100)
}
/// Draws tried per block while filtering.
const FILTER_BLOCK: usize = 64;

/// Build the caches: `spec.count` posterior draws (kept by the stationarity filter, if any),
/// or the one fixed θ.
pub fn build_thetas(
    source: &ParamSource,
    ordering: &[usize],
    tail: &[Vec<f64>],
    h: usize,
    spec: DrawSpec,
    cancel: &AtomicBool,
) -> Result<ThetaSet, ForecastError> {
    let make = |i: usize, p: Params| -> Result<Theta, ForecastError> {
        if cancel.load(Ordering::Relaxed) {
            return Err(ForecastError::Cancelled);
        }
        Theta::new(p, ordering, tail, h).map_err(|e| e.in_draw(i))
    };
    let post = match source {
        ParamSource::Fixed(p) => {
            let root = p.spectral_radius();
            if let Some(limit) = spec.below.filter(|&l| root >= l) {
                return Err(ForecastError::NotStationary {
                    kept: 0,
                    tried: 1,
                    limit,
                    needed: 1.0,
                    fixed_root: Some(root),
                });
            }
            return Ok(ThetaSet {
                thetas: vec![make(0, p.clone())?],
                fixed: true,
                roots: RootSummary {
                    below: spec.below,
                    tried: 1,
                    kept: 1,
                    measured: vec![root],
                },
            });
        }
        ParamSource::Posterior(post) => post,
    };
    let draw = |i: usize| {
        post.draw(&mut stream(spec.seed, Purpose::Parameters, i as u64))
            .map_err(|_| ForecastError::Singular("the posterior draw of Σ".into()).in_draw(i))
    };
    let Some(limit) = spec.below else {
        let thetas = (0..spec.count)
            .into_par_iter()
            .map(|i| make(i, draw(i)?))
            .collect::<Vec<_>>()
            .into_iter()
            .collect::<Result<Vec<_>, _>>()?;
        let np = post.n() * post.b_bar.nrows().saturating_sub(1) / post.n().max(1);
        let measured = (0..spec.count.min(root_sample(np)))
            .into_par_iter()
            .map(|i| Ok(draw(i)?.spectral_radius()))
            .collect::<Result<_, ForecastError>>()?;
        return Ok(ThetaSet {
            thetas,
            fixed: false,
            roots: RootSummary {
                below: None,
                tried: spec.count,
                kept: spec.count,
                measured,
            },
        });
    };
    // Keep the first `count` draws below the bound, trying at most count / min_kept_share.
    let most =
        ((spec.count as f64 / spec.min_kept_share.max(1e-6)).ceil() as usize).max(spec.count);
    let mut thetas = Vec::with_capacity(spec.count);
    let mut measured = Vec::new();
    let mut tried = 0;
    while thetas.len() < spec.count && tried < most {
        let end = (tried + FILTER_BLOCK).min(most);
        let block = (tried..end)
            .into_par_iter()
            .map(|i| {
                let p = draw(i)?;
                let root = p.spectral_radius();
                let theta = (root < limit).then(|| make(i, p)).transpose()?;
                Ok((root, theta))
            })
            .collect::<Vec<Result<_, ForecastError>>>();
        for result in block {
            let (root, theta) = result?;
            tried += 1;
            measured.push(root);
            if let Some(theta) = theta {
                thetas.push(theta);
                if thetas.len() == spec.count {
                    break;
                }
            }
        }
    }
    if thetas.len() < spec.count {
        return Err(ForecastError::NotStationary {
            kept: thetas.len(),
            tried,
            limit,
            needed: spec.min_kept_share,
            fixed_root: None,
        });
    }
    Ok(ThetaSet {
        thetas,
        fixed: false,
        roots: RootSummary {
            below: Some(limit),
            tried,
            kept: spec.count,
            measured,
        },
    })
}

/// A posterior draw (or, for fixed coefficients, a path) set aside, and why.
#[derive(Debug, Clone, PartialEq)]
pub struct Failure {
    /// The posterior draw (fixed coefficients: the path).
    pub index: usize,
    pub error: ForecastError,
}

/// Pooled paths of a run, in (θ, path) order.
#[derive(Debug, Clone, Default)]
pub struct PathSet {
    pub conditional: Vec<Vec<f64>>,
    pub unconditional: Vec<Vec<f64>>,
    /// The θ (index into the set) each path was drawn under.
    pub sources: Vec<usize>,
    /// Largest relative pin error over all conditional paths.
    pub max_pin_error: f64,
    /// Largest relative corridor violation over all conditional paths (0: all held).
    pub max_corridor_violation: f64,
    /// With reweighting: `ln ω_i` per θ that gave paths (unnormalised), else empty.
    pub log_weights: Vec<f64>,
    /// Notes from the conditions (redundant pins, merged corridors), without repeats.
    pub notes: Vec<String>,
    /// Draws (or paths) set aside, in index order.
    pub failures: Vec<Failure>,
    /// Draws (or paths) attempted.
    pub attempted: usize,
    /// True for the paths of fixed coefficients (failures then count paths).
    pub fixed: bool,
    /// Proposals behind the kept paths (naive rejection: its acceptance share).
    pub proposals: usize,
    /// Each kept θ's conditional mean shift by condition (main engine), in θ order.
    pub parts: Vec<Part>,
}

impl PathSet {
    fn absorb(&mut self, b: PathSet) {
        self.max_pin_error = self.max_pin_error.max(b.max_pin_error);
        self.max_corridor_violation = self.max_corridor_violation.max(b.max_corridor_violation);
        self.conditional.extend(b.conditional);
        self.unconditional.extend(b.unconditional);
        self.sources.extend(b.sources);
        self.log_weights.extend(b.log_weights);
        self.parts.extend(b.parts);
        self.failures.extend(b.failures);
        self.attempted += b.attempted;
        self.proposals += b.proposals;
        for note in b.notes {
            if !self.notes.contains(&note) {
                self.notes.push(note);
            }
        }
    }

    /// Add a later block of the same run.
    pub fn extend(&mut self, more: PathSet) {
        self.fixed = more.fixed;
        self.absorb(more);
    }

    /// Set aside every θ (fixed coefficients: every path) with a path, conditional or not,
    /// that `ok` rejects — for example one that overflows in display units — as `NotFinite`.
    pub fn keep_only(&mut self, ok: impl Fn(&[f64]) -> bool + Sync) {
        let bad: Vec<bool> = (0..self.conditional.len())
            .into_par_iter()
            .map(|k| !(ok(&self.conditional[k]) && ok(&self.unconditional[k])))
            .collect();
        if !bad.contains(&true) {
            return;
        }
        let fixed = self.fixed;
        // Posterior draws: a θ goes with all its paths (and its weight).
        let mut drop = bad.clone();
        if !fixed {
            let mut groups: Vec<(usize, usize)> = Vec::new();
            for (k, &s) in self.sources.iter().enumerate() {
                match groups.last_mut() {
                    Some((source, end)) if *source == s => *end = k + 1,
                    _ => groups.push((s, k + 1)),
                }
            }
            let mut start = 0;
            let mut weights = Vec::new();
            for (g, &(source, end)) in groups.iter().enumerate() {
                let any = bad[start..end].contains(&true);
                drop[start..end].iter_mut().for_each(|d| *d = any);
                if any {
                    self.failures.push(Failure {
                        index: source,
                        error: ForecastError::NotFinite { draw: Some(source) },
                    });
                    self.parts.retain(|p| p.theta != source);
                } else if let Some(&w) = self.log_weights.get(g) {
                    weights.push(w);
                }
                start = end;
            }
            if !self.log_weights.is_empty() {
                self.log_weights = weights;
            }
        } else {
            for (k, &b) in bad.iter().enumerate() {
                if b {
                    self.failures.push(Failure {
                        index: k,
                        error: ForecastError::NotFinite { draw: None },
                    });
                }
            }
        }
        retain_by(&mut self.conditional, &drop);
        retain_by(&mut self.unconditional, &drop);
        retain_by(&mut self.sources, &drop);
        self.failures.sort_by_key(|f| f.index);
    }

    /// The first `k` paths (fixed coefficients: a first summary before all of them), with
    /// what was measured over all of them.
    pub fn first(&self, k: usize) -> PathSet {
        let k = k.min(self.conditional.len());
        PathSet {
            conditional: self.conditional[..k].to_vec(),
            unconditional: self.unconditional[..k].to_vec(),
            sources: self.sources[..k].to_vec(),
            log_weights: self.log_weights.clone(),
            notes: self.notes.clone(),
            failures: self.failures.clone(),
            parts: self.parts.clone(),
            ..*self
        }
    }

    /// Share of the attempts set aside.
    pub fn failed_share(&self) -> f64 {
        self.failures.len() as f64 / self.attempted.max(1) as f64
    }

    /// The paths, unless more than `max_share` of the attempts failed (or all of them).
    pub fn within(self, max_share: f64) -> Result<PathSet, ForecastError> {
        let share = self.failed_share();
        if (self.conditional.is_empty() || share > max_share)
            && let Some(first) = self.failures.first()
        {
            return Err(ForecastError::TooManyFailed {
                failed: self.failures.len(),
                attempted: self.attempted,
                allowed: max_share,
                fixed: self.fixed,
                first: Box::new(first.clone()),
            });
        }
        Ok(self)
    }
}

/// Keep the entries of `v` whose `drop` flag is false.
fn retain_by<T>(v: &mut Vec<T>, drop: &[bool]) {
    let mut flags = drop.iter();
    v.retain(|_| !flags.next().copied().unwrap_or(false));
}

/// How many paths, and whether to reweight θ by the scenario (ALGORITHMS §8.4).
#[derive(Debug, Clone, Copy)]
pub struct Sampling {
    pub paths_per_theta: usize,
    pub seed: u64,
    pub reweight: bool,
    /// Refuse a θ whose corridor sampler would accept fewer than this share of its proposals.
    pub min_acceptance: f64,
    /// The engine that draws the paths (the main one unless cross-checking).
    pub engine: EngineKind,
}

/// Proposals behind each θ's acceptance estimate before its paths are drawn: a screen for
/// hopeless draws, whose acceptance lies orders of magnitude below the usual 0.03–0.9, so a
/// rough estimate serves (the check at the central parameters uses thousands).
pub const ACCEPTANCE_PROPOSALS: usize = 16;

/// Proposals behind each θ's corridor-probability estimate when reweighting.
pub const WEIGHT_PROPOSALS: usize = 500;

/// Paths of one θ drawn together as one piece of work.
pub const PATH_CHUNK: usize = 64;

/// Draw `paths_per_theta` conditional paths for every θ in `range` of the set.
pub fn sample_paths(
    set: &ThetaSet,
    range: std::ops::Range<usize>,
    cond: &Conditions,
    how: Sampling,
    cancel: &AtomicBool,
) -> Result<PathSet, ForecastError> {
    let basis = PlanBasis::new(set, cond)?;
    let blocks = range
        .into_par_iter()
        .map(|i| one_theta(set, i, &basis, cond, how, cancel))
        .collect::<Vec<_>>();
    let mut all = PathSet {
        fixed: set.fixed,
        ..PathSet::default()
    };
    for b in blocks {
        all.absorb(b?);
    }
    Ok(all)
}

/// What every θ's plan starts from: the rows, made once when the conditions are on
/// observables (the same rows under every θ), and the first θ's corridor law, which every θ's
/// law is laid out like (the order of its variables only affects speed): no reordering search,
/// and a warm start for its saddle point. The first θ of the whole set, so that blocks of a
/// streamed run draw what one run would.
pub struct PlanBasis {
    rows: Option<Arc<Rows>>,
    law: Option<CorridorLaw>,
}

impl PlanBasis {
    pub fn new(set: &ThetaSet, cond: &Conditions) -> Result<PlanBasis, ForecastError> {
        let rows = match (cond.on_shocks(), set.thetas.first()) {
            (false, Some(theta)) => Some(Arc::new(Rows::new(theta, cond, None)?)),
            _ => None,
        };
        let mut basis = PlanBasis { rows, law: None };
        basis.law = set.thetas.first().and_then(|theta| {
            basis
                .plan(theta, cond, None)
                .ok()
                .and_then(|p| p.law().cloned())
        });
        Ok(basis)
    }

    /// θ's rows: the shared ones, or its own.
    fn rows(
        &self,
        theta: &Theta,
        cond: &Conditions,
        draw: Option<usize>,
    ) -> Result<Arc<Rows>, ForecastError> {
        match &self.rows {
            Some(rows) => Ok(rows.clone()),
            None => Rows::new(theta, cond, draw).map(Arc::new),
        }
    }

    /// θ's plan, from the shared rows and laid out like the first θ's law.
    pub fn plan(
        &self,
        theta: &Theta,
        cond: &Conditions,
        draw: Option<usize>,
    ) -> Result<Plan, ForecastError> {
        Plan::with_rows(
            theta,
            self.rows(theta, cond, draw)?,
            cond,
            draw,
            self.law.as_ref(),
        )
    }
}

/// The paths of θ `i`: its plan, then its paths in chunks (in parallel for fixed
/// coefficients). With parameter uncertainty, any failure sets the whole draw aside; with
/// fixed coefficients a failing plan stops the run and a failing path is set aside.
fn one_theta(
    set: &ThetaSet,
    i: usize,
    basis: &PlanBasis,
    cond: &Conditions,
    how: Sampling,
    cancel: &AtomicBool,
) -> Result<PathSet, ForecastError> {
    if cancel.load(Ordering::Relaxed) {
        return Err(ForecastError::Cancelled);
    }
    let theta = &set.thetas[i];
    let draw = (!set.fixed).then_some(i);
    let name = |e: ForecastError| if set.fixed { e } else { e.in_draw(i) };
    let per = how.paths_per_theta;
    let set_aside = |error: ForecastError| PathSet {
        failures: vec![Failure { index: i, error }],
        attempted: 1,
        fixed: set.fixed,
        ..PathSet::default()
    };
    let planned = match how.engine {
        EngineKind::Main => plan_for(theta, basis, cond, how, i, draw)
            .map(|(plan, w)| (Conditioner::Main(Box::new(plan)), w)),
        other if how.reweight => Err(ForecastError::Unsupported {
            engine: other.name().into(),
            what: "does not reweight posterior draws".into(),
        }),
        other => basis
            .rows(theta, cond, draw)
            .and_then(|rows| Conditioner::cross_check(other, theta, Rows::clone(&rows), cond, draw))
            .map(|c| (c, None)),
    }
    .map_err(name);
    let (plan, log_weight) = match planned {
        Ok(p) => p,
        Err(ForecastError::Cancelled) => return Err(ForecastError::Cancelled),
        Err(e) if set.fixed => return Err(e),
        Err(e) => return Ok(set_aside(e)),
    };
    let chunks: Vec<PathSet> = (0..per.div_ceil(PATH_CHUNK))
        .into_par_iter()
        .map(|c| {
            let mut out = PathSet::default();
            if cancel.load(Ordering::Relaxed) {
                return Err(ForecastError::Cancelled);
            }
            let paths = c * PATH_CHUNK..((c + 1) * PATH_CHUNK).min(per);
            let mut streams: Vec<_> = paths
                .clone()
                .map(|j| stream(how.seed, Purpose::Paths, (i * per + j) as u64))
                .collect();
            let mut rngs: Vec<_> = streams.iter_mut().collect();
            let drawn = plan.sample_many(theta, &mut rngs);
            for (j, result) in paths.zip(drawn) {
                out.attempted += 1;
                let result = result.and_then(|(y, ystar, tried)| {
                    let finite = y.iter().chain(&ystar).all(|v| v.is_finite());
                    if finite {
                        Ok((y, ystar, tried))
                    } else {
                        Err(ForecastError::NotFinite { draw })
                    }
                });
                match result {
                    Ok((y, ystar, tried)) => {
                        out.proposals += tried;
                        out.max_pin_error = out.max_pin_error.max(plan.rows().pin_error(&y));
                        out.max_corridor_violation = out
                            .max_corridor_violation
                            .max(plan.rows().corridor_violation(&y));
                        out.conditional.push(y);
                        out.unconditional.push(ystar);
                        out.sources.push(i);
                    }
                    Err(e) => out.failures.push(Failure {
                        index: if set.fixed { j } else { i },
                        error: name(e),
                    }),
                }
            }
            Ok(out)
        })
        .collect::<Result<_, _>>()?;
    let mut out = PathSet {
        notes: plan.rows().notes.clone(),
        fixed: set.fixed,
        ..PathSet::default()
    };
    for c in chunks {
        out.absorb(c);
    }
    if let Conditioner::Main(plan) = &plan {
        out.parts
            .extend(Part::of_paths(i, theta, plan, cond, &out.conditional, None));
    }
    if set.fixed {
        return Ok(out);
    }
    // A posterior draw counts once, and is set aside whole when any of its paths fails.
    if let Some(first) = out.failures.first() {
        return Ok(set_aside(first.error.clone()));
    }
    out.attempted = 1;
    out.log_weights.extend(log_weight);
    Ok(out)
}

/// The plan of θ `i`, screened for hopeless corridors, and its log weight when reweighting.
fn plan_for(
    theta: &Theta,
    basis: &PlanBasis,
    cond: &Conditions,
    how: Sampling,
    i: usize,
    draw: Option<usize>,
) -> Result<(Plan, Option<f64>), ForecastError> {
    let plan = basis.plan(theta, cond, draw)?;
    plan.expect_paths(theta, how.paths_per_theta);
    // Fail fast, naming the draw, rather than spend the path budget on a hopeless θ.
    let mut rng = stream(how.seed, Purpose::Acceptance, i as u64);
    if let Some(acceptance) =
        plan.acceptance_below(&mut rng, ACCEPTANCE_PROPOSALS, how.min_acceptance)?
    {
        return Err(ForecastError::TooImprobable {
            corridors: plan.corridor_names(),
            acceptance,
            draw,
        });
    }
    let weight = how
        .reweight
        .then(|| log_weight(&plan, how.seed, i))
        .transpose()?;
    Ok((plan, weight))
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

    fn paths(sources: &[usize]) -> PathSet {
        let attempted = sources
            .iter()
            .collect::<std::collections::HashSet<_>>()
            .len();
        PathSet {
            conditional: sources.iter().map(|&s| vec![s as f64]).collect(),
            unconditional: sources.iter().map(|_| vec![0.0]).collect(),
            sources: sources.to_vec(),
            log_weights: (0..attempted).map(|g| g as f64).collect(),
            attempted,
            ..PathSet::default()
        }
    }

    /// A posterior draw with one unusable path goes whole, with its weight; the rest stay in
    /// order. The run fails only past the allowed share, and always when nothing is left.
    #[test]
    fn draws_set_aside_whole_and_counted() {
        let mut p = paths(&[0, 0, 1, 1, 2, 2]);
        p.keep_only(|y| y[0] != 1.0);
        assert_eq!(p.sources, vec![0, 0, 2, 2]);
        assert_eq!(p.log_weights, vec![0.0, 2.0]);
        assert_eq!(p.failures.len(), 1);
        assert_eq!(p.failures[0].index, 1);
        assert!((p.failed_share() - 1.0 / 3.0).abs() < 1e-15);
        assert!(p.clone().within(0.34).is_ok());
        let err = p.within(0.3).unwrap_err();
        assert!(matches!(
            err,
            ForecastError::TooManyFailed {
                failed: 1,
                attempted: 3,
                ..
            }
        ));
        let mut none = paths(&[0, 1]);
        none.keep_only(|_| false);
        assert!(none.within(1.0).is_err());
    }

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
