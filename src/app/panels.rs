//! The window's layout: the top bar (scenario, files, model, engine state), the series and
//! shocks on the left, the chart grid in the centre, the conditions and checks on the right,
//! and the status and caution line at the bottom.

use egui::{Color32, RichText};

use super::files::Purpose;
use super::gesture::CondRef;
use super::palette::Palette;
use super::worker::{EngineState, Subject};
use super::{AfterSave, Prompt, TiltyardApp, table};
use crate::checks::{CheckReport, Severity, Status};
use crate::report::CAUTION;
use crate::scenario::{DriverSpec, Units};

/// Units a chart can switch to (those that apply to every transform).
pub const CHART_UNITS: [Units; 6] = [
    Units::Level,
    Units::YearOnYear,
    Units::Annualised,
    Units::PctChange,
    Units::Difference,
    Units::Cumulative,
];

pub fn palette(ui: &egui::Ui) -> Palette {
    Palette::for_theme(ui.visuals().dark_mode)
}

pub(super) fn severity_colour(p: &Palette, s: Severity) -> Color32 {
    match s {
        Severity::Clash => p.clash,
        Severity::Strain => p.strain,
    }
}

pub fn show(ui: &mut egui::Ui, app: &mut TiltyardApp) {
    let pal = palette(ui);
    egui::Panel::top("top").show(ui, |ui| top_bar(ui, app, &pal));
    egui::Panel::bottom("bottom").show(ui, |ui| footer(ui, app, &pal));
    egui::Panel::left("series")
        .resizable(true)
        .default_size(210.0)
        .show(ui, |ui| {
            // The settings first: on a laptop with forty series they would otherwise sit
            // below a screen or two of series.
            egui::ScrollArea::vertical().show(ui, |ui| {
                super::settings::show(ui, app, &pal);
                ui.separator();
                series_list(ui, app, &pal);
                ui.separator();
                shock_list(ui, app, &pal);
            });
        });
    egui::Panel::right("conditions")
        .resizable(true)
        .default_size(430.0)
        .show(ui, |ui| {
            egui::ScrollArea::vertical().show(ui, |ui| {
                table::conditions(ui, app, &pal);
                ui.separator();
                super::targets_table::show(ui, app, &pal);
                super::second::panel(ui, app, &pal);
                ui.separator();
                checks(ui, app, &pal);
            });
        });
    egui::CentralPanel::default().show(ui, |ui| super::grid::show(ui, app, &pal));
    super::reverse_panel::show(ui.ctx(), app, &pal);
    prompts(ui, app);
}

fn top_bar(ui: &mut egui::Ui, app: &mut TiltyardApp, pal: &Palette) {
    ui.horizontal_wrapped(|ui| {
        name_and_state(ui, app, pal);
        ui.separator();
        file_buttons(ui, app);
    });
    status_line(ui, app, pal);
    super::narrative::show(ui, app, pal);
    if let Some(n) = &app.notice {
        ui.colored_label(pal.clash, n);
    }
    if let Some(e) = &app.session.engine_error {
        ui.colored_label(pal.clash, e);
    }
}

/// The scenario's name (cut to fit, whole on hover) and whether it is saved, in a fixed
/// width so that the buttons never move; the window title follows.
fn name_and_state(ui: &mut egui::Ui, app: &mut TiltyardApp, pal: &Palette) {
    // A long name is cut to fit (whole on hover), so the buttons keep one row.
    ui.scope(|ui| {
        ui.set_max_width(430.0);
        ui.add(egui::Label::new(RichText::new(&app.doc.file.name).heading()).truncate())
            .on_hover_text(&app.doc.file.name);
    });
    // The file and its state in a fixed width, so the buttons never move.
    let (state, colour) = if app.saving {
        ("saving…", pal.muted)
    } else if app.doc.untitled {
        ("not saved yet", pal.strain)
    } else if app.doc.is_dirty() {
        ("unsaved changes", pal.strain)
    } else {
        ("saved", pal.muted)
    };
    ui.add_sized(
        [110.0, ui.spacing().interact_size.y],
        egui::Label::new(RichText::new(state).color(colour)),
    )
    .on_hover_text(app.doc.path.display().to_string());
    window_title(ui, app, state);
}

