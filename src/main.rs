//! The `tiltyard` command: thin dispatch to the library.

use std::path::{Path, PathBuf};
use std::process::ExitCode;

use anyhow::Context;
use clap::{Parser, Subcommand};

use tiltyard::compare::{changes_text, compare, write_compare};
use tiltyard::crosscheck::EngineKind;
use tiltyard::report::{
    CAUTION, COMMAND_FILES, Outputs, Stamp, check_text, write_about, write_attribution,
    write_checks_json, write_draws, write_fans, write_summary,
};
use tiltyard::run::{RunError, RunOptions, check, run, summary};

/// Design macro-financial stress-test scenarios: conditional forecasts from a Bayesian VAR.
/// Without a command, opens the scenario window (on the demo scenario unless one is given).
#[derive(Parser)]
#[command(
    name = "tiltyard",
    version,
    about,
    args_conflicts_with_subcommands = true
)]
struct Cli {
    #[command(subcommand)]
    command: Option<Command>,
    /// A scenario file to open in the window.
    scenario: Option<PathBuf>,
    /// A second scenario on the same series to compare it with, in the window.
    #[arg(long)]
    compare: Option<PathBuf>,
}

#[derive(Subcommand)]
enum Command {
    /// Run a scenario headless: estimate, sample, write fans.csv (and draws.csv).
    Run {
        /// The scenario file (RON).
        scenario: PathBuf,
        /// Posterior draws (paths, for fixed coefficients); overrides the file.
        #[arg(long)]
        draws: Option<usize>,
        /// Conditional paths per posterior draw; overrides the file.
        #[arg(long)]
        paths_per_draw: Option<usize>,
        /// Random seed; overrides the file.
        #[arg(long)]
        seed: Option<u64>,
        /// Worker threads: 0 or absent for one per core, at most the machine's cores.
        /// Results do not depend on it.
        #[arg(long)]
        threads: Option<usize>,
        /// Output folder.
        #[arg(long, default_value = "out")]
        out: PathBuf,
        /// Also write every path to draws.csv.
        #[arg(long)]
        keep_draws: bool,
        /// The engine that draws the paths: main, or a cross-check (dense: the full
        /// covariance; kalman: filter and simulation smoother, pins only; rejection: naive
        /// acceptance–rejection for corridors).
        #[arg(long, value_enum, default_value = "main")]
        engine: EngineArg,
        /// With --engine rejection: proposals tried for one path before giving up.
        #[arg(long, default_value_t = 1_000_000)]
        proposal_cap: usize,
    },
    /// Compare two scenarios on the same series: their conditions side by side, and by series
    /// and period the second's fan against the first's and the difference (compare.csv,
    /// compare-summary.csv, compare.txt).
    Compare {
        /// The first scenario (for example the baseline).
        first: PathBuf,
        /// The second scenario (for example the adverse one).
        second: PathBuf,
        /// Posterior draws (paths, for fixed coefficients) of both; overrides the files.
        #[arg(long)]
        draws: Option<usize>,
        /// Random seed of both; overrides the files.
        #[arg(long)]
        seed: Option<u64>,
        /// Worker threads: 0 or absent for one per core, at most the machine's cores.
        /// Results do not depend on it.
        #[arg(long)]
        threads: Option<usize>,
        /// Output folder.
        #[arg(long, default_value = "out")]
        out: PathBuf,
    },
    /// Export a briefing pack: a chart per series, where the conditioned series' moves come
    /// from, the tables, and briefing.html (one self-contained page to read or print).
    Export {
        /// The scenario file (RON).
        scenario: PathBuf,
        /// A second scenario on the same series to compare it with.
        #[arg(long)]
        compare: Option<PathBuf>,
        /// Posterior draws (paths, for fixed coefficients); overrides the file(s).
        #[arg(long)]
        draws: Option<usize>,
        /// Random seed; overrides the file(s).
        #[arg(long)]
        seed: Option<u64>,
        /// Worker threads: 0 or absent for one per core, at most the machine's cores.
        /// Results do not depend on it.
        #[arg(long)]
        threads: Option<usize>,
        /// Output folder.
        #[arg(long, default_value = "briefing")]
        out: PathBuf,
    },
    /// Reverse stress test: the most plausible way for a series to reach a threshold (at
    /// most, or at least) at some period of a range, with any other outcomes (--also),
    /// keeping the scenario's pins, corridors and drivers; writes it as a new scenario beside
    /// the first, with each outcome that binds pinned where it happens.
    Reverse {
        /// The scenario file (RON).
        scenario: PathBuf,
        /// The series of the outcome.
        #[arg(long)]
        series: String,
        /// Its units, as in a scenario file (level, year_on_year, annualised, pct_change,
        /// difference, "average(4)").
        #[arg(long, default_value = "level")]
        units: String,
        /// The outcome is the series at or below this value.
        #[arg(long, allow_hyphen_values = true, conflicts_with = "at_least")]
        at_most: Option<f64>,
        /// The outcome is the series at or above this value.
        #[arg(long, allow_hyphen_values = true)]
        at_least: Option<f64>,
        /// First period the outcome may happen at.
        #[arg(long)]
        from: String,
        /// Last period the outcome may happen at (default: the first).
        #[arg(long)]
        to: Option<String>,
        /// Another outcome to reach together with the first (repeatable), written
        /// "SERIES UNITS at-most|at-least VALUE FROM [TO]", e.g.
        /// "unemployment level at-least 8 2027Q1 2027Q4".
        #[arg(long, allow_hyphen_values = true)]
        also: Vec<String>,
        /// Where to write the new scenario (default: beside the first, "-reverse" added).
        #[arg(long)]
        out: Option<PathBuf>,
    },
    /// Check a scenario: clashes, strain, the conditions to blame and the plausibility;
    /// prints the report and writes checks.json. Exit status 2 when the conditions clash.
    Check {
        /// The scenario file (RON).
        scenario: PathBuf,
        /// Random seed of the probability estimates; overrides the file.
        #[arg(long)]
        seed: Option<u64>,
        /// Output folder.
        #[arg(long, default_value = "out")]
        out: PathBuf,
    },
}

