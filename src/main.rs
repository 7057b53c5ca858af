//! The `tiltyard` command: thin dispatch to the library.

use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::Context;
use clap::{Parser, Subcommand};

use tiltyard::report::{CAUTION, write_about, write_draws, write_fans};
use tiltyard::run::{RunOptions, run, summary};

/// Design macro-financial stress-test scenarios: conditional forecasts from a Bayesian VAR.
#[derive(Parser)]
#[command(name = "tiltyard", version, about)]
struct Cli {
    #[command(subcommand)]
    command: Option<Command>,
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
        /// Worker threads (default: all cores). Results do not depend on it.
        #[arg(long)]
        threads: Option<usize>,
        /// Output folder.
        #[arg(long, default_value = "out")]
        out: PathBuf,
        /// Also write every path to draws.csv.
        #[arg(long)]
        keep_draws: bool,
    },
}

fn main() -> ExitCode {
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
        }) => run_command(
            scenario,
            RunOptions {
                draws,
                seed,
                paths_per_draw,
            },
            threads,
            out,
            keep_draws,
        ),
        None => {
            println!(
                "The scenario window is not built yet. Run a scenario headless:\n  tiltyard run scenarios-demo/baseline.ron\n(see tiltyard --help)"
            );
            Ok(())
        }
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("error: {e:#}");
            ExitCode::FAILURE
        }
    }
}

fn run_command(
    scenario: PathBuf,
    options: RunOptions,
    threads: Option<usize>,
    out: PathBuf,
    keep_draws: bool,
) -> anyhow::Result<()> {
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads.unwrap_or(0))
        .build()
        .context("cannot start worker threads")?;
    let mut setup = tiltyard::scenario::load(&scenario)?;
    let outcome = pool.install(|| run(&mut setup, &options))?;
    std::fs::create_dir_all(&out).with_context(|| format!("cannot create {}", out.display()))?;
    write_fans(&out.join("fans.csv"), &outcome.fans)?;
    if keep_draws {
        write_draws(&out.join("draws.csv"), &setup, &outcome.paths.conditional)?;
    }
    let text = summary(&setup, &outcome);
    write_about(&out.join("about.txt"), &text)?;
    println!("{text}");
    println!(
        "wrote      {}{}",
        out.join("fans.csv").display(),
        if keep_draws {
            format!(", {}", out.join("draws.csv").display())
        } else {
            String::new()
        }
    );
    println!("\n{CAUTION}");
    Ok(())
}
