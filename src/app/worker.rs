//! The engine worker: one background thread that turns the scenario being edited into checks
//! and fans, streaming partial results while the window stays responsive.
//!
//! Every edit sends a [`Job`] with a new generation and cancels the running one (an atomic
//! flag checked between blocks of work). Model-level work (estimation, posterior draws and
//! their caches) is kept while only conditions change, so an edit of a pin or corridor redoes
//! only the checks and the sampling. Results come in tiers (ALGORITHMS §8.3): a preview at the
//! posterior mean first, then posterior draws in blocks, fans refreshed after each. A panic
//! inside a job is caught and reported; the thread lives on.

use crate::targets::tilt_paths;
use std::panic::{AssertUnwindSafe, catch_unwind};
use std::path::PathBuf;
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{Receiver, Sender};
use std::time::Instant;

use crate::attribution::Attribution;
use crate::attribution::leave_one_out::{Effect, leave_one_out};
use crate::checks::CheckReport;
use crate::dataset::Period;
use crate::forecast::{
    Conditions, ForecastError, PathSet, Sampling, Theta, ThetaSet, preview::Preview, sample_paths,
};
use crate::pipeline::{Model, PipelineError, check_central, check_draws, read_conditions};
use crate::report::{FanRow, Kind, fans};
use crate::scenario::{ScenarioFile, Setup, Units, units::display_value};

/// Posterior draws per block of the streamed results.
pub const BLOCK: usize = 50;
/// Paths of the preview at the posterior mean.
pub const PREVIEW_PATHS: usize = 300;
/// Years of history shown before the forecast.
pub const HISTORY_YEARS: usize = 6;

/// A request: the scenario as it now stands.
pub struct Job {
    pub generation: u64,
    pub file: ScenarioFile,
    /// The scenario's path (relative dataset paths start from its folder).
    pub path: PathBuf,
    pub cancel: Arc<AtomicBool>,
}

/// What the engine is doing.
#[derive(Debug, Clone, PartialEq)]
pub enum EngineState {
    /// A job was sent and the worker has not reported on it yet.
    Idle,
    Estimating,
    Checking,
    /// Drawing the posterior parameters (once per model).
    Drawing,
    Sampling {
        done: usize,
        total: usize,
    },
    Done {
        draws: usize,
        seconds: f64,
        /// Posterior draws set aside because they could not be conditioned.
        set_aside: usize,
    },
    /// The conditions clash: nothing was sampled.
    Clashing,
    Failed,
}

/// What a chart shows: a series (in its display units) or a structural shock (standardised).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Subject {
    Series,
    Shock,
}

/// One series' or shock's results. `x` is the horizon: 0 is the last observation, negative
/// values are history (none for shocks).
#[derive(Debug, Clone, PartialEq)]
pub struct SeriesView {
    pub name: String,
    pub subject: Subject,
    pub units: Units,
    pub history: Vec<(f64, f64)>,
    pub conditional: Vec<FanPoint>,
    pub unconditional: Vec<FanPoint>,
}

/// A fan at one horizon: the mean and the quantiles of [`crate::report::QUANTILES`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FanPoint {
    pub x: f64,
    pub mean: f64,
    pub q: [f64; 7],
}

/// Fans of all series and shocks, and how many draws they rest on.
#[derive(Debug, Clone, PartialEq)]
pub struct Results {
    pub series: Vec<SeriesView>,
    /// One per shock, in series order (shocks are named after the series).
    pub shocks: Vec<SeriesView>,
    /// Posterior draws behind the fans (0 for the preview at the posterior mean).
    pub draws: usize,
    pub total: usize,
    /// True for the preview at the posterior mean (it understates uncertainty).
    pub preview: bool,
    /// Drawn without the conditions, because they clash and nothing better was there to show.
    pub without_conditions: bool,
    /// With reweighting (ALGORITHMS §8.4): the effective number of posterior draws.
    pub effective_draws: Option<f64>,
    /// With targets on the distribution: what tilting the paths did, or why it could not
    /// (the fans are then untilted).
    pub targets: Option<Result<String, String>>,
    /// Label of each horizon `x` from −history to h (index `x + history`).
    pub labels: Vec<String>,
    pub history: usize,
    /// The last observed period (horizon 0).
    pub last: Period,
}

