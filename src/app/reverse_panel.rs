//! The reverse stress test in the window: the outcome (a series at most or at least a
//! threshold, at some period of a range), found off the window's thread with the headless
//! engine ([`crate::reverse`]) on the scenario as it stands, and a button that adds the
//! outcome as a pin where it happens (one undo step; the user edits it further).

use std::sync::Arc;
use std::sync::mpsc::{Receiver, TryRecvError, channel};

use egui::RichText;

use super::TiltyardApp;
use super::palette::Palette;
use super::panels::CHART_UNITS;
use crate::pipeline::Model;
use crate::reverse::{Outcome, path_table, reverse, summary_lines};
use crate::scenario::{PinSpec, ScenarioFile, Setup, Units};

/// The form, the search under way and its last answer.
#[derive(Default)]
pub struct ReverseState {
    pub open: bool,
    pub series: String,
    pub units: Units,
    pub at_most: bool,
    pub threshold: f64,
    pub from: String,
    pub to: String,
    job: Option<Receiver<Result<Found, String>>>,
    pub answer: Option<Result<Found, String>>,
}

/// What a search found: lines to read, and the pin that makes it a scenario.
#[derive(Debug, Clone)]
pub struct Found {
    pub lines: Vec<String>,
    /// `None` when the scenario already meets the outcome on average.
    pub pin: Option<PinSpec>,
}

impl ReverseState {
    fn start(
        &mut self,
        file: ScenarioFile,
        path: std::path::PathBuf,
        wake: Arc<dyn Fn() + Send + Sync>,
    ) {
        let outcome = Outcome {
            series: self.series.clone(),
            units: self.units,
            threshold: self.threshold,
            at_most: self.at_most,
            from: self.from.clone(),
            to: self.to.clone(),
        };
        let (tx, rx) = channel();
        let spawned = std::thread::Builder::new()
            .name("reverse stress test".into())
            .spawn(move || {
                // A panic is an answer too: the window must not wait for ever.
                let answer = std::panic::catch_unwind(|| find(file, &path, &outcome))
                    .unwrap_or_else(|_| Err("an internal error stopped the search".into()));
                let _ = tx.send(answer);
                wake();
            });
        match spawned {
            Ok(_) => {
                self.job = Some(rx);
                self.answer = None;
            }
            Err(e) => self.answer = Some(Err(format!("cannot start the search: {e}"))),
        }
    }

    fn poll(&mut self) {
        if let Some(rx) = &self.job {
            match rx.try_recv() {
                Ok(answer) => {
                    self.answer = Some(answer);
                    self.job = None;
                }
                Err(TryRecvError::Disconnected) => {
                    self.answer = Some(Err("the search stopped without a word".into()));
                    self.job = None;
                }
                Err(TryRecvError::Empty) => {}
            }
        }
    }
}

/// The search itself (on its own thread): the model at its central parameters, then the
/// most plausible path to the outcome.
fn find(file: ScenarioFile, path: &std::path::Path, outcome: &Outcome) -> Result<Found, String> {
    let setup = Setup::new(file, path).map_err(|e| e.to_string())?;
    let model = Model::new(&setup).map_err(|e| e.to_string())?;
    let outcomes = std::slice::from_ref(outcome);
    let r = reverse(&setup, &model.central, outcomes).map_err(|e| e.to_string())?;
    let mut lines = summary_lines(outcomes, &r);
    let period = &r.at[0].0;
    let t = setup
        .horizon_of(period, "period")
        .map_err(|e| e.to_string())?;
    let at: Vec<String> = path_table(&setup, &r)
        .iter()
        .enumerate()
        .map(|(i, (_, v))| format!("{} {:.2}", setup.shown(i), v[t - 1]))
        .collect();
    lines.push(format!("The path in {period}: {}.", at.join(", ")));
    let pin = r.at[0].1.then(|| r.scenario.pins.last().cloned()).flatten();
    Ok(Found { lines, pin })
}

