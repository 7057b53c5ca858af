//! The headless commands: the checks (scenario → model at its posterior mean → clash and
//! strain report) and the run (checks, then draws → fans, with a short summary). Used by
//! `tiltyard check`, `tiltyard run` and the end-to-end tests.

use std::sync::atomic::AtomicBool;
use std::time::{Duration, Instant};

use crate::attribution::Attribution;
use crate::checks::CheckReport;
use crate::crosscheck::EngineKind;
use crate::forecast::{ForecastError, PathSet, RootSummary, Sampling, sample_paths};
use crate::model::FitSummary;
use crate::pipeline::{
    Model, PipelineError, check_central, check_draws, read_conditions, summarise,
};
use crate::report::{FanRow, Kind, Stamp, Stat, check_text, displayable, fans};
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
    #[error(
        "{what} is not a finite number; nothing was written. The model is explosive over this horizon or a condition lies far outside the data's range: check the conditions' values and units, shorten the horizon, or keep only stationary draws (largest_root: below(1.0))"
    )]
    NotFinite { what: String },
}

impl From<PipelineError> for RunError {
    fn from(e: PipelineError) -> RunError {
        match e {
            PipelineError::Scenario(e) => RunError::Scenario(e),
            PipelineError::Forecast(e) => RunError::Forecast(e),
        }
    }
}

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
    /// With targets on the distribution: what the tilt did.
    pub tilt: Option<crate::targets::TiltSummary>,
    /// Each conditional path's share in the fans (summing to one) after reweighting or a
    /// tilt; `None`: equal shares.
    pub weights: Option<Vec<f64>>,
    /// The engine that drew the paths.
    pub engine: EngineKind,
    /// The departure from the unconditional forecast by shock and by condition (main engine).
    pub attribution: Option<Attribution>,
    /// Peaks, troughs, changes and calendar-year averages with their bands.
    pub summary: Vec<Stat>,
    /// The scenario and run its files name.
    pub stamp: Stamp,
}

/// Check a loaded scenario: every invalid condition is a clash naming its field; the rest are
/// checked at the central parameters and, with parameter uncertainty, on the first posterior
/// draws ([`crate::pipeline`]).
pub fn check(setup: &Setup) -> Result<CheckReport, RunError> {
    let model = Model::new(setup)?;
    let (conditions, invalid) = read_conditions(setup);
    let mut report = check_central(setup, &model, &conditions, invalid);
    if !model.is_fixed() && !report.clashes() {
        // The run's own draws (the stationarity filter keeps and refuses as it would there);
        // the first of them are re-checked.
        let thetas = model.draw(setup, setup.file.draws, &AtomicBool::new(false))?;
        check_draws(setup, &mut report, &thetas, &conditions);
    }
    Ok(report)
}

/// Run a loaded scenario (options override the file's draws, seed and paths per draw).
pub fn run(setup: &mut Setup, options: &RunOptions) -> Result<RunOutcome, RunError> {
    let start = Instant::now();
    let stamp = Stamp::new(&setup.file.name, &setup.path);
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
    let model = Model::new(setup)?;
    let (conditions, invalid) = read_conditions(setup);
    let mut checks = check_central(setup, &model, &conditions, invalid);
    if checks.clashes() {
        return Err(RunError::Clash(Box::new(checks)));
    }
    let file = &setup.file;
    let (thetas_wanted, paths_per_theta) = model.counts(setup);
    let cancel = AtomicBool::new(false);
    let set = model.draw(setup, thetas_wanted, &cancel)?;
    check_draws(setup, &mut checks, &set, &conditions);
    if checks.clashes() {
        return Err(RunError::Clash(Box::new(checks)));
    }
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
    let summaries = summarise(setup, &set.thetas, &conditions, &paths, paths_per_theta)?;
    let mut rows = fans(
        setup,
        &paths.conditional,
        summaries.weights.as_deref(),
        Kind::Conditional,
    );
    rows.extend(fans(setup, &paths.unconditional, None, Kind::Unconditional));
    // Nothing that is not a number reaches a file or a chart without a message: a fan that
    // overflows stops the run (statistics that do are left out by `summarise`, with a note).
    if let Some(r) = rows
        .iter()
        .find(|r| !r.mean.is_finite() || r.quantiles.iter().any(|q| !q.is_finite()))
    {
        return Err(RunError::NotFinite {
            what: format!("the {} fan of {} at {}", r.kind.label(), r.series, r.period),
        });
    }
    let mut paths = paths;
    paths.notes.extend(summaries.notes);
    Ok(RunOutcome {
        fans: rows,
        posterior_draws: if model.is_fixed() {
            0
        } else {
            set.thetas.len()
        },
        fit: model.fit,
        roots: set.roots,
        elapsed: start.elapsed(),
        paths,
        checks,
        effective_draws: summaries.effective_draws,
        tilt: summaries.tilt,
        weights: summaries.weights,
        engine: options.engine,
        attribution: summaries.attribution,
        summary: summaries.statistics,
        stamp,
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
        Some(d) => format!("drivers: {}", crate::scenario::describe_drivers(d)),
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
    if let Some(t) = &out.tilt {
        s.push(format!(
            "targets    met by tilting the paths' weights: divergence {:.3} nats, effective paths {:.0} of {}",
            t.divergence, t.effective_paths, t.paths
        ));
        for m in &t.targets {
            s.push(format!(
                "           {} [{}]: {:.4} on the tilted paths",
                m.label, m.field, m.got
            ));
        }
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
