//! The conditions table: every pin and corridor with editable fields, an on/off switch and its
//! check status, in sync with the charts both ways (both edit the same document).

use egui::{RichText, Ui};

use super::TiltyardApp;
use super::chart::CondRef;
use super::palette::Palette;
use crate::checks::Severity;
use crate::scenario::{Bound, CorridorSpec, PinSpec, ScenarioFile, Units};

/// Units offered in the table (averages are written in the file).
const UNITS: [Units; 6] = [
    Units::Level,
    Units::PctChange,
    Units::Annualised,
    Units::YearOnYear,
    Units::Difference,
    Units::Average(4),
];

/// Edits made through the table this frame, applied after drawing.
enum Edit {
    Pin(usize, PinSpec),
    Corridor(usize, CorridorSpec),
    Remove(CondRef),
    Begin,
    End,
    AddPin,
    AddCorridor,
    Select(CondRef),
}

pub fn conditions(ui: &mut Ui, app: &mut TiltyardApp, pal: &Palette) {
    ui.horizontal(|ui| {
        ui.strong("Conditions");
        if ui.small_button("+ pin").clicked() {
            edits_apply(app, vec![Edit::AddPin]);
        }
        if ui.small_button("+ corridor").clicked() {
            edits_apply(app, vec![Edit::AddCorridor]);
        }
    });
    ui.label(
        RichText::new("On a chart: Ctrl+click places a pin, Shift+drag draws a corridor, drag a handle to move it.")
            .small()
            .color(pal.muted),
    );
    let file = app.doc.file.clone();
    let series: Vec<String> = file.series.iter().map(|s| s.name.clone()).collect();
    let mut edits = Vec::new();
    for (k, pin) in file.pins.iter().enumerate() {
        let cref = CondRef::Pin(k);
        row_frame(ui, app, pal, cref, |ui| {
            pin_row(ui, k, pin, &series, &mut edits)
        });
    }
    for (k, c) in file.corridors.iter().enumerate() {
        let cref = CondRef::Corridor(k);
        row_frame(ui, app, pal, cref, |ui| {
            corridor_row(ui, k, c, &series, &mut edits)
        });
    }
    if file.pins.is_empty() && file.corridors.is_empty() {
        ui.label(
            RichText::new("No conditions yet: the fans are the model's unconditional forecast.")
                .color(pal.muted),
        );
    }
    edits_apply(app, edits);
}

/// A framed row, outlined by its check status and highlighted when selected.
fn row_frame(
    ui: &mut Ui,
    app: &TiltyardApp,
    pal: &Palette,
    cref: CondRef,
    body: impl FnOnce(&mut Ui),
) {
    let stroke_colour = match app.status_of(cref) {
        Some(Severity::Clash) => pal.clash,
        Some(Severity::Strain) => pal.strain,
        None if app.selected == Some(cref) => pal.pin,
        None => ui.visuals().widgets.noninteractive.bg_stroke.color,
    };
    let width = if app.selected == Some(cref) { 2.0 } else { 1.0 };
    egui::Frame::group(ui.style())
        .stroke(egui::Stroke::new(width, stroke_colour))
        .show(ui, body);
}

fn gesture(r: &egui::Response, edits: &mut Vec<Edit>) {
    if r.drag_started() || r.gained_focus() {
        edits.push(Edit::Begin);
    }
    if r.drag_stopped() || r.lost_focus() {
        edits.push(Edit::End);
    }
}

fn units_box(ui: &mut Ui, id: (&str, usize), units: &mut Units) -> bool {
    let before = *units;
    egui::ComboBox::from_id_salt(id)
        .selected_text(units.label())
        .width(96.0)
        .show_ui(ui, |ui| {
            for u in UNITS {
                ui.selectable_value(units, u, u.label());
            }
        })
        .response
        .accessible_name("units");
    *units != before
}

