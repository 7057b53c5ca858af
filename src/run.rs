//! The headless run: scenario → model → draws → fans, with a short summary.
//! Used by `tiltyard run` and by the end-to-end tests.

use std::sync::atomic::AtomicBool;
use std::time::{Duration, Instant};

use crate::forecast::{ForecastError, ParamSource, PathSet, Sampling, build_thetas, sample_paths};
use crate::model::FitSummary;
use crate::report::{FanRow, Kind, fans};
use crate::scenario::{ModelSpec, ScenarioError, Setup};

/// Every path must meet every pin to this relative error (ALGORITHMS §11.4).
pub const PIN_TOLERANCE: f64 = 1e-9;

/// Overrides from the command line.
#[derive(Debug, Clone, Default)]
pub struct RunOptions {
    pub draws: Option<usize>,
    pub seed: Option<u64>,
    pub paths_per_draw: Option<usize>,
}

/// Errors of a run.
#[derive(Debug, thiserror::Error)]
pub enum RunError {
    #[error(transparent)]
    Scenario(#[from] ScenarioError),
    #[error(transparent)]
    Forecast(#[from] ForecastError),
}

/// What a run produced.
#[derive(Debug, Clone)]
pub struct RunOutcome {
    pub paths: PathSet,
    pub fans: Vec<FanRow>,
    pub fit: Option<FitSummary>,
    pub posterior_draws: usize,
    pub explosive: usize,
    pub median_root: f64,
    pub elapsed: Duration,
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
        thetas_wanted,
        file.seed,
        &cancel,
    )?;
    let how = Sampling {
        paths_per_theta,
        seed: file.seed,
        reweight: file.reweight,
    };
    let paths = sample_paths(&set, 0..set.thetas.len(), &conditions, how, &cancel)?;
    let mut rows = fans(setup, &paths.conditional, Kind::Conditional);
    rows.extend(fans(setup, &paths.unconditional, Kind::Unconditional));
    Ok(RunOutcome {
        fans: rows,
        fit,
        posterior_draws: if matches!(source, ParamSource::Fixed(_)) {
            0
        } else {
            set.thetas.len()
        },
        explosive: set.explosive,
        median_root: set.median_root,
        elapsed: start.elapsed(),
        paths,
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
    let drivers = match &file.drivers {
        None => "all shocks drive".to_string(),
        Some(d) => format!("drivers: {}", d.join(", ")),
    };
    let met = if out.paths.max_pin_error <= PIN_TOLERANCE {
        "met in every path"
    } else {
        "NOT MET to tolerance"
    };
    s.push(format!(
        "checks     {pins} pins {met} (largest relative error {:.1e}); {drivers}",
        out.paths.max_pin_error
    ));
    if out.posterior_draws > 0 {
        let share = 100.0 * out.explosive as f64 / out.posterior_draws as f64;
        s.push(format!(
            "           explosive posterior draws (largest root modulus > 1): {} of {} ({share:.1}%), kept; median largest root {:.4}",
            out.explosive, out.posterior_draws, out.median_root
        ));
    }
    s.push(format!("time       {:.2} s", out.elapsed.as_secs_f64()));
    s.join("\n")
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
