//! Where the scenario comes from: for one series, the conditional mean minus the
//! unconditional mean by period, split by structural shock or by condition (stacked bars, the
//! total as a line), and the same numbers as a table.
//!
//! The split is the engine's ([`crate::attribution`]), averaged over the posterior draws; a
//! series is shown in its display units where they are linear in the model (else in levels),
//! so the parts add up to the total in every period.

use egui::{Color32, RichText};
use egui_plot::{Bar, BarChart, GridMark, Legend, Line, Plot};

use super::TiltyardApp;
use super::palette::Palette;
use super::worker::Sources;
use crate::report::attribution::{PART_COLOURS, date_parts, series_part, shock_parts};

/// How the attribution view splits the move.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum Split {
    /// By structural shock.
    #[default]
    Shock,
    /// By pin and corridor.
    Condition,
    /// By the date the shocks hit (with timed drivers).
    Date,
}

/// What the attribution view shows.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct SourcesView {
    /// The series shown (by name; the first conditioned series when none was chosen).
    pub series: Option<String>,
    pub split: Split,
}

/// The colour of the `k`-th part of a chart ([`PART_COLOURS`]).
fn part_colour(k: usize) -> Color32 {
    let (r, g, b) = PART_COLOURS[k % PART_COLOURS.len()];
    Color32::from_rgb(r, g, b)
}

/// The colour of the `k`-th condition (pins first, then corridors), also used in the table.
pub fn condition_colour(k: usize) -> Color32 {
    part_colour(k)
}

/// The colour of a condition in the split by condition, when that split is on show.
pub fn colour_of(app: &TiltyardApp, cref: super::gesture::CondRef) -> Option<Color32> {
    let (_, sources) = app.session.sources.as_ref()?;
    if !(app.view.pane == super::grid::Pane::Sources
        && app.view.sources_view.split == Split::Condition)
    {
        return None;
    }
    let field = cref.field();
    sources
        .attribution
        .conditions
        .iter()
        .position(|(_, f)| *f == field)
        .map(condition_colour)
}

/// A value for the tables: two decimals, and no "-0.00".
fn cell(v: f64) -> String {
    crate::report::summary::two_decimals(v, false)
}

/// The first row of a table by period: the period labels.
fn period_header(ui: &mut egui::Ui, labels: &[String]) {
    ui.label("");
    for l in labels {
        ui.label(RichText::new(l).small().strong());
    }
    ui.end_row();
}

/// A row's head: a colour square and its name.
fn keyed(ui: &mut egui::Ui, colour: Color32, name: &str) {
    ui.horizontal(|ui| {
        let (rect, _) = ui.allocate_exact_size(egui::vec2(10.0, 10.0), egui::Sense::hover());
        ui.painter().rect_filled(rect, 2.0, colour);
        ui.label(name);
    });
}

/// One part of the chosen series, by period.
struct Part {
    name: String,
    values: Vec<f64>,
    colour: Color32,
}

/// The parts of series `i`: by shock as [`shock_parts`] gives them, by condition in the
/// scenario's order (pins, then corridors), or by the date the shocks hit (`labels`: the
/// future periods), with the weights' parts after.
fn parts(
    sources: &Sources,
    shown: &[String],
    labels: &[String],
    i: usize,
    split: Split,
    pal: &Palette,
) -> Vec<Part> {
    let a = &sources.attribution;
    let terms = &sources.units[i].0;
    let shown_parts = match split {
        Split::Shock => Some(shock_parts(a, shown, terms, i)),
        Split::Date => {
            date_parts(a, labels, terms, i).or_else(|| Some(shock_parts(a, shown, terms, i)))
        }
        Split::Condition => None,
    };
    if let Some(list) = shown_parts {
        return list
            .into_iter()
            .enumerate()
            .map(|(k, p)| Part {
                colour: if p.rest { pal.muted } else { part_colour(k) },
                name: p.name,
                values: p.values,
            })
            .collect();
    }
    let mut list: Vec<Part> = a
        .conditions
        .iter()
        .zip(&a.by_condition)
        .enumerate()
        .map(|(k, ((label, _), part))| Part {
            name: label.clone(),
            values: series_part(a.n, terms, part, i),
            colour: condition_colour(k),
        })
        .collect();
    if let Some(p) = &a.targets {
        list.push(Part {
            name: "targets on the distribution".into(),
            values: series_part(a.n, terms, p, i),
            colour: pal.muted,
        });
    }
    if let Some(p) = &a.parameters {
        list.push(Part {
            name: "weighting of the parameters".into(),
            values: series_part(a.n, terms, p, i),
            colour: pal.muted,
        });
    }
    list
}

