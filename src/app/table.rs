//! The conditions table: every pin and corridor with editable fields, an on/off switch and its
//! check status, in sync with the charts both ways (both edit the same document).

use egui::{RichText, Ui};

use super::TiltyardApp;
use super::gesture::CondRef;
use super::palette::Palette;
use crate::checks::Severity;
use crate::dataset::{Frequency, Period};
use crate::scenario::{Bound, CorridorSpec, PinSpec, ScenarioFile, Units};

/// Units offered in the table: the linear ones, the average over a year's periods, and
/// whatever the condition already has (other averages are written in the file).
fn units_offered(per_year: usize, current: Units) -> Vec<Units> {
    let mut list = vec![
        Units::Level,
        Units::PctChange,
        Units::Annualised,
        Units::YearOnYear,
        Units::Difference,
        Units::Average(per_year),
        Units::Cumulative,
    ];
    if !list.contains(&current) {
        list.push(current);
    }
    list
}

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
        if ui
            .small_button("reverse stress test…")
            .on_hover_text("Find the most plausible way for a series to reach a threshold")
            .clicked()
        {
            app.reverse.open = !app.reverse.open;
        }
    });
    ui.label(
        RichText::new("On a chart: drag across future periods to draw a corridor, Ctrl+click to place a pin, drag a handle to move it (Shift: no snapping; Ctrl on an edge: that period only).")
            .small()
            .color(pal.muted),
    );
    let file = app.doc.file.clone();
    // (column name, the name shown)
    let series: Vec<(String, String)> = file
        .series
        .iter()
        .map(|s| (s.name.clone(), s.shown().to_string()))
        .collect();
    let per_year = app
        .session
        .results
        .as_ref()
        .map_or(4, |r| r.last.freq.periods_per_year());
    let freq = app.session.results.as_ref().map(|r| r.last.freq);
    let mut edits = Vec::new();
    for (k, pin) in file.pins.iter().enumerate() {
        let cref = CondRef::Pin(k);
        row_frame(ui, app, pal, cref, |ui| {
            pin_row(ui, k, pin, &series, per_year, &mut edits)
        });
    }
    for (k, c) in file.corridors.iter().enumerate() {
        let cref = CondRef::Corridor(k);
        row_frame(ui, app, pal, cref, |ui| {
            corridor_row(ui, k, c, &series, (per_year, freq), &mut edits)
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

/// A framed row, outlined by its check status (and saying it, under the fields) and
/// highlighted when selected.
fn row_frame(
    ui: &mut Ui,
    app: &TiltyardApp,
    pal: &Palette,
    cref: CondRef,
    body: impl FnOnce(&mut Ui),
) {
    let status = app.status_of(cref);
    let stroke_colour = match status {
        Some(Severity::Clash) => pal.clash,
        Some(Severity::Strain) => pal.strain,
        None if app.view.selected == Some(cref) => ui.visuals().selection.bg_fill,
        None => ui.visuals().widgets.noninteractive.bg_stroke.color,
    };
    let width = if app.view.selected == Some(cref) {
        2.0
    } else {
        1.0
    };
    let frame = egui::Frame::group(ui.style())
        .stroke(egui::Stroke::new(width, stroke_colour))
        .show(ui, |ui| {
            body(ui);
            let word = match status {
                Some(Severity::Clash) => "clashes: see the checks",
                Some(Severity::Strain) => "strained: see the checks",
                None => return,
            };
            ui.label(RichText::new(word).small().color(stroke_colour));
        });
    // The split by condition is on show: the condition's colour there, as a strip on the left.
    if let Some(colour) = super::sources::colour_of(app, cref) {
        let r = frame.response.rect;
        let strip = egui::Rect::from_min_max(r.left_top(), egui::pos2(r.left() + 4.0, r.bottom()));
        ui.painter().rect_filled(strip, 2.0, colour);
    }
}

fn gesture(r: &egui::Response, edits: &mut Vec<Edit>) {
    if r.drag_started() || r.gained_focus() {
        edits.push(Edit::Begin);
    }
    if r.drag_stopped() || r.lost_focus() {
        edits.push(Edit::End);
    }
}

/// A short text field applied when it loses focus (Enter, Tab or a click elsewhere): while it
/// has focus a draft is kept, so half-typed periods never reach the engine and the whole
/// entry is one undo step. Returns the new text when it differs from `current`.
pub(super) fn draft_field(
    ui: &mut Ui,
    salt: impl std::hash::Hash + std::fmt::Debug,
    current: &str,
    name: &str,
    hint: &str,
) -> Option<String> {
    let id = ui.make_persistent_id(salt);
    let mut text = ui
        .data(|d| d.get_temp::<String>(id))
        .unwrap_or_else(|| current.to_string());
    let r = ui
        .add(
            egui::TextEdit::singleline(&mut text)
                .id(id.with("field"))
                .desired_width(64.0)
                .hint_text(hint),
        )
        .accessible_name(name);
    if r.lost_focus() {
        ui.data_mut(|d| d.remove::<String>(id));
        let text = text.trim().to_string();
        return (text != current).then_some(text);
    }
    if r.has_focus() {
        ui.data_mut(|d| d.insert_temp(id, text));
    }
    None
}

/// Where a frame's edits go in the undo history when a field's gesture (focus or drag) begins
/// or ends in that frame: a beginning gesture takes the frame's edit; an ending one keeps it;
/// when focus moves from one field to another, the edit ends the old gesture and the new one
/// begins after it.
pub(super) fn in_gesture(
    app: &mut TiltyardApp,
    began: bool,
    ended: bool,
    edit: impl FnOnce(&mut TiltyardApp),
) {
    if began && !ended {
        app.doc.begin_gesture();
    }
    edit(app);
    if ended {
        app.doc.end_gesture();
        if began {
            app.doc.begin_gesture();
        }
    }
}

fn units_box(ui: &mut Ui, id: (&str, usize), units: &mut Units, per_year: usize) -> bool {
    let before = *units;
    egui::ComboBox::from_id_salt(id)
        .selected_text(units.words())
        .width(150.0)
        .show_ui(ui, |ui| {
            for u in units_offered(per_year, before) {
                ui.selectable_value(units, u, u.words());
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
    names: &[(String, String)],
) -> bool {
    let shown = |n: &str| {
        names
            .iter()
            .find(|(name, _)| name == n)
            .map_or(n.to_string(), |(_, s)| s.clone())
    };
    let current = match (&series, &shock) {
        (Some(s), _) => shown(s),
        (None, Some(s)) => format!("{} shock", shown(s)),
        _ => "?".into(),
    };
    let mut chosen: Option<(bool, String)> = None;
    egui::ComboBox::from_id_salt(id)
        .selected_text(current)
        .width(130.0)
        .show_ui(ui, |ui| {
            for (n, label) in names {
                if ui
                    .selectable_label(series.as_deref() == Some(n), label)
                    .clicked()
                {
                    chosen = Some((false, n.clone()));
                }
            }
            ui.separator();
            for (n, label) in names {
                if ui
                    .selectable_label(shock.as_deref() == Some(n), format!("{label} shock"))
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

/// The start of a condition's row: its on/off switch, its kind (click: select it) and what it
/// is about (a series or a shock).
struct Head<'a> {
    cref: CondRef,
    names: &'a [(String, String)],
}

impl Head<'_> {
    /// Returns whether a field changed.
    fn show(
        &self,
        ui: &mut Ui,
        active: &mut bool,
        series: &mut Option<String>,
        shock: &mut Option<String>,
        edits: &mut Vec<Edit>,
    ) -> bool {
        let (kind, k) = match self.cref {
            CondRef::Pin(k) => ("pin", k),
            CondRef::Corridor(k) => ("corridor", k),
        };
        let use_it = format!("use this {kind}");
        let mut changed = ui
            .checkbox(active, "")
            .on_hover_text(&use_it)
            .accessible_name(&use_it)
            .changed();
        if ui
            .selectable_label(false, RichText::new(kind).strong())
            .clicked()
        {
            edits.push(Edit::Select(self.cref));
        }
        changed |= target_box(ui, (kind, k), series, shock, self.names);
        changed
    }
}

fn pin_row(
    ui: &mut Ui,
    k: usize,
    pin: &PinSpec,
    names: &[(String, String)],
    per_year: usize,
    edits: &mut Vec<Edit>,
) {
    let mut p = pin.clone();
    let mut changed = false;
    ui.horizontal_wrapped(|ui| {
        let head = Head {
            cref: CondRef::Pin(k),
            names,
        };
        changed |= head.show(ui, &mut p.active, &mut p.series, &mut p.shock, edits);
        if let Some(text) = draft_field(ui, ("pin period", k), &p.period, "period", "") {
            p.period = text;
            changed = true;
        }
        if p.shock.is_none() {
            changed |= units_box(ui, ("pin units", k), &mut p.units, per_year);
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

fn corridor_row(
    ui: &mut Ui,
    k: usize,
    c: &CorridorSpec,
    names: &[(String, String)],
    (per_year, freq): (usize, Option<Frequency>),
    edits: &mut Vec<Edit>,
) {
    let mut s = c.clone();
    let mut changed = false;
    ui.horizontal_wrapped(|ui| {
        let head = Head {
            cref: CondRef::Corridor(k),
            names,
        };
        changed |= head.show(ui, &mut s.active, &mut s.series, &mut s.shock, edits);
        for (name, period) in [("from", &mut s.from), ("to", &mut s.to)] {
            if let Some(text) = draft_field(ui, (name, k), period, name, "") {
                *period = text;
                changed = true;
            }
        }
        if s.shock.is_none() {
            changed |= units_box(ui, ("corridor units", k), &mut s.units, per_year);
        }
        if ui.small_button("remove").clicked() {
            edits.push(Edit::Remove(CondRef::Corridor(k)));
        }
    });
    // Period labels from the corridor's first period (when it reads as one).
    let span = freq.and_then(|f| {
        let from = Period::parse(&s.from, f).ok()?;
        let to = Period::parse(&s.to, f).ok()?;
        let n = to.periods_since(&from) + 1;
        (n >= 1).then_some((from, n as usize))
    });
    let label = |i: usize| {
        span.map_or(format!("period {}", i + 1), |(p, _)| {
            p.offset(i as i64).to_string()
        })
    };
    for (side, bound) in [("lower", &mut s.lower), ("upper", &mut s.upper)] {
        changed |= bound_editor(ui, (side, k), bound, span.map(|(_, n)| n), &label, edits);
    }
    if changed {
        edits.push(Edit::Corridor(k, s));
    }
}

/// Per-period bounds up to this many are shown open; longer lists fold into a summary line.
const UNFOLDED_PERIODS: usize = 8;
/// Per-period bounds in a row of the table.
const PERIODS_PER_ROW: usize = 4;
/// Width of one period's label and value, for fitting the rows to the panel.
const PERIOD_CELL: f32 = 100.0;

/// One side of a corridor: open, one value, or one value per period (each labelled with its
/// period, in a grid of a few a row, folded when there are many).
fn bound_editor(
    ui: &mut Ui,
    id: (&str, usize),
    bound: &mut Option<Bound>,
    periods: Option<usize>,
    label: &dyn Fn(usize) -> String,
    edits: &mut Vec<Edit>,
) -> bool {
    let mut changed = side(ui, id, bound, periods, edits);
    if let Some(Bound::Each(list)) = bound {
        changed |= per_period(ui, id, list, label, edits);
    }
    changed
}

/// A side's first row: open or bounded, the switch between one value and one per period,
/// and the one value.
fn side(
    ui: &mut Ui,
    id: (&str, usize),
    bound: &mut Option<Bound>,
    periods: Option<usize>,
    edits: &mut Vec<Edit>,
) -> bool {
    let mut changed = false;
    ui.horizontal(|ui| {
        ui.label(RichText::new(id.0).small());
        let mut open = bound.is_none();
        if ui
            .checkbox(&mut open, "open")
            .accessible_name(format!("{} bound open", id.0))
            .changed()
        {
            *bound = if open { None } else { Some(Bound::Same(0.0)) };
            changed = true;
        }
        let each = matches!(bound, Some(Bound::Each(_)));
        if bound.is_some() {
            // A two-way switch: the same bound at every period, or one per period.
            if ui.selectable_label(!each, "one value").clicked() && each {
                let first = match bound {
                    Some(Bound::Each(list)) => list.iter().flatten().next().copied(),
                    _ => None,
                };
                *bound = Some(Bound::Same(first.unwrap_or(0.0)));
                changed = true;
            }
            if let Some(n) = periods
                && ui.selectable_label(each, "per period").clicked()
                && !each
                && let Some(Bound::Same(v)) = bound
            {
                *bound = Some(Bound::Each(vec![Some(*v); n]));
                changed = true;
            }
        }
        if let Some(Bound::Same(v)) = bound {
            let r = ui
                .add(egui::DragValue::new(v).speed(0.01).max_decimals(4))
                .accessible_name(format!("{} bound", id.0));
            gesture(&r, edits);
            changed |= r.changed();
        }
    });
    changed
}

/// Per-period bounds, folded when there are many: each period's label beside its value, a
/// few to a row, an open period as a button that bounds it.
fn per_period(
    ui: &mut Ui,
    id: (&str, usize),
    list: &mut [Option<f64>],
    label: &dyn Fn(usize) -> String,
    edits: &mut Vec<Edit>,
) -> bool {
    let mut changed = false;
    let values: Vec<f64> = list.iter().flatten().copied().collect();
    let range = match (values.first(), values.last()) {
        (Some(a), Some(b)) => format!("{a} … {b}"),
        _ => "all open".into(),
    };
    let header = format!("{} periods, {range}", list.len());
    egui::CollapsingHeader::new(RichText::new(header).small())
        .id_salt(("per period", id.0, id.1))
        .default_open(list.len() <= UNFOLDED_PERIODS)
        .show(ui, |ui| {
            // Four periods a row (a year of quarters) where the panel has room, else two or
            // one: the panel never widens for them.
            let per_row = [PERIODS_PER_ROW, 2, 1]
                .into_iter()
                .find(|&k| k as f32 * PERIOD_CELL <= ui.available_width())
                .unwrap_or(1);
            egui::Grid::new(("bounds", id.0, id.1))
                .num_columns(per_row)
                .spacing([10.0, 2.0])
                .show(ui, |ui| {
                    for (i, v) in list.iter_mut().enumerate() {
                        // A period's label and its value stay together.
                        ui.horizontal(|ui| {
                            ui.label(RichText::new(label(i)).small());
                            match v {
                                Some(x) => {
                                    let r = ui
                                        .add(egui::DragValue::new(x).speed(0.01).max_decimals(4))
                                        .accessible_name(format!(
                                            "{} bound, period {}",
                                            id.0,
                                            i + 1
                                        ));
                                    gesture(&r, edits);
                                    changed |= r.changed();
                                }
                                None => {
                                    if ui
                                        .small_button("open")
                                        .on_hover_text(format!(
                                            "{} is open on this side; click to bound it",
                                            label(i)
                                        ))
                                        .clicked()
                                    {
                                        *v = Some(0.0);
                                        changed = true;
                                    }
                                }
                            }
                        });
                        if (i + 1) % per_row == 0 {
                            ui.end_row();
                        }
                    }
                });
        });
    changed
}

fn edits_apply(app: &mut TiltyardApp, edits: Vec<Edit>) {
    let began = edits.iter().any(|e| matches!(e, Edit::Begin));
    let ended = edits.iter().any(|e| matches!(e, Edit::End));
    in_gesture(app, began, ended, |app| {
        for e in edits {
            apply_one(app, e);
        }
    });
}

fn apply_one(app: &mut TiltyardApp, e: Edit) {
    match e {
        Edit::Begin | Edit::End => {}
        Edit::Pin(k, p) => app.doc.edit(|f| {
            if let Some(slot) = f.pins.get_mut(k) {
                *slot = p;
            }
        }),
        Edit::Corridor(k, mut c) => {
            // Per-period bounds follow a typed change of the first or last period.
            if let (Some(old), Some(r)) = (app.doc.file.corridors.get(k), &app.session.results) {
                let at = |label: &str| super::chart::horizon(r, label);
                let ends = [
                    (false, old.from.clone(), c.from.clone()),
                    (true, old.to.clone(), c.to.clone()),
                ];
                for (last, before, now) in ends {
                    if let (Some(a), Some(b)) = (at(&before), at(&now))
                        && a != b
                    {
                        super::edits::move_end(&mut c, last, b - a, now);
                    }
                }
            }
            app.doc.edit(|f| {
                if let Some(slot) = f.corridors.get_mut(k) {
                    *slot = c;
                }
            })
        }
        Edit::Remove(cref) => app.remove(cref),
        Edit::Select(cref) => app.view.selected = Some(cref),
        Edit::AddPin => {
            let first = first_future(app);
            let median = app
                .session
                .results
                .as_ref()
                .and_then(|r| r.series.first())
                .and_then(|s| s.conditional.first())
                .map_or(0.0, |f| f.q[3]);
            let pin = new_pin(&app.doc.file, first, median);
            app.add_pin(pin);
        }
        Edit::AddCorridor => {
            let first = first_future(app);
            let corridor = new_corridor(&app.doc.file, first);
            app.add_corridor(corridor);
        }
    }
}

/// The first forecast period's label, if the engine has said what it is.
fn first_future(app: &TiltyardApp) -> String {
    app.session
        .results
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
