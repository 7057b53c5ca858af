//! The scenario window (egui). The engine lives in the rest of the crate; this module only
//! uses it: every edit becomes a change of the [`document::Document`], the window sends the
//! scenario as it now stands to the [`worker`] (cancelling the job in flight), and draws
//! whatever the worker has streamed back. Once the window is up, nothing on its thread
//! computes, reads or writes files, or waits: the engine, dialogs (and the reading of what they
//! pick), saves and the recovery file all run on threads of their own and report by channel.
//!
//! - [`document`]: the scenario being edited, undo/redo, atomic saves, the recovery file;
//!   [`edits`]: the changes gestures, nudges and panels make to it, as plain functions;
//! - [`state`]: the engine session (jobs sent, what came back) and the view (panes, charts,
//!   selection); [`worker`]: the engine thread and its messages;
//! - [`chart`]: one series' or shock's chart; [`gesture`]: its gestures as pure functions;
//! - [`panels`]: the bars and side panels; [`table`]: the conditions table;
//!   [`settings`]: the model settings;
//! - [`files`]: dialogs, saves and recovery writes off the window's thread; [`palette`]:
//!   colours.

pub mod chart;
pub mod chooser;
pub mod document;
pub mod edits;
pub mod export;
pub mod files;
pub mod gesture;
pub mod grid;
pub mod legend;
pub mod narrative;
pub mod palette;
pub mod panels;
pub mod paths_table;
pub mod reverse_panel;
pub mod second;
pub mod settings;
pub mod sources;
pub mod state;
pub mod table;
pub mod targets_table;
pub mod worker;

use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::channel;
use std::time::{Duration, Instant};

use document::Document;
use files::{Answer, Chores, Dialogs, PathPicker, Purpose};
use gesture::{ChartAction, CondRef};
use state::{Session, View};
use worker::{EngineState, Job, Message, Subject};

use crate::checks::Severity;
use crate::scenario::{CorridorSpec, PinSpec, ScenarioFile};

/// Time the window spends draining the worker's messages per frame.
const DRAIN_BUDGET: Duration = Duration::from_millis(4);
/// Unsaved edits reach the recovery file this long after a change at most (one write per
/// pause, off the window's thread, so a drag writes twice a second, not every frame).
const RECOVERY_PAUSE: Duration = Duration::from_millis(500);

/// A question the window is asking.
#[derive(Debug, Clone, PartialEq)]
pub enum Prompt {
    /// Unsaved changes before opening another scenario or closing.
    Unsaved { then: AfterSave },
    /// A recovery file from a session that did not end cleanly, as read.
    Recover { edits: Box<files::Recovered> },
}

/// What the window does once unsaved changes are saved or discarded.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum AfterSave {
    Open,
    /// A blank scenario on the same data and model.
    New,
    /// A new scenario on a dataset picked next.
    NewFromData,
    Close,
}

