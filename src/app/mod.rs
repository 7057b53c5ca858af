//! The scenario window (egui). The engine lives in the rest of the crate; this module only
//! uses it: every edit becomes a change of the [`document::Document`], the window sends the
//! scenario as it now stands to the [`worker`] (cancelling the job in flight), and draws
//! whatever the worker has streamed back. Nothing here computes, reads files or waits on the
//! window's thread except saving a small text file.
//!
//! - [`document`]: the scenario being edited, undo/redo, atomic saves, the recovery file;
//! - [`worker`]: the engine thread and its messages;
//! - [`chart`]: one series' chart and its gestures;
//! - [`panels`]: the bars and side panels; [`table`]: the conditions table;
//!   [`settings`]: the model settings;
//! - [`files`]: file dialogs off the window's thread; [`palette`]: colours.

pub mod chart;
pub mod document;
pub mod files;
pub mod palette;
pub mod panels;
pub mod settings;
pub mod table;
pub mod worker;

use std::collections::{HashMap, HashSet};
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{Receiver, Sender, channel};
use std::time::{Duration, Instant};

use chart::{ChartAction, ChartMemory, CondRef};
use document::Document;
use files::{Dialogs, PathPicker, Purpose};
use worker::{EngineState, Job, Message, Results};

use crate::checks::{CheckReport, Severity};
use crate::scenario::{Bound, CorridorSpec, PinSpec, ScenarioFile};

/// Time the window spends draining the worker's messages per frame.
const DRAIN_BUDGET: Duration = Duration::from_millis(4);
/// Unsaved edits are written to the recovery file this often.
const AUTOSAVE: Duration = Duration::from_secs(20);

/// A question the window is asking.
#[derive(Debug, Clone, PartialEq)]
pub enum Prompt {
    /// Unsaved changes before opening another scenario or closing.
    Unsaved { then: AfterSave },
    /// A recovery file from a session that did not end cleanly.
    Recover { path: PathBuf },
}

#[derive(Debug, Clone, PartialEq)]
pub enum AfterSave {
    Open,
    Close,
}

/// The window's state.
pub struct TiltyardApp {
    pub doc: Document,
    /// The last problem to show (a failed open or save).
    pub notice: Option<String>,
    // Worker.
    jobs: Sender<Job>,
    messages: Receiver<Message>,
    generation: u64,
    cancel: Arc<AtomicBool>,
    sent: Option<ScenarioFile>,
    job_started: Instant,
    // What the worker said for the current generation (results are kept until replaced).
    pub results: Option<Arc<Results>>,
    pub checks: Option<Box<CheckReport>>,
    pub state: EngineState,
    pub model_line: String,
    pub engine_error: Option<String>,
    /// Time from the last edit to its first fans.
    pub first_update: Option<Duration>,
    // Interface.
    pub charts: HashMap<usize, ChartMemory>,
    pub hidden: HashSet<String>,
    pub selected: Option<CondRef>,
    pub enlarged: Option<usize>,
    pub prompt: Option<Prompt>,
    dialogs: Dialogs,
    wake: Arc<dyn Fn() + Send + Sync>,
    last_autosave: Instant,
    close_confirmed: bool,
}

impl TiltyardApp {
    /// Open `path` (its recovery file, if newer, is offered) and start the engine. `wake`
    /// asks the window to repaint (the worker and dialogs call it from their threads).
    pub fn new(
        path: &Path,
        picker: Arc<dyn PathPicker>,
        wake: Arc<dyn Fn() + Send + Sync>,
    ) -> TiltyardApp {
        let (doc, notice) = match Document::open(path) {
            Ok(doc) => (doc, None),
            Err(e) => {
                let file = blank(path);
                (
                    Document::from_file(file, path.to_path_buf()),
                    Some(format!("cannot open the scenario: {e}")),
                )
            }
        };
        let (jobs, job_rx) = channel::<Job>();
        let (msg_tx, messages) = channel::<Message>();
        let w = wake.clone();
        std::thread::Builder::new()
            .name("tiltyard-engine".into())
            .spawn(move || worker::run(job_rx, msg_tx, move || w()))
            .expect("the engine thread starts");
        let recovery = document::recovery_path(path);
        let prompt = newer(&recovery, path).then_some(Prompt::Recover { path: recovery });
        TiltyardApp {
            doc,
            notice,
            jobs,
            messages,
            generation: 0,
            cancel: Arc::new(AtomicBool::new(false)),
            sent: None,
            job_started: Instant::now(),
            results: None,
            checks: None,
            state: EngineState::Idle,
            model_line: String::new(),
            engine_error: None,
            first_update: None,
            charts: HashMap::new(),
            hidden: HashSet::new(),
            selected: None,
            enlarged: None,
            prompt,
            dialogs: Dialogs::new(picker),
            wake,
            last_autosave: Instant::now(),
            close_confirmed: false,
        }
    }