/// The window of the reverse stress test, when open.
pub fn show(ctx: &egui::Context, app: &mut TiltyardApp, pal: &Palette) {
    app.reverse.poll();
    if !app.reverse.open {
        return;
    }
    if app.reverse.series.is_empty() {
        let f = &app.doc.file;
        app.reverse.series = f.series.first().map(|s| s.name.clone()).unwrap_or_default();
        app.reverse.from = app
            .session
            .results
            .as_ref()
            .and_then(|r| r.label(1.0))
            .unwrap_or_default()
            .to_string();
        app.reverse.to = app
            .session
            .results
            .as_ref()
            .and_then(|r| r.label(f.horizon as f64))
            .unwrap_or_default()
            .to_string();
        app.reverse.at_most = true;
    }
    let mut open = true;
    egui::Window::new("Reverse stress test")
        .open(&mut open)
        .collapsible(false)
        .resizable(true)
        .default_width(460.0)
        .default_pos([300.0, 140.0])
        .show(ctx, |ui| form(ui, app, pal));
    app.reverse.open &= open;
}

fn form(ui: &mut egui::Ui, app: &mut TiltyardApp, pal: &Palette) {
    ui.label(
        RichText::new("The most plausible way (the smallest structural shocks) for a series to reach a threshold at some period, keeping the scenario's pins, corridors and drivers.")
            .small()
            .color(pal.muted),
    );
    let names: Vec<(String, String)> = (0..app.doc.file.series.len())
        .map(|i| {
            (
                app.doc.file.series[i].name.clone(),
                app.shown(&app.doc.file.series[i].name),
            )
        })
        .collect();
    let r = &mut app.reverse;
    egui::Grid::new("reverse form")
        .num_columns(2)
        .show(ui, |ui| {
            ui.label("series");
            let shown = names
                .iter()
                .find(|n| n.0 == r.series)
                .map_or(String::new(), |n| n.1.clone());
            egui::ComboBox::from_id_salt("reverse series")
                .selected_text(shown)
                .show_ui(ui, |ui| {
                    for (name, shown) in &names {
                        ui.selectable_value(&mut r.series, name.clone(), shown);
                    }
                });
            ui.end_row();
            ui.label("units");
            egui::ComboBox::from_id_salt("reverse units")
                .selected_text(r.units.words())
                .show_ui(ui, |ui| {
                    for u in CHART_UNITS {
                        ui.selectable_value(&mut r.units, u, u.words());
                    }
                });
            ui.end_row();
            ui.label("outcome");
            ui.horizontal(|ui| {
                ui.selectable_value(&mut r.at_most, true, "at most");
                ui.selectable_value(&mut r.at_most, false, "at least");
                ui.add(
                    egui::DragValue::new(&mut r.threshold)
                        .speed(0.1)
                        .max_decimals(4),
                )
                .accessible_name("threshold");
            });
            ui.end_row();
            ui.label("at some period from");
            ui.horizontal(|ui| {
                ui.add(egui::TextEdit::singleline(&mut r.from).desired_width(70.0))
                    .accessible_name("from");
                ui.label("to");
                ui.add(egui::TextEdit::singleline(&mut r.to).desired_width(70.0))
                    .accessible_name("to");
            });
            ui.end_row();
        });
    answer(ui, app, pal);
}

/// Find, and the answer: its lines and the button that adds the outcome as a pin.
fn answer(ui: &mut egui::Ui, app: &mut TiltyardApp, pal: &Palette) {
    let running = app.reverse.job.is_some();
    if ui
        .add_enabled(!running, egui::Button::new("Find"))
        .clicked()
    {
        let (file, path, wake) = (app.doc.file.clone(), app.doc.path.clone(), app.wake.clone());
        app.reverse.start(file, path, wake);
    }
    if running {
        ui.label(RichText::new("searching…").color(pal.muted));
    }
    match app.reverse.answer.clone() {
        Some(Ok(found)) => {
            for line in &found.lines {
                ui.label(line);
            }
            if let Some(pin) = found.pin
                && ui
                    .button("Add the outcome as a pin")
                    .on_hover_text("The most plausible scenario is the current one with this pin: add it, then edit further")
                    .clicked()
            {
                app.add_pin(pin);
                app.reverse.answer = None;
            }
        }
        Some(Err(why)) => {
            ui.colored_label(pal.clash, why);
        }
        None => {}
    }
}
