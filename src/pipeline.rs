//! One scenario pipeline, driven by `tiltyard run`, `tiltyard check` and the window's worker:
//! model → checks at the central parameters → checks on posterior draws → paths → results.
//!
//! Each front end calls the same steps in the same order, so the same scenario and seed give
//! the same check report wherever it is read:
//!
//! 1. [`Model::new`]: the posterior (or the fixed coefficients) and the central parameters
//!    `θ̄` (the posterior mean, or the fixed coefficients themselves);
//! 2. [`read_conditions`]: pins and corridors as engine rows, every invalid one a clash
//!    finding naming its field;
//! 3. [`check_central`]: clashes, strain and plausibility at `θ̄` (ALGORITHMS §9);
//! 4. [`check_draws`]: the first [`DRAWS_RECHECKED`] posterior draws conditioned one by one
//!    (the drivers' rank condition, near dependence and the corridor sampler's acceptance
//!    change from draw to draw, ALGORITHMS §9.1 item 6);
//! 5. paths ([`crate::forecast::sample_paths`]) over the posterior draws of [`Model::draw`],
//!    block by block, then fans and [`summarise`]: weights, the split of the mean shift and
//!    the statistics.

use std::sync::atomic::AtomicBool;

use rayon::prelude::*;

use crate::attribution::{Attribution, Part, attribute};
use crate::checks::{CheckReport, Finding, Severity, Status, check_conditions};
use crate::forecast::{
    Conditions, DrawSpec, ForecastError, ParamSource, PathSet, Plan, PlanBasis, Theta, ThetaSet,
    build_thetas, normalise, path_weights,
    random::{Purpose, stream},
};
use crate::model::FitSummary;
use crate::report::{Stat, statistics};
use crate::scenario::{ScenarioError, Setup};
use crate::targets::{TiltSummary, tilt_paths};

/// Posterior draws re-checked one by one (ALGORITHMS §9.1 item 6).
pub const DRAWS_RECHECKED: usize = 40;
/// Proposals behind each re-checked draw's acceptance estimate (more than the sampling
/// loop's screen: here the estimate is reported).
const RECHECK_PROPOSALS: usize = 256;

/// The model-level part of a run: kept while only conditions change.
#[derive(Debug, Clone)]
pub struct Model {
    pub source: ParamSource,
    pub fit: Option<FitSummary>,
    /// The central parameters: the posterior mean, or the fixed coefficients.
    pub central: Theta,
    /// Which parameters `central` holds, as the reports say it.
    pub central_label: &'static str,
}

impl Model {
    /// Estimate the model (or take the fixed coefficients) and build the central θ.
    pub fn new(setup: &Setup) -> Result<Model, PipelineError> {
        let (source, fit) = setup.estimate()?;
        let (params, central_label) = match &source {
            ParamSource::Fixed(p) => (p.clone(), "the fixed coefficients"),
            ParamSource::Posterior(post) => (
                post.mean().ok_or(ForecastError::Singular(
                    "the posterior mean of Σ (too few observations)".into(),
                ))?,
                "the posterior mean of the parameters",
            ),
        };
        let central = Theta::new(params, &setup.ordering, &setup.tail()?, setup.file.horizon)?;
        Ok(Model {
            source,
            fit,
            central,
            central_label,
        })
    }

    pub fn is_fixed(&self) -> bool {
        matches!(self.source, ParamSource::Fixed(_))
    }

    /// Parameter draws and paths per draw that the scenario asks for: fixed coefficients are
    /// one θ with every path drawn from it.
    pub fn counts(&self, setup: &Setup) -> (usize, usize) {
        let file = &setup.file;
        if self.is_fixed() {
            (1, file.draws * file.paths_per_draw)
        } else {
            (file.draws, file.paths_per_draw)
        }
    }