/// The window's state.
pub struct TiltyardApp {
    /// The scenario being edited: what is saved and undone.
    pub doc: Document,
    /// The engine's side: jobs sent, and what came back.
    pub session: Session,
    /// How the window shows it all: charts, panes, the selection.
    pub view: View,
    /// The last problem to show (a failed open or save).
    pub notice: Option<String>,
    /// A briefing pack being written.
    pub export: Option<export::Export>,
    /// A second scenario shown beside the document (read-only), and its fans.
    pub second: Option<second::Second>,
    /// The narrative's draft and the conditions it was last checked against.
    pub narrative: narrative::NarrativeState,
    /// The reverse stress test's form and answer.
    pub reverse: reverse_panel::ReverseState,
    // The document's life: prompts, dialogs, saves, recovery.
    pub prompt: Option<Prompt>,
    dialogs: Dialogs,
    chores: Chores,
    /// A save is under way on the chores' thread.
    pub saving: bool,
    /// Counts the documents opened or started in this window (saves name theirs).
    document: u64,
    /// The scenario whose unsaved edits were just discarded (its recovery file is not
    /// offered again when it is reopened).
    discarded: Option<PathBuf>,
    /// What to do once a Save As (asked for by an unsaved-changes prompt) is done.
    after_save_as: Option<AfterSave>,
    wake: Arc<dyn Fn() + Send + Sync>,
    last_autosave: Instant,
    /// The window's own file chooser, when the desktop's dialog could not be shown.
    pub chooser: Option<chooser::Chooser>,
    /// Files opened, saved or started from in this session, newest first (the chooser lists
    /// them).
    pub recent: Vec<PathBuf>,
    /// The document's change count when its recovery file was last written (none written).
    recovery_at: Option<u64>,
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
                let mut doc = Document::from_file(blank(path), path.to_path_buf());
                doc.untitled = true;
                (
                    doc,
                    Some(format!(
                        "cannot open the scenario: {e} (the file is left as it is; Save asks for a new name)"
                    )),
                )
            }
        };
        let (jobs, job_rx) = channel::<Job>();
        let (msg_tx, messages) = channel::<Message>();
        let w = wake.clone();
        // Without its thread the engine cannot run; the window still opens and says so (a job
        // sent then fails, and the top bar asks to restart).
        let spawned = std::thread::Builder::new()
            .name("tiltyard-engine".into())
            .spawn(move || worker::run(job_rx, msg_tx, move || w()));
        let notice = match spawned {
            Ok(_) => notice,
            Err(e) => Some(format!("the engine thread could not start: {e}")),
        };
        let prompt = files::newer_recovery(path).map(|r| Prompt::Recover { edits: Box::new(r) });
        let narrative = narrative::NarrativeState::for_file(&doc.file);
        TiltyardApp {
            session: Session::new(jobs, messages),
            view: View::for_file(&doc.file),
            doc,
            notice,
            second: None,
            export: None,
            narrative,
            reverse: reverse_panel::ReverseState::default(),
            prompt,
            dialogs: Dialogs::new(picker),
            chores: Chores::start(),
            saving: false,
            document: 0,
            discarded: None,
            after_save_as: None,
            wake,
            last_autosave: Instant::now(),
            chooser: None,
            recent: vec![path.to_path_buf()],
            recovery_at: None,
            close_confirmed: false,
        }
    }

    /// The generation of the newest job sent.
    pub fn generation(&self) -> u64 {
        self.session.generation
    }

    /// The scenario as last sent to the engine.
    pub fn sent(&self) -> Option<&ScenarioFile> {
        self.session.sent.as_ref()
    }

    /// A series as people name it (its label in the scenario file, else its column name).
    pub fn shown(&self, name: &str) -> String {
        self.doc
            .file
            .series
            .iter()
            .find(|s| s.name == name)
            .map_or(name, |s| s.shown())
            .to_string()
    }

    /// What a series' values in `units` are measured in, in words.
    pub fn measure(&self, name: &str, units: crate::scenario::Units) -> String {
        self.doc
            .file
            .series
            .iter()
            .find(|s| s.name == name)
            .map_or_else(|| units.words(), |s| s.measure(units))
    }

    /// The checks shown were made with other posterior draws than the ones being made now (the
    /// model, data, transforms, horizon, draws, seed or stationarity filter changed): they are
    /// greyed and said to be old.
    pub fn checks_of_another_model(&self) -> bool {
        self.session.checks.is_some() && self.session.checks_model != self.session.sent_model
    }

    /// True while the worker has not finished the newest job.
    pub fn busy(&self) -> bool {
        self.session.sent.as_ref() != Some(&self.doc.file)
            || !matches!(
                self.session.state,
                EngineState::Done { .. } | EngineState::Clashing | EngineState::Failed
            )
    }

    /// Send the scenario to the worker if it changed since the last job.
    fn dispatch(&mut self) {
        if self.session.sent.as_ref() == Some(&self.doc.file) {
            return;
        }
        self.session.cancel.store(true, Ordering::Relaxed);
        self.session.cancel = Arc::new(AtomicBool::new(false));
        self.session.generation += 1;
        self.session.job_started = Instant::now();
        self.session.first_update = None;
        self.session.timing_edit = self.session.sent.is_some();
        self.session.engine_error = None;
        // Until the worker reports on the new job, the old job's state no longer applies.
        self.session.state = EngineState::Idle;
        let job = Job {
            generation: self.session.generation,
            file: self.doc.file.clone(),
            path: self.doc.path.clone(),
            cancel: self.session.cancel.clone(),
        };
        self.session.sent = Some(self.doc.file.clone());
        self.session.sent_model = Some(worker::model_key(&self.doc.file));
        if self.session.jobs.send(job).is_err() {
            self.session.engine_error =
                Some("the engine thread has stopped; save your work and restart".into());
        }
    }

    /// Compare the document with the scenario in `file` (at `path`): it must have the same
    /// series; its fans are drawn on a worker of its own.
    pub fn compare_with(&mut self, path: PathBuf, file: ScenarioFile) {
        self.remember(&path);
        let names = |f: &ScenarioFile| f.series.iter().map(|s| s.name.clone()).collect::<Vec<_>>();
        if names(&file) != names(&self.doc.file) {
            self.notice = Some(format!(
                "cannot compare with {}: it has the series {}, this scenario {}",
                path.display(),
                names(&file).join(", "),
                names(&self.doc.file).join(", ")
            ));
            return;
        }
        if file.horizon != self.doc.file.horizon {
            self.notice = Some(format!(
                "cannot compare with {}: its horizon is {} periods, this scenario's {}",
                path.display(),
                file.horizon,
                self.doc.file.horizon
            ));
            return;
        }
        self.second = Some(second::Second::start(
            path,
            file,
            &self.doc.file,
            self.wake.clone(),
        ));
    }

    /// Take the worker's messages for the newest job, within a time budget.
    fn drain(&mut self) {
        if let Some(s) = &mut self.second {
            s.drain();
            // Shown in this scenario's units: start it again when they change.
            if s.units_differ(&self.doc.file) {
                let (path, file) = (s.path.clone(), s.file.clone());
                self.second = Some(second::Second::start(
                    path,
                    file,
                    &self.doc.file,
                    self.wake.clone(),
                ));
            }
        }
        if let Some(answer) = self.export.as_mut().and_then(|e| e.done()) {
            self.export = None;
            self.notice = Some(match answer {
                Ok(text) => text,
                Err(e) => format!("cannot write the briefing pack: {e}"),
            });
        }
        let start = Instant::now();
        while start.elapsed() < DRAIN_BUDGET {
            let Ok(message) = self.session.messages.try_recv() else {
                break;
            };
            match message {
                Message::State(g, s) if g == self.session.generation => self.session.state = s,
                Message::Model(g, line) if g == self.session.generation => {
                    self.session.model_line = line
                }
                Message::Checks(g, report) if g == self.session.generation => {
                    // The checks are of the scenario last sent (the newest generation).
                    if let Some(f) = &self.session.sent {
                        self.session.checked = (f.pins.len(), f.corridors.len());
                    }
                    self.session.checks = Some(report);
                    self.session.checks_model = self.session.sent_model.clone();
                }
                // Fans without the conditions only stand in for having none at all.
                Message::Results(g, r)
                    if g == self.session.generation
                        && !(r.without_conditions
                            && self
                                .session
                                .results
                                .as_ref()
                                .is_some_and(|x| !x.without_conditions)) =>
                {
                    if self.session.timing_edit {
                        self.session
                            .first_update
                            .get_or_insert(self.session.job_started.elapsed());
                    }
                    self.session.results = Some(r);
                }
                Message::Sources(g, s) if g == self.session.generation => {
                    self.session.sources = Some((g, s))
                }
                Message::LeaveOneOut(g, e) if g == self.session.generation => {
                    self.session.effects = Some((g, e))
                }
                Message::Failed(g, text) if g == self.session.generation => {
                    self.session.engine_error = Some(text)
                }
                _ => {}
            }
        }
    }

    /// The status colour of a condition from the checks.
    pub fn status_of(&self, cref: CondRef) -> Option<Severity> {
        let field = cref.field();
        let checks = self.session.checks.as_ref()?;
        let f = &self.doc.file;
        if self.session.checked != (f.pins.len(), f.corridors.len()) {
            return None;
        }
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

    /// True when the shown fans are from before a clash or a failure.
    pub fn stale(&self) -> bool {
        matches!(
            self.session.state,
            EngineState::Clashing | EngineState::Failed
        )
    }

    /// True while a file dialog is up (the window waits for it, without blocking).
    pub fn dialog_open(&self) -> bool {
        self.dialogs.open
    }

    /// True while a handle or a new corridor is being dragged on some chart.
    pub fn dragging(&self) -> bool {
        self.view.charts.values().any(|m| m.drag.is_some())
    }

    /// Apply an action of the chart of series or shock `name`: edits go to the document (one
    /// undo step each, or one per gesture), the rest to the view.
    pub fn apply(&mut self, subject: Subject, name: &str, action: ChartAction) {
        match action {
            ChartAction::BeginGesture => self.doc.begin_gesture(),
            ChartAction::EndGesture => self.doc.end_gesture(),
            ChartAction::Select(s) => self.view.selected = s,
            ChartAction::Remove(cref) => self.remove(cref),
            ChartAction::Enlarge => {
                let i = self
                    .doc
                    .file
                    .series
                    .iter()
                    .position(|s| s.name == name)
                    .map(|i| (subject, i));
                self.view.enlarged = if self.view.enlarged == i { None } else { i };
            }
            edit => {
                let mut select = None;
                self.doc
                    .edit(|f| select = edits::apply(f, subject, name, edit));
                if select.is_some() {
                    self.view.selected = select;
                }
            }
        }
    }

    /// Add a pin (one undo step) and select it.
    pub fn add_pin(&mut self, pin: PinSpec) {
        self.add_pins(vec![pin]);
    }

    /// Add pins (one undo step) and select the last.
    pub fn add_pins(&mut self, pins: Vec<PinSpec>) {
        if pins.is_empty() {
            return;
        }
        self.doc.edit(|f| f.pins.extend(pins));
        self.view.selected = Some(CondRef::Pin(self.doc.file.pins.len() - 1));
    }

    /// Add a corridor (one undo step) and select it.
    pub fn add_corridor(&mut self, corridor: CorridorSpec) {
        self.doc.edit(|f| f.corridors.push(corridor));
        self.view.selected = Some(CondRef::Corridor(self.doc.file.corridors.len() - 1));
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
        self.view.selected = None;
    }

    fn shortcuts(&mut self, ctx: &egui::Context) {
        use egui::{Key, KeyboardShortcut, Modifiers};
        let undo = KeyboardShortcut::new(Modifiers::COMMAND, Key::Z);
        let redo = KeyboardShortcut::new(Modifiers::COMMAND | Modifiers::SHIFT, Key::Z);
        let redo_y = KeyboardShortcut::new(Modifiers::COMMAND, Key::Y);
        let save = KeyboardShortcut::new(Modifiers::COMMAND, Key::S);
        // Not while a question is asked or a dialog is up; undo, redo and Delete not while a
        // drag is under way (it holds indices into the lists) or a field is being typed in
        // (the field has its own).
        if self.prompt.is_some() || self.dialogs.open {
            return;
        }
        let typing = ctx.text_edit_focused() || self.dragging();
        let (do_redo, do_undo, do_save, delete) = ctx.input_mut(|i| {
            let redo = !typing && (i.consume_shortcut(&redo) || i.consume_shortcut(&redo_y));
            let undo = !typing && i.consume_shortcut(&undo);
            let save = i.consume_shortcut(&save);
            let delete = !typing && i.key_pressed(Key::Delete);
            (redo, undo, save, delete)
        });
        // Plain keys only when no widget has the keyboard (a focused number field takes the
        // arrows itself).
        let focused = ctx.memory(|m| m.focused().is_some());
        // Presses of a key with no modifier this frame (several may come in one frame).
        let plain = |i: &egui::InputState, k: Key| {
            if typing || focused || !i.modifiers.is_none() {
                0
            } else {
                i.num_presses(k) as i64
            }
        };
        let (up, down, left, right, toggle) = ctx.input(|i| {
            (
                plain(i, Key::ArrowUp),
                plain(i, Key::ArrowDown),
                plain(i, Key::ArrowLeft),
                plain(i, Key::ArrowRight),
                plain(i, Key::G),
            )
        });
        // Enter enlarges the chart of the selected condition (again: back to all); Escape
        // goes back to all.
        let (enter, escape) = ctx.input(|i| (plain(i, Key::Enter), plain(i, Key::Escape)));
        if enter % 2 == 1
            && let Some(chart) = self.view.selected.and_then(|c| self.chart_of(c))
        {
            self.view.subject = chart.0;
            self.view.enlarged = if self.view.enlarged == Some(chart) {
                None
            } else {
                Some(chart)
            };
        }
        if escape > 0 {
            self.view.enlarged = None;
        }
        if toggle % 2 == 1 {
            self.view.snapping = !self.view.snapping;
        }
        if let Some(cref) = self.view.selected {
            let steps = i32::try_from(up - down).unwrap_or(0);
            let periods = right - left;
            if steps != 0 || periods != 0 {
                self.nudge(cref, steps, periods);
            }
        }
        if do_redo {
            self.doc.redo();
        }
        if do_undo {
            self.doc.undo();
        }
        if do_save {
            self.save(None);
        }
        if delete && let Some(cref) = self.view.selected {
            self.remove(cref);
        }
    }

    /// The chart a condition is drawn on: its series' or its shock's.
    pub fn chart_of(&self, cref: CondRef) -> Option<(Subject, usize)> {
        let f = &self.doc.file;
        let (series, shock) = match cref {
            CondRef::Pin(k) => f.pins.get(k).map(|p| (&p.series, &p.shock))?,
            CondRef::Corridor(k) => f.corridors.get(k).map(|c| (&c.series, &c.shock))?,
        };
        let (subject, name) = match (series, shock) {
            (Some(name), _) => (Subject::Series, name),
            (None, Some(name)) => (Subject::Shock, name),
            _ => return None,
        };
        f.series
            .iter()
            .position(|s| &s.name == name)
            .map(|i| (subject, i))
    }

    /// Move a condition by `steps` of its chart's snapping step (a corridor's bounds all
    /// together) and by `periods` in time, staying within the forecast.
    pub fn nudge(&mut self, cref: CondRef, steps: i32, periods: i64) {
        let Some(results) = self.session.results.clone() else {
            return;
        };
        let f = &self.doc.file;
        let chart = self.chart_of(cref);
        // The chart's step when the condition is in the chart's units, else one of its own.
        let units = match cref {
            CondRef::Pin(k) => f.pins.get(k).map(|p| (p.units, p.value.abs())),
            CondRef::Corridor(k) => f.corridors.get(k).map(|c| (c.units, 1.0)),
        };
        let same_units = match (chart, units) {
            (Some((Subject::Shock, _)), _) => true,
            (Some((Subject::Series, i)), Some((u, _))) => {
                f.series.get(i).map(|s| s.display) == Some(u)
            }
            _ => false,
        };
        let step = chart
            .filter(|_| same_units)
            .and_then(|c| self.view.charts.get(&c))
            .map(|m| m.step)
            .filter(|&s| s > 0.0)
            .unwrap_or_else(|| chart::snap_step(5.0 * units.map_or(1.0, |u| u.1.max(1.0))));
        let delta = f64::from(steps) * step;
        let h = (results.labels.len() as i64 - results.history as i64 - 1).min(f.horizon as i64);
        // A label moved by `periods` (if it stays within the forecast).
        let shifted = |label: &str| -> Option<String> {
            let t = chart::horizon(&results, label)? + periods;
            (1..=h)
                .contains(&t)
                .then(|| results.label(t as f64).map(str::to_string))?
        };
        self.doc
            .edit(|f| edits::nudge(f, cref, (steps != 0).then_some(delta), &shifted));
    }

    /// Save to the document's path (atomically, on the chores' thread; the recovery file goes
    /// once it is saved), then do `then`. A new scenario, or one whose file could not be read,
    /// asks where instead.
    pub fn save(&mut self, then: Option<AfterSave>) {
        self.commit_narrative();
        if self.doc.untitled {
            self.after_save_as = then;
            self.pick(Purpose::SaveAs);
            return;
        }
        let to = self.doc.path.clone();
        self.save_to(to, then);
    }

    fn save_to(&mut self, to: PathBuf, then: Option<AfterSave>) {
        self.remember(&to);
        self.chores.save(files::Save {
            document: self.document,
            from: self.doc.path.clone(),
            to,
            file: self.doc.file.clone(),
            then,
        });
        self.saving = true;
    }

    /// Reports of saves and chores.
    fn chores_done(&mut self) {
        while let Some(reply) = self.chores.reply() {
            self.take_reply(reply);
        }
    }

    fn take_reply(&mut self, reply: files::Reply) {
        match reply {
            files::Reply::Failed(text) => self.notice = Some(text),
            files::Reply::SaveFailed(text) => {
                self.saving = false;
                self.notice = Some(text);
            }
            files::Reply::Saved(save, written) if save.document == self.document => {
                self.saving = false;
                self.doc.saved_as(&save.to, *written, &save.file.dataset);
                self.recovery_at = None;
                self.notice = None;
                match save.then {
                    // Edits made while saving are asked about again, not dropped.
                    Some(then) if self.doc.is_dirty() => {
                        self.prompt = Some(Prompt::Unsaved { then })
                    }
                    Some(then) => self.proceed(then),
                    None => {}
                }
            }
            files::Reply::Saved(..) | files::Reply::Flushed => {}
        }
    }

    /// Open, New or New from data, after asking about unsaved changes.
    pub fn ask(&mut self, then: AfterSave) {
        self.commit_narrative();
        if self.doc.is_dirty() {
            self.prompt = Some(Prompt::Unsaved { then });
        } else {
            self.proceed(then);
        }
    }

    /// Go on once unsaved changes are dealt with.
    pub fn proceed(&mut self, then: AfterSave) {
        match then {
            AfterSave::Open => self.pick(Purpose::Open),
            AfterSave::NewFromData => self.pick(Purpose::NewFromData),
            AfterSave::New => self.new_scenario(),
            AfterSave::Close => self.confirm_close(),
        }
    }

    /// A blank scenario on the same data, series and model: no conditions, not yet saved.
    pub fn new_scenario(&mut self) {
        let mut file = self.doc.file.clone();
        file.name = "New scenario".into();
        file.narrative.clear();
        file.pins.clear();
        file.corridors.clear();
        file.drivers = None;
        let path = self.doc.path.with_file_name("new-scenario.ron");
        self.install(file, path, true);
    }

    /// Start a new scenario on a dataset (read here; the dialog reads it on its own thread).
    pub fn new_from_dataset(&mut self, dataset: &Path) {
        let file = files::scenario_for(dataset);
        self.take_new(dataset, file);
    }

    fn take_new(&mut self, dataset: &Path, file: Result<ScenarioFile, String>) {
        match file {
            Ok(file) => {
                let path = dataset.with_file_name(format!(
                    "{}-scenario.ron",
                    dataset
                        .file_stem()
                        .map(|s| s.to_string_lossy().into_owned())
                        .unwrap_or_else(|| "new".into())
                ));
                self.install(file, path, true);
            }
            Err(e) => self.notice = Some(format!("cannot start a scenario on this data: {e}")),
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

    /// Open a scenario from a path (no dialog; read here, where the dialog reads it on its
    /// own thread).
    pub fn open_path(&mut self, path: &Path) {
        let (file, recovery) = files::read_scenario(path);
        self.take_opened(path, file, recovery);
    }

    fn take_opened(
        &mut self,
        path: &Path,
        file: Result<ScenarioFile, String>,
        recovery: Option<files::Recovered>,
    ) {
        match file {
            Ok(file) => {
                // Edits just discarded are not offered back (`install` removes their file).
                let discarded = self.discarded.as_deref() == Some(path);
                self.install(file, path.to_path_buf(), false);
                self.prompt = recovery
                    .filter(|_| !discarded)
                    .map(|r| Prompt::Recover { edits: Box::new(r) });
            }
            Err(e) => self.notice = Some(format!("cannot open {}: {e}", path.display())),
        }
    }

    /// Replace the document. The edits of the one it replaces were saved or discarded before;
    /// its recovery file goes now, not before (a cancelled dialog keeps both).
    fn install(&mut self, file: ScenarioFile, path: PathBuf, untitled: bool) {
        self.forget_recovery();
        self.remember(&path);
        self.doc = Document::from_file(file, path);
        self.narrative = narrative::NarrativeState::for_file(&self.doc.file);
        self.doc.untitled = untitled;
        self.document += 1;
        self.discarded = None;
        self.saving = false;
        self.after_save_as = None;
        // The engine starts afresh on the new document, even if its file equals the last one
        // sent (its dataset may sit elsewhere).
        self.session.sent = None;
        self.session.sent_model = None;
        self.session.state = EngineState::Idle;
        self.session.model_line.clear();
        self.session.engine_error = None;
        self.session.first_update = None;
        self.view.selected = None;
        self.view.enlarged = None;
        self.session.results = None;
        self.session.sources = None;
        self.session.effects = None;
        self.second = None;
        self.view.pane = grid::Pane::Charts;
        self.session.checks = None;
        self.notice = None;
        self.view.charts.clear();
        self.view.hidden.clear();
        self.view.grid = grid::GridView::for_file(&self.doc.file);
        self.view.list_filter.clear();
    }

    /// Let the unsaved edits go: on close at once, otherwise once the next scenario is there.
    pub fn discard(&mut self, then: AfterSave) {
        if then == AfterSave::Close {
            self.forget_recovery();
        } else {
            self.discarded = Some(self.doc.path.clone());
        }
    }

    fn answers(&mut self) {
        let answer = match self.dialogs.answer() {
            None => return,
            Some(files::DialogReply::Unavailable {
                purpose,
                start,
                name,
            }) => {
                self.chooser = Some(chooser::Chooser::new(purpose, &start, &name, &self.recent));
                return;
            }
            Some(files::DialogReply::Answered(answer)) => answer,
        };
        {
            match answer {
                Some(Answer::Open(p, read)) => {
                    let (file, recovery) = *read;
                    self.take_opened(&p, file, recovery)
                }
                Some(Answer::NewFromData(p, file)) => self.take_new(&p, *file),
                Some(Answer::ExportPack(dir)) => {
                    let second = self
                        .second
                        .as_ref()
                        .map(|s| (s.file.clone(), s.path.clone()));
                    self.export = Some(export::Export::start(
                        dir,
                        self.doc.file.clone(),
                        self.doc.path.clone(),
                        second,
                        self.wake.clone(),
                    ));
                }
                Some(Answer::ExportTable(p)) => {
                    if let Some(r) = &self.session.results {
                        self.chores.write(p, paths_table::csv_text(r));
                    }
                }
                Some(Answer::Compare(p, file)) => match *file {
                    Ok(file) => self.compare_with(p, file),
                    Err(e) => self.notice = Some(format!("cannot compare: {e}")),
                },
                None => self.after_save_as = None,
                Some(Answer::SaveAs(p)) => {
                    let then = self.after_save_as.take();
                    self.save_to(p, then);
                }
            }
        }
    }

    /// Unsaved changes go to the recovery file within [`RECOVERY_PAUSE`] of being made; when
    /// undo brings the document back to what is saved, the recovery file goes.
    fn autosave(&mut self) {
        let dirty = self.doc.is_dirty();
        // Not while saving: the save removes the recovery file, and must have the last word.
        if dirty && self.recovery_behind() && self.last_autosave.elapsed() >= RECOVERY_PAUSE {
            self.last_autosave = Instant::now();
            self.chores
                .write(self.doc.recovery_path(), self.doc.recovery_text());
            self.recovery_at = Some(self.doc.changes());
        } else if !dirty && self.recovery_at.is_some() {
            self.forget_recovery();
        }
    }

    /// Unsaved changes not yet in the recovery file (none while a save runs).
    fn recovery_behind(&self) -> bool {
        !self.saving && self.recovery_at != Some(self.doc.changes())
    }

    /// Remove the document's recovery file (after a save, or when its edits are let go).
    pub fn forget_recovery(&mut self) {
        self.chores.remove(self.doc.recovery_path());
        self.recovery_at = None;
    }

    /// Put `path` first among the recent files.
    fn remember(&mut self, path: &Path) {
        self.recent.retain(|p| p != path);
        self.recent.insert(0, path.to_path_buf());
        self.recent.truncate(12);
    }

    /// The own chooser's answer this frame.
    pub fn chooser_outcome(&mut self, outcome: chooser::Outcome) {
        let Some(purpose) = self.chooser.as_ref().map(|c| c.purpose) else {
            return;
        };
        match outcome {
            chooser::Outcome::Waiting => return,
            chooser::Outcome::Chosen(path) => {
                self.dialogs.chosen(purpose, path, self.wake.clone());
            }
            chooser::Outcome::Cancelled => {
                self.dialogs.cancelled();
                self.after_save_as = None;
            }
        }
        self.chooser = None;
    }

    /// Draw the window and handle everything that happened since the last frame.
    pub fn ui(&mut self, ui: &mut egui::Ui) {
        let ctx = ui.ctx().clone();
        self.drain();
        self.answers();
        self.chores_done();
        self.shortcuts(&ctx);
        let closing = ctx.input(|i| i.viewport().close_requested());
        if closing {
            self.commit_narrative();
        }
        if closing && !self.close_confirmed && self.doc.is_dirty() {
            ctx.send_viewport_cmd(egui::ViewportCommand::CancelClose);
            self.prompt = Some(Prompt::Unsaved {
                then: AfterSave::Close,
            });
        }
        panels::show(ui, self);
        if self.close_confirmed {
            // Let queued file chores (a recovery file to remove) finish before the process
            // goes: a short wait, on the way out.
            for reply in self.chores.finish(Duration::from_secs(2)) {
                self.take_reply(reply);
            }
            ctx.send_viewport_cmd(egui::ViewportCommand::Close);
        }
        // Every change, also mid-gesture, goes to the engine (which drops stale jobs).
        self.dispatch();
        self.autosave();
        if self.busy() {
            ctx.request_repaint_after(Duration::from_millis(50));
        }
        // Wake to write the recovery file even if nothing else happens.
        if self.doc.is_dirty() && self.recovery_behind() {
            ctx.request_repaint_after(RECOVERY_PAUSE.saturating_sub(self.last_autosave.elapsed()));
        }
    }

    /// Close after the unsaved-changes prompt was answered.
    /// A narrative being typed becomes an edit (saved, asked about, recovered like any other)
    /// before the document is saved, replaced or closed.
    fn commit_narrative(&mut self) {
        if let Some(text) = self.narrative.draft.take() {
            self.doc.edit(|f| f.narrative = text);
            self.narrative.touch(&self.doc.file);
        }
    }

    pub fn confirm_close(&mut self) {
        self.close_confirmed = true;
    }

    pub fn clear_recovery_prompt(&mut self) {
        self.forget_recovery();
        self.prompt = None;
    }

    /// Take the edits from a recovery file into the document (one undo step).
    pub fn recover(&mut self, edits: files::Recovered) {
        match edits.file {
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
        targets: Vec::new(),
        checks: Default::default(),
        reweight: false,
        largest_root: crate::scenario::LargestRoot::Keep,
    }
}

/// Run the window on `path` until it is closed.
pub fn run_window(path: PathBuf, compare: Option<PathBuf>) -> Result<(), String> {
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
            let mut app = TiltyardApp::new(&path, Arc::new(files::DesktopPicker), wake);
            if let Some(other) = compare {
                match crate::scenario::read(&other) {
                    Ok(file) => app.compare_with(other, file),
                    Err(e) => app.notice = Some(format!("cannot compare: {e}")),
                }
            }
            Ok(Box::new(app))
        }),
    )
    .map_err(|e| e.to_string())
}