#[derive(Clone, Copy, clap::ValueEnum)]
enum EngineArg {
    Main,
    Dense,
    Kalman,
    Rejection,
}

impl EngineArg {
    fn kind(self, cap: usize) -> EngineKind {
        match self {
            EngineArg::Main => EngineKind::Main,
            EngineArg::Dense => EngineKind::Dense,
            EngineArg::Kalman => EngineKind::Kalman,
            EngineArg::Rejection => EngineKind::Rejection { cap: cap.max(1) },
        }
    }
}

/// Exit status when the scenario's conditions clash (1 is any other error).
const CLASH_EXIT: u8 = 2;

/// How a command ended.
enum Outcome {
    Done,
    Clash,
}

fn main() -> ExitCode {
    tiltyard::keep_freed_memory();
    let cli = Cli::parse();
    let result = match cli.command {
        Some(Command::Run {
            scenario,
            draws,
            paths_per_draw,
            seed,
            threads,
            out,
            keep_draws,
            engine,
            proposal_cap,
        }) => run_command(
            scenario,
            RunOptions {
                draws,
                seed,
                paths_per_draw,
                engine: engine.kind(proposal_cap),
            },
            threads,
            out,
            keep_draws,
        ),
        Some(Command::Check {
            scenario,
            seed,
            out,
        }) => check_command(scenario, seed, out),
        Some(Command::Export {
            scenario,
            compare,
            draws,
            seed,
            threads,
            out,
        }) => export_command(
            scenario,
            compare,
            RunOptions {
                draws,
                seed,
                ..RunOptions::default()
            },
            threads,
            out,
        ),
        Some(Command::Compare {
            first,
            second,
            draws,
            seed,
            threads,
            out,
        }) => compare_command(
            [first, second],
            RunOptions {
                draws,
                seed,
                ..RunOptions::default()
            },
            threads,
            out,
        ),
        Some(Command::Reverse {
            scenario,
            series,
            units,
            at_most,
            at_least,
            from,
            to,
            also,
            out,
        }) => reverse_command(
            scenario,
            series,
            &units,
            (at_most, at_least),
            (from, to),
            &also,
            out,
        ),
        None => window(cli.scenario, cli.compare),
    };
    match result {
        Ok(Outcome::Done) => ExitCode::SUCCESS,
        Ok(Outcome::Clash) => ExitCode::from(CLASH_EXIT),
        Err(e) => {
            eprintln!("error: {e:#}");
            ExitCode::FAILURE
        }
    }
}

