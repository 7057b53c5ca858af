//! The model settings, in a window of their own: the prior (Minnesota or flat; fixed coefficients are shown, as they are
//! set in the scenario file), lags, prior tightness (chosen by marginal likelihood or set), the
//! dummy observations and the prior's other constants, the estimation window, draws, seed,
//! horizon, the stationarity filter, how each series enters the model (as it is or 100·log)
//! and the identification ordering. Any change here
//! makes the worker re-estimate in the background (the top bar says so); edits of conditions
//! never do.

use egui::{RichText, Ui};

use super::TiltyardApp;
use super::palette::Palette;
use super::table::draft_field;
use crate::dataset::Transform;
use crate::model::{FlatSettings, MinnesotaSettings, Tightness, Window};
use crate::scenario::{LargestRoot, ModelSpec, ScenarioFile};

/// A button at the top of the series panel, and the settings in a window of their own: opening
/// them moves nothing else (the charts keep their size), and a laptop reaches them without
/// scrolling past the series.
pub fn show(ui: &mut Ui, app: &mut TiltyardApp, pal: &Palette) {
    if ui
        .selectable_label(app.view.settings_open, "Model settings…")
        .on_hover_text("The prior, lags, estimation window, draws, seed, transforms and ordering")
        .clicked()
    {
        app.view.settings_open = !app.view.settings_open;
    }
    let mut open = app.view.settings_open;
    egui::Window::new("Model settings")
        .open(&mut open)
        .default_width(360.0)
        .default_pos(ui.max_rect().left_top() + egui::vec2(12.0, 28.0))
        .vscroll(true)
        .show(ui.ctx(), |ui| body(ui, app, pal));
    app.view.settings_open &= open;
}

fn body(ui: &mut Ui, app: &mut TiltyardApp, pal: &Palette) {
    let mut file = app.doc.file.clone();
    // (began, ended) of a field's gesture this frame.
    let mut gesture = (false, false);
    egui::Grid::new("model settings")
        .num_columns(2)
        .show(ui, |ui| {
            prior_row(ui, &mut file.model);
            estimation_rows(ui, &mut file.model, &mut gesture);
            minnesota_rows(ui, &mut file.model, &mut gesture);
            run_rows(ui, &mut file, &mut gesture);
        });
    transforms(ui, &mut file, pal);
    identification(ui, &mut file, pal);
    super::table::in_gesture(app, gesture.0, gesture.1, |app| {
        if file != app.doc.file {
            app.doc.edit(|f| *f = file);
        }
    });
}

/// A number applied on Enter or when dragged; `g` gathers (began, ended) of its gesture.
pub(super) fn number(ui: &mut Ui, name: &str, value: egui::DragValue, g: &mut (bool, bool)) {
    let r = ui
        .add(value.update_while_editing(false))
        .accessible_name(name);
    g.0 |= r.drag_started() || r.gained_focus();
    g.1 |= r.drag_stopped() || r.lost_focus();
}

/// Lags, the tightness (when the prior has one) and the estimation window of an estimated
/// model.
fn estimation_rows(ui: &mut Ui, model: &mut ModelSpec, gesture: &mut (bool, bool)) {
    // (prior, lags, tightness if the prior has one, estimation window)
    let estimated = match model {
        ModelSpec::Minnesota(m) => Some((
            "Minnesota",
            &mut m.lags,
            Some(&mut m.tightness),
            &mut m.window,
        )),
        ModelSpec::Flat(f) => Some(("flat", &mut f.lags, None, &mut f.window)),
        ModelSpec::Fixed(_) => None,
    };
    if let Some((_, lags, tightness, window)) = estimated {
        ui.label("lags");
        number(
            ui,
            "lags",
            egui::DragValue::new(lags).range(1..=12),
            gesture,
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
                    number(ui, "tightness", value, gesture);
                }
            });
            ui.end_row();
        }
        window_row(ui, window);
    }
}