/// New, open, save, export, compare, undo and redo.
fn file_buttons(ui: &mut egui::Ui, app: &mut TiltyardApp) {
    if ui
        .button("New")
        .on_hover_text("A blank scenario on the same data and model")
        .clicked()
    {
        app.ask(AfterSave::New);
    }
    if ui
        .button("New from data…")
        .on_hover_text("A new scenario on a dataset (CSV) you pick")
        .clicked()
    {
        app.ask(AfterSave::NewFromData);
    }
    if ui.button("Open…").clicked() {
        app.ask(AfterSave::Open);
    }
    if ui.button("Save").clicked() {
        app.save(None);
    }
    if ui.button("Save as…").clicked() {
        app.pick(Purpose::SaveAs);
    }
    let exporting = app.export.is_some();
    if ui
        .add_enabled(!exporting, egui::Button::new("Export pack…"))
        .on_hover_text("Write the briefing pack (charts, tables, one page to read or print) into a folder you pick")
        .clicked()
    {
        app.pick(Purpose::ExportPack);
    }
    if ui
        .button("Compare with…")
        .on_hover_text("Draw a second scenario on the same series beside this one")
        .clicked()
    {
        app.pick(Purpose::Compare);
    }
    ui.separator();
    if ui
        .add_enabled(app.doc.can_undo(), egui::Button::new("Undo"))
        .clicked()
    {
        app.doc.undo();
    }
    if ui
        .add_enabled(app.doc.can_redo(), egui::Button::new("Redo"))
        .clicked()
    {
        app.doc.redo();
    }
}

/// The file's short path, the engine's state and the model line, each in a slot of its own
/// width, so that changing text never moves the rest of the window (the charts must not
/// shift under a drag).
fn status_line(ui: &mut egui::Ui, app: &TiltyardApp, pal: &Palette) {
    ui.horizontal(|ui| {
        ui.add_sized(
            [200.0, ui.spacing().interact_size.y],
            egui::Label::new(RichText::new(short_path(&app.doc.path)).color(pal.muted)).truncate(),
        )
        .on_hover_text(app.doc.path.display().to_string());
        let (text, colour) = engine_text(&app.session.state, pal);
        ui.add_sized(
            [260.0, ui.spacing().interact_size.y],
            egui::Label::new(RichText::new(text).color(colour).strong()).truncate(),
        );
        ui.separator();
        // The theme switch keeps the right end; the model line takes what is left.
        ui.with_layout(egui::Layout::right_to_left(egui::Align::Center), |ui| {
            theme_switch(ui);
            ui.separator();
            ui.add(
                egui::Label::new(RichText::new(&app.session.model_line).color(pal.muted))
                    .truncate(),
            );
        });
    });
}

/// The last two parts of a path ("scenarios-demo/adverse.ron"), the way people name a file
/// they are working on.
pub fn short_path(path: &std::path::Path) -> String {
    let parts: Vec<String> = path
        .components()
        .rev()
        .take(2)
        .map(|c| c.as_os_str().to_string_lossy().into_owned())
        .collect();
    let short: Vec<&str> = parts.iter().rev().map(String::as_str).collect();
    short.join("/")
}

/// The window's title names the scenario, its file and whether it is saved; sent to the
/// desktop only when it changes.
fn window_title(ui: &egui::Ui, app: &mut TiltyardApp, state: &str) {
    let title = format!(
        "{} · {} ({state}) · Tiltyard",
        app.doc.file.name,
        short_path(&app.doc.path)
    );
    if app.view.title != title {
        ui.ctx()
            .send_viewport_cmd(egui::ViewportCommand::Title(title.clone()));
        app.view.title = title;
    }
}

/// Light, dark, or as the desktop says (words, not glyphs: the bundled font has no symbols).
fn theme_switch(ui: &mut egui::Ui) {
    use egui::ThemePreference;
    let before = ui.ctx().options(|o| o.theme_preference);
    let mut pref = before;
    let mut choices = [
        (ThemePreference::Light, "light"),
        (ThemePreference::Dark, "dark"),
        (ThemePreference::System, "system"),
    ];
    // Read left to right whichever way the row is laid out.
    if ui.layout().main_dir() == egui::Direction::RightToLeft {
        choices.reverse();
    }
    for (p, name) in choices {
        ui.selectable_value(&mut pref, p, name);
    }
    if pref != before {
        ui.ctx().set_theme(pref);
    }
}

