//! File dialogs and file reading off the window's thread. Dialogs sit behind [`PathPicker`]
//! so that tests give paths directly and never open one; the real picker uses the desktop's
//! file dialog (rfd). A dialog runs on its own thread, reads what was picked there, and
//! answers through a channel, so a slow or hung dialog service or disk never freezes the
//! window.

use std::path::{Path, PathBuf};
use std::sync::mpsc::{Receiver, Sender, channel};

use crate::dataset::{Dataset, Frequency};
use crate::scenario::{self, LargestRoot, ModelSpec, ScenarioFile, SeriesSpec};

/// What a file dialog gave.
#[derive(Debug, Clone, PartialEq)]
pub enum Pick {
    Path(PathBuf),
    Cancelled,
    /// No dialog could be shown (the window then offers its own chooser).
    Unavailable,
}

/// Asks the user for paths.
pub trait PathPicker: Send + Sync {
    /// A scenario to open.
    fn open(&self, start: &Path) -> Pick;
    /// Where to save a scenario.
    fn save(&self, start: &Path, name: &str) -> Pick;
    /// A dataset (CSV) to start a new scenario on.
    fn dataset(&self, start: &Path) -> Pick;
}

/// The desktop's file dialogs.
pub struct DesktopPicker;

/// A dialog that answers "nothing" faster than this was never on screen: a person takes
/// longer to see a dialog and dismiss it. (Without a dialog service the desktop's dialog
/// returns nothing at once, as a cancel would.)
const NEVER_SHOWN: std::time::Duration = std::time::Duration::from_millis(250);

fn timed(dialog: impl FnOnce() -> Option<PathBuf>) -> Pick {
    let start = std::time::Instant::now();
    match dialog() {
        Some(path) => Pick::Path(path),
        None if start.elapsed() < NEVER_SHOWN => Pick::Unavailable,
        None => Pick::Cancelled,
    }
}

impl PathPicker for DesktopPicker {
    fn open(&self, start: &Path) -> Pick {
        timed(|| {
            rfd::FileDialog::new()
                .set_directory(start)
                .add_filter("scenario", &["ron"])
                .pick_file()
        })
    }

    fn save(&self, start: &Path, name: &str) -> Pick {
        timed(|| {
            rfd::FileDialog::new()
                .set_directory(start)
                .set_file_name(name)
                .save_file()
        })
    }

    fn dataset(&self, start: &Path) -> Pick {
        timed(|| {
            rfd::FileDialog::new()
                .set_directory(start)
                .add_filter("dataset", &["csv"])
                .pick_file()
        })
    }
}

/// What a dialog is for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Purpose {
    Open,
    SaveAs,
    NewFromData,
    /// A second scenario to compare the document with.
    Compare,
    /// Where to save the table of paths.
    ExportTable,
    /// The folder of a briefing pack.
    ExportPack,
}

/// A dialog's answer, with what was read from the picked file.
pub enum Answer {
    /// A scenario, read (or why not), and the newer recovery file beside it, if any.
    Open(
        PathBuf,
        Box<(Result<ScenarioFile, String>, Option<Recovered>)>,
    ),
    SaveAs(PathBuf),
    /// A new scenario on a dataset (or why the dataset cannot be used).
    NewFromData(PathBuf, Box<Result<ScenarioFile, String>>),
    /// A scenario to compare with, read (or why not).
    Compare(PathBuf, Box<Result<ScenarioFile, String>>),
    /// Where to save the table of paths.
    ExportTable(PathBuf),
    /// The folder of a briefing pack.
    ExportPack(PathBuf),
}

/// Unsaved edits found in a recovery file: the scenario they make (or why it cannot be read),
/// and what the file says it holds ("3 unsaved changes to adverse.ron, the last at …").
#[derive(Debug, Clone, PartialEq)]
pub struct Recovered {
    pub file: Result<ScenarioFile, String>,
    pub note: Option<String>,
}

/// Read a scenario file for the window, and the recovery file beside it if that is newer.
pub fn read_scenario(path: &Path) -> (Result<ScenarioFile, String>, Option<Recovered>) {
    let file = scenario::read(path).map_err(|e| e.to_string());
    (file, newer_recovery(path))
}

/// The recovery file of `path`, read, if it exists and is newer than `path` (or `path` is
/// missing).
pub fn newer_recovery(path: &Path) -> Option<Recovered> {
    let recovery = super::document::recovery_path(path);
    let modified = |p: &Path| std::fs::metadata(p).and_then(|m| m.modified()).ok();
    let newer = match (modified(&recovery), modified(path)) {
        (Some(r), Some(p)) => r > p,
        (Some(_), None) => true,
        _ => false,
    };
    newer.then(|| Recovered {
        file: scenario::read(&recovery).map_err(|e| e.to_string()),
        note: super::document::recovery_note(&recovery),
    })
}

