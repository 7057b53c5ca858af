//! The headless commands: the checks (scenario → model at its posterior mean → clash and
//! strain report) and the run (checks, then draws → fans, with a short summary). Used by
//! `tiltyard check`, `tiltyard run` and the end-to-end tests.

use std::sync::atomic::AtomicBool;
use std::time::{Duration, Instant};

use crate::checks::{CheckReport, Finding, Severity, check_conditions};
use crate::crosscheck::EngineKind;
use crate::forecast::{
    DrawSpec, ForecastError, ParamSource, PathSet, Plan, RootSummary, Sampling, Theta,
    build_thetas, path_weights,
    random::{Purpose, stream},
    sample_paths,
};
use crate::model::FitSummary;
use crate::report::{FanRow, Kind, check_text, displayable, fans};
use crate::scenario::{ModelSpec, ScenarioError, Setup};

/// Every path must meet every pin to this relative error (ALGORITHMS §11.4).
pub const PIN_TOLERANCE: f64 = 1e-9;

/// Overrides from the command line.
#[derive(Debug, Clone, Default)]
pub struct RunOptions {
    pub draws: Option<usize>,
    pub seed: Option<u64>,
    pub paths_per_draw: Option<usize>,
    /// The engine that draws the paths.
    pub engine: EngineKind,
}