impl Results {
    /// The period label of horizon `x`.
    pub fn label(&self, x: f64) -> Option<&str> {
        let k = x.round() as i64 + self.history as i64;
        usize::try_from(k)
            .ok()
            .and_then(|k| self.labels.get(k))
            .map(String::as_str)
    }
}

/// Messages from the worker; each carries the generation of its job.
#[derive(Debug, Clone)]
pub enum Message {
    State(u64, EngineState),
    Model(u64, String),
    Checks(u64, Box<CheckReport>),
    Results(u64, Arc<Results>),
    /// Where the scenario comes from, once all its draws are in.
    Sources(u64, Arc<Sources>),
    /// How each series' median moves when one condition is switched off (after the rest).
    LeaveOneOut(u64, Arc<Vec<Effect>>),
    Failed(u64, String),
}

/// The attribution of the scenario's mean shift, with how each series shows it.
#[derive(Debug, Clone, PartialEq)]
pub struct Sources {
    pub attribution: Attribution,
    /// Per series: the terms and the name of its units for the split
    /// ([`crate::report::attribution::linear_units`]).
    pub units: Vec<(Vec<(usize, f64)>, String)>,
    /// The shocks in identification order (the split by shock depends on it).
    pub ordering: Vec<String>,
    /// Peaks, troughs, changes and calendar-year averages with their bands.
    pub statistics: Vec<crate::report::Stat>,
}

impl Sources {
    /// The split and the statistics of a job's paths, drawn under `thetas`
    /// ([`crate::pipeline::summarise`]); `None` without a split (no paths kept).
    fn new(
        setup: &Setup,
        thetas: &[Theta],
        conditions: &Conditions,
        paths: &PathSet,
        paths_per_theta: usize,
    ) -> Result<Option<Sources>, String> {
        let s = crate::pipeline::summarise(setup, thetas, conditions, paths, paths_per_theta)
            .map_err(text)?;
        Ok(s.attribution.map(|attribution| Sources {
            statistics: s.statistics,
            units: (0..setup.n())
                .map(|i| crate::report::attribution::linear_units(setup, i))
                .collect(),
            ordering: setup
                .ordering
                .iter()
                .map(|&i| setup.names[i].clone())
                .collect(),
            attribution,
        }))
    }
}

/// Model-level work kept between jobs.
struct ModelCache {
    key: String,
    model: Model,
    /// Posterior draws, made after the first fans and the checks, then kept for edits.
    thetas: Option<ThetaSet>,
    /// The first tier's paths at the central θ, reused across edits.
    preview: Preview,
    model_line: String,
}

/// The worker's loop: take the newest job, run it, report.
pub fn run(rx: Receiver<Job>, tx: Sender<Message>, wake: impl Fn() + Send + 'static) {
    let mut cache: Option<ModelCache> = None;
    run_with(rx, tx, wake, move |job, send| {
        process(job, &mut cache, send)
    });
}

/// The loop with the work itself passed in (tests pass work that fails or panics). A job's
/// error becomes a `Failed` message; so does a panic, after which the loop goes on.
pub fn run_with(
    rx: Receiver<Job>,
    tx: Sender<Message>,
    wake: impl Fn() + Send + 'static,
    mut work: impl FnMut(&Job, &dyn Fn(Message)) -> Result<(), String>,
) {
    while let Ok(mut job) = rx.recv() {
        while let Ok(newer) = rx.try_recv() {
            job = newer;
        }
        let g = job.generation;
        let send = |m: Message| {
            let _ = tx.send(m);
            wake();
        };
        let outcome = catch_unwind(AssertUnwindSafe(|| work(&job, &send)));
        let failure = match outcome {
            Ok(Ok(())) => None,
            Ok(Err(message)) => Some(message),
            Err(panic) => {
                let text = panic
                    .downcast_ref::<&str>()
                    .map(|s| s.to_string())
                    .or_else(|| panic.downcast_ref::<String>().cloned())
                    .unwrap_or_else(|| "unknown cause".into());
                Some(format!(
                    "the engine stopped on an internal error ({text}); the scenario is unchanged, and the next edit starts it again"
                ))
            }
        };
        if let Some(message) = failure {
            send(Message::Failed(g, message));
            send(Message::State(g, EngineState::Failed));
        }
    }
}