fn target_box(
    ui: &mut Ui,
    id: (&str, usize),
    series: &mut Option<String>,
    shock: &mut Option<String>,
    names: &[String],
) -> bool {
    let current = match (&series, &shock) {
        (Some(s), _) => s.clone(),
        (None, Some(s)) => format!("{s} shock"),
        _ => "?".into(),
    };
    let mut chosen: Option<(bool, String)> = None;
    egui::ComboBox::from_id_salt(id)
        .selected_text(current)
        .width(130.0)
        .show_ui(ui, |ui| {
            for n in names {
                if ui
                    .selectable_label(series.as_deref() == Some(n), n)
                    .clicked()
                {
                    chosen = Some((false, n.clone()));
                }
            }
            ui.separator();
            for n in names {
                if ui
                    .selectable_label(shock.as_deref() == Some(n), format!("{n} shock"))
                    .clicked()
                {
                    chosen = Some((true, n.clone()));
                }
            }
        })
        .response
        .accessible_name("series or shock");
    match chosen {
        Some((false, n)) => {
            *series = Some(n);
            *shock = None;
            true
        }
        Some((true, n)) => {
            *series = None;
            *shock = Some(n);
            true
        }
        None => false,
    }
}

fn pin_row(ui: &mut Ui, k: usize, pin: &PinSpec, names: &[String], edits: &mut Vec<Edit>) {
    let mut p = pin.clone();
    let mut changed = false;
    ui.horizontal_wrapped(|ui| {
        changed |= ui
            .checkbox(&mut p.active, "")
            .on_hover_text("use this pin")
            .accessible_name("use this pin")
            .changed();
        if ui
            .selectable_label(false, RichText::new("pin").strong())
            .clicked()
        {
            edits.push(Edit::Select(CondRef::Pin(k)));
        }
        changed |= target_box(ui, ("pin target", k), &mut p.series, &mut p.shock, names);
        let r = ui
            .add(egui::TextEdit::singleline(&mut p.period).desired_width(64.0))
            .accessible_name("period");
        gesture(&r, edits);
        changed |= r.changed();
        if p.shock.is_none() {
            changed |= units_box(ui, ("pin units", k), &mut p.units);
        }
        let r = ui
            .add(
                egui::DragValue::new(&mut p.value)
                    .speed(0.01)
                    .max_decimals(4),
            )
            .accessible_name("value");
        gesture(&r, edits);
        changed |= r.changed();
        if ui.small_button("remove").clicked() {
            edits.push(Edit::Remove(CondRef::Pin(k)));
        }
    });
    if changed {
        edits.push(Edit::Pin(k, p));
    }
}

fn corridor_row(ui: &mut Ui, k: usize, c: &CorridorSpec, names: &[String], edits: &mut Vec<Edit>) {
    let mut s = c.clone();
    let mut changed = false;
    ui.horizontal_wrapped(|ui| {
        changed |= ui
            .checkbox(&mut s.active, "")
            .on_hover_text("use this corridor")
            .accessible_name("use this corridor")
            .changed();
        if ui
            .selectable_label(false, RichText::new("corridor").strong())
            .clicked()
        {
            edits.push(Edit::Select(CondRef::Corridor(k)));
        }
        changed |= target_box(
            ui,
            ("corridor target", k),
            &mut s.series,
            &mut s.shock,
            names,
        );
        for (name, period) in [("from", &mut s.from), ("to", &mut s.to)] {
            let r = ui
                .add(egui::TextEdit::singleline(period).desired_width(64.0))
                .accessible_name(name);
            gesture(&r, edits);
            changed |= r.changed();
        }
        if s.shock.is_none() {
            changed |= units_box(ui, ("corridor units", k), &mut s.units);
        }
        if ui.small_button("remove").clicked() {
            edits.push(Edit::Remove(CondRef::Corridor(k)));
        }
    });
    ui.horizontal_wrapped(|ui| {
        for (side, bound) in [("lower", &mut s.lower), ("upper", &mut s.upper)] {
            ui.label(RichText::new(side).small());
            changed |= bound_editor(ui, (side, k), bound, edits);
        }
    });
    if changed {
        edits.push(Edit::Corridor(k, s));
    }
}