/// The view: choices in one row, the chart, the table.
pub fn show(ui: &mut egui::Ui, app: &mut TiltyardApp, pal: &Palette) {
    let names: Vec<String> = app.doc.file.series.iter().map(|s| s.name.clone()).collect();
    let shown: Vec<String> = names.iter().map(|n| app.shown(n)).collect();
    let Some((generation, sources)) = app.session.sources.clone() else {
        ui.label(
            RichText::new(
                "The split appears here once the engine has all the posterior draws of the scenario.",
            )
            .color(pal.muted),
        );
        return;
    };
    if names.len() != sources.units.len() {
        ui.label(
            RichText::new("The series changed: the split is being made again.").color(pal.muted),
        );
        return;
    }
    let outdated = generation != app.generation() || app.busy();
    let view = &mut app.view.sources_view;
    let first = app.view.grid.order.first().cloned().unwrap_or_default();
    let chosen = view
        .series
        .clone()
        .filter(|s| names.contains(s))
        .unwrap_or(first);
    let i = names.iter().position(|n| *n == chosen).unwrap_or(0);
    ui.horizontal_wrapped(|ui| {
        egui::ComboBox::from_id_salt("sources series")
            .selected_text(&shown[i])
            .show_ui(ui, |ui| {
                for (name, label) in names.iter().zip(&shown) {
                    if ui.selectable_label(*name == names[i], label).clicked() {
                        view.series = Some(name.clone());
                    }
                }
            })
            .response
            .accessible_name("series to split");
        ui.selectable_value(&mut view.split, Split::Shock, "by structural shock");
        ui.selectable_value(&mut view.split, Split::Condition, "by condition");
        if sources.attribution.by_date.is_some() {
            ui.selectable_value(&mut view.split, Split::Date, "by shock date");
        } else if view.split == Split::Date {
            view.split = Split::Shock;
        }
        ui.label(RichText::new(format!("in {}", sources.units[i].1)).color(pal.muted));
    });
    let note = if view.split == Split::Condition {
        "Each pin's and corridor's share of the move away from the unconditional forecast (the shift is linear in the conditions' offsets, so the shares add up)."
            .to_string()
    } else if view.split == Split::Date {
        "The share of the shocks hitting at each period (every shock together): with drivers timed, when the surprises come, and how long their effects last."
            .to_string()
    } else {
        format!(
            "The split by shock depends on the identification ordering, here {} (first to last). Change it in Model settings.",
            sources.ordering.join(", ")
        )
    };
    ui.add(egui::Label::new(RichText::new(note).small().color(pal.muted)).wrap());
    if outdated {
        ui.label(
            RichText::new(
                "From before the last edit; the split is made again once all draws are in.",
            )
            .small()
            .color(pal.strain),
        );
    }
    let split = view.split;
    let a = &sources.attribution;
    let total = series_part(a.n, &sources.units[i].0, &a.total, i);
    let labels: Vec<String> = match &app.session.results {
        Some(r) => (1..=a.h)
            .map(|t| r.label(t as f64).unwrap_or("").to_string())
            .collect(),
        None => (1..=a.h).map(|t| format!("+{t}")).collect(),
    };
    let list = parts(&sources, &shown, &labels, i, split, pal);
    chart(ui, &list, &total, &labels, pal);
    table(ui, &list, &total, &labels, pal);
    if split == Split::Condition {
        effects(ui, app, i, &labels, pal);
    }
}