/// Everything that decides the posterior draws: the file without its conditions, name,
/// narrative and how series are named and shown.
pub(crate) fn model_key(file: &ScenarioFile) -> String {
    let mut f = file.clone();
    f.pins.clear();
    f.corridors.clear();
    f.drivers = None;
    f.name.clear();
    f.narrative.clear();
    // The stationarity filter's floor decides which draws are kept; the other thresholds do not.
    f.checks = crate::scenario::CheckSettings {
        min_kept_share: file.checks.min_kept_share,
        ..Default::default()
    };
    f.reweight = false;
    for s in &mut f.series {
        s.display = Units::Level;
        s.label = None;
        s.unit = None;
    }
    crate::scenario::to_text(&f)
}

fn text(e: impl std::fmt::Display) -> String {
    e.to_string()
}

fn process(
    job: &Job,
    cache: &mut Option<ModelCache>,
    send: &dyn Fn(Message),
) -> Result<(), String> {
    let g = job.generation;
    let cancelled = || job.cancel.load(Ordering::Relaxed);
    let start = Instant::now();
    crate::scenario::setup::check_counts(&job.file).map_err(text)?;
    let setup = Setup::new(job.file.clone(), &job.path).map_err(text)?;
    let key = model_key(&job.file);
    if cache.as_ref().is_none_or(|c| c.key != key) {
        send(Message::State(g, EngineState::Estimating));
        *cache = Some(estimate(&setup, key)?);
    }
    let Some(model) = cache.as_mut() else {
        return Err("no model".into());
    };
    send(Message::Model(g, model.model_line.clone()));
    if cancelled() {
        return Ok(());
    }
    let (conditions, invalid) = read_conditions(&setup);
    // First fans fast: the preview at the central θ, before the checks (which take longer).
    // Invalid conditions are clashes; no preview is shown for them.
    let fixed = model.model.is_fixed();
    let total = if fixed { 0 } else { setup.file.draws };
    let publish = |model: &ModelCache, paths: &PathSet, without_conditions: bool| {
        let shocks = Shocks::of(paths, |_| &model.model.central)?;
        let mut r = results(
            &setup,
            &model.model.central,
            paths,
            &shocks,
            0,
            total,
            !fixed,
        );
        r.without_conditions = without_conditions;
        send(Message::Results(g, Arc::new(r)));
        Ok(())
    };
    // Fixed coefficients draw all their paths here: the first PREVIEW_PATHS of them are
    // summarised first, and all of them once the checks are out.
    let first = invalid.is_empty().then(|| {
        preview(&setup, &mut model.preview, &conditions, job).and_then(|paths| {
            if paths.conditional.len() > PREVIEW_PATHS {
                publish(model, &paths.first(PREVIEW_PATHS), false)?;
            } else {
                publish(model, &paths, false)?;
            }
            Ok(paths)
        })
    });
    if cancelled() {
        return Ok(());
    }
    send(Message::State(g, EngineState::Checking));
    let report = check_central(&setup, &model.model, &conditions, invalid);
    let clashes = report.clashes();
    send(Message::Checks(g, Box::new(report.clone())));
    if clashes {
        send(Message::State(g, EngineState::Clashing));
        // Something to look at when the window has no earlier fans (it keeps those if it has):
        // the forecast without the conditions.
        if !matches!(first, Some(Ok(_)))
            && let Ok(paths) = preview(&setup, &mut model.preview, &Conditions::default(), job)
        {
            publish(model, &paths, true).map_err(text)?;
        }
        return Ok(());
    }
    match first {
        // (Invalid conditions always clash: `None` does not get here.)
        None | Some(Err(crate::forecast::ForecastError::Cancelled)) => Ok(()),
        Some(Err(e)) => Err(e.to_string()),
        Some(Ok(paths)) if fixed => {
            if paths.conditional.len() > PREVIEW_PATHS {
                publish(model, &paths, false).map_err(text)?;
            }
            finish_fixed(
                &setup,
                &model.model.central,
                &conditions,
                &paths,
                job,
                send,
                start,
            )
        }
        Some(Ok(_)) => finish_estimated(&setup, model, &conditions, report, job, send, start),
    }
}

