//! Targets on the distribution in the conditions panel: each a row (series, period, units,
//! what is set and its value), added, edited and removed in the window, each change one undo
//! step (a dragged value one step per drag). The fans show them met by tilting the paths'
//! weights ([`crate::targets`]); the footer says what the tilt did.

use egui::{RichText, Ui};

use super::TiltyardApp;
use super::palette::Palette;
use super::panels::CHART_UNITS;
use super::settings::number;
use crate::scenario::TargetSpec;

/// What a target sets.
#[derive(Clone, Copy, PartialEq)]
enum Kind {
    Mean,
    Sd,
    Below,
    Above,
}

impl Kind {
    const ALL: [Kind; 4] = [Kind::Mean, Kind::Sd, Kind::Below, Kind::Above];

    fn of(t: &TargetSpec) -> Kind {
        match (t.sd, t.probability, t.above) {
            (Some(_), ..) => Kind::Sd,
            (_, Some(_), Some(_)) => Kind::Above,
            (_, Some(_), _) => Kind::Below,
            _ => Kind::Mean,
        }
    }

    fn words(self) -> &'static str {
        match self {
            Kind::Mean => "mean",
            Kind::Sd => "standard deviation",
            Kind::Below => "at or below",
            Kind::Above => "at or above",
        }
    }

    /// `t` set to this kind, keeping what values carry over.
    fn apply(self, t: &mut TargetSpec) {
        let value = t.mean.or(t.sd).unwrap_or(0.0);
        let threshold = t.below.or(t.above).unwrap_or(value);
        let p = t.probability.unwrap_or(0.1);
        (t.mean, t.sd, t.probability, t.below, t.above) = (None, None, None, None, None);
        match self {
            Kind::Mean => t.mean = Some(value),
            Kind::Sd => t.sd = Some(value.abs().max(0.1)),
            Kind::Below => (t.probability, t.below) = (Some(p), Some(threshold)),
            Kind::Above => (t.probability, t.above) = (Some(p), Some(threshold)),
        }
    }
}

/// The targets' rows and the "+ target" button.
pub fn show(ui: &mut Ui, app: &mut TiltyardApp, pal: &Palette) {
    let mut targets = app.doc.file.targets.clone();
    let series: Vec<(String, String)> = app
        .doc
        .file
        .series
        .iter()
        .map(|s| (s.name.clone(), s.shown().to_string()))
        .collect();
    ui.horizontal(|ui| {
        ui.strong("Targets on the distribution");
        if ui
            .small_button("+ target")
            .on_hover_text("Set a series' mean, spread or tail probability at a period; met by tilting the paths' weights")
            .clicked()
            && let Some((name, _)) = series.first()
        {
            let period = app.session.results.as_ref().and_then(|r| r.label(1.0));
            targets.push(TargetSpec {
                series: name.clone(),
                period: period.unwrap_or_default().to_string(),
                units: Default::default(),
                mean: Some(0.0),
                sd: None,
                probability: None,
                below: None,
                above: None,
                active: true,
            });
        }
    });
    let mut gesture = (false, false);
    let mut remove = None;
    for (k, t) in targets.iter_mut().enumerate() {
        egui::Frame::group(ui.style()).show(ui, |ui| {
            if row(ui, k, t, &series, &mut gesture) {
                remove = Some(k);
            }
        });
    }
    if let Some(k) = remove {
        targets.remove(k);
    }
    if targets.is_empty() {
        ui.label(RichText::new("none").small().color(pal.muted));
    }
    super::table::in_gesture(app, gesture.0, gesture.1, |app| {
        if targets != app.doc.file.targets {
            app.doc.edit(|f| f.targets = targets);
        }
    });
}

/// One target's fields; true when its "remove" was clicked.
fn row(
    ui: &mut Ui,
    k: usize,
    t: &mut TargetSpec,
    series: &[(String, String)],
    gesture: &mut (bool, bool),
) -> bool {
    let mut removed = false;
    ui.horizontal(|ui| {
        ui.checkbox(&mut t.active, "")
            .on_hover_text("Off: kept in the file, not met");
        let shown = series
            .iter()
            .find(|s| s.0 == t.series)
            .map_or(t.series.clone(), |s| s.1.clone());
        egui::ComboBox::from_id_salt(("target series", k))
            .selected_text(shown)
            .show_ui(ui, |ui| {
                for (name, shown) in series {
                    ui.selectable_value(&mut t.series, name.clone(), shown);
                }
            });
        let name = format!("target {k} period");
        if let Some(text) =
            super::table::draft_field(ui, ("target period", k), &t.period, &name, "")
        {
            t.period = text;
        }
        removed = ui.small_button("remove").clicked();
    });
    ui.horizontal(|ui| {
        egui::ComboBox::from_id_salt(("target units", k))
            .selected_text(t.units.words())
            .show_ui(ui, |ui| {
                for u in CHART_UNITS {
                    ui.selectable_value(&mut t.units, u, u.words());
                }
            });
        let mut kind = Kind::of(t);
        egui::ComboBox::from_id_salt(("target kind", k))
            .selected_text(kind.words())
            .show_ui(ui, |ui| {
                for option in Kind::ALL {
                    ui.selectable_value(&mut kind, option, option.words());
                }
            });
        if kind != Kind::of(t) {
            kind.apply(t);
        }
        let mut number = |ui: &mut Ui, v: &mut f64, name: &str| {
            let value = egui::DragValue::new(v).speed(0.01).max_decimals(4);
            number(ui, &format!("target {k} {name}"), value, gesture);
        };
        match kind {
            Kind::Mean => number(ui, t.mean.get_or_insert(0.0), "mean"),
            Kind::Sd => number(ui, t.sd.get_or_insert(0.1), "standard deviation"),
            Kind::Below | Kind::Above => {
                let side = if kind == Kind::Below {
                    &mut t.below
                } else {
                    &mut t.above
                };
                number(ui, side.get_or_insert(0.0), "threshold");
            }
        }
    });
    // A probability on a line of its own: the panel stays narrow.
    if t.probability.is_some() {
        ui.horizontal(|ui| {
            ui.label(RichText::new("with probability").small());
            let value = egui::DragValue::new(t.probability.get_or_insert(0.1))
                .speed(0.001)
                .range(0.0001..=0.9999)
                .max_decimals(4);
            number(ui, &format!("target {k} probability"), value, gesture);
        });
    }
    removed
}