    /// The first `count` posterior draws (kept by the stationarity filter, if any), or the one
    /// fixed θ. Draw `i` is the same whatever `count` is.
    pub fn draw(
        &self,
        setup: &Setup,
        count: usize,
        cancel: &AtomicBool,
    ) -> Result<ThetaSet, PipelineError> {
        let spec = DrawSpec {
            count,
            seed: setup.file.seed,
            below: setup.file.largest_root.bound(),
            min_kept_share: setup.file.checks.min_kept_share,
        };
        Ok(build_thetas(
            &self.source,
            &setup.ordering,
            &setup.tail()?,
            setup.file.horizon,
            spec,
            cancel,
        )?)
    }
}

/// What the paths give besides the fans: their weights (when reweighting), the split of the
/// mean shift, and the statistics people quote.
#[derive(Debug, Clone)]
pub struct Summaries {
    /// Per path, normalised (reweighting only: each θ's weight shared by its paths).
    pub weights: Option<Vec<f64>>,
    /// With reweighting: the effective number of posterior draws (Kish).
    pub effective_draws: Option<f64>,
    /// With targets on the distribution: what the tilt did (the weights above are tilted).
    pub tilt: Option<TiltSummary>,
    /// The split by shock and by condition (none from a cross-check engine, which keeps no
    /// parts).
    pub attribution: Option<Attribution>,
    /// Every statistic whose numbers are finite.
    pub statistics: Vec<Stat>,
    /// What was left out, said plainly (statistics that overflow at long horizons).
    pub notes: Vec<String>,
}

/// The summaries of `paths`, drawn under `thetas` with `paths_per_theta` paths each. With
/// reweighting the conditional side is weighted by the scenario's probability of each θ and
/// the unconditional side keeps `p(θ | data)` (ALGORITHMS §8.4).
pub fn summarise(
    setup: &Setup,
    thetas: &[Theta],
    conditions: &Conditions,
    paths: &PathSet,
    paths_per_theta: usize,
) -> Result<Summaries, ForecastError> {
    let (weights, effective_draws) = match path_weights(&paths.log_weights, paths_per_theta) {
        Some((w, ess)) if setup.file.reweight => (Some(w), Some(ess)),
        _ => (None, None),
    };
    // The split averages θ by θ: each θ's weight is its paths' together.
    let theta_weights = weights.as_ref().map(|_| normalise(&paths.log_weights).0);
    // Targets on the distribution tilt the paths' weights (after any reweighting).
    let (weights, tilt) = match tilt_paths(setup, &paths.conditional, weights.as_deref())? {
        Some((w, t)) => (Some(w), Some(t)),
        None => (weights, None),
    };
    let attribution = if paths.parts.is_empty() {
        None
    } else if let (Some(_), Some(w)) = (&tilt, &weights) {
        let (parts, part_weights) = tilted_parts(thetas, conditions, paths, w)?;
        Some(attribute(
            thetas,
            conditions,
            &parts,
            part_weights.as_deref(),
            Some((&paths.parts, theta_weights.as_deref())),
        )?)
    } else {
        Some(attribute(
            thetas,
            conditions,
            &paths.parts,
            theta_weights.as_deref(),
            None,
        )?)
    };
    let mut statistics = statistics(
        setup,
        &paths.conditional,
        &paths.unconditional,
        weights.as_deref(),
    );
    // A statistic that overflows (a cumulative change of a level over hundreds of periods)
    // is left out, and said to be: nothing that is not a number reaches a table.
    let finite = |s: &Stat| s.mean.is_finite() && s.quantiles.iter().all(|q| q.is_finite());
    let mut overflowing: Vec<String> = statistics
        .iter()
        .filter(|s| !finite(s))
        .map(|s| format!("{} of {}", s.statistic, s.series))
        .collect();
    let mut notes = Vec::new();
    if !overflowing.is_empty() {
        let count = overflowing.len();
        overflowing.dedup();
        notes.push(format!(
            "{count} statistics overflow the range of numbers at this horizon and are left out ({})",
            crate::scenario::listing(&overflowing)
        ));
        statistics.retain(finite);
    }
    Ok(Summaries {
        weights,
        effective_draws,
        tilt,
        attribution,
        statistics,
        notes,
    })
}