/// Fixed coefficients, once the checks are clear: the split of the scenario, done, then
/// each condition's effect on up to 1,000 of the central θ's paths.
fn finish_fixed(
    setup: &Setup,
    central_theta: &Theta,
    conditions: &Conditions,
    paths: &PathSet,
    job: &Job,
    send: &dyn Fn(Message),
    start: Instant,
) -> Result<(), String> {
    let g = job.generation;
    let central = std::slice::from_ref(central_theta);
    let count = paths.attempted;
    if let Some(sources) = Sources::new(setup, central, conditions, paths, count)? {
        send(Message::Sources(g, Arc::new(sources)));
    }
    send(Message::State(
        g,
        EngineState::Done {
            draws: 0,
            seconds: start.elapsed().as_secs_f64(),
            set_aside: 0,
        },
    ));
    // Fixed coefficients: the effects on up to 1,000 of the central θ's paths.
    let paths = (setup.file.draws * setup.file.paths_per_draw).min(1000);
    let single = ThetaSet::single(central_theta.clone());
    effects(
        setup,
        &single,
        conditions,
        sampling(&setup.file, paths),
        job,
        send,
    )?;
    Ok(())
}

/// An estimated model, once the checks at the central θ are clear: the posterior draws (made
/// once per model), the checks on the first of them, then the sampling.
fn finish_estimated(
    setup: &Setup,
    model: &mut ModelCache,
    conditions: &Conditions,
    mut report: CheckReport,
    job: &Job,
    send: &dyn Fn(Message),
    start: Instant,
) -> Result<(), String> {
    let g = job.generation;
    if model.thetas.is_none() {
        send(Message::State(g, EngineState::Drawing));
        match model.model.draw(setup, setup.file.draws, &job.cancel) {
            Ok(set) => model.thetas = Some(set),
            Err(PipelineError::Forecast(ForecastError::Cancelled)) => return Ok(()),
            Err(e) => return Err(e.to_string()),
        }
    }
    if let Some(set) = &model.thetas {
        let findings = report.findings.len();
        check_draws(setup, &mut report, set, conditions);
        if report.findings.len() > findings {
            let clashes = report.clashes();
            send(Message::Checks(g, Box::new(report)));
            if clashes {
                send(Message::State(g, EngineState::Clashing));
                return Ok(());
            }
        }
    }
    posterior(setup, model, conditions, job, send, start)
}

fn estimate(setup: &Setup, key: String) -> Result<ModelCache, String> {
    let model = Model::new(setup).map_err(text)?;
    let (fit, file) = (&model.fit, &setup.file);
    let preview_count = if model.is_fixed() {
        file.draws * file.paths_per_draw
    } else {
        PREVIEW_PATHS
    };
    let p = setup.lags();
    let model_line = match (fit, model.is_fixed()) {
        (_, true) => format!(
            "{} series · VAR({p}), fixed coefficients · {}–{}",
            setup.n(),
            setup.dataset.first_period(),
            setup.last_period()
        ),
        (Some(fit), false) => format!(
            "{} series · VAR({p}){} · {}T = {} · {} draws",
            setup.n(),
            fit.lambda
                .map(|l| format!(", Minnesota prior, tightness {l:.3}"))
                .unwrap_or_else(|| ", flat prior".into()),
            match setup.estimation_window() {
                Ok(Some((a, b))) => format!("{a}–{b}, "),
                _ => String::new(),
            },
            fit.observations,
            file.draws
        ),
        (None, false) => format!("{} series · VAR({p})", setup.n()),
    };
    Ok(ModelCache {
        key,
        preview: Preview::new(model.central.clone(), preview_count, file.seed),
        model,
        thetas: None,
        model_line,
    })
}