    /// The generation of the newest job sent.
    pub fn generation(&self) -> u64 {
        self.generation
    }

    /// The scenario as last sent to the engine.
    pub fn sent(&self) -> Option<&ScenarioFile> {
        self.sent.as_ref()
    }

    /// True while the worker has not finished the newest job.
    pub fn busy(&self) -> bool {
        self.sent.as_ref() != Some(&self.doc.file)
            || !matches!(
                self.state,
                EngineState::Done { .. } | EngineState::Clashing | EngineState::Failed
            )
    }

    /// Send the scenario to the worker if it changed since the last job.
    fn dispatch(&mut self) {
        if self.sent.as_ref() == Some(&self.doc.file) {
            return;
        }
        self.cancel.store(true, Ordering::Relaxed);
        self.cancel = Arc::new(AtomicBool::new(false));
        self.generation += 1;
        self.job_started = Instant::now();
        self.first_update = None;
        self.engine_error = None;
        // Until the worker reports on the new job, the old job's state no longer applies.
        self.state = EngineState::Idle;
        let job = Job {
            generation: self.generation,
            file: self.doc.file.clone(),
            path: self.doc.path.clone(),
            cancel: self.cancel.clone(),
        };
        self.sent = Some(self.doc.file.clone());
        if self.jobs.send(job).is_err() {
            self.engine_error =
                Some("the engine thread has stopped; save your work and restart".into());
        }
    }

    /// Take the worker's messages for the newest job, within a time budget.
    fn drain(&mut self) {
        let start = Instant::now();
        while start.elapsed() < DRAIN_BUDGET {
            let Ok(message) = self.messages.try_recv() else {
                break;
            };
            match message {
                Message::State(g, s) if g == self.generation => self.state = s,
                Message::Model(g, line) if g == self.generation => self.model_line = line,
                Message::Checks(g, report) if g == self.generation => self.checks = Some(report),
                Message::Results(g, r) if g == self.generation => {
                    self.first_update.get_or_insert(self.job_started.elapsed());
                    self.results = Some(r);
                }
                Message::Failed(g, text) if g == self.generation => self.engine_error = Some(text),
                _ => {}
            }
        }
    }

    /// The status colour of a condition from the checks.
    pub fn status_of(&self, cref: CondRef) -> Option<Severity> {
        let field = cref.field();
        let checks = self.checks.as_ref()?;
        let mut worst = None;
        for f in &checks.findings {
            if f.fields
                .iter()
                .any(|x| x == &field || x.starts_with(&format!("{field}.")))
            {
                if f.severity == Severity::Clash {
                    return Some(Severity::Clash);
                }
                worst = Some(Severity::Strain);
            }
        }
        worst
    }

    /// True when the shown fans are from before a clash.
    pub fn stale(&self) -> bool {
        self.state == EngineState::Clashing
    }

    /// Apply a chart's action to the document.
    pub fn apply(&mut self, series: &str, action: ChartAction) {
        let units = self
            .doc
            .file
            .series
            .iter()
            .find(|s| s.name == series)
            .map(|s| s.display)
            .unwrap_or_default();
        match action {
            ChartAction::BeginGesture => self.doc.begin_gesture(),
            ChartAction::EndGesture => self.doc.end_gesture(),
            ChartAction::SetPin { pin, value } => self.doc.edit(|f| {
                if let Some(p) = f.pins.get_mut(pin) {
                    p.value = value;
                }
            }),
            ChartAction::MoveBound {
                corridor,
                upper,
                delta,
                period,
            } => self.doc.edit(|f| {
                if let Some(c) = f.corridors.get_mut(corridor) {
                    move_bound(c, upper, delta, period);
                }
            }),
            ChartAction::AddPin { period, value } => {
                self.doc.edit(|f| {
                    f.pins.push(PinSpec {
                        series: Some(series.to_string()),
                        shock: None,
                        period,
                        units,
                        value,
                        active: true,
                    })
                });
                self.selected = Some(CondRef::Pin(self.doc.file.pins.len() - 1));
            }
            ChartAction::AddCorridor {
                from,
                to,
                lower,
                upper,
            } => {
                self.doc.edit(|f| {
                    f.corridors.push(CorridorSpec {
                        series: Some(series.to_string()),
                        shock: None,
                        from,
                        to,
                        units,
                        lower: Some(Bound::Same(lower)),
                        upper: Some(Bound::Same(upper)),
                        active: true,
                    })
                });
                self.selected = Some(CondRef::Corridor(self.doc.file.corridors.len() - 1));
            }
            ChartAction::Select(s) => self.selected = s,
            ChartAction::Remove(cref) => self.remove(cref),
            ChartAction::Enlarge => {
                let i = self.doc.file.series.iter().position(|s| s.name == series);
                self.enlarged = if self.enlarged == i { None } else { i };
            }
        }
    }

