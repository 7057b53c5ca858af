//! The engines side by side at the sizes scenario teams use, on the invented panels of
//! `benches/data/` (made by `make_panels.py`): S (8 series, 4 lags, 12 periods, 3 pins), M (20
//! series, 20 periods, 5 pins, corridors on 3 series over all periods), L (40 series, 20
//! periods, 3 pins, one corridor over all periods), each estimated (Minnesota prior, tightness
//! by marginal likelihood) and with fixed coefficients; plus the adverse demo.
//!
//! Every measurement runs in a fresh process (this program started again with
//! `TILTYARD_BENCH_CASE` set), so a cold start is cold and the peak memory (`VmHWM`) is that
//! case's alone. Printed: the machine, one table, then ratios and targets.
//!
//! Run: `cargo bench --bench engines` (about ten minutes on two cores).

use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::Arc;
use std::sync::atomic::AtomicBool;
use std::sync::mpsc::channel;
use std::time::{Duration, Instant};

use nalgebra::DMatrix;
use tiltyard::app::files::Pick;
use tiltyard::app::worker::{self, EngineState, Job, Message, PREVIEW_PATHS};
use tiltyard::crosscheck::EngineKind;
use tiltyard::forecast::engine::root_sample;
use tiltyard::forecast::{ParamSource, Sampling, Theta, ThetaSet, preview::Preview, sample_paths};
use tiltyard::report::{Kind, fans};
use tiltyard::run::{RunOptions, run};
use tiltyard::scenario::{self, ScenarioFile};

/// Edits timed per case (the median is reported).
const EDITS: usize = 11;

fn data(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("benches/data")
        .join(name)
}

fn machine() -> String {
    let cpu = std::fs::read_to_string("/proc/cpuinfo")
        .ok()
        .and_then(|t| {
            t.lines()
                .find(|l| l.starts_with("model name"))
                .map(|l| l.split(':').nth(1).unwrap_or("").trim().to_string())
        })
        .unwrap_or_else(|| "unknown CPU".into());
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    let mem = std::fs::read_to_string("/proc/meminfo")
        .ok()
        .and_then(|t| {
            t.lines()
                .next()
                .map(|l| l.split_whitespace().nth(1).unwrap_or("0").to_string())
        })
        .and_then(|kb| kb.parse::<f64>().ok())
        .map_or(String::new(), |kb| format!(", {:.0} GiB", kb / 1048576.0));
    format!("{cpu}, {cores} cores{mem}")
}

fn peak_mb() -> f64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|t| {
            t.lines()
                .find(|l| l.starts_with("VmHWM"))
                .and_then(|l| l.split_whitespace().nth(1).map(str::to_string))
        })
        .and_then(|kb| kb.parse::<f64>().ok())
        .map_or(f64::NAN, |kb| kb / 1024.0)
}

fn median(v: &mut [Duration]) -> Duration {
    v.sort();
    v[v.len() / 2]
}

fn engine(name: &str) -> EngineKind {
    match name {
        "dense" => EngineKind::Dense,
        "kalman" => EngineKind::Kalman,
        "rejection" => EngineKind::Rejection { cap: 100_000 },
        _ => EngineKind::Main,
    }
}

/// A scenario file, optionally without its corridors (for the Kalman engine).
fn scenario_file(file: &str, pins_only: bool) -> (ScenarioFile, PathBuf) {
    let path = data(file);
    let mut f = scenario::read(&path).expect("benchmark scenario");
    if pins_only {
        f.corridors.clear();
    }
    (f, path)
}

/// Setup from a file object (written beside the original so the dataset resolves).
fn load(f: &ScenarioFile, path: &Path) -> scenario::Setup {
    scenario::Setup::new(f.clone(), path).expect("benchmark setup")
}

// ---- the measurements, each run in a child process --------------------------------------

/// `run:FILE:ENGINE:THREADS[:pins|all[:DRAWS]]`: the headless run (estimation included).
fn child_run(args: &[&str]) -> String {
    let (file, eng, threads) = (args[0], args[1], args[2].parse::<usize>().unwrap_or(2));
    let draws = args.get(4).and_then(|d| d.parse::<usize>().ok());
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build_global()
        .expect("thread pool");
    let (f, path) = scenario_file(file, args.get(3) == Some(&"pins"));
    let options = RunOptions {
        engine: engine(eng),
        draws,
        ..RunOptions::default()
    };
    // A run under a second is repeated (five in all) and the median kept: one such run is at
    // the mercy of the machine's noise (±30% here).
    let mut times = Vec::new();
    loop {
        let start = Instant::now();
        let mut setup = load(&f, &path);
        match run(&mut setup, &options) {
            Ok(out) => {
                times.push(start.elapsed());
                if times.len() == 5 || times[0] > Duration::from_secs(1) {
                    return format!(
                        "secs={:.3} peak={:.0} paths={} proposals={} failed={}",
                        median(&mut times).as_secs_f64(),
                        peak_mb(),
                        out.paths.conditional.len(),
                        out.paths.proposals,
                        out.paths.failures.len()
                    );
                }
            }
            Err(e) => return format!("error={}", e.to_string().replace(' ', "_")),
        }
    }
}