fn sampling(file: &ScenarioFile, paths_per_theta: usize) -> Sampling {
    Sampling {
        paths_per_theta,
        seed: file.seed,
        reweight: file.reweight,
        min_acceptance: file.checks.min_acceptance,
        engine: crate::crosscheck::EngineKind::Main,
    }
}

/// Tier 0: paths at the central θ alone (for fixed coefficients, all the paths there are),
/// reusing the randomness and, when only values changed, the plan of the previous edit.
fn preview(
    setup: &Setup,
    tier0: &mut Preview,
    conditions: &Conditions,
    job: &Job,
) -> Result<PathSet, crate::forecast::ForecastError> {
    let file = &setup.file;
    let mut paths = tier0.update(conditions, sampling(file, 1), &job.cancel)?;
    paths.keep_only(|p| crate::report::displayable(setup, p));
    paths.within(file.checks.max_failed_share)
}

/// Tier 1: posterior draws in blocks. Fans are refreshed when the draws done have doubled
/// since the last refresh (and at the end), so refreshing costs at most twice one summary of
/// all the paths, however many blocks there are.
fn posterior(
    setup: &Setup,
    model: &ModelCache,
    conditions: &Conditions,
    job: &Job,
    send: &dyn Fn(Message),
    start: Instant,
) -> Result<(), String> {
    let g = job.generation;
    let file = &setup.file;
    let Some(set) = &model.thetas else {
        return Err("no posterior draws".into());
    };
    let total = set.thetas.len();
    let mut all = PathSet::default();
    let mut shocks = Shocks::default();
    let mut done = 0;
    let mut shown = 0;
    while done < total {
        if job.cancel.load(Ordering::Relaxed) {
            return Ok(());
        }
        send(Message::State(g, EngineState::Sampling { done, total }));
        let end = (done + BLOCK).min(total);
        let block = sample_paths(
            set,
            done..end,
            conditions,
            sampling(file, file.paths_per_draw),
            &job.cancel,
        );
        let mut block = match block {
            Ok(b) => b,
            Err(crate::forecast::ForecastError::Cancelled) => return Ok(()),
            Err(e) => return Err(e.to_string()),
        };
        block.keep_only(|p| crate::report::displayable(setup, p));
        shocks.extend(Shocks::of(&block, |i| &set.thetas[i]).map_err(text)?);
        all.extend(block);
        done = end;
        if done == total || done >= 2 * shown {
            shown = done;
            send(Message::Results(
                g,
                Arc::new(results(
                    setup,
                    &model.model.central,
                    &all,
                    &shocks,
                    done,
                    total,
                    false,
                )),
            ));
        }
    }
    let all = all.within(file.checks.max_failed_share).map_err(text)?;
    // The attribution weights each draw as the fans do (by the scenario's probability when
    // reweighting).
    if let Some(sources) = Sources::new(setup, &set.thetas, conditions, &all, file.paths_per_draw)?
    {
        send(Message::Sources(g, Arc::new(sources)));
    }
    send(Message::State(
        g,
        EngineState::Done {
            draws: total - all.failures.len(),
            seconds: start.elapsed().as_secs_f64(),
            set_aside: all.failures.len(),
        },
    ));
    effects(
        setup,
        set,
        conditions,
        sampling(file, file.paths_per_draw),
        job,
        send,
    )
}