/// Leave one out: how the chosen series' median moves when each condition is switched off.
fn effects(ui: &mut egui::Ui, app: &TiltyardApp, i: usize, labels: &[String], pal: &Palette) {
    ui.add_space(8.0);
    ui.strong("If one condition were switched off");
    let Some((generation, effects)) = &app.session.effects else {
        ui.label(
            RichText::new("Being measured in the background, after the draws…")
                .small()
                .color(pal.muted),
        );
        return;
    };
    let mut note = format!(
        "How the median moves without each condition, the others kept (on the first {} posterior draws, or up to 1,000 paths of fixed coefficients, with the same draws and shocks either way). These effects need not add up: conditions interact.",
        crate::attribution::leave_one_out::DRAWS
    );
    if *generation != app.generation() {
        note.push_str(" From before the last edit.");
    }
    ui.add(egui::Label::new(RichText::new(note).small().color(pal.muted)).wrap());
    egui::ScrollArea::horizontal()
        .id_salt("effects table")
        .show(ui, |ui| {
            egui::Grid::new("effects grid")
                .striped(true)
                .min_col_width(52.0)
                .show(ui, |ui| {
                    period_header(ui, labels);
                    for (k, e) in effects.iter().enumerate() {
                        keyed(ui, condition_colour(k), &format!("without {}", e.label));
                        match &e.shift {
                            Ok(shift) => {
                                for v in shift.get(i).into_iter().flatten() {
                                    ui.label(cell(*v));
                                }
                            }
                            Err(why) => {
                                ui.label(RichText::new(why).small().color(pal.strain));
                            }
                        }
                        ui.end_row();
                    }
                });
        });
}

fn chart(ui: &mut egui::Ui, list: &[Part], total: &[f64], labels: &[String], pal: &Palette) {
    let axis_labels = labels.to_vec();
    let height = (ui.available_height() * 0.55).clamp(220.0, 520.0);
    Plot::new("sources chart")
        .height(height)
        .legend(Legend::default().position(egui_plot::Corner::LeftTop))
        .allow_drag(false)
        .allow_zoom(false)
        .allow_scroll(false)
        .allow_boxed_zoom(false)
        .show_grid([false, true])
        .y_axis_min_width(44.0)
        .y_grid_spacer(egui_plot::uniform_grid_spacer(super::chart::steps_125))
        .x_grid_spacer(egui_plot::uniform_grid_spacer(|_| [1.0, 2.0, 4.0]))
        .x_axis_formatter(move |mark: GridMark, _| {
            let k = mark.value.round();
            if (mark.value - k).abs() > 1e-9 || k < 1.0 {
                return String::new();
            }
            axis_labels.get(k as usize - 1).cloned().unwrap_or_default()
        })
        .show(ui, |pui| {
            let mut drawn: Vec<BarChart> = Vec::new();
            for p in list {
                let bars = p
                    .values
                    .iter()
                    .enumerate()
                    .map(|(t, &v)| Bar::new((t + 1) as f64, v).width(0.7).fill(p.colour))
                    .collect();
                let chart = BarChart::new(p.name.clone(), bars).color(p.colour);
                let below: Vec<&BarChart> = drawn.iter().collect();
                let chart = chart.stack_on(&below);
                drawn.push(chart);
            }
            for c in drawn {
                pui.bar_chart(c);
            }
            pui.line(
                Line::new(
                    "total: conditional minus unconditional mean",
                    total
                        .iter()
                        .enumerate()
                        .map(|(t, &v)| [(t + 1) as f64, v])
                        .collect::<Vec<_>>(),
                )
                .color(pal.history)
                .width(2.0),
            );
        });
}

fn table(ui: &mut egui::Ui, list: &[Part], total: &[f64], labels: &[String], pal: &Palette) {
    egui::ScrollArea::both()
        .id_salt("sources table")
        .show(ui, |ui| {
            egui::Grid::new("sources grid")
                .striped(true)
                .min_col_width(52.0)
                .show(ui, |ui| {
                    period_header(ui, labels);
                    ui.label(RichText::new("total").strong());
                    for v in total {
                        ui.label(RichText::new(cell(*v)).strong());
                    }
                    ui.end_row();
                    for p in list {
                        keyed(ui, p.colour, &p.name);
                        for v in &p.values {
                            let text = cell(*v);
                            let colour = if v.abs() < 0.005 {
                                pal.muted
                            } else {
                                ui.visuals().text_color()
                            };
                            ui.label(RichText::new(text).color(colour));
                        }
                        ui.end_row();
                    }
                });
        });
}