/// `window:FILE`: the window's worker from a cold start to its first fans and to all draws,
/// then edits of the first pin with the model cached (median time to first fans).
fn child_window(args: &[&str]) -> String {
    let (mut f, path) = scenario_file(args[0], false);
    let (jobs, job_rx) = channel();
    let (tx, rx) = channel();
    std::thread::spawn(move || worker::run(job_rx, tx, || {}));
    let mut first = Vec::new();
    let mut cold = (Duration::ZERO, Duration::ZERO);
    let base = f.pins[0].value;
    // As the window does: a new job cancels the one before (which may still be measuring
    // each condition's effect after its draws).
    let mut cancel = Arc::new(AtomicBool::new(false));
    for g in 1..=(EDITS as u64 + 1) {
        f.pins[0].value = base + 0.01 * g as f64;
        cancel.store(true, std::sync::atomic::Ordering::Relaxed);
        cancel = Arc::new(AtomicBool::new(false));
        let start = Instant::now();
        jobs.send(Job {
            generation: g,
            file: f.clone(),
            path: path.clone(),
            cancel: cancel.clone(),
        })
        .expect("worker");
        let mut fans_at = None;
        loop {
            match rx.recv().expect("worker answers") {
                Message::Results(m, _) if m == g && fans_at.is_none() => {
                    fans_at = Some(start.elapsed())
                }
                Message::State(m, EngineState::Done { .. }) if m == g => break,
                Message::Failed(m, text) if m == g => return format!("error={text}"),
                _ => {}
            }
        }
        let fans_at = fans_at.unwrap_or_default();
        if g == 1 {
            cold = (fans_at, start.elapsed());
        } else {
            first.push(fans_at);
        }
    }
    format!(
        "cold_ms={:.1} cold_all_ms={:.1} edit_ms={:.1} peak={:.0}",
        cold.0.as_secs_f64() * 1e3,
        cold.1.as_secs_f64() * 1e3,
        median(&mut first).as_secs_f64() * 1e3,
        peak_mb()
    )
}

/// `edit:FILE:ENGINE[:pins]`: the engine's work after an edit of a pin with the model cached,
/// as the window's first tier does it — condition the central parameters and draw the
/// preview's paths (300; fixed coefficients: all 2,000) — by the given engine (median over
/// the edits; reading the scenario and summarising the fans, the same for every engine, are
/// left out).
fn child_edit(args: &[&str]) -> String {
    let (mut f, path) = scenario_file(args[0], args.get(2) == Some(&"pins"));
    let setup = load(&f, &path);
    let (source, _) = setup.estimate().expect("model");
    let params = match &source {
        ParamSource::Fixed(p) => p.clone(),
        ParamSource::Posterior(post) => post.mean().expect("posterior mean"),
    };
    let theta = Theta::new(params, &setup.ordering, &setup.tail().unwrap(), f.horizon).unwrap();
    let kind = engine(args[1]);
    let count = match source {
        ParamSource::Fixed(_) => f.draws * f.paths_per_draw,
        ParamSource::Posterior(_) => PREVIEW_PATHS,
    };
    let how = Sampling {
        paths_per_theta: count,
        seed: f.seed,
        reweight: false,
        min_acceptance: f.checks.min_acceptance,
        engine: kind,
    };
    // The main engine keeps the randomness and the plan across edits, as the window does; the
    // cross-check engines start again.
    let mut tier0 = Preview::new(theta.clone(), count, f.seed);
    let set = ThetaSet::single(theta);
    let base = f.pins[0].value;
    let mut times = Vec::new();
    for g in 0..EDITS {
        f.pins[0].value = base + 0.01 * g as f64;
        let setup = load(&f, &path);
        let cond = setup.conditions().expect("conditions");
        let start = Instant::now();
        let paths = match kind {
            EngineKind::Main => tier0.update(&cond, how, &AtomicBool::new(false)),
            _ => sample_paths(&set, 0..1, &cond, how, &AtomicBool::new(false)),
        };
        match paths {
            Ok(paths) => {
                times.push(start.elapsed());
                let rows = fans(&setup, &paths.conditional, None, Kind::Conditional);
                std::hint::black_box(rows);
            }
            Err(e) => return format!("error={}", e.to_string().replace(' ', "_")),
        }
    }
    format!("edit_ms={:.2}", median(&mut times).as_secs_f64() * 1e3)
}