/// A new scenario on the dataset at `path`: every column a series, as it is (no transform),
/// the Minnesota prior with its tightness chosen by marginal likelihood, two years ahead, and
/// no conditions yet. The dataset is named by file name: the scenario is meant to be saved
/// beside it.
pub fn scenario_for(path: &Path) -> Result<ScenarioFile, String> {
    let data = Dataset::read(path).map_err(|e| e.to_string())?;
    let stem = path
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "data".into());
    let horizon = match data.frequency {
        Frequency::Quarterly => 8,
        Frequency::Monthly => 24,
    };
    Ok(ScenarioFile {
        name: format!("New scenario on {stem}"),
        narrative: String::new(),
        dataset: path
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default(),
        series: data
            .names
            .iter()
            .map(|name| SeriesSpec {
                name: name.clone(),
                transform: crate::dataset::Transform::AsIs,
                centre: Default::default(),
                display: Default::default(),
                label: None,
                unit: None,
            })
            .collect(),
        model: ModelSpec::Minnesota(Default::default()),
        ordering: None,
        drivers: None,
        horizon,
        draws: 1000,
        paths_per_draw: 1,
        seed: 1,
        pins: Vec::new(),
        corridors: Vec::new(),
        targets: Vec::new(),
        checks: Default::default(),
        reweight: false,
        largest_root: LargestRoot::Keep,
    })
}

/// What a dialog's thread reports.
pub enum DialogReply {
    /// The answer (none: cancelled).
    Answered(Option<Answer>),
    /// The desktop's dialog could not be shown: ask with the window's own chooser.
    Unavailable {
        purpose: Purpose,
        start: PathBuf,
        name: String,
    },
}

/// Dialogs in flight.
pub struct Dialogs {
    picker: std::sync::Arc<dyn PathPicker>,
    tx: Sender<DialogReply>,
    rx: Receiver<DialogReply>,
    pub open: bool,
    /// The desktop's dialog failed once: the window's own chooser is used from then on.
    pub own: bool,
}

impl Dialogs {
    pub fn new(picker: std::sync::Arc<dyn PathPicker>) -> Dialogs {
        let (tx, rx) = channel();
        Dialogs {
            picker,
            tx,
            rx,
            open: false,
            own: false,
        }
    }

    /// Ask for a path on a thread of its own; `wake` repaints the window when it answers.
    pub fn ask(
        &mut self,
        purpose: Purpose,
        start: PathBuf,
        name: String,
        wake: std::sync::Arc<dyn Fn() + Send + Sync>,
    ) {
        if self.open {
            return;
        }
        self.open = true;
        if self.own {
            let _ = self.tx.send(DialogReply::Unavailable {
                purpose,
                start,
                name,
            });
            wake();
            return;
        }
        let picker = self.picker.clone();
        let tx = self.tx.clone();
        std::thread::spawn(move || {
            let pick = match purpose {
                Purpose::Open | Purpose::Compare => picker.open(&start),
                Purpose::SaveAs => picker.save(&start, &name),
                Purpose::NewFromData => picker.dataset(&start),
                Purpose::ExportPack => picker.save(&start, "briefing"),
                Purpose::ExportTable => picker.save(&start, "paths-table.csv"),
            };
            let reply = match pick {
                Pick::Path(path) => DialogReply::Answered(Some(answer_for(purpose, path))),
                Pick::Cancelled => DialogReply::Answered(None),
                Pick::Unavailable => DialogReply::Unavailable {
                    purpose,
                    start,
                    name,
                },
            };
            let _ = tx.send(reply);
            wake();
        });
    }

    /// A path chosen in the window's own chooser: read what it names on a thread, as a
    /// dialog's answer.
    pub fn chosen(
        &mut self,
        purpose: Purpose,
        path: PathBuf,
        wake: std::sync::Arc<dyn Fn() + Send + Sync>,
    ) {
        let tx = self.tx.clone();
        std::thread::spawn(move || {
            let _ = tx.send(DialogReply::Answered(Some(answer_for(purpose, path))));
            wake();
        });
    }

    /// The answer of the dialog in flight, if it has come (the dialog is then closed, unless
    /// it handed over to the window's own chooser).
    pub fn answer(&mut self) -> Option<DialogReply> {
        let reply = self.rx.try_recv().ok()?;
        match reply {
            DialogReply::Answered(_) => self.open = false,
            DialogReply::Unavailable { .. } => self.own = true,
        }
        Some(reply)
    }

    /// The own chooser was cancelled.
    pub fn cancelled(&mut self) {
        self.open = false;
    }
}

