//! The briefing pack from the window: the scenario as it stands (saved or not), and the second
//! scenario when comparing, run through the headless pipeline on a thread of its own and
//! written to the folder the user picks ([`crate::report::pack`]).

use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::mpsc::{Receiver, channel};

use crate::compare::compare;
use crate::report::pack::write_pack;
use crate::run::{RunError, RunOptions, run};
use crate::scenario::{ScenarioFile, Setup};

/// An export under way: its folder, and the answer to come (a summary or why it failed).
pub struct Export {
    pub dir: PathBuf,
    /// What it is doing now ("running the scenario", "chart 3 of 14").
    pub stage: String,
    answer: Receiver<Result<String, String>>,
    stages: Receiver<String>,
}

impl Export {
    /// Start writing the pack of `file` (at `path`; with `second` to compare) into `dir`.
    pub fn start(
        dir: PathBuf,
        file: ScenarioFile,
        path: PathBuf,
        second: Option<(ScenarioFile, PathBuf)>,
        wake: Arc<dyn Fn() + Send + Sync>,
    ) -> Export {
        let (tx, answer) = channel();
        let (stage_tx, stages) = channel();
        let to = dir.clone();
        let wake_stage = wake.clone();
        let started = std::thread::Builder::new()
            .name("briefing pack".into())
            .spawn(move || {
                let stage = move |text: &str| {
                    let _ = stage_tx.send(text.to_string());
                    wake_stage();
                };
                // A panic is an answer too: the window must not wait for ever.
                let result = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
                    pack(&to, file, &path, second, &stage)
                }))
                .unwrap_or_else(|_| {
                    Err("an internal error stopped it; nothing else changed".into())
                });
                let _ = tx.send(result);
                wake();
            });
        let stage = "running the scenario".to_string();
        if let Err(e) = started {
            let (tx, rx) = channel();
            let _ = tx.send(Err(format!("cannot start it: {e}")));
            return Export {
                dir,
                stage,
                answer: rx,
                stages,
            };
        }
        Export {
            dir,
            stage,
            answer,
            stages,
        }
    }

    /// The answer, once it has come (a thread that vanished without one is an error); the
    /// stage reached meanwhile.
    pub fn done(&mut self) -> Option<Result<String, String>> {
        while let Ok(stage) = self.stages.try_recv() {
            self.stage = stage;
        }
        match self.answer.try_recv() {
            Ok(answer) => Some(answer),
            Err(std::sync::mpsc::TryRecvError::Empty) => None,
            Err(std::sync::mpsc::TryRecvError::Disconnected) => {
                Some(Err("it stopped without a word".into()))
            }
        }
    }
}

fn one(file: ScenarioFile, path: &Path) -> Result<(Setup, crate::run::RunOutcome), String> {
    let mut setup = Setup::new(file, path).map_err(|e| e.to_string())?;
    match run(&mut setup, &RunOptions::default()) {
        Ok(out) => Ok((setup, out)),
        Err(RunError::Clash(_)) => Err(format!(
            "the conditions of {} clash; see the checks",
            setup.file.name
        )),
        Err(e) => Err(e.to_string()),
    }
}

fn pack(
    dir: &Path,
    file: ScenarioFile,
    path: &Path,
    second: Option<(ScenarioFile, PathBuf)>,
    stage: &dyn Fn(&str),
) -> Result<String, String> {
    std::fs::create_dir_all(dir).map_err(|e| format!("cannot create {}: {e}", dir.display()))?;
    let (setup, out) = one(file, path)?;
    let comparison = match second {
        None => None,
        Some((f, p)) => {
            stage("running the compared scenario");
            let (b, run_b) = one(f, &p)?;
            Some(compare(&setup, &out, &b, &run_b).map_err(|e| e.to_string())?)
        }
    };
    let written =
        write_pack(dir, &setup, &out, comparison.as_ref(), stage).map_err(|e| e.to_string())?;
    Ok(format!(
        "briefing pack written: {} files in {} (open briefing.html)",
        written.len(),
        dir.display()
    ))
}
