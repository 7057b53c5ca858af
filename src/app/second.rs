//! A second scenario beside the document, for comparison: read-only, sampled once on a worker
//! of its own (the same engine and pipeline as the document's), its fans drawn on the same
//! charts, its conditions set beside the document's, and a table of the differences.

use std::path::PathBuf;
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{Receiver, Sender, channel};

use egui::RichText;

use super::TiltyardApp;
use super::palette::Palette;
use super::worker::{self, EngineState, Job, Message, Results};
use crate::compare::{Change, condition_changes};
use crate::report::summary::two_decimals;
use crate::scenario::ScenarioFile;

/// The second scenario and what its worker has said.
pub struct Second {
    pub path: PathBuf,
    pub file: ScenarioFile,
    /// The file as sampled: in the document's display units.
    shown: ScenarioFile,
    pub results: Option<Arc<Results>>,
    /// Its split and statistics, once all its draws are in.
    pub sources: Option<Arc<super::worker::Sources>>,
    pub state: EngineState,
    pub error: Option<String>,
    messages: Receiver<Message>,
    /// Dropped with the comparison: the worker's loop ends.
    _jobs: Sender<Job>,
    cancel: Arc<AtomicBool>,
}

impl Second {
    /// Start sampling the scenario in `file` on a worker of its own, its series shown in the
    /// display units of `shown_as` (the document), so that both read alike.
    pub fn start(
        path: PathBuf,
        file: ScenarioFile,
        shown_as: &ScenarioFile,
        wake: Arc<dyn Fn() + Send + Sync>,
    ) -> Second {
        let mut job_file = file.clone();
        for (s, d) in job_file.series.iter_mut().zip(&shown_as.series) {
            s.display = d.display;
        }
        let (jobs, job_rx) = channel();
        let (tx, messages) = channel();
        let cancel = Arc::new(AtomicBool::new(false));
        let started = std::thread::Builder::new()
            .name("second scenario".into())
            .spawn(move || worker::run(job_rx, tx, move || wake()));
        let error = match started {
            Ok(_) => {
                let _ = jobs.send(Job {
                    generation: 1,
                    file: job_file.clone(),
                    path: path.clone(),
                    cancel: cancel.clone(),
                });
                None
            }
            Err(e) => Some(format!("cannot start its engine: {e}")),
        };
        Second {
            path,
            file,
            shown: job_file,
            results: None,
            sources: None,
            state: EngineState::Idle,
            error,
            messages,
            _jobs: jobs,
            cancel,
        }
    }

    /// True when the document's display units are no longer those this was drawn in.
    pub fn units_differ(&self, doc: &ScenarioFile) -> bool {
        self.shown
            .series
            .iter()
            .zip(&doc.series)
            .any(|(a, b)| a.display != b.display)
    }

    /// Its fans, when they are on the same periods as the document's `own`.
    pub fn comparable(&self, own: &Results) -> Option<&Arc<Results>> {
        self.results.as_ref().filter(|r| r.last == own.last)
    }

    /// Take what the worker said.
    pub fn drain(&mut self) {
        while let Ok(m) = self.messages.try_recv() {
            match m {
                Message::Results(_, r) => self.results = Some(r),
                Message::Sources(_, s) => self.sources = Some(s),
                Message::State(_, s) => self.state = s,
                Message::Failed(_, e) => self.error = Some(e),
                _ => {}
            }
        }
    }

    pub fn name(&self) -> &str {
        &self.file.name
    }
}

impl Drop for Second {
    fn drop(&mut self) {
        self.cancel.store(true, Ordering::Relaxed);
    }
}

/// The comparison under the conditions table: the other scenario, its state, what differs
/// in the conditions, and a way to stop comparing.
pub fn panel(ui: &mut egui::Ui, app: &mut TiltyardApp, pal: &Palette) {
    let Some(second) = &app.second else {
        return;
    };
    ui.separator();
    let mut stop = false;
    ui.horizontal_wrapped(|ui| {
        ui.strong("Compared with");
        ui.label(RichText::new(second.name()).color(pal.second));
        if ui.small_button("stop comparing").clicked() {
            stop = true;
        }
    });
    let other_periods = match (&second.results, &app.session.results) {
        (Some(r), Some(own)) => r.last != own.last,
        _ => false,
    };
    let state = match (&second.error, &second.state) {
        (None, _) if other_periods => {
            "its data end in another period: nothing to compare period by period".into()
        }
        (Some(e), _) => format!("cannot sample it: {e}"),
        (None, EngineState::Clashing) => "its conditions clash: nothing to compare".into(),
        (None, EngineState::Done { draws, .. }) => format!("{draws} posterior draws"),
        (None, _) => "sampling…".into(),
    };
    ui.label(RichText::new(state).small().color(pal.muted));
    let changes = condition_changes(&app.doc.file, &second.file);
    if changes.is_empty() {
        ui.label(RichText::new("The same conditions as this scenario.").small());
    }
    for c in changes {
        let (word, text) = match c {
            Change::Added(t) => ("only there", t),
            Change::Removed(t) => ("only here", t),
            Change::Changed { first, second } => ("here", format!("{first}\nthere: {second}")),
        };
        ui.label(RichText::new(format!("{word}: {text}")).small());
    }
    if stop {
        app.second = None;
    }
}