fn engine_text(state: &EngineState, pal: &Palette) -> (String, Color32) {
    match state {
        EngineState::Idle => ("waiting for the engine…".into(), pal.muted),
        EngineState::Estimating => ("estimating the model…".into(), pal.fan),
        EngineState::Checking => ("checking the conditions…".into(), pal.fan),
        EngineState::Drawing => ("drawing the parameters…".into(), pal.fan),
        EngineState::Sampling { done, total } => (format!("sampling {done}/{total}"), pal.fan),
        EngineState::Done {
            draws,
            seconds,
            set_aside,
        } => (
            if *set_aside > 0 {
                format!("ready: {draws} draws in {seconds:.2} s ({set_aside} set aside)")
            } else if *draws > 0 {
                format!("ready: {draws} draws in {seconds:.2} s")
            } else {
                format!("ready in {seconds:.2} s")
            },
            pal.ok,
        ),
        EngineState::Clashing => ("conditions clash: nothing sampled".into(), pal.clash),
        EngineState::Failed => ("stopped on an error".into(), pal.clash),
    }
}

fn footer(ui: &mut egui::Ui, app: &TiltyardApp, pal: &Palette) {
    ui.horizontal_wrapped(|ui| {
        if let Some(r) = &app.session.results {
            let what = if r.without_conditions {
                "forecast without the conditions, at the posterior mean".to_string()
            } else if r.preview {
                "preview at the posterior mean (understates uncertainty)".to_string()
            } else if r.total > 0 {
                format!("{} of {} posterior draws", r.draws, r.total)
            } else {
                "fixed coefficients".to_string()
            };
            ui.label(what);
            if let Some(ess) = r.effective_draws {
                ui.label(format!(
                    "reweighted by the scenario: effective sample size {ess:.0}"
                ));
            }
            match &r.targets {
                Some(Ok(said)) => {
                    ui.label(said);
                }
                Some(Err(why)) => {
                    ui.colored_label(pal.clash, why);
                }
                None => {}
            }
            ui.separator();
        }
        if let Some(e) = &app.export {
            ui.label(
                RichText::new(format!(
                    "briefing pack in {}: {}…",
                    e.dir.display(),
                    e.stage
                ))
                .color(pal.second),
            );
            ui.separator();
        }
        ui.label(format!("seed {}", app.doc.file.seed));
        ui.separator();
        ui.label(if app.view.snapping {
            "values snap (G: off)"
        } else {
            "free values (G: snap)"
        });
        if let Some(t) = app.session.first_update {
            ui.separator();
            ui.label(format!(
                "first fans {:.0} ms after the edit",
                t.as_secs_f64() * 1e3
            ));
        }
    });
    ui.label(RichText::new(CAUTION).color(pal.muted).small());
}

fn series_list(ui: &mut egui::Ui, app: &mut TiltyardApp, pal: &Palette) {
    ui.strong("Series");
    ui.add(
        egui::TextEdit::singleline(&mut app.view.list_filter)
            .hint_text("find a series")
            .desired_width(f32::INFINITY),
    )
    .accessible_name("find a series");
    let wanted = app.view.list_filter.to_lowercase();
    let names: Vec<(String, Units)> = app
        .doc
        .file
        .series
        .iter()
        .filter(|s| {
            wanted.is_empty()
                || s.name.to_lowercase().contains(&wanted)
                || s.shown().to_lowercase().contains(&wanted)
        })
        .map(|s| (s.name.clone(), s.display))
        .collect();
    ui.horizontal(|ui| {
        ui.label(RichText::new("charts:").small().color(pal.muted));
        if ui
            .small_button("all")
            .on_hover_text("show the charts of the series listed")
            .clicked()
        {
            for (name, _) in &names {
                app.view.hidden.remove(name);
            }
        }
        if ui
            .small_button("none")
            .on_hover_text("hide the charts of the series listed")
            .clicked()
        {
            for (name, _) in &names {
                app.view.hidden.insert(name.clone());
            }
        }
    });
    if names.is_empty() {
        ui.label(RichText::new("no series matches").small().color(pal.muted));
    }
    for (name, units) in &names {
        ui.horizontal(|ui| {
            let mut shown = !app.view.hidden.contains(name);
            if ui.checkbox(&mut shown, app.shown(name)).changed() {
                if shown {
                    app.view.hidden.remove(name);
                } else {
                    app.view.hidden.insert(name.clone());
                }
            }
            ui.label(
                RichText::new(app.measure(name, *units))
                    .small()
                    .color(pal.muted),
            );
            if let Some(s) = status(app, Subject::Series, name) {
                dot(ui, severity_colour(pal, s));
            }
        });
    }
}

