//! The reverse stress test in the window: one or more outcomes (a series at most or at least
//! a threshold, at some period of a range), found off the window's thread with the headless
//! engine ([`crate::reverse`]) on the scenario as it stands, and a button that adds the
//! outcomes that bind as pins where they happen (one undo step; the user edits them further).

use std::sync::Arc;
use std::sync::mpsc::{Receiver, TryRecvError, channel};

use egui::RichText;

use super::TiltyardApp;
use super::palette::Palette;
use super::panels::CHART_UNITS;
use crate::pipeline::Model;
use crate::reverse::{Outcome, path_table, reverse, summary_lines};
use crate::scenario::{PinSpec, ScenarioFile, Setup, Units};

/// One outcome of the form.
#[derive(Debug, Clone, Default)]
pub struct OutcomeForm {
    pub series: String,
    pub units: Units,
    pub at_most: bool,
    pub threshold: f64,
    pub from: String,
    pub to: String,
}

impl OutcomeForm {
    fn outcome(&self) -> Outcome {
        Outcome {
            series: self.series.clone(),
            units: self.units,
            threshold: self.threshold,
            at_most: self.at_most,
            from: self.from.clone(),
            to: self.to.clone(),
        }
    }
}

/// The form, the search under way and its last answer.
#[derive(Default)]
pub struct ReverseState {
    pub open: bool,
    /// The outcomes to reach together (at least one once the form is shown).
    pub outcomes: Vec<OutcomeForm>,
    job: Option<Receiver<Result<Found, String>>>,
    pub answer: Option<Result<Found, String>>,
}

/// What a search found: lines to read, and the pins that make it a scenario.
#[derive(Debug, Clone)]
pub struct Found {
    pub lines: Vec<String>,
    /// The outcomes that bind, as pins where they happen (none when the scenario already
    /// meets them all).
    pub pins: Vec<PinSpec>,
}