/// The demo scenario the window opens by default: beside the working folder when run from
/// the project, else where the project was built.
fn demo_scenario() -> PathBuf {
    let here = PathBuf::from("scenarios-demo/adverse.ron");
    if here.exists() {
        return here;
    }
    Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios-demo/adverse.ron")
}

#[cfg(feature = "gui")]
fn window(scenario: Option<PathBuf>, compare: Option<PathBuf>) -> anyhow::Result<Outcome> {
    let path = scenario.unwrap_or_else(demo_scenario);
    tiltyard::app::run_window(path, compare).map_err(|e| {
        anyhow::anyhow!(
            "cannot open the window ({e}). Without a display, use the headless commands: tiltyard run SCENARIO, tiltyard check SCENARIO (see tiltyard --help)"
        )
    })?;
    Ok(Outcome::Done)
}

#[cfg(not(feature = "gui"))]
fn window(scenario: Option<PathBuf>, _compare: Option<PathBuf>) -> anyhow::Result<Outcome> {
    let path = scenario.unwrap_or_else(demo_scenario);
    anyhow::bail!(
        "this build has no window (built without the gui feature); run {} headless with: tiltyard run {}",
        path.display(),
        path.display()
    )
}

/// The worker pool: `--threads N`, 0 or absent for one per core. More threads than cores
/// only slow the run down (and a huge count would exhaust the machine), so N is capped at
/// the machine's cores, with a note.
fn pool(threads: Option<usize>) -> anyhow::Result<rayon::ThreadPool> {
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    let wanted = threads.filter(|&t| t > 0).unwrap_or(cores);
    if wanted > cores {
        eprintln!(
            "note: --threads {wanted} is more than this machine's {cores} cores; using {cores}"
        );
    }
    rayon::ThreadPoolBuilder::new()
        .num_threads(wanted.min(cores))
        .build()
        .context("cannot start worker threads")
}

/// Print what a command wrote and the stale files it removed.
fn wrote(outputs: &Outputs) -> anyhow::Result<()> {
    let removed = outputs.remove_stale(COMMAND_FILES)?;
    let wrote: Vec<String> = outputs
        .written()
        .iter()
        .map(|p| p.display().to_string())
        .collect();
    println!("wrote      {}", wrote.join(", "));
    if !removed.is_empty() {
        println!(
            "removed    {} (an earlier run's, not rewritten by this one)",
            removed.join(", ")
        );
    }
    Ok(())
}

fn check_command(scenario: PathBuf, seed: Option<u64>, out: PathBuf) -> anyhow::Result<Outcome> {
    let mut setup = tiltyard::scenario::load(&scenario)?;
    let mut outputs = Outputs::prepare(&out)?;
    if let Some(s) = seed {
        setup.file.seed = s;
    }
    let stamp = Stamp::new(&setup.file.name, &scenario);
    let report = check(&setup)?;
    outputs.write("checks.json", |p| write_checks_json(p, &stamp, &report))?;
    println!("scenario   {} ({})", setup.file.name, scenario.display());
    println!("{}", check_text(&report));
    wrote(&outputs)?;
    println!("\n{CAUTION}");
    Ok(if report.clashes() {
        Outcome::Clash
    } else {
        Outcome::Done
    })
}

