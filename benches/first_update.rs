//! How fast the window's engine answers an edit: the time from sending a job to its first
//! fans (the preview at the posterior mean), and to the last block of posterior draws, on the
//! adverse demo scenario (10 series, 12 quarters, 1000 draws, pins and corridors, drivers).
//! The first job includes estimating the model; later jobs are edits of a pin, which reuse it.
//!
//! Run: `cargo bench --bench first_update` (prints the machine, then the timings).

use std::path::Path;
use std::sync::Arc;
use std::sync::atomic::AtomicBool;
use std::sync::mpsc::channel;
use std::time::{Duration, Instant};

use tiltyard::app::worker::{self, EngineState, Job, Message};
use tiltyard::scenario;

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
    format!("{cpu}, {cores} cores")
}

fn median(v: &mut [Duration]) -> Duration {
    v.sort();
    v[v.len() / 2]
}

fn main() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios-demo");
    let path = root.join("adverse.ron");
    let mut file = scenario::read(&path).expect("the demo scenario");
    let (jobs, job_rx) = channel();
    let (tx, rx) = channel();
    std::thread::spawn(move || worker::run(job_rx, tx, || {}));
    println!("machine    {}", machine());
    let mut first = Vec::new();
    let mut last = Vec::new();
    let edits = 21;
    for g in 1..=edits {
        // An edit of the house-price pin (the model is estimated on the first job only).
        file.pins[1].value = -10.0 + 0.1 * g as f64;
        let start = Instant::now();
        jobs.send(Job {
            generation: g,
            file: file.clone(),
            path: path.clone(),
            cancel: Arc::new(AtomicBool::new(false)),
        })
        .expect("the worker runs");
        let mut first_fans = None;
        loop {
            match rx.recv().expect("the worker answers") {
                Message::Results(m, _) if m == g && first_fans.is_none() => {
                    first_fans = Some(start.elapsed());
                }
                Message::State(m, EngineState::Done { .. }) if m == g => break,
                Message::Failed(m, text) if m == g => panic!("job {g} failed: {text}"),
                _ => {}
            }
        }
        let f = first_fans.expect("fans before the end");
        if g == 1 {
            println!(
                "cold       first fans {:.0} ms, all 1000 draws {:.0} ms (estimating the model included)",
                f.as_secs_f64() * 1e3,
                start.elapsed().as_secs_f64() * 1e3
            );
        } else {
            first.push(f);
            last.push(start.elapsed());
        }
    }
    let (lo, hi) = (
        first.iter().min().copied().unwrap_or_default(),
        first.iter().max().copied().unwrap_or_default(),
    );
    println!(
        "edit       first fans median {:.0} ms (min {:.0}, max {:.0}) over {} edits",
        median(&mut first).as_secs_f64() * 1e3,
        lo.as_secs_f64() * 1e3,
        hi.as_secs_f64() * 1e3,
        edits - 1
    );
    println!(
        "edit       all 1000 draws median {:.0} ms",
        median(&mut last).as_secs_f64() * 1e3
    );
}
