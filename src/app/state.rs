//! The window's state besides the document: the engine session (jobs sent, what came back)
//! and the view (how it is shown). The document ([`super::document::Document`]) is what is
//! saved and undone; neither of these is.

use std::collections::{HashMap, HashSet};
use std::sync::Arc;
use std::sync::atomic::AtomicBool;
use std::sync::mpsc::{Receiver, Sender};
use std::time::{Duration, Instant};

use super::chart::ChartMemory;
use super::gesture::CondRef;
use super::worker::{EngineState, Job, Message, Results, Sources, Subject};
use super::{grid, sources};
use crate::attribution::leave_one_out::Effect;
use crate::checks::CheckReport;
use crate::scenario::ScenarioFile;

/// The engine's side of the window: the jobs sent to the worker and what it streamed back for
/// the newest (results are kept until replaced).
pub struct Session {
    pub(super) jobs: Sender<Job>,
    pub(super) messages: Receiver<Message>,
    pub(super) generation: u64,
    pub(super) cancel: Arc<AtomicBool>,
    /// The scenario as last sent.
    pub(super) sent: Option<ScenarioFile>,
    pub(super) job_started: Instant,
    pub results: Option<Arc<Results>>,
    /// The last attribution, and the generation it belongs to (older ones are shown as such).
    pub sources: Option<(u64, Arc<Sources>)>,
    /// Each condition's effect on the medians (leave one out), and its generation.
    pub effects: Option<(u64, Arc<Vec<Effect>>)>,
    pub checks: Option<Box<CheckReport>>,
    /// How many pins and corridors the scenario had when it was checked (the findings name
    /// conditions by position, so they colour nothing once the lists change).
    pub(super) checked: (usize, usize),
    pub state: EngineState,
    pub model_line: String,
    pub engine_error: Option<String>,
    /// Time from the last edit to its first fans (none for a document's first job: that is
    /// an opening, not an edit).
    pub first_update: Option<Duration>,
    /// The job running is an edit's (not a document's first).
    pub(super) timing_edit: bool,
    /// What decides the posterior draws ([`super::worker::model_key`]) of the job sent last,
    /// made once when it is sent, and of the job behind the checks shown.
    pub(super) sent_model: Option<String>,
    pub(super) checks_model: Option<String>,
}

impl Session {
    pub fn new(jobs: Sender<Job>, messages: Receiver<Message>) -> Session {
        Session {
            jobs,
            messages,
            generation: 0,
            cancel: Arc::new(AtomicBool::new(false)),
            sent: None,
            job_started: Instant::now(),
            results: None,
            sources: None,
            effects: None,
            checks: None,
            checked: (0, 0),
            state: EngineState::Idle,
            model_line: String::new(),
            engine_error: None,
            first_update: None,
            timing_edit: false,
            sent_model: None,
            checks_model: None,
        }
    }
}

/// How the window shows the scenario: which pane and charts, what is selected, enlarged or
/// hidden, each chart's memory between frames.
pub struct View {
    /// What the centre shows: charts, where the scenario comes from, or the differences.
    pub pane: grid::Pane,
    /// The attribution view in place of the chart grid, and what it shows.
    pub sources_view: sources::SourcesView,
    pub charts: HashMap<(Subject, usize), ChartMemory>,
    pub hidden: HashSet<String>,
    /// The chart grid's order, search and page.
    pub grid: grid::GridView,
    /// What the series list is narrowed to.
    pub list_filter: String,
    pub selected: Option<CondRef>,
    /// Series charts or shock charts.
    pub subject: Subject,
    /// Values dragged on charts snap to readable steps.
    pub snapping: bool,
    pub enlarged: Option<(Subject, usize)>,
    /// The model settings' window is open.
    pub settings_open: bool,
    /// The window title last sent to the desktop.
    pub title: String,
}

impl View {
    pub fn for_file(file: &ScenarioFile) -> View {
        View {
            pane: grid::Pane::Charts,
            sources_view: sources::SourcesView::default(),
            charts: HashMap::new(),
            hidden: HashSet::new(),
            grid: grid::GridView::for_file(file),
            list_filter: String::new(),
            selected: None,
            subject: Subject::Series,
            snapping: true,
            enlarged: None,
            settings_open: false,
            title: String::new(),
        }
    }
}