/// Last, in the background of a finished job: each condition's effect on the medians.
fn effects(
    setup: &Setup,
    set: &ThetaSet,
    conditions: &Conditions,
    how: Sampling,
    job: &Job,
    send: &dyn Fn(Message),
) -> Result<(), String> {
    if conditions.pins.is_empty() && conditions.corridors.is_empty() {
        return Ok(());
    }
    // An extra after the job is done: it never turns the job into a failure (every effect
    // carries its own error; a cancelled one just stops).
    if let Ok(e) = leave_one_out(setup, set, conditions, how, &job.cancel) {
        send(Message::LeaveOneOut(job.generation, Arc::new(e)));
    }
    Ok(())
}

/// The structural shocks behind each path, each under the θ that drew it.
#[derive(Default)]
struct Shocks {
    conditional: Vec<Vec<f64>>,
    unconditional: Vec<Vec<f64>>,
}

impl Shocks {
    /// Shocks of every path of `paths`, each under the θ that drew it (`theta(i)` for the
    /// source index `i`; paths of one θ are consecutive).
    fn of<'a>(
        paths: &PathSet,
        theta: impl Fn(usize) -> &'a Theta,
    ) -> Result<Shocks, crate::forecast::ForecastError> {
        let each = |list: &[Vec<f64>]| -> Result<Vec<Vec<f64>>, crate::forecast::ForecastError> {
            let mut out = Vec::with_capacity(list.len());
            let mut k = 0;
            while k < list.len() {
                let source = paths.sources.get(k).copied().unwrap_or(0);
                let run = paths.sources[k..]
                    .iter()
                    .take_while(|&&s| s == source)
                    .count();
                let run = run.max(1);
                out.extend(theta(source).shocks_from_paths(&list[k..k + run])?);
                k += run;
            }
            Ok(out)
        };
        Ok(Shocks {
            conditional: each(&paths.conditional)?,
            unconditional: each(&paths.unconditional)?,
        })
    }

    fn extend(&mut self, more: Shocks) {
        self.conditional.extend(more.conditional);
        self.unconditional.extend(more.unconditional);
    }
}

/// Fans of shock `j` over horizons 1…h from shocks stacked period by period (`n` per period),
/// weighted by path if `weights` are given.
fn shock_fans(
    all: &[Vec<f64>],
    weights: Option<&[f64]>,
    j: usize,
    n: usize,
    h: usize,
) -> Vec<FanPoint> {
    let mut values = Vec::with_capacity(all.len());
    (1..=h)
        .map(|t| {
            values.clear();
            values.extend(all.iter().map(|e| e[(t - 1) * n + j]));
            let (mean, q) = match weights {
                Some(w) => crate::report::weighted(&values, w),
                None => (
                    values.iter().sum::<f64>() / values.len().max(1) as f64,
                    crate::report::quantiles(&mut values),
                ),
            };
            FanPoint {
                x: t as f64,
                mean,
                q,
            }
        })
        .collect()
}

/// The structural shocks of the last `history` observed periods at `theta`, by horizon
/// (0 is the last observation); none when the data are too short or `L` cannot be inverted.
fn historical_shocks(setup: &Setup, theta: &Theta, history: usize) -> Vec<(f64, Vec<f64>)> {
    let first = -((history + theta.p()) as i64) + 1;
    let values: Vec<_> = (0..setup.n())
        .map(|i| crate::report::fans::model_value(setup, &[], i))
        .collect();
    let rows: Option<Vec<Vec<f64>>> = (first..=0)
        .map(|t| values.iter().map(|v| v(t)).collect())
        .collect();
    let Some(rows) = rows else {
        return Vec::new();
    };
    let Ok(eps) = theta.shocks_of_history(&rows) else {
        return Vec::new();
    };
    let start = first + theta.p() as i64;
    eps.into_iter()
        .enumerate()
        .map(|(k, e)| ((start + k as i64) as f64, e))
        .filter(|(_, e)| e.iter().all(|v| v.is_finite()))
        .collect()
}

/// Weights (none: equal), effective draws, and what the tilt did or why it could not.
type Weighting = (
    Option<Vec<f64>>,
    Option<f64>,
    Option<Result<String, String>>,
);