/// The shocks in identification order, ticked when they drive the scenario (a change is one
/// undo step; all ticked means every shock drives).
fn shock_list(ui: &mut egui::Ui, app: &mut TiltyardApp, pal: &Palette) {
    ui.strong("Shocks (identification order)");
    ui.label(
        RichText::new(
            "Ticked shocks drive the scenario; the others keep their usual distribution.",
        )
        .small()
        .color(pal.muted),
    );
    let order = shock_order(app);
    let mut toggle = None;
    let mut timed: Option<(String, Option<(String, String)>)> = None;
    let whole = forecast_span(app);
    for name in &order {
        // `None`: not a driver; `Some(None)`: at every period; else its periods.
        let timing = match &app.doc.file.drivers {
            None => Some(None),
            Some(list) => list.iter().find(|d| d.shock() == name).map(|d| match d {
                DriverSpec::Always(_) => None,
                DriverSpec::Timed { from, to, .. } => Some((from.clone(), to.clone())),
            }),
        };
        let mut drives = timing.is_some();
        ui.horizontal(|ui| {
            if ui
                .checkbox(&mut drives, format!("{} shock", app.shown(name)))
                .on_hover_text("Ticked: it moves (at every period, or at those set under it) to meet the conditions")
                .changed()
            {
                toggle = Some((name.clone(), drives));
            }
            if let Some(s) = status(app, Subject::Shock, name) {
                dot(ui, severity_colour(pal, s));
            }
        });
        // Its periods under its name (the panel is narrow).
        // (With every shock driving, no per-shock controls: forty series would double the list.)
        let Some(timing) = timing.filter(|_| app.doc.file.drivers.is_some()) else {
            continue;
        };
        ui.indent(("timing", name.as_str()), |ui| match &timing {
            Some((from, to)) => {
                ui.horizontal(|ui| {
                    ui.label(RichText::new("moves from").small().color(pal.muted));
                    let f = super::table::draft_field(ui, ("driver from", name), from, &format!("{name} moves from"), "");
                    ui.label(RichText::new("to").small().color(pal.muted));
                    let t = super::table::draft_field(ui, ("driver to", name), to, &format!("{name} moves to"), "");
                    if f.is_some() || t.is_some() {
                        let periods = (f.unwrap_or(from.clone()), t.unwrap_or(to.clone()));
                        timed = Some((name.clone(), Some(periods)));
                    }
                });
                if ui.small_button("every period").clicked() {
                    timed = Some((name.clone(), None));
                }
            }
            None => {
                if let Some((first, last)) = &whole
                    && ui
                        .small_button("only some periods…")
                        .on_hover_text("Let this shock move only over some periods (a scenario announced at once: its first quarter only)")
                        .clicked()
                {
                    timed = Some((name.clone(), Some((first.clone(), last.clone()))));
                }
            }
        });
    }
    if let Some((name, periods)) = timed {
        app.doc
            .edit(|f| super::edits::set_driver_periods(f, &order, &name, periods));
    }
    if let Some((name, on)) = toggle {
        app.doc
            .edit(|f| super::edits::set_driver(f, &order, &name, on));
    }
}

/// A small filled circle (drawn, not a glyph).
fn dot(ui: &mut egui::Ui, colour: Color32) {
    let (rect, _) = ui.allocate_exact_size(egui::vec2(10.0, 10.0), egui::Sense::hover());
    ui.painter().circle_filled(rect.center(), 4.0, colour);
}