    /// Remove a condition (one undo step).
    pub fn remove(&mut self, cref: CondRef) {
        self.doc.edit(|f| match cref {
            CondRef::Pin(k) if k < f.pins.len() => {
                f.pins.remove(k);
            }
            CondRef::Corridor(k) if k < f.corridors.len() => {
                f.corridors.remove(k);
            }
            _ => {}
        });
        self.selected = None;
    }

    fn shortcuts(&mut self, ctx: &egui::Context) {
        use egui::{Key, KeyboardShortcut, Modifiers};
        let undo = KeyboardShortcut::new(Modifiers::COMMAND, Key::Z);
        let redo = KeyboardShortcut::new(Modifiers::COMMAND | Modifiers::SHIFT, Key::Z);
        let redo_y = KeyboardShortcut::new(Modifiers::COMMAND, Key::Y);
        let save = KeyboardShortcut::new(Modifiers::COMMAND, Key::S);
        let typing = ctx.text_edit_focused();
        let (do_redo, do_undo, do_save, delete) = ctx.input_mut(|i| {
            let redo = i.consume_shortcut(&redo) || i.consume_shortcut(&redo_y);
            let undo = !typing && i.consume_shortcut(&undo);
            let save = i.consume_shortcut(&save);
            let delete = !typing && i.key_pressed(Key::Delete);
            (redo, undo, save, delete)
        });
        if do_redo && !typing {
            self.doc.redo();
        }
        if do_undo {
            self.doc.undo();
        }
        if do_save {
            self.save();
        }
        if delete && let Some(cref) = self.selected {
            self.remove(cref);
        }
    }

    /// Save to the document's path (atomic); clears the recovery file.
    pub fn save(&mut self) {
        match self.doc.save() {
            Ok(()) => {
                self.doc.clear_recovery();
                self.notice = None;
            }
            Err(e) => {
                self.notice = Some(format!("cannot save {}: {e}", self.doc.path.display()));
            }
        }
    }

    pub fn ask_open(&mut self) {
        if self.doc.is_dirty() {
            self.prompt = Some(Prompt::Unsaved {
                then: AfterSave::Open,
            });
        } else {
            self.pick(Purpose::Open);
        }
    }

    pub fn pick(&mut self, purpose: Purpose) {
        let start = self
            .doc
            .path
            .parent()
            .map(Path::to_path_buf)
            .unwrap_or_else(|| PathBuf::from("."));
        let name = self
            .doc
            .path
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| "scenario.ron".into());
        self.dialogs.ask(purpose, start, name, self.wake.clone());
    }

    /// Open a scenario from a path (no dialog).
    pub fn open_path(&mut self, path: &Path) {
        match Document::open(path) {
            Ok(doc) => {
                self.doc = doc;
                self.selected = None;
                self.enlarged = None;
                self.results = None;
                self.checks = None;
                self.notice = None;
                self.charts.clear();
                if newer(&document::recovery_path(path), path) {
                    self.prompt = Some(Prompt::Recover {
                        path: document::recovery_path(path),
                    });
                }
            }
            Err(e) => self.notice = Some(format!("cannot open {}: {e}", path.display())),
        }
    }

    fn answers(&mut self) {
        if let Some((purpose, path)) = self.dialogs.answer() {
            match (purpose, path) {
                (Purpose::Open, Some(p)) => self.open_path(&p),
                (Purpose::SaveAs, Some(p)) => match self.doc.save_as(&p) {
                    Ok(()) => self.notice = None,
                    Err(e) => self.notice = Some(format!("cannot save {}: {e}", p.display())),
                },
                (_, None) => {}
            }
        }
    }

    fn autosave(&mut self) {
        if self.doc.is_dirty() && self.last_autosave.elapsed() >= AUTOSAVE {
            self.last_autosave = Instant::now();
            if let Err(e) = self.doc.write_recovery() {
                self.notice = Some(format!("cannot write the recovery file: {e}"));
            }
        }
    }

    /// Draw the window and handle everything that happened since the last frame.
    pub fn ui(&mut self, ui: &mut egui::Ui) {
        let ctx = ui.ctx().clone();
        self.drain();
        self.answers();
        self.shortcuts(&ctx);
        if ctx.input(|i| i.viewport().close_requested())
            && !self.close_confirmed
            && self.doc.is_dirty()
        {
            ctx.send_viewport_cmd(egui::ViewportCommand::CancelClose);
            self.prompt = Some(Prompt::Unsaved {
                then: AfterSave::Close,
            });
        }
        panels::show(ui, self);
        if self.close_confirmed {
            ctx.send_viewport_cmd(egui::ViewportCommand::Close);
        }
        // Every change, also mid-gesture, goes to the engine (which drops stale jobs).
        self.dispatch();
        self.autosave();
        if self.busy() {
            ctx.request_repaint_after(Duration::from_millis(50));
        }
    }

    /// Close after the unsaved-changes prompt was answered.
    pub fn confirm_close(&mut self) {
        self.close_confirmed = true;
    }

    pub fn clear_recovery_prompt(&mut self) {
        self.doc.clear_recovery();
        self.prompt = None;
    }

    /// Take the edits from a recovery file into the document (one undo step).
    pub fn recover(&mut self, path: &Path) {
        match crate::scenario::read(path) {
            Ok(file) => self.doc.edit(|f| *f = file),
            Err(e) => self.notice = Some(format!("cannot read the recovery file: {e}")),
        }
        self.prompt = None;
    }
}