/// Errors of a run.
#[derive(Debug, thiserror::Error)]
pub enum RunError {
    #[error(transparent)]
    Scenario(#[from] ScenarioError),
    #[error(transparent)]
    Forecast(#[from] ForecastError),
    #[error("the scenario clashes; nothing was sampled\n{}", check_text(.0))]
    Clash(Box<CheckReport>),
}

/// Posterior draws re-checked for the drivers' rank condition (ALGORITHMS §9.1 item 6).
pub const DRAWS_RECHECKED: usize = 40;
/// Proposals behind each re-checked draw's acceptance estimate (more than the sampling
/// loop's screen: here the estimate is reported).
const RECHECK_PROPOSALS: usize = 256;
/// Warn when the effective sample size of reweighted draws falls below this share.
pub const LOW_ESS_SHARE: f64 = 0.1;

/// What a run produced.
#[derive(Debug, Clone)]
pub struct RunOutcome {
    pub paths: PathSet,
    pub fans: Vec<FanRow>,
    pub fit: Option<FitSummary>,
    pub posterior_draws: usize,
    /// Largest companion roots: the stationarity filter's count, or a measured subsample.
    pub roots: RootSummary,
    pub elapsed: Duration,
    /// The checks run before sampling.
    pub checks: CheckReport,
    /// With reweighting: the effective sample size of the weighted posterior draws.
    pub effective_draws: Option<f64>,
    /// The engine that drew the paths.
    pub engine: EngineKind,
}

/// The posterior draws a scenario asks for (`count` of them).
fn draw_spec(setup: &Setup, count: usize) -> DrawSpec {
    DrawSpec {
        count,
        seed: setup.file.seed,
        below: setup.file.largest_root.bound(),
        min_kept_share: setup.file.checks.min_kept_share,
    }
}

/// The parameters the checks use: the posterior mean, or the fixed coefficients.
fn central_theta(setup: &Setup, source: &ParamSource) -> Result<(Theta, String), RunError> {
    let (params, at) = match source {
        ParamSource::Fixed(p) => (p.clone(), "the fixed coefficients"),
        ParamSource::Posterior(post) => (
            post.mean().ok_or(ForecastError::Singular(
                "the posterior mean of Σ (too few observations)".into(),
            ))?,
            "the posterior mean of the parameters",
        ),
    };
    let theta = Theta::new(params, &setup.ordering, &setup.tail()?, setup.file.horizon)?;
    Ok((theta, at.to_string()))
}

/// Check a loaded scenario: every invalid condition is a clash naming its field; the rest are
/// checked at the posterior mean (or the fixed coefficients); with parameter uncertainty they
/// are also re-checked on a few posterior draws (the drivers' rank condition, near dependence
/// and the corridor sampler's acceptance can change from draw to draw).
pub fn check(setup: &Setup) -> Result<CheckReport, RunError> {
    let (source, _) = setup.estimate()?;
    let (conditions, problems) = setup.read_conditions();
    let invalid: Vec<Finding> = problems
        .into_iter()
        .map(|e| {
            let field = match &e {
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
                remedy:
                    "correct the field named here (the condition was left out of the other checks)"
                        .into(),
                minimal: None,
            }
        })
        .collect();
    let (theta, at) = central_theta(setup, &source)?;
    let mut report = check_conditions(
        &theta,
        &conditions,
        &setup.file.checks,
        setup.file.seed,
        &at,
        invalid,
    );
    if let (ParamSource::Posterior(_), false) = (&source, report.clashes()) {
        let cancel = AtomicBool::new(false);
        let set = build_thetas(
            &source,
            &setup.ordering,
            &setup.tail()?,
            setup.file.horizon,
            draw_spec(setup, DRAWS_RECHECKED),
            &cancel,
        )?;
        let settings = &setup.file.checks;
        let fails = |i: usize| -> Option<ForecastError> {
            let plan = match Plan::new(&set.thetas[i], &conditions, Some(i)) {
                Ok(plan) => plan,
                Err(e) => return Some(e),
            };
            let mut rng = stream(setup.file.seed, Purpose::Acceptance, i as u64);
            match plan.acceptance(&mut rng, RECHECK_PROPOSALS) {
                Ok(Some(a)) if a < settings.min_acceptance => Some(ForecastError::TooImprobable {
                    corridors: plan.corridor_names(),
                    acceptance: a,
                    draw: Some(i),
                }),
                Ok(_) => None,
                Err(e) => Some(e),
            }
        };
        let failing: Vec<(usize, ForecastError)> = (0..set.thetas.len())
            .filter_map(|i| fails(i).map(|e| (i, e)))
            .collect();
        if let Some((_, first)) = failing.first() {
            let e = first.to_string();
            report.findings.push(Finding {
                severity: Severity::Clash,
                kind: "fails_in_posterior_draws".into(),
                conditions: Vec::new(),
                fields: Vec::new(),
                message: format!(
                    "{} of {} posterior draws checked cannot meet the conditions ({e})",
                    failing.len(),
                    set.thetas.len()
                ),
                remedy: "add drivers or loosen the conditions; the posterior mean meets them, but parameter uncertainty does not".into(),
                minimal: None,
            });
            report.status = crate::checks::Status::Clashing;
        }
    }
    Ok(report)
}

/// Run a loaded scenario (options override the file's draws, seed and paths per draw).
pub fn run(setup: &mut Setup, options: &RunOptions) -> Result<RunOutcome, RunError> {
    let start = Instant::now();
    if let Some(d) = options.draws {
        setup.file.draws = d;
    }
    if let Some(s) = options.seed {
        setup.file.seed = s;
    }
    if let Some(p) = options.paths_per_draw {
        setup.file.paths_per_draw = p;
    }
    crate::scenario::setup::check_counts(&setup.file)?;
    let (source, fit) = setup.estimate()?;
    let conditions = setup.conditions()?;
    let (theta, at) = central_theta(setup, &source)?;
    let checks = check_conditions(
        &theta,
        &conditions,
        &setup.file.checks,
        setup.file.seed,
        &at,
        Vec::new(),
    );
    if checks.clashes() {
        return Err(RunError::Clash(Box::new(checks)));
    }
    let file = &setup.file;
    // Fixed coefficients: one θ, and `draws` paths from it.
    let (thetas_wanted, paths_per_theta) = match source {
        ParamSource::Fixed(_) => (1, file.draws * file.paths_per_draw),
        ParamSource::Posterior(_) => (file.draws, file.paths_per_draw),
    };
    let cancel = AtomicBool::new(false);
    let tail = setup.tail()?;
    let set = build_thetas(
        &source,
        &setup.ordering,
        &tail,
        file.horizon,
        draw_spec(setup, thetas_wanted),
        &cancel,
    )?;
    let how = Sampling {
        paths_per_theta,
        seed: file.seed,
        reweight: file.reweight,
        min_acceptance: file.checks.min_acceptance,
        engine: options.engine,
    };
    let mut paths = sample_paths(&set, 0..set.thetas.len(), &conditions, how, &cancel)?;
    paths.keep_only(|p| displayable(setup, p));
    let paths = paths.within(file.checks.max_failed_share)?;
    // Reweighting: each θ's weight shared by its paths; the unconditional fans keep p(θ | data).
    let (weights, effective_draws) = match path_weights(&paths.log_weights, paths_per_theta) {
        Some((w, ess)) if file.reweight => (Some(w), Some(ess)),
        _ => (None, None),
    };
    let mut rows = fans(
        setup,
        &paths.conditional,
        weights.as_deref(),
        Kind::Conditional,
    );
    rows.extend(fans(setup, &paths.unconditional, None, Kind::Unconditional));
    Ok(RunOutcome {
        fans: rows,
        fit,
        posterior_draws: if matches!(source, ParamSource::Fixed(_)) {
            0
        } else {
            set.thetas.len()
        },
        roots: set.roots,
        elapsed: start.elapsed(),
        paths,
        checks,
        effective_draws,
        engine: options.engine,
    })
}

/// A few lines for the terminal and for `about.txt`.
pub fn summary(setup: &Setup, out: &RunOutcome) -> String {
    let file = &setup.file;
    let mut s = Vec::new();
    s.push(format!(
        "scenario   {} ({})",
        file.name,
        setup.path.display()
    ));
    s.push(format!(
        "dataset    {} series of {}, {}–{} ({} periods)",
        setup.n(),
        setup.dataset.names.len(),
        setup.dataset.first_period(),
        setup.last_period(),
        setup.dataset.len()
    ));
    for note in &setup.dataset.notes {
        s.push(format!("           note: {note}"));
    }
    s.push(format!("model      {}", model_line(setup, out)));
    if let Some(fit) = &out.fit {
        let k = 1 + setup.n() * setup.lags();
        if fit.observations < k {
            s.push(format!(
                "           note: {} observations for {k} coefficients per equation; the prior carries most of the estimate",
                fit.observations
            ));
        }
        for &i in &fit.floored_scales {
            s.push(format!(
                "           note: series {} is constant over the window; its prior scale was floored",
                setup.names[i]
            ));
        }
    }
    let paths = out.paths.conditional.len();
    s.push(format!(
        "forecast   {} periods ({}–{}), {} paths, seed {}",
        file.horizon,
        setup.last_period().offset(1),
        setup.last_period().offset(file.horizon as i64),
        paths,
        file.seed
    ));
    let pins = file.pins.iter().filter(|p| p.active).count();
    let corridors = file.corridors.iter().filter(|c| c.active).count();
    let drivers = match &file.drivers {
        None => "all shocks drive".to_string(),
        Some(d) if d.is_empty() => "no shocks drive".to_string(),
        Some(d) => format!("drivers: {}", d.join(", ")),
    };
    let met = |ok: bool| {
        if ok {
            "met in every path"
        } else {
            "NOT MET to tolerance"
        }
    };
    let plural = |k: usize, one: &str| {
        if k == 1 {
            format!("1 {one}")
        } else {
            format!("{k} {one}s")
        }
    };
    if out.engine != EngineKind::Main {
        let extra = match out.engine {
            EngineKind::Rejection { .. } => format!(
                ": {} proposals for {paths} paths (acceptance {:.2e}, an estimate of the corridors' probability)",
                out.paths.proposals,
                paths as f64 / out.paths.proposals.max(1) as f64
            ),
            _ => String::new(),
        };
        s.push(format!(
            "engine     {} (a cross-check){extra}",
            out.engine.name()
        ));
    }
    s.push(format!(
        "conditions {} {} (largest relative error {:.1e}); {} {} (largest violation {:.1e}); {drivers}",
        plural(pins, "pin"),
        met(out.paths.max_pin_error <= PIN_TOLERANCE),
        out.paths.max_pin_error,
        plural(corridors, "corridor"),
        met(out.paths.max_corridor_violation <= PIN_TOLERANCE),
        out.paths.max_corridor_violation
    ));
    for note in &out.paths.notes {
        s.push(format!("           note: {note}"));
    }
    if let Some(ess) = out.effective_draws {
        let low = ess < LOW_ESS_SHARE * out.posterior_draws as f64;
        s.push(format!(
            "           posterior draws reweighted by the scenario's probability: effective sample size {ess:.0} of {}{}",
            out.posterior_draws,
            if low { " (LOW: the fans rest on few draws)" } else { "" }
        ));
    }
    if let Some(first) = out.paths.failures.first() {
        let unit = if out.paths.fixed {
            "paths"
        } else {
            "posterior draws"
        };
        s.push(format!(
            "           set aside: {} of {} {unit} ({:.1}%); the first ({} {}): {}",
            out.paths.failures.len(),
            out.paths.attempted,
            100.0 * out.paths.failed_share(),
            if out.paths.fixed { "path" } else { "draw" },
            first.index,
            first.error
        ));
    }
    if out.posterior_draws > 0 {
        s.push(roots_line(&out.roots));
    }
    s.push(check_text(&out.checks));
    s.push(format!("time       {:.2} s", out.elapsed.as_secs_f64()));
    s.join("\n")
}

/// The largest companion roots in one line: what the stationarity filter kept, or the share
/// of explosive draws in the measured subsample.
fn roots_line(roots: &RootSummary) -> String {
    let median = roots.median();
    match roots.below {
        Some(bound) => format!(
            "           largest root below {bound}: kept {} of {} posterior draws tried ({:.1}%); median largest root of those tried {median:.4}",
            roots.kept,
            roots.tried,
            100.0 * roots.kept as f64 / roots.tried.max(1) as f64
        ),
        None => {
            let (share, se) = roots.explosive_share();
            let of = match se {
                Some(se) => format!(
                    "{:.1}% ± {:.1}% (measured on {} of {} draws)",
                    100.0 * share,
                    100.0 * se,
                    roots.measured.len(),
                    roots.kept
                ),
                None => format!("{:.1}% of {} draws", 100.0 * share, roots.kept),
            };
            format!(
                "           explosive posterior draws (largest root modulus > 1): {of}, kept; median largest root {median:.4}"
            )
        }
    }
}

fn model_line(setup: &Setup, out: &RunOutcome) -> String {
    let p = setup.lags();
    match (&setup.file.model, &out.fit) {
        (ModelSpec::Fixed(_), _) => {
            format!("VAR({p}) with fixed coefficients (no parameter uncertainty)")
        }
        (ModelSpec::Flat(_), Some(fit)) => format!(
            "VAR({p}), flat prior, T = {}, {} posterior draws",
            fit.observations, out.posterior_draws
        ),
        (ModelSpec::Minnesota(m), Some(fit)) => {
            let lambda = fit.lambda.unwrap_or(f64::NAN);
            let how = match m.tightness {
                crate::model::Tightness::Auto => format!(
                    "chosen by marginal likelihood{}",
                    if fit.lambda_on_boundary {
                        ", at the edge of the search range"
                    } else {
                        ""
                    }
                ),
                crate::model::Tightness::Fixed(_) => "set".into(),
            };
            format!(
                "VAR({p}), Minnesota prior, tightness {lambda:.4} ({how}), log ML {:.2}, T = {}, {} posterior draws",
                fit.log_ml.unwrap_or(f64::NAN),
                fit.observations,
                out.posterior_draws
            )
        }
        _ => format!("VAR({p})"),
    }
}