/// The worst status of the conditions on a series or a shock.
fn status(app: &TiltyardApp, subject: Subject, name: &str) -> Option<Severity> {
    let f = &app.doc.file;
    let on = |series: &Option<String>, shock: &Option<String>| match subject {
        Subject::Series => series.as_deref() == Some(name),
        Subject::Shock => shock.as_deref() == Some(name),
    };
    let refs = f
        .pins
        .iter()
        .enumerate()
        .filter(|(_, p)| on(&p.series, &p.shock))
        .map(|(k, _)| CondRef::Pin(k))
        .chain(
            f.corridors
                .iter()
                .enumerate()
                .filter(|(_, c)| on(&c.series, &c.shock))
                .map(|(k, _)| CondRef::Corridor(k)),
        );
    let mut worst = None;
    for r in refs {
        match app.status_of(r) {
            Some(Severity::Clash) => return Some(Severity::Clash),
            Some(s) => worst = Some(s),
            None => {}
        }
    }
    worst
}

/// The units switch of series `i`'s chart.
pub(super) fn units_box(ui: &mut egui::Ui, app: &mut TiltyardApp, i: usize, name: &str) {
    let mut units = app.doc.file.series.get(i).map(|s| s.display);
    egui::ComboBox::from_id_salt(("units", i))
        .selected_text(units.map(|u| u.words()).unwrap_or_default())
        .show_ui(ui, |ui| {
            for u in CHART_UNITS {
                ui.selectable_value(&mut units, Some(u), u.words());
            }
        })
        .response
        .accessible_name(format!("units of the {name} chart"));
    if let Some(u) = units
        && app.doc.file.series.get(i).is_some_and(|s| s.display != u)
    {
        app.doc.edit(|f| f.series[i].display = u);
    }
}

/// The forecast's first and last period labels (once the engine has answered).
fn forecast_span(app: &TiltyardApp) -> Option<(String, String)> {
    let r = app.session.results.as_ref()?;
    let h = app.doc.file.horizon as f64;
    Some((r.label(1.0)?.to_string(), r.label(h)?.to_string()))
}

/// Shock names in identification order.
pub(super) fn shock_order(app: &TiltyardApp) -> Vec<String> {
    match &app.doc.file.ordering {
        Some(o) => o.clone(),
        None => app.doc.file.series.iter().map(|s| s.name.clone()).collect(),
    }
}

fn checks(ui: &mut egui::Ui, app: &mut TiltyardApp, pal: &Palette) {
    ui.strong("Checks");
    let Some(report) = app.session.checks.clone() else {
        let text = match app.session.state {
            EngineState::Failed => "none: the engine stopped before it could check (see above)",
            _ => "waiting for the engine…",
        };
        ui.label(RichText::new(text).color(pal.muted));
        return;
    };
    // While the model is estimated again, the checks shown are the previous model's: greyed,
    // and said so.
    let old = app.checks_of_another_model();
    if old {
        let text = match app.session.state {
            EngineState::Failed => {
                "the model could not be run with the changed settings: these checks are from before"
            }
            _ => {
                "the model is being run again with the changed settings: these checks are from before"
            }
        };
        ui.label(RichText::new(text).color(pal.strain));
    }
    let pal = &if old {
        Palette {
            ok: pal.stale,
            strain: pal.stale,
            clash: pal.stale,
            ..*pal
        }
    } else {
        *pal
    };
    let (verdict, colour) = match report.status {
        Status::Clear => ("clear: the conditions hold together without strain", pal.ok),
        Status::Strained => (
            "strained: they hold together, but only improbably",
            pal.strain,
        ),
        Status::Clashing => ("clash: the conditions cannot hold together", pal.clash),
    };
    ui.label(RichText::new(verdict).color(colour).strong());
    ui.label(
        RichText::new(format!("evaluated at {}", report.evaluated_at))
            .small()
            .color(pal.muted),
    );
    findings(ui, app, &report, pal);
    readings(ui, &report, pal);
}

/// Each finding in a frame of its colour; a click selects the first condition it names.
fn findings(ui: &mut egui::Ui, app: &mut TiltyardApp, report: &CheckReport, pal: &Palette) {
    for f in &report.findings {
        let colour = severity_colour(pal, f.severity);
        let frame = egui::Frame::group(ui.style()).stroke(egui::Stroke::new(1.0, colour));
        let clicked = frame
            .show(ui, |ui| {
                ui.label(RichText::new(&f.message).color(colour));
                if !f.conditions.is_empty() {
                    ui.label(
                        RichText::new(format!("to blame: {}", f.conditions.join("; "))).small(),
                    );
                }
                ui.label(
                    RichText::new(format!("to resolve: {}", f.remedy))
                        .small()
                        .color(pal.muted),
                );
            })
            .response
            .interact(egui::Sense::click())
            .on_hover_text("Click to select the first condition named here")
            .clicked();
        if clicked {
            app.view.selected = f.fields.iter().find_map(|field| parse_field(field));
        }
    }
}