/// `roots:FILE`: the cost of one largest-root measurement against one posterior draw's
/// conditioning and path (both on one core).
fn child_roots(args: &[&str]) -> String {
    let (f, path) = scenario_file(args[0], false);
    let setup = load(&f, &path);
    let (source, _) = setup.estimate().expect("model");
    let ParamSource::Posterior(post) = &source else {
        return "error=fixed".into();
    };
    let mut rng =
        tiltyard::forecast::random::stream(1, tiltyard::forecast::random::Purpose::Parameters, 0);
    let draws: Vec<_> = (0..50).filter_map(|_| post.draw(&mut rng).ok()).collect();
    let start = Instant::now();
    for p in &draws {
        std::hint::black_box(p.spectral_radius());
    }
    let root = start.elapsed() / draws.len() as u32;
    // A pool of its own: estimation has already started the global one.
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .expect("pool");
    // The whole run of 2,000 draws on that core, the roots' own share included.
    let mut setup = load(
        &ScenarioFile {
            draws: 2000,
            ..f.clone()
        },
        &path,
    );
    let start = Instant::now();
    pool.install(|| run(&mut setup, &RunOptions::default()))
        .expect("run");
    format!(
        "root_ms={:.3} run_ms={:.1}",
        root.as_secs_f64() * 1e3,
        start.elapsed().as_secs_f64() * 1e3
    )
}

/// `flops`: the block recursions' achieved rate against dense matrix multiplication.
fn child_flops() -> String {
    let (f, path) = scenario_file("l-fixed.ron", false);
    let setup = load(&f, &path);
    let (ParamSource::Fixed(p), _) = setup.estimate().expect("model") else {
        return "error=estimated".into();
    };
    let theta = Theta::new(p, &setup.ordering, &setup.tail().unwrap(), f.horizon).unwrap();
    let (n, lags, h, k) = (theta.n(), theta.p(), theta.h, 24);
    let mut x = DMatrix::from_fn(theta.len(), k, |i, j| ((i + 3 * j) as f64 * 0.1).sin());
    let reps = 200;
    let start = Instant::now();
    for _ in 0..reps {
        theta.forward_in_place(&mut x);
        theta.backward_in_place(&mut x);
        x.scale_mut(1e-3);
    }
    let secs = start.elapsed().as_secs_f64();
    // Each period t > 1 adds min(p, t−1) products of n×n by n×k, both ways.
    let products: usize = (1..h).map(|t| t.min(lags)).sum();
    let flops = 2.0 * 2.0 * (products * n * n * k) as f64 * reps as f64;
    let a = DMatrix::from_fn(512, 512, |i, j| ((i * 7 + j) as f64).cos());
    let start = Instant::now();
    let mut c = DMatrix::zeros(512, 512);
    for _ in 0..10 {
        c.gemm(1.0, &a, &a, 0.0);
    }
    let gemm = 10.0 * 2.0 * 512f64.powi(3) / start.elapsed().as_secs_f64();
    std::hint::black_box(c);
    format!(
        "recursion_gflops={:.2} gemm_gflops={:.2}",
        flops / secs / 1e9,
        gemm / 1e9
    )
}

/// A window that never opens a dialog.
struct NoDialogs;

impl tiltyard::app::files::PathPicker for NoDialogs {
    fn open(&self, _: &Path) -> Pick {
        Pick::Cancelled
    }
    fn save(&self, _: &Path, _: &str) -> Pick {
        Pick::Cancelled
    }
    fn dataset(&self, _: &Path) -> Pick {
        Pick::Cancelled
    }
}