/// What a picked path gives for `purpose` (files read here, off the window's thread).
fn answer_for(purpose: Purpose, path: PathBuf) -> Answer {
    match purpose {
        Purpose::Open => {
            let read = read_scenario(&path);
            Answer::Open(path, Box::new(read))
        }
        Purpose::SaveAs => Answer::SaveAs(path),
        Purpose::NewFromData => {
            let file = scenario_for(&path);
            Answer::NewFromData(path, Box::new(file))
        }
        Purpose::ExportPack => Answer::ExportPack(path),
        Purpose::ExportTable => Answer::ExportTable(path),
        Purpose::Compare => {
            let file = scenario::read(&path).map_err(|e| e.to_string());
            Answer::Compare(path, Box::new(file))
        }
    }
}

/// File chores (saves and the recovery file) done in order on a thread of their own, so
/// that a slow disk never stalls the window.
pub struct Chores {
    tx: Sender<Chore>,
    replies: Receiver<Reply>,
}

enum Chore {
    Write(PathBuf, String),
    Remove(PathBuf),
    Save(Box<Save>),
    Flush,
}

/// A save: the document's `file` as it stood, moving from the scenario at `from` to `to`;
/// `then` is what the window does once it is saved. `document` tells which document the
/// window had open (a reply about another one changes nothing).
pub struct Save {
    pub document: u64,
    pub from: PathBuf,
    pub to: PathBuf,
    pub file: ScenarioFile,
    pub then: Option<super::AfterSave>,
}

/// What the chores' thread reports.
pub enum Reply {
    /// A recovery-file chore failed.
    Failed(String),
    /// A save failed (nothing was written over the file).
    SaveFailed(String),
    /// Every chore sent before the flush is done.
    Flushed,
    /// A save succeeded: the file as written (its dataset path rewritten for `to`).
    Saved(Box<Save>, Box<ScenarioFile>),
}

impl Chores {
    /// Start the chores' thread.
    pub fn start() -> Chores {
        let (tx, rx) = channel::<Chore>();
        let (reply, replies) = channel();
        std::thread::spawn(move || {
            for chore in rx {
                let answer = match chore {
                    Chore::Write(path, text) => crate::report::write_atomic(&path, text.as_bytes())
                        .err()
                        .map(|e| Reply::Failed(format!("cannot write {}: {e}", path.display()))),
                    Chore::Remove(path) => remove(&path).err().map(Reply::Failed),
                    Chore::Save(save) => Some(
                        match crate::scenario::layout::write_scenario(
                            &save.from, &save.to, &save.file,
                        ) {
                            Ok(written) => {
                                // The recovery file of the old place has served its turn.
                                let old = super::document::recovery_path(&save.from);
                                let _ = remove(&old);
                                Reply::Saved(save, Box::new(written))
                            }
                            Err(e) => {
                                Reply::SaveFailed(format!("cannot save {}: {e}", save.to.display()))
                            }
                        },
                    ),
                    Chore::Flush => Some(Reply::Flushed),
                };
                if let Some(a) = answer {
                    let _ = reply.send(a);
                }
            }
        });
        Chores { tx, replies }
    }

    /// Write `text` to `path` atomically.
    pub fn write(&self, path: PathBuf, text: String) {
        let _ = self.tx.send(Chore::Write(path, text));
    }

    /// Remove `path` if it is there.
    pub fn remove(&self, path: PathBuf) {
        let _ = self.tx.send(Chore::Remove(path));
    }

    /// Save a scenario (atomically; its dataset path follows a move).
    pub fn save(&self, save: Save) {
        let _ = self.tx.send(Chore::Save(Box::new(save)));
    }

    /// A report from the chores' thread, if any.
    pub fn reply(&self) -> Option<Reply> {
        self.replies.try_recv().ok()
    }

    /// Wait (at most `limit`) until every chore sent so far is done, for a window about to
    /// close; the other replies that come in meanwhile are returned.
    pub fn finish(&self, limit: std::time::Duration) -> Vec<Reply> {
        let _ = self.tx.send(Chore::Flush);
        let end = std::time::Instant::now() + limit;
        let mut others = Vec::new();
        while let Some(left) = end.checked_duration_since(std::time::Instant::now()) {
            match self.replies.recv_timeout(left) {
                Ok(Reply::Flushed) | Err(_) => break,
                Ok(other) => others.push(other),
            }
        }
        others
    }
}

fn remove(path: &Path) -> Result<(), String> {
    match std::fs::remove_file(path) {
        Err(e) if e.kind() != std::io::ErrorKind::NotFound => {
            Err(format!("cannot remove {}: {e}", path.display()))
        }
        _ => Ok(()),
    }
}