impl ReverseState {
    fn start(
        &mut self,
        file: ScenarioFile,
        path: std::path::PathBuf,
        wake: Arc<dyn Fn() + Send + Sync>,
    ) {
        let outcomes: Vec<Outcome> = self.outcomes.iter().map(OutcomeForm::outcome).collect();
        let (tx, rx) = channel();
        let spawned = std::thread::Builder::new()
            .name("reverse stress test".into())
            .spawn(move || {
                // A panic is an answer too: the window must not wait for ever.
                let answer = std::panic::catch_unwind(|| find(file, &path, &outcomes))
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
/// most plausible path to the outcomes.
fn find(file: ScenarioFile, path: &std::path::Path, outcomes: &[Outcome]) -> Result<Found, String> {
    let setup = Setup::new(file, path).map_err(|e| e.to_string())?;
    let model = Model::new(&setup).map_err(|e| e.to_string())?;
    let r = reverse(&setup, &model.central, outcomes).map_err(|e| e.to_string())?;
    let mut lines = summary_lines(&setup, outcomes, &r);
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
    // How the scenario with the outcomes pinned compares with history.
    let pinned = Setup::new(r.scenario.clone(), path).map_err(|e| e.to_string())?;
    if let Some(h) = crate::run::check(&pinned)
        .ok()
        .and_then(|report| report.against_history)
    {
        lines.push(format!("Against history: {}.", h.reading));
    }
    let pins = r.scenario.pins[setup.file.pins.len()..].to_vec();
    Ok(Found { lines, pins })
}

/// A series the form offers: its name, its label, its chart's units and the low end of its
/// fan at the last period (5% quantile, two decimals), the outcome's starting point.
struct Choice {
    name: String,
    shown: String,
    units: Units,
    low: f64,
}

fn choices(app: &TiltyardApp) -> Vec<Choice> {
    let views = app.session.results.as_ref().map(|r| &r.series);
    app.doc
        .file
        .series
        .iter()
        .enumerate()
        .map(|(i, s)| {
            let view = views.and_then(|v| v.get(i));
            Choice {
                name: s.name.clone(),
                shown: app.shown(&s.name),
                units: view.map_or(Units::Level, |v| v.units),
                low: view
                    .and_then(|v| v.conditional.last())
                    .map(|p| (p.q[0] * 100.0).round() / 100.0)
                    .filter(|v| v.is_finite())
                    .unwrap_or(0.0),
            }
        })
        .collect()
}

/// A new outcome: the first series, at most the low end of its fan, over the whole forecast.
fn new_outcome(app: &TiltyardApp, first: Option<&Choice>) -> OutcomeForm {
    let label = |t: f64| {
        app.session
            .results
            .as_ref()
            .and_then(|r| r.label(t))
            .unwrap_or_default()
            .to_string()
    };
    OutcomeForm {
        series: first.map(|c| c.name.clone()).unwrap_or_default(),
        units: first.map_or(Units::Level, |c| c.units),
        threshold: first.map_or(0.0, |c| c.low),
        at_most: true,
        from: label(1.0),
        to: label(app.doc.file.horizon as f64),
    }
}

/// The window of the reverse stress test, when open.
pub fn show(ctx: &egui::Context, app: &mut TiltyardApp, pal: &Palette) {
    app.reverse.poll();
    if !app.reverse.open {
        return;
    }
    if app.reverse.outcomes.is_empty() {
        let first = new_outcome(app, choices(app).first());
        app.reverse.outcomes.push(first);
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
        RichText::new("The most plausible way (the smallest structural shocks) for series to reach thresholds at some period, keeping the scenario's pins, corridors and drivers.")
            .small()
            .color(pal.muted),
    );
    let names = choices(app);
    let fresh = new_outcome(app, names.first());
    let r = &mut app.reverse;
    let several = r.outcomes.len() > 1;
    let mut remove = None;
    for (k, o) in r.outcomes.iter_mut().enumerate() {
        if several {
            ui.horizontal(|ui| {
                ui.strong(format!("outcome {}", k + 1));
                if ui.small_button("remove").clicked() {
                    remove = Some(k);
                }
            });
        }
        outcome_rows(ui, o, k, &names);
    }
    if let Some(k) = remove {
        r.outcomes.remove(k);
    }
    if ui
        .button("+ another outcome")
        .on_hover_text("Outcomes to reach together: every combination of their periods is searched")
        .clicked()
    {
        r.outcomes.push(fresh);
    }
    answer(ui, app, pal);
}

/// One outcome's fields (ids salted by its place `k`); another series brings its own units
/// and starting threshold.
fn outcome_rows(ui: &mut egui::Ui, o: &mut OutcomeForm, k: usize, names: &[Choice]) {
    egui::Grid::new(("reverse form", k))
        .num_columns(2)
        .show(ui, |ui| {
            ui.label("series");
            let shown = names
                .iter()
                .find(|n| n.name == o.series)
                .map_or(String::new(), |n| n.shown.clone());
            egui::ComboBox::from_id_salt(("reverse series", k))
                .selected_text(shown)
                .show_ui(ui, |ui| {
                    for c in names {
                        if ui
                            .selectable_value(&mut o.series, c.name.clone(), &c.shown)
                            .changed()
                        {
                            (o.units, o.threshold) = (c.units, c.low);
                        }
                    }
                });
            ui.end_row();
            ui.label("units");
            egui::ComboBox::from_id_salt(("reverse units", k))
                .selected_text(o.units.words())
                .show_ui(ui, |ui| {
                    for u in CHART_UNITS {
                        ui.selectable_value(&mut o.units, u, u.words());
                    }
                });
            ui.end_row();
            ui.label("outcome");
            ui.horizontal(|ui| {
                ui.selectable_value(&mut o.at_most, true, "at most");
                ui.selectable_value(&mut o.at_most, false, "at least");
                ui.add(
                    egui::DragValue::new(&mut o.threshold)
                        .speed(0.1)
                        .max_decimals(4),
                )
                .accessible_name("threshold");
            });
            ui.end_row();
            ui.label("at some period from");
            ui.horizontal(|ui| {
                ui.add(egui::TextEdit::singleline(&mut o.from).desired_width(70.0))
                    .accessible_name("from");
                ui.label("to");
                ui.add(egui::TextEdit::singleline(&mut o.to).desired_width(70.0))
                    .accessible_name("to");
            });
            ui.end_row();
        });
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
            let label = if found.pins.len() == 1 {
                "Add the outcome as a pin"
            } else {
                "Add the outcomes as pins"
            };
            if !found.pins.is_empty()
                && ui
                    .button(label)
                    .on_hover_text("The most plausible scenario is the current one with these pins where the outcomes happen: add them (one undo step), then edit further")
                    .clicked()
            {
                app.add_pins(found.pins);
                app.reverse.answer = None;
            }
        }
        Some(Err(why)) => {
            ui.colored_label(pal.clash, why);
        }
        None => {}
    }
}