/// `frames:FILE`: the window (headless, egui_kittest at 1600×1000: layout and tessellation,
/// no painting on a GPU) from opening the scenario until all its draws are in; the longest and the median
/// frame while the engine works.
fn child_frames(args: &[&str]) -> String {
    let path = data(args[0]);
    let app = tiltyard::app::TiltyardApp::new(&path, Arc::new(NoDialogs), Arc::new(|| {}));
    let mut h = egui_kittest::Harness::builder()
        .with_size(egui::Vec2::new(1600.0, 1000.0))
        .build_ui_state(|ui, app: &mut tiltyard::app::TiltyardApp| app.ui(ui), app);
    let start = Instant::now();
    let mut frames = Vec::new();
    while start.elapsed() < Duration::from_secs(120) {
        let t = Instant::now();
        h.step();
        // What a renderer would ask of the CPU next: the frame's shapes as triangles.
        let shapes = h.output().shapes.clone();
        std::hint::black_box(h.ctx.tessellate(shapes, 1.0));
        frames.push(t.elapsed());
        let app = h.state();
        if !app.busy() && app.session.results.is_some() {
            break;
        }
        std::thread::sleep(Duration::from_millis(5));
    }
    let count = frames.len();
    let longest = frames.iter().max().copied().unwrap_or_default();
    format!(
        "frames={count} longest_ms={:.1} median_ms={:.1}",
        longest.as_secs_f64() * 1e3,
        median(&mut frames).as_secs_f64() * 1e3
    )
}

fn child(case: &str) {
    // As the program does at start.
    tiltyard::keep_freed_memory();
    let parts: Vec<&str> = case.split(':').collect();
    let out = match parts[0] {
        "run" => child_run(&parts[1..]),
        "window" => child_window(&parts[1..]),
        "edit" => child_edit(&parts[1..]),
        "roots" => child_roots(&parts[1..]),
        "flops" => child_flops(),
        "frames" => child_frames(&parts[1..]),
        other => format!("error=unknown_case_{other}"),
    };
    println!("{out}");
}

// ---- the parent: run the cases, print the table ------------------------------------------

fn measure(case: &str) -> std::collections::HashMap<String, String> {
    let out = Command::new(std::env::current_exe().expect("own path"))
        .env("TILTYARD_BENCH_CASE", case)
        .output()
        .expect("child");
    let text = String::from_utf8_lossy(&out.stdout);
    let line = text.lines().last().unwrap_or("error=no_output");
    line.split_whitespace()
        .filter_map(|kv| {
            kv.split_once('=')
                .map(|(k, v)| (k.to_string(), v.to_string()))
        })
        .collect()
}

fn num(m: &std::collections::HashMap<String, String>, k: &str) -> Option<f64> {
    m.get(k).and_then(|v| v.parse().ok())
}

fn cell(v: Option<f64>, digits: usize) -> String {
    v.map_or("—".into(), |x| format!("{x:.digits$}"))
}