/// One side of a corridor: open, one value, or one value per period.
fn bound_editor(
    ui: &mut Ui,
    id: (&str, usize),
    bound: &mut Option<Bound>,
    edits: &mut Vec<Edit>,
) -> bool {
    let mut changed = false;
    let mut open = bound.is_none();
    if ui
        .checkbox(&mut open, "open")
        .accessible_name(format!("{} bound open", id.0))
        .changed()
    {
        *bound = if open { None } else { Some(Bound::Same(0.0)) };
        changed = true;
    }
    match bound {
        Some(Bound::Same(v)) => {
            let r = ui
                .add(egui::DragValue::new(v).speed(0.01).max_decimals(4))
                .accessible_name(format!("{} bound", id.0));
            gesture(&r, edits);
            changed |= r.changed();
        }
        Some(Bound::Each(list)) => {
            ui.push_id(id, |ui| {
                for (i, v) in list.iter_mut().enumerate() {
                    match v {
                        Some(x) => {
                            let r = ui
                                .add(egui::DragValue::new(x).speed(0.01).max_decimals(4))
                                .accessible_name(format!("{} bound, period {}", id.0, i + 1));
                            gesture(&r, edits);
                            changed |= r.changed();
                        }
                        None => {
                            if ui
                                .small_button("open")
                                .on_hover_text(format!(
                                    "period {} is open; click to bound it",
                                    i + 1
                                ))
                                .clicked()
                            {
                                *v = Some(0.0);
                                changed = true;
                            }
                        }
                    }
                }
            });
        }
        None => {}
    }
    changed
}

fn edits_apply(app: &mut TiltyardApp, edits: Vec<Edit>) {
    for e in edits {
        match e {
            Edit::Begin => app.doc.begin_gesture(),
            Edit::End => app.doc.end_gesture(),
            Edit::Pin(k, p) => app.doc.edit(|f| {
                if let Some(slot) = f.pins.get_mut(k) {
                    *slot = p;
                }
            }),
            Edit::Corridor(k, c) => app.doc.edit(|f| {
                if let Some(slot) = f.corridors.get_mut(k) {
                    *slot = c;
                }
            }),
            Edit::Remove(cref) => app.remove(cref),
            Edit::Select(cref) => app.selected = Some(cref),
            Edit::AddPin => {
                let first = first_future(app);
                let median = app
                    .results
                    .as_ref()
                    .and_then(|r| r.series.first())
                    .and_then(|s| s.conditional.first())
                    .map_or(0.0, |f| f.q[3]);
                app.doc
                    .edit(|f| f.pins.push(new_pin(f, first.clone(), median)));
                app.selected = Some(CondRef::Pin(app.doc.file.pins.len() - 1));
            }
            Edit::AddCorridor => {
                let first = first_future(app);
                app.doc
                    .edit(|f| f.corridors.push(new_corridor(f, first.clone())));
                app.selected = Some(CondRef::Corridor(app.doc.file.corridors.len() - 1));
            }
        }
    }
}

/// The first forecast period's label, if the engine has said what it is.
fn first_future(app: &TiltyardApp) -> String {
    app.results
        .as_ref()
        .and_then(|r| r.label(1.0).map(str::to_string))
        .unwrap_or_default()
}

/// A new pin on the first series at the first forecast period, at its current median.
fn new_pin(f: &ScenarioFile, period: String, value: f64) -> PinSpec {
    let s = f.series.first();
    PinSpec {
        series: s.map(|s| s.name.clone()),
        shock: None,
        period,
        units: s.map(|s| s.display).unwrap_or_default(),
        value: (value * 100.0).round() / 100.0,
        active: true,
    }
}

fn new_corridor(f: &ScenarioFile, period: String) -> CorridorSpec {
    let s = f.series.first();
    CorridorSpec {
        series: s.map(|s| s.name.clone()),
        shock: None,
        from: period.clone(),
        to: period,
        units: s.map(|s| s.display).unwrap_or_default(),
        lower: Some(Bound::Same(0.0)),
        upper: None,
        active: true,
    }
}