/// The differences by series and period: each scenario's median and 90% band, and the median
/// of the second minus that of the document.
pub fn table(ui: &mut egui::Ui, app: &TiltyardApp, pal: &Palette) {
    let (Some(second), Some(first)) = (&app.second, &app.session.results) else {
        return;
    };
    let Some(other) = second.comparable(first) else {
        ui.label(RichText::new("The second scenario's fans are on their way.").color(pal.muted));
        return;
    };
    ui.label(
        RichText::new(format!(
            "{} against {}: medians and 90% bands; the difference is of the medians (second minus this one).",
            second.name(),
            app.doc.file.name
        ))
        .small()
        .color(pal.muted),
    );
    egui::ScrollArea::both()
        .id_salt("difference table")
        .show(ui, |ui| {
            if let (Some((_, mine)), Some(theirs)) = (&app.session.sources, &second.sources) {
                statistics(ui, &mine.statistics, &theirs.statistics, pal);
                ui.add_space(10.0);
                ui.strong("By period");
            }
            egui::Grid::new("difference grid")
                .striped(true)
                .min_col_width(60.0)
                .show(ui, |ui| {
                    ui.strong("series");
                    ui.strong("units");
                    ui.strong("period");
                    ui.strong("this: median");
                    ui.strong("5% … 95%");
                    ui.strong("second: median");
                    ui.strong("5% … 95%");
                    ui.strong("difference");
                    ui.end_row();
                    for view in &first.series {
                        let Some(o) = other.series.iter().find(|s| s.name == view.name) else {
                            continue;
                        };
                        // The series as people name it, and its units in words.
                        let (shown, measure) =
                            (app.shown(&view.name), app.measure(&view.name, view.units));
                        for (a, b) in view.conditional.iter().zip(&o.conditional) {
                            ui.label(&shown);
                            ui.label(RichText::new(&measure).small().color(pal.muted));
                            ui.label(first.label(a.x).unwrap_or(""));
                            ui.label(format!("{:.2}", a.q[3]));
                            ui.label(format!("{:.2} … {:.2}", a.q[0], a.q[6]));
                            ui.label(RichText::new(format!("{:.2}", b.q[3])).color(pal.second));
                            ui.label(format!("{:.2} … {:.2}", b.q[0], b.q[6]));
                            let d = two_decimals(b.q[3] - a.q[3], true);
                            ui.label(RichText::new(d).strong());
                            ui.end_row();
                        }
                    }
                });
        });
}

/// The statistics people quote in both scenarios: medians with their 90% bands, and the
/// difference of the medians (second minus this one).
fn statistics(
    ui: &mut egui::Ui,
    mine: &[crate::report::Stat],
    theirs: &[crate::report::Stat],
    pal: &Palette,
) {
    use crate::report::summary::{HEADLINE, StatKind, band};
    ui.strong("Summary statistics");
    egui::Grid::new("compared statistics")
        .striped(true)
        .min_col_width(56.0)
        .show(ui, |ui| {
            for head in [
                "series",
                "statistic",
                "units",
                "this one",
                "second",
                "difference",
            ] {
                ui.strong(head);
            }
            ui.end_row();
            for a in mine.iter().filter(|s| {
                s.kind == StatKind::Conditional && HEADLINE.contains(&s.statistic.as_str())
            }) {
                let Some(b) = theirs.iter().find(|s| {
                    s.kind == StatKind::Conditional
                        && s.series == a.series
                        && s.statistic == a.statistic
                }) else {
                    continue;
                };
                ui.label(&a.series);
                ui.label(a.statistic.replace('_', " "));
                ui.label(RichText::new(&a.units).small().color(pal.muted));
                ui.label(band(&a.quantiles));
                ui.label(RichText::new(band(&b.quantiles)).color(pal.second));
                let d = two_decimals(b.quantiles[3] - a.quantiles[3], true);
                ui.label(RichText::new(d).strong());
                ui.end_row();
            }
        });
}