/// The Minnesota prior's lag decay, intercept scale and dummy observations.
fn minnesota_rows(ui: &mut Ui, model: &mut ModelSpec, gesture: &mut (bool, bool)) {
    if let ModelSpec::Minnesota(m) = model {
        ui.label("lag decay");
        let value = egui::DragValue::new(&mut m.lag_decay)
            .range(0.0..=10.0)
            .speed(0.05);
        number(ui, "lag decay", value, gesture);
        ui.end_row();
        ui.label("intercept scale");
        let value = egui::DragValue::new(&mut m.intercept_scale)
            .range(0.001..=1.0e6)
            .speed(1.0);
        number(ui, "intercept scale", value, gesture);
        ui.end_row();
        for (name, weight) in [
            ("sum of coefficients", &mut m.sum_of_coefficients),
            ("single unit root", &mut m.single_unit_root),
        ] {
            ui.label(name);
            ui.horizontal(|ui| {
                let mut on = weight.is_some();
                if ui
                    .checkbox(&mut on, "dummy observations, weight")
                    .on_hover_text("Off: no such dummy observations")
                    .changed()
                {
                    *weight = on.then_some(1.0);
                }
                if let Some(w) = weight {
                    let value = egui::DragValue::new(w).range(0.001..=1000.0).speed(0.01);
                    number(ui, name, value, gesture);
                }
            });
            ui.end_row();
        }
    }
}

/// Horizon, draws, seed and the stationarity filter.
fn run_rows(ui: &mut Ui, file: &mut ScenarioFile, gesture: &mut (bool, bool)) {
    ui.label("horizon");
    let value = egui::DragValue::new(&mut file.horizon).range(1..=120);
    number(ui, "horizon", value, gesture);
    ui.end_row();
    ui.label("draws");
    let value = egui::DragValue::new(&mut file.draws)
        .range(10..=20_000)
        .speed(10);
    number(ui, "draws", value, gesture);
    ui.end_row();
    ui.label("seed");
    number(ui, "seed", egui::DragValue::new(&mut file.seed), gesture);
    ui.end_row();
    ui.label("largest root");
    ui.horizontal(|ui| {
        let mut filter = !file.largest_root.is_keep();
        if ui
            .checkbox(&mut filter, "keep only draws below")
            .on_hover_text(
                "The stationarity filter: posterior draws whose largest root is not \
                 below the bound are set aside (off: every draw is kept)",
            )
            .changed()
        {
            file.largest_root = if filter {
                LargestRoot::Below(1.0)
            } else {
                LargestRoot::Keep
            };
        }
        if let LargestRoot::Below(bound) = &mut file.largest_root {
            let value = egui::DragValue::new(bound).range(0.5..=2.0).speed(0.005);
            number(ui, "largest root bound", value, gesture);
        }
    });
    ui.end_row();
}

/// How each series enters the model.
fn transforms(ui: &mut Ui, file: &mut ScenarioFile, pal: &Palette) {
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
}

/// The identification order, with buttons to move a series up or down.
fn identification(ui: &mut Ui, file: &mut ScenarioFile, pal: &Palette) {
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
}

/// The prior, as a choice between the two estimated models (the lags and the estimation
/// window carry over; the Minnesota prior's other settings start at their defaults); fixed
/// coefficients are shown as such, set in the scenario file.
fn prior_row(ui: &mut Ui, model: &mut ModelSpec) {
    ui.label("prior");
    ui.horizontal(|ui| {
        let (lags, window) = match model {
            ModelSpec::Minnesota(m) => (m.lags, m.window.clone()),
            ModelSpec::Flat(f) => (f.lags, f.window.clone()),
            ModelSpec::Fixed(f) => {
                ui.label(format!(
                    "fixed coefficients, {} lags (set in the scenario file)",
                    f.lags.len()
                ));
                return;
            }
        };
        let minnesota = matches!(model, ModelSpec::Minnesota(_));
        let to_minnesota = ui.selectable_label(minnesota, "Minnesota").clicked();
        let to_flat = ui.selectable_label(!minnesota, "flat").clicked();
        if to_minnesota && !minnesota {
            *model = ModelSpec::Minnesota(MinnesotaSettings {
                lags,
                window,
                ..Default::default()
            });
        } else if to_flat && minnesota {
            *model = ModelSpec::Flat(FlatSettings { lags, window });
        }
    });
    ui.end_row();
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