fn main() {
    if let Ok(case) = std::env::var("TILTYARD_BENCH_CASE") {
        child(&case);
        return;
    }
    println!("machine  {}", machine());
    println!();
    println!(
        "| case | engine | 2,000 draws, 2 cores (s) | 1 core (s) | 2 cores vs 1 | cold start → first fans (ms) | edit → first fans (ms) | peak memory (MB) |"
    );
    println!("|---|---|---|---|---|---|---|---|");
    let mut edits: std::collections::HashMap<(String, String), f64> = Default::default();
    for size in ["s", "m", "l"] {
        for model in ["estimated", "fixed"] {
            let file = format!("{size}-{model}.ron");
            let window = measure(&format!("window:{file}"));
            // Naive rejection is measured on the rare corridor below: on these panels' corridors
            // (probabilities far below 1e-6) it gives up on every draw.
            for eng in ["main", "dense", "kalman"] {
                // The Kalman engine takes pins only: M and L without their corridors (the main
                // engine is timed on those too, for the ratio).
                let pins = eng == "kalman" && size != "s";
                let which = if pins { "pins" } else { "all" };
                // The dense engine at L costs too much for 2,000 draws: 200, scaled to 2,000
                // (marked so in the table).
                let draws = if eng == "dense" && size == "l" {
                    200
                } else {
                    2000
                };
                let scale = 2000.0 / draws as f64;
                let two = measure(&format!("run:{file}:{eng}:2:{which}:{draws}"));
                let one = measure(&format!("run:{file}:{eng}:1:{which}:{draws}"));
                let edit = measure(&format!("edit:{file}:{eng}:{which}"));
                let (t2, t1) = (
                    num(&two, "secs").map(|t| t * scale),
                    num(&one, "secs").map(|t| t * scale),
                );
                let label = format!(
                    "{} {model}{}",
                    size.to_uppercase(),
                    if pins { " (pins only)" } else { "" }
                );
                if let Some(e) = num(&edit, "edit_ms") {
                    edits.insert((label.clone(), eng.to_string()), e);
                }
                if pins {
                    let main = measure(&format!("edit:{file}:main:pins"));
                    if let Some(e) = num(&main, "edit_ms") {
                        edits.insert((label.clone(), "main".into()), e);
                    }
                }
                let window_cells = if eng == "main" {
                    (
                        cell(num(&window, "cold_ms"), 0),
                        format!("{} (window), ", cell(num(&window, "edit_ms"), 1)),
                    )
                } else {
                    ("—".into(), String::new())
                };
                let note = two
                    .get("error")
                    .map(|e| format!(" ({})", e.replace('_', " ")))
                    .unwrap_or_default();
                let scaled = if draws < 2000 { " (from 200)" } else { "" };
                println!(
                    "| {label} | {eng}{note} | {}{scaled} | {}{scaled} | {} | {} | {}{} | {} |",
                    cell(t2, 2),
                    cell(t1, 2),
                    cell(t1.zip(t2).map(|(a, b)| a / b), 2),
                    window_cells.0,
                    window_cells.1,
                    cell(num(&edit, "edit_ms"), 1),
                    cell(num(&two, "peak"), 0),
                );
            }
        }
    }
    let demo = measure(&format!(
        "window:{}",
        Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("scenarios-demo/adverse.ron")
            .display()
    ));
    println!(
        "| demo (10 series, 2 lags, 12 periods, 1,000 draws) | main | — | — | — | {} | {} (window) | {} |",
        cell(num(&demo, "cold_ms"), 0),
        cell(num(&demo, "edit_ms"), 1),
        cell(num(&demo, "peak"), 0)
    );
    println!();
    let ratio = |label: &str, other: &str| -> Option<f64> {
        let a = edits.get(&(label.to_string(), other.to_string()))?;
        let b = edits.get(&(label.to_string(), "main".to_string()))?;
        Some(a / b)
    };
    println!("ratios after an edit (time of the engine / time of the main engine, same case):");
    for (label, other) in [
        ("L estimated", "dense"),
        ("L fixed", "dense"),
        ("L estimated (pins only)", "kalman"),
        ("L fixed (pins only)", "kalman"),
        ("M estimated", "dense"),
        ("S estimated", "kalman"),
    ] {
        println!(
            "  {label:<26} {other:<10} {}×",
            cell(ratio(label, other), 1)
        );
    }
    // Rare corridors: naive rejection against the main engine, per path (rejection's cost
    // grows as 1/probability: at about 1e-4 it draws 40 paths, scaled to 2,000).
    for (file, paths) in [("rare.ron", 2000), ("rare-deep.ron", 40)] {
        let main = measure(&format!("run:{file}:main:2:all:2000"));
        let rejection = measure(&format!("run:{file}:rejection:2:all:{paths}"));
        if let (Some(tm), Some(tr), Some(props), Some(kept)) = (
            num(&main, "secs"),
            num(&rejection, "secs"),
            num(&rejection, "proposals"),
            num(&rejection, "paths"),
        ) {
            let tr = tr * 2000.0 / paths as f64;
            println!(
                "{file} (S model, probability ≈ {:.1e} by rejection's acceptance): 2,000 paths main {tm:.2} s, rejection {tr:.1} s{}: {:.0}×",
                kept / props,
                if paths < 2000 { " (from 40)" } else { "" },
                tr / tm
            );
        } else {
            println!("{file}: {main:?} {rejection:?}");
        }
    }
    let roots = measure("roots:l-estimated.ron");
    if let (Some(r), Some(total)) = (num(&roots, "root_ms"), num(&roots, "run_ms")) {
        println!(
            "largest root at L: {r:.2} ms per eigenvalue decomposition, {:.2} ms per posterior draw of the whole run (one core); measured on {} of 2,000 draws: {:.1}% of the run",
            total / 2000.0,
            root_sample(160),
            100.0 * root_sample(160) as f64 * r / total
        );
    }
    for file in ["l-estimated.ron", "m-estimated.ron"] {
        let frames = measure(&format!("frames:{file}"));
        println!(
            "window frames at {file} while the engine works (headless, 1600×1000): longest {} ms, median {} ms over {} frames",
            cell(num(&frames, "longest_ms"), 1),
            cell(num(&frames, "median_ms"), 1),
            cell(num(&frames, "frames"), 0)
        );
    }
    let flops = measure("flops");
    println!(
        "block recursions (L, 24 right-hand sides): {} Gflop/s; dense matrix product (512³): {} Gflop/s",
        cell(num(&flops, "recursion_gflops"), 1),
        cell(num(&flops, "gemm_gflops"), 1)
    );
}