fn reverse_command(
    scenario: PathBuf,
    series: String,
    units: &str,
    bound: (Option<f64>, Option<f64>),
    (from, to): (String, Option<String>),
    also: &[String],
    out: Option<PathBuf>,
) -> anyhow::Result<Outcome> {
    use tiltyard::reverse::{self, Outcome as Wanted};
    let setup = tiltyard::scenario::load(&scenario)?;
    let units_of = |text: &str, what: &str| -> anyhow::Result<tiltyard::scenario::Units> {
        ron::from_str(text)
            .map_err(|e| anyhow::anyhow!("{what} {text}: not a unit of a scenario file ({e})"))
    };
    let (threshold, at_most) = match bound {
        (Some(c), None) => (c, true),
        (None, Some(c)) => (c, false),
        _ => anyhow::bail!("give the outcome's threshold with --at-most or --at-least"),
    };
    let mut wanted = vec![Wanted {
        series,
        units: units_of(units, "--units")?,
        threshold,
        at_most,
        to: to.unwrap_or_else(|| from.clone()),
        from,
    }];
    for text in also {
        let words: Vec<&str> = text.split_whitespace().collect();
        let bad = || {
            anyhow::anyhow!(
                "--also \"{text}\": write SERIES UNITS at-most|at-least VALUE FROM [TO], e.g. \"unemployment level at-least 8 2027Q1 2027Q4\""
            )
        };
        let (&[series, units, side, value, from], to) = (
            words
                .get(..5)
                .and_then(|w| <&[&str; 5]>::try_from(w).ok())
                .ok_or_else(bad)?,
            words.get(5).copied(),
        );
        if words.len() > 6 {
            return Err(bad());
        }
        wanted.push(Wanted {
            series: series.to_string(),
            units: units_of(units, "--also")?,
            threshold: value.parse().map_err(|_| bad())?,
            at_most: match side {
                "at-most" => true,
                "at-least" => false,
                _ => return Err(bad()),
            },
            from: from.to_string(),
            to: to.unwrap_or(from).to_string(),
        });
    }
    let model = tiltyard::pipeline::Model::new(&setup)?;
    let found = reverse::reverse(&setup, &model.central, &wanted)?;
    println!("scenario   {} ({})", setup.file.name, scenario.display());
    for w in &wanted {
        println!(
            "outcome    {}, from {} to {}",
            reverse::describe(w),
            w.from,
            w.to
        );
    }
    for (periods, r) in &found.tried {
        let at = periods.join(", ");
        match r {
            Ok(d) => println!("  {at}  ½ε'ε = {d:.3} nats"),
            Err(why) => println!("  {at}  out of reach: {why}"),
        }
    }
    for line in reverse::summary_lines(&setup, &wanted, &found) {
        println!("{line}");
    }
    println!("(at {})", model.central_label);
    let period = &found.at[0].0;
    let t = setup.horizon_of(period, "period")?;
    let at: Vec<String> = reverse::path_table(&setup, &found)
        .iter()
        .map(|(name, v)| format!("{name} {:.2}", v[t - 1]))
        .collect();
    println!("path at {period} (display units): {}", at.join(", "));
    let path = out.unwrap_or_else(|| {
        let stem = scenario
            .file_stem()
            .map_or("scenario".into(), |s| s.to_string_lossy());
        scenario.with_file_name(format!("{stem}-reverse.ron"))
    });
    // Written elsewhere, a relative dataset path is rewritten to point at the same file.
    let written = tiltyard::scenario::layout::write_scenario(&scenario, &path, &found.scenario)
        .with_context(|| format!("cannot write {}", path.display()))?;
    let new = tiltyard::scenario::Setup::new(written, &path)?;
    let report = check(&new)?;
    if let Some(h) = &report.against_history {
        println!("history    {}", h.reading);
    }
    println!(
        "wrote      {} (each outcome that binds pinned where it happens: edit it further)",
        path.display()
    );
    println!("\n{CAUTION}");
    Ok(Outcome::Done)
}