impl eframe::App for TiltyardApp {
    fn ui(&mut self, ui: &mut egui::Ui, _frame: &mut eframe::Frame) {
        TiltyardApp::ui(self, ui);
    }
}

/// Shift one side of a corridor by `delta`, at every period or at one (which turns the side
/// into per-period bounds).
fn move_bound(c: &mut CorridorSpec, upper: bool, delta: f64, period: Option<usize>) {
    let periods = match (&c.lower, &c.upper) {
        (Some(Bound::Each(v)), _) | (_, Some(Bound::Each(v))) => v.len(),
        _ => 0,
    };
    let side = if upper { &mut c.upper } else { &mut c.lower };
    match (side.as_mut(), period) {
        (Some(Bound::Same(v)), None) => *v += delta,
        (Some(Bound::Each(list)), None) => {
            for v in list.iter_mut().flatten() {
                *v += delta;
            }
        }
        (Some(Bound::Same(v)), Some(k)) => {
            let n = periods.max(k + 1);
            let mut list = vec![Some(*v); n];
            if let Some(x) = list[k].as_mut() {
                *x += delta;
            }
            *side = Some(Bound::Each(list));
        }
        (Some(Bound::Each(list)), Some(k)) => {
            if let Some(Some(x)) = list.get_mut(k) {
                *x += delta;
            }
        }
        (None, _) => {}
    }
}

/// True when `recovery` exists and is newer than `path` (or `path` is missing).
fn newer(recovery: &Path, path: &Path) -> bool {
    let modified = |p: &Path| std::fs::metadata(p).and_then(|m| m.modified()).ok();
    match (modified(recovery), modified(path)) {
        (Some(r), Some(p)) => r > p,
        (Some(_), None) => true,
        _ => false,
    }
}

/// An empty scenario for a file that could not be read (the window still opens).
fn blank(path: &Path) -> ScenarioFile {
    ScenarioFile {
        name: path
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_default(),
        narrative: String::new(),
        dataset: String::new(),
        series: Vec::new(),
        model: crate::scenario::ModelSpec::Minnesota(Default::default()),
        ordering: None,
        drivers: None,
        horizon: 12,
        draws: 1000,
        paths_per_draw: 1,
        seed: 0,
        pins: Vec::new(),
        corridors: Vec::new(),
        checks: Default::default(),
        reweight: false,
    }
}

/// Run the window on `path` until it is closed.
pub fn run_window(path: PathBuf) -> Result<(), String> {
    let options = eframe::NativeOptions {
        viewport: egui::ViewportBuilder::default()
            .with_title("Tiltyard")
            .with_inner_size([1500.0, 940.0]),
        ..Default::default()
    };
    eframe::run_native(
        "Tiltyard",
        options,
        Box::new(move |cc| {
            let ctx = cc.egui_ctx.clone();
            let wake: Arc<dyn Fn() + Send + Sync> = Arc::new(move || ctx.request_repaint());
            Ok(Box::new(TiltyardApp::new(
                &path,
                Arc::new(files::DesktopPicker),
                wake,
            )))
        }),
    )
    .map_err(|e| e.to_string())
}
