//! The model settings: lags, prior tightness (chosen by marginal likelihood or set), the
//! estimation window, draws, seed, horizon, how each series enters the model (as it is or
//! 100·log) and the identification ordering. Any change here
//! makes the worker re-estimate in the background (the top bar says so); edits of conditions
//! never do.

use egui::{RichText, Ui};

use super::TiltyardApp;
use super::palette::Palette;
use super::table::draft_field;
use crate::dataset::Transform;
use crate::model::{Tightness, Window};
use crate::scenario::ModelSpec;

pub fn show(ui: &mut Ui, app: &mut TiltyardApp, pal: &Palette) {
    egui::CollapsingHeader::new("Model settings")
        .default_open(false)
        .show(ui, |ui| body(ui, app, pal));
}

fn body(ui: &mut Ui, app: &mut TiltyardApp, pal: &Palette) {
    let mut file = app.doc.file.clone();
    // (began, ended) of a field's gesture this frame.
    let mut gesture = (false, false);
    // A number applied on Enter or when dragged, in a labelled row.
    let number = |ui: &mut Ui, name: &str, value: egui::DragValue, g: &mut (bool, bool)| {
        let r = ui
            .add(value.update_while_editing(false))
            .accessible_name(name);
        g.0 |= r.drag_started() || r.gained_focus();
        g.1 |= r.drag_stopped() || r.lost_focus();
    };
    egui::Grid::new("model settings")
        .num_columns(2)
        .show(ui, |ui| {
            // (prior, lags, tightness if the prior has one, estimation window)
            let estimated = match &mut file.model {
                ModelSpec::Minnesota(m) => Some((
                    "Minnesota",
                    &mut m.lags,
                    Some(&mut m.tightness),
                    &mut m.window,
                )),
                ModelSpec::Flat(f) => Some(("flat", &mut f.lags, None, &mut f.window)),
                ModelSpec::Fixed(f) => {
                    ui.label("model");
                    ui.label(format!("fixed coefficients, {} lags", f.lags.len()));
                    ui.end_row();
                    None
                }
            };
            if let Some((prior, lags, tightness, window)) = estimated {
                ui.label("prior");
                ui.label(prior);
                ui.end_row();
                ui.label("lags");
                number(
                    ui,
                    "lags",
                    egui::DragValue::new(lags).range(1..=12),
                    &mut gesture,
                );
                ui.end_row();
                if let Some(tightness) = tightness {
                    ui.label("tightness");
                    ui.horizontal(|ui| {
                        let mut auto = *tightness == Tightness::Auto;
                        if ui.checkbox(&mut auto, "by marginal likelihood").changed() {
                            *tightness = if auto {
                                Tightness::Auto
                            } else {
                                Tightness::Fixed(0.2)
                            };
                        }
                        if let Tightness::Fixed(l) = tightness {
                            let value = egui::DragValue::new(l).range(0.001..=5.0).speed(0.005);
                            number(ui, "tightness", value, &mut gesture);
                        }
                    });
                    ui.end_row();
                }
                window_row(ui, window);
            }
            ui.label("horizon");
            let value = egui::DragValue::new(&mut file.horizon).range(1..=120);
            number(ui, "horizon", value, &mut gesture);
            ui.end_row();
            ui.label("draws");
            let value = egui::DragValue::new(&mut file.draws)
                .range(10..=20_000)
                .speed(10);
            number(ui, "draws", value, &mut gesture);
            ui.end_row();
            ui.label("seed");
            number(
                ui,
                "seed",
                egui::DragValue::new(&mut file.seed),
                &mut gesture,
            );
            ui.end_row();
        });
    ui.label(
        RichText::new("How each series enters the model")
            .small()
            .color(pal.muted),
    );
    egui::Grid::new("transforms").num_columns(2).show(ui, |ui| {
        for series in &mut file.series {
            ui.label(&series.name);
            let shown = |t: Transform| match t {
                Transform::AsIs => "as it is",
                Transform::Log100 => "100·log",
            };
            egui::ComboBox::from_id_salt(("transform", series.name.as_str()))
                .selected_text(shown(series.transform))
                .show_ui(ui, |ui| {
                    for t in [Transform::AsIs, Transform::Log100] {
                        ui.selectable_value(&mut series.transform, t, shown(t));
                    }
                })
                .response
                .accessible_name(format!("transform of {}", series.name));
            ui.end_row();
        }
    });
    ui.label(
        RichText::new(
            "Identification order (a shock moves the series below it on impact, not those above)",
        )
        .small()
        .color(pal.muted),
    );
    let mut order: Vec<String> = file
        .ordering
        .clone()
        .unwrap_or_else(|| file.series.iter().map(|s| s.name.clone()).collect());
    let mut swap = None;
    for (k, name) in order.iter().enumerate() {
        ui.horizontal(|ui| {
            ui.label(format!("{}. {name}", k + 1));
            if ui
                .add_enabled(k > 0, egui::Button::new("up").small())
                .clicked()
            {
                swap = Some(k - 1);
            }
            if ui
                .add_enabled(k + 1 < order.len(), egui::Button::new("down").small())
                .clicked()
            {
                swap = Some(k);
            }
        });
    }
    if let Some(k) = swap {
        order.swap(k, k + 1);
        file.ordering = Some(order);
    }
    super::table::in_gesture(app, gesture.0, gesture.1, |app| {
        if file != app.doc.file {
            app.doc.edit(|f| *f = file);
        }
    });
}

/// The estimation window's ends, applied when a field loses focus (so the model is not
/// re-estimated on every keystroke, nor on half-typed periods); empty means the data's end.
fn window_row(ui: &mut Ui, window: &mut Option<Window>) {
    ui.label("estimation window");
    ui.horizontal(|ui| {
        let mut w = window.clone().unwrap_or_default();
        let mut commit = false;
        for (name, end) in [("from", &mut w.from), ("to", &mut w.to)] {
            let hint = if name == "from" { "first" } else { "last" };
            let current = end.clone().unwrap_or_default();
            let label = format!("estimation window {name}");
            if let Some(text) = draft_field(ui, ("estimation window", name), &current, &label, hint)
            {
                *end = (!text.is_empty()).then_some(text);
                commit = true;
            }
        }
        if commit {
            *window = (w.from.is_some() || w.to.is_some()).then_some(w);
        }
    });
    ui.end_row();
}