fn run_command(
    scenario: PathBuf,
    options: RunOptions,
    threads: Option<usize>,
    out: PathBuf,
    keep_draws: bool,
) -> anyhow::Result<Outcome> {
    let pool = pool(threads)?;
    let mut setup = tiltyard::scenario::load(&scenario)?;
    let mut outputs = Outputs::prepare(&out)?;
    let outcome = match pool.install(|| run(&mut setup, &options)) {
        Ok(outcome) => outcome,
        Err(RunError::Clash(report)) => {
            let stamp = Stamp::new(&setup.file.name, &scenario);
            outputs.write("checks.json", |p| write_checks_json(p, &stamp, &report))?;
            println!("scenario   {} ({})", setup.file.name, scenario.display());
            println!("{}", check_text(&report));
            println!("nothing sampled: the conditions clash");
            wrote(&outputs)?;
            return Ok(Outcome::Clash);
        }
        Err(e) => return Err(e.into()),
    };
    let stamp = &outcome.stamp;
    outputs.write("fans.csv", |p| write_fans(p, stamp, &outcome.fans))?;
    outputs.write("summary.csv", |p| write_summary(p, stamp, &outcome.summary))?;
    outputs.write("checks.json", |p| {
        write_checks_json(p, stamp, &outcome.checks)
    })?;
    if let Some(a) = &outcome.attribution {
        outputs.write("attribution.csv", |p| {
            write_attribution(p, stamp, &setup, a)
        })?;
    }
    if keep_draws {
        outputs.write("draws.csv", |p| {
            write_draws(
                p,
                stamp,
                &setup,
                &outcome.paths.conditional,
                outcome.weights.as_deref(),
            )
        })?;
    }
    let text = summary(&setup, &outcome);
    outputs.write("about.txt", |p| write_about(p, stamp, &text))?;
    println!("{text}");
    wrote(&outputs)?;
    println!("\n{CAUTION}");
    Ok(Outcome::Done)
}

fn compare_command(
    files: [PathBuf; 2],
    options: RunOptions,
    threads: Option<usize>,
    out: PathBuf,
) -> anyhow::Result<Outcome> {
    let pool = pool(threads)?;
    let mut outputs = Outputs::prepare(&out)?;
    let Some((a, run_a)) = run_or_report(&files[0], &options, &pool)? else {
        return Ok(Outcome::Clash);
    };
    let Some((b, run_b)) = run_or_report(&files[1], &options, &pool)? else {
        return Ok(Outcome::Clash);
    };
    let comparison = compare(&a, &run_a, &b, &run_b)?;
    let stamp = &comparison.stamp;
    outputs.write("compare.csv", |p| write_compare(p, stamp, &comparison))?;
    outputs.write("compare-summary.csv", |p| {
        write_summary(p, stamp, &comparison.statistics)
    })?;
    let text = changes_text(&comparison);
    outputs.write("compare.txt", |p| write_about(p, stamp, &text))?;
    println!("{text}");
    wrote(&outputs)?;
    println!("\n{CAUTION}");
    Ok(Outcome::Done)
}

/// Run a scenario; a clash is printed and gives `None`.
fn run_or_report(
    file: &Path,
    options: &RunOptions,
    pool: &rayon::ThreadPool,
) -> anyhow::Result<Option<(tiltyard::scenario::Setup, tiltyard::run::RunOutcome)>> {
    let mut setup = tiltyard::scenario::load(file)?;
    match pool.install(|| run(&mut setup, options)) {
        Ok(outcome) => Ok(Some((setup, outcome))),
        Err(RunError::Clash(report)) => {
            println!("scenario   {} ({})", setup.file.name, file.display());
            println!("{}", check_text(&report));
            println!(
                "nothing written: the conditions of {} clash",
                file.display()
            );
            Ok(None)
        }
        Err(e) => Err(anyhow::Error::new(e).context(format!("{}", file.display()))),
    }
}

fn export_command(
    scenario: PathBuf,
    other: Option<PathBuf>,
    options: RunOptions,
    threads: Option<usize>,
    out: PathBuf,
) -> anyhow::Result<Outcome> {
    let pool = pool(threads)?;
    Outputs::prepare(&out)?;
    let Some((setup, outcome)) = run_or_report(&scenario, &options, &pool)? else {
        return Ok(Outcome::Clash);
    };
    let comparison = match &other {
        None => None,
        Some(file) => {
            let Some((b, run_b)) = run_or_report(file, &options, &pool)? else {
                return Ok(Outcome::Clash);
            };
            Some(compare(&setup, &outcome, &b, &run_b)?)
        }
    };
    let written = pool.install(|| {
        tiltyard::report::pack::write_pack(&out, &setup, &outcome, comparison.as_ref(), &|_| {})
    })?;
    println!("scenario   {} ({})", setup.file.name, scenario.display());
    println!(
        "wrote      {} files in {}, to read: {}",
        written.len(),
        out.display(),
        out.join("briefing.html").display()
    );
    println!("\n{CAUTION}");
    Ok(Outcome::Done)
}