/// The parts of the split under tilted path weights `w` (one per kept path): each θ weighs
/// the sum of its paths' weights (`None` for a single θ, whose weight is one), and a θ with
/// several paths is split again at their weighted mean, on its plan made anew; a θ with one
/// path keeps its part, which is that path's.
fn tilted_parts(
    thetas: &[Theta],
    conditions: &Conditions,
    paths: &PathSet,
    w: &[f64],
) -> Result<(Vec<Part>, Option<Vec<f64>>), ForecastError> {
    // A θ's paths lie together, in θ order, as its part does.
    let mut groups: Vec<(usize, std::ops::Range<usize>)> = Vec::new();
    for (k, &s) in paths.sources.iter().enumerate() {
        match groups.last_mut() {
            Some((source, range)) if *source == s => range.end = k + 1,
            _ => groups.push((s, k..k + 1)),
        }
    }
    let parts = paths
        .parts
        .par_iter()
        .map(|part| {
            let Some((_, range)) = groups.iter().find(|(s, _)| *s == part.theta) else {
                return Ok((part.clone(), 0.0));
            };
            let weight: f64 = w[range.clone()].iter().sum();
            if range.len() == 1 {
                return Ok((part.clone(), weight));
            }
            let theta = &thetas[part.theta];
            let plan = Plan::new(theta, conditions, None)?;
            let again = Part::of_paths(
                part.theta,
                theta,
                &plan,
                conditions,
                &paths.conditional[range.clone()],
                Some(&w[range.clone()]),
            );
            Ok((again.unwrap_or_else(|| part.clone()), weight))
        })
        .collect::<Result<Vec<_>, ForecastError>>()?;
    let weights = (parts.len() > 1).then(|| parts.iter().map(|(_, w)| *w).collect());
    Ok((parts.into_iter().map(|(p, _)| p).collect(), weights))
}