/// The conditional paths' weights: reweighting (each θ's weight shared by its paths; the
/// preview has one θ: no weights; the unconditional fans keep p(θ | data)), then the tilt
/// that meets targets on the distribution, as in a headless run. Also the effective number
/// of draws, and what the tilt did or why it could not (the weights are then untilted).
fn conditional_weights(setup: &Setup, paths: &PathSet) -> Weighting {
    let reweighted = (paths.log_weights.len() > 1)
        .then(|| crate::forecast::path_weights(&paths.log_weights, setup.file.paths_per_draw))
        .flatten();
    let (weights, effective_draws) = match reweighted {
        Some((w, ess)) => (Some(w), Some(ess)),
        None => (None, None),
    };
    let (weights, targets) = match tilt_paths(setup, &paths.conditional, weights.as_deref()) {
        Ok(Some((w, t))) => {
            let said = format!(
                "targets met by tilting: effective paths {:.0} of {}, divergence {:.2} nats",
                t.effective_paths, t.paths, t.divergence
            );
            (Some(w), Some(Ok(said)))
        }
        Ok(None) => (weights, None),
        Err(e) => (
            weights,
            Some(Err(format!("targets not met, fans untilted: {e}"))),
        ),
    };
    (weights, effective_draws, targets)
}

/// Fans and history of every series in display units, and fans of every shock with the
/// model's own historical shocks at the central θ.
fn results(
    setup: &Setup,
    central: &Theta,
    paths: &PathSet,
    shocks: &Shocks,
    draws: usize,
    total: usize,
    preview: bool,
) -> Results {
    let (weights, effective_draws, targets) = conditional_weights(setup, paths);
    let cond = fans(
        setup,
        &paths.conditional,
        weights.as_deref(),
        Kind::Conditional,
    );
    let uncond = fans(setup, &paths.unconditional, None, Kind::Unconditional);
    let h = setup.file.horizon;
    let history = HISTORY_YEARS * setup.periods_per_year();
    let history = history.min(setup.dataset.len().saturating_sub(1));
    let point = |r: &FanRow| FanPoint {
        x: r.horizon as f64,
        mean: r.mean,
        q: r.quantiles,
    };
    let last = setup.last_period();
    let labels = (-(history as i64)..=h as i64)
        .map(|t| last.offset(t).to_string())
        .collect();
    let series = (0..setup.n())
        .map(|i| {
            let x = crate::report::fans::model_value(setup, &[], i);
            let mut hist: Vec<(f64, f64)> = (-(history as i64)..=0)
                .filter_map(|t| {
                    display_value(
                        setup.display[i],
                        setup.transforms[i],
                        setup.periods_per_year(),
                        t,
                        &x,
                    )
                    .map(|v| (t as f64, v))
                })
                .collect();
            hist.retain(|(_, v)| v.is_finite());
            let pick = |rows: &[FanRow]| -> Vec<FanPoint> {
                rows.iter()
                    .filter(|r| r.series == setup.names[i])
                    .map(point)
                    .collect()
            };
            SeriesView {
                name: setup.names[i].clone(),
                subject: Subject::Series,
                units: setup.display[i],
                history: hist,
                conditional: pick(&cond),
                unconditional: pick(&uncond),
            }
        })
        .collect();
    let n = setup.n();
    let past = historical_shocks(setup, central, history);
    let shocks = (0..n)
        .map(|j| SeriesView {
            name: setup.names[j].clone(),
            subject: Subject::Shock,
            units: Units::Level,
            history: past.iter().map(|(t, e)| (*t, e[j])).collect(),
            conditional: shock_fans(&shocks.conditional, weights.as_deref(), j, n, h),
            unconditional: shock_fans(&shocks.unconditional, None, j, n, h),
        })
        .collect();
    Results {
        series,
        shocks,
        draws,
        total,
        preview,
        without_conditions: false,
        effective_draws,
        targets,
        labels,
        history,
        last,
    }
}