/// The probabilities and the severity readings under the findings, and the notes.
fn readings(ui: &mut egui::Ui, report: &CheckReport, pal: &Palette) {
    if let Some(c) = &report.corridors {
        ui.label(format!(
            "Corridors given the pins: probability 10^{:.2} ({}, ±{:.0}%), every shock free",
            c.log10_probability,
            crate::checks::one_in(c.log10_probability),
            100.0 * c.relative_error
        ));
    }
    if let Some(p) = &report.pins {
        ui.label(format!(
            "Pins: {:.1} standard deviations from the unconditional forecast, jointly",
            p.mahalanobis.sqrt()
        ));
    }
    if let Some(p) = &report.plausibility {
        ui.label(format!(
            "Plausibility: {:.2} nats ({:.3} per period); coin {:.3}",
            p.divergence, p.per_period, p.coin
        ));
        ui.label(RichText::new(&p.reading).small().italics());
    }
    if let Some(s) = &report.against_history {
        ui.label(format!("Against history: {}", s.headline()));
        ui.label(RichText::new(&s.reading).small().italics());
    }
    for note in &report.notes {
        ui.label(
            RichText::new(format!("note: {note}"))
                .small()
                .color(pal.muted),
        );
    }
}

/// `pins[2]` or `corridors[0].lower` → the condition.
pub fn parse_field(field: &str) -> Option<CondRef> {
    let (kind, rest) = field.split_once('[')?;
    let k: usize = rest.split(']').next()?.parse().ok()?;
    match kind {
        "pins" => Some(CondRef::Pin(k)),
        "corridors" => Some(CondRef::Corridor(k)),
        _ => None,
    }
}

fn prompts(ui: &mut egui::Ui, app: &mut TiltyardApp) {
    // The window's own chooser, when the desktop's dialog could not be shown.
    if let Some(chooser) = app.chooser.as_mut() {
        let outcome = chooser.show(ui.ctx());
        app.chooser_outcome(outcome);
        return;
    }
    // While a file dialog is up, edits wait (its answer could replace the scenario).
    if app.dialog_open() {
        egui::Modal::new(egui::Id::unique("tiltyard dialog")).show(ui.ctx(), |ui| {
            ui.label("Waiting for the file dialog…");
        });
        return;
    }
    let Some(prompt) = app.prompt.clone() else {
        return;
    };
    egui::Modal::new(egui::Id::unique("tiltyard prompt")).show(ui.ctx(), |ui| match prompt {
        Prompt::Unsaved { then } => {
            ui.heading("Unsaved changes");
            ui.label(format!(
                "Save the changes to {} first?",
                app.doc.path.display()
            ));
            ui.horizontal(|ui| {
                let mut proceed = false;
                if ui.button("Save first").clicked() {
                    // Goes on once saved (a failed save says why and stays).
                    app.prompt = None;
                    app.save(Some(then));
                }
                if ui.button("Discard changes").clicked() {
                    app.discard(then);
                    proceed = true;
                }
                if ui.button("Cancel").clicked() {
                    app.prompt = None;
                }
                if proceed {
                    app.prompt = None;
                    app.proceed(then);
                }
            });
        }
        Prompt::Recover { edits } => {
            ui.heading("Unsaved edits found");
            ui.label(format!(
                "Edits to {} were kept when the window last closed without saving{}. Take them back?",
                app.doc.path.display(),
                edits
                    .note
                    .as_ref()
                    .map_or_else(String::new, |n| format!(": {n}"))
            ));
            ui.horizontal(|ui| {
                if ui.button("Recover the edits").clicked() {
                    app.recover(*edits.clone());
                }
                if ui.button("Discard them").clicked() {
                    app.clear_recovery_prompt();
                }
            });
        }
    });
}