/// Errors of the pipeline's model-level steps.
#[derive(Debug, thiserror::Error)]
pub enum PipelineError {
    #[error(transparent)]
    Scenario(#[from] ScenarioError),
    #[error(transparent)]
    Forecast(#[from] ForecastError),
}

/// The scenario's conditions as engine rows, with every condition that cannot be read as a
/// clash finding naming its field (the others are still checked).
pub fn read_conditions(setup: &Setup) -> (Conditions, Vec<Finding>) {
    let (conditions, problems) = setup.read_conditions();
    (conditions, problems.iter().map(invalid_finding).collect())
}

/// A condition that cannot be read, as a clash naming its field.
fn invalid_finding(e: &ScenarioError) -> Finding {
    let field = match e {
        ScenarioError::Invalid { field, .. }
        | ScenarioError::Condition { field, .. }
        | ScenarioError::UnknownSeries { field, .. }
        | ScenarioError::UnknownShock { field, .. } => field.clone(),
        _ => String::new(),
    };
    Finding {
        severity: Severity::Clash,
        kind: "invalid_condition".into(),
        conditions: Vec::new(),
        fields: vec![field],
        message: e.to_string(),
        remedy: "correct the field named here (the condition was left out of the other checks)"
            .into(),
        minimal: None,
    }
}

/// The checks at the central parameters, with the invalid conditions' findings.
pub fn check_central(
    setup: &Setup,
    model: &Model,
    conditions: &Conditions,
    invalid: Vec<Finding>,
) -> CheckReport {
    let history = setup.history().ok();
    check_conditions(
        &model.central,
        conditions,
        &setup.file.checks,
        setup.file.seed,
        model.central_label,
        invalid,
        history.as_ref(),
    )
}

/// Condition the first [`DRAWS_RECHECKED`] posterior draws of `thetas` one by one and add a
/// finding when some cannot be used: a clash when surely more fail than
/// `checks.max_failed_share` allows (a run would stop there) or all of them do, a strain
/// otherwise (a run sets them aside). Nothing to do for fixed coefficients or a report that
/// already clashes.
pub fn check_draws(
    setup: &Setup,
    report: &mut CheckReport,
    thetas: &ThetaSet,
    conditions: &Conditions,
) {
    if thetas.fixed || report.clashes() {
        return;
    }
    let settings = &setup.file.checks;
    let count = thetas.thetas.len().min(DRAWS_RECHECKED);
    // Planned as a run plans them: shared rows, laid out like the first draw's law.
    let basis = PlanBasis::new(thetas, conditions);
    let fails = |i: usize| -> Option<ForecastError> {
        let planned = basis.as_ref().map_err(|e| e.clone().in_draw(i));
        let plan = match planned.and_then(|b| b.plan(&thetas.thetas[i], conditions, Some(i))) {
            Ok(plan) => plan,
            Err(e) => return Some(e),
        };
        let mut rng = stream(setup.file.seed, Purpose::Acceptance, i as u64);
        match plan.acceptance_below(&mut rng, RECHECK_PROPOSALS, settings.min_acceptance) {
            Ok(Some(a)) => Some(ForecastError::TooImprobable {
                corridors: plan.corridor_names(),
                acceptance: a,
                draw: Some(i),
            }),
            Ok(_) => None,
            Err(e) => Some(e),
        }
    };
    // In parallel, gathered in draw order: the report does not depend on the threads.
    let failing: Vec<ForecastError> = (0..count)
        .into_par_iter()
        .filter_map(fails)
        .collect::<Vec<_>>();
    let Some(first) = failing.first() else {
        return;
    };
    // A clash only when the share failing is surely above what a run allows (the lower end
    // of its 95% interval from these few draws), or when every draw failed; else a strain.
    let clash =
        failing.len() == count || wilson_lower(failing.len(), count) > settings.max_failed_share;
    report.findings.push(Finding {
        severity: if clash { Severity::Clash } else { Severity::Strain },
        kind: "fails_in_posterior_draws".into(),
        conditions: Vec::new(),
        fields: Vec::new(),
        message: format!(
            "{} of {count} posterior draws checked cannot meet the conditions ({first}); a run sets such draws aside, and stops when they are more than {:.0}% (checks.max_failed_share)",
            failing.len(),
            100.0 * settings.max_failed_share
        ),
        remedy: "add drivers or loosen the conditions; the central parameters meet them, but parameter uncertainty does not".into(),
        minimal: None,
    });
    report.status = if clash {
        Status::Clashing
    } else if report.status == Status::Clear {
        Status::Strained
    } else {
        report.status
    };
}

/// The lower end of the 95% Wilson (1927) score interval for a share of `k` out of `n`.
fn wilson_lower(k: usize, n: usize) -> f64 {
    if n == 0 {
        return 0.0;
    }
    let (k, n, z) = (k as f64, n as f64, 1.959_963_984_540_054);
    let p = k / n;
    let z2 = z * z;
    let centre = p + z2 / (2.0 * n);
    let spread = z * (p * (1.0 - p) / n + z2 / (4.0 * n * n)).sqrt();
    ((centre - spread) / (1.0 + z2 / n)).max(0.0)
}

#[cfg(test)]
mod tests {
    use super::wilson_lower;

    /// The closed form (Wilson 1927) evaluated independently with Python and scipy's normal
    /// quantile (z = 1.959963984540054): 3 of 40 gives 0.025836025774588.
    #[test]
    fn wilson_lower_bound() {
        assert!((wilson_lower(3, 40) - 0.025836025774588).abs() < 1e-12);
        assert_eq!(wilson_lower(0, 40), 0.0);
        assert!(wilson_lower(40, 40) > 0.9);
    }
}
