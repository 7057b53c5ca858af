//! The fans as numbers: series × period, the conditional median with its 50% and 90% bands
//! and the unconditional median, in each series' display units; copied or saved as CSV.

use egui::RichText;

use super::TiltyardApp;
use super::palette::Palette;
use super::worker::Results;

/// The table as CSV text (what is copied and saved), ending with the caution as a `#`
/// comment line.
pub fn csv_text(results: &Results) -> String {
    // Through the CSV writer, so that a series name with a comma or a quote stays one field.
    let mut w = csv::Writer::from_writer(Vec::new());
    let _ = w.write_record([
        "series",
        "units",
        "period",
        "conditional_median",
        "conditional_q25",
        "conditional_q75",
        "conditional_q05",
        "conditional_q95",
        "unconditional_median",
    ]);
    for view in &results.series {
        for (c, u) in view.conditional.iter().zip(&view.unconditional) {
            let mut rec = vec![
                view.name.clone(),
                view.units.label(),
                results.label(c.x).unwrap_or("").to_string(),
            ];
            rec.extend([c.q[3], c.q[2], c.q[4], c.q[0], c.q[6], u.q[3]].map(|v| v.to_string()));
            let _ = w.write_record(&rec);
        }
    }
    let mut out = w
        .into_inner()
        .map(|bytes| String::from_utf8_lossy(&bytes).into_owned())
        .unwrap_or_default();
    out.push_str(&format!("# {}\n", crate::report::CAUTION));
    out
}

/// The table, with Copy and Save buttons.
pub fn show(ui: &mut egui::Ui, app: &mut TiltyardApp, pal: &Palette) {
    let Some(results) = app.session.results.clone() else {
        ui.label(
            RichText::new("The table fills in as soon as the engine has the first draws.")
                .color(pal.muted),
        );
        return;
    };
    ui.horizontal_wrapped(|ui| {
        if ui
            .button("Copy as CSV")
            .on_hover_text("The whole table, to paste into a spreadsheet")
            .clicked()
        {
            ui.ctx().copy_text(csv_text(&results));
        }
        if ui.button("Save as CSV…").clicked() {
            app.pick(super::files::Purpose::ExportTable);
        }
        let what = if results.preview {
            "from the posterior mean only, until the draws are in"
        } else {
            "medians and bands over the posterior draws"
        };
        ui.label(RichText::new(what).small().color(pal.muted));
    });
    egui::ScrollArea::both()
        .id_salt("paths table")
        .show(ui, |ui| {
            if let Some((_, sources)) = &app.session.sources {
                statistics(ui, &sources.statistics, pal);
                ui.add_space(10.0);
                ui.strong("Paths by period");
            }
            egui::Grid::new("paths grid")
                .striped(true)
                .min_col_width(56.0)
                .show(ui, |ui| {
                    for head in [
                        "series",
                        "units",
                        "period",
                        "median",
                        "50% band",
                        "90% band",
                        "unconditional median",
                    ] {
                        ui.strong(head);
                    }
                    ui.end_row();
                    for view in &results.series {
                        // The series as people name it, and its units in words.
                        let (shown, measure) =
                            (app.shown(&view.name), app.measure(&view.name, view.units));
                        for (c, u) in view.conditional.iter().zip(&view.unconditional) {
                            ui.label(&shown);
                            ui.label(RichText::new(&measure).small().color(pal.muted));
                            ui.label(results.label(c.x).unwrap_or(""));
                            ui.label(RichText::new(format!("{:.2}", c.q[3])).strong());
                            ui.label(format!("{:.2} … {:.2}", c.q[2], c.q[4]));
                            ui.label(format!("{:.2} … {:.2}", c.q[0], c.q[6]));
                            ui.label(RichText::new(format!("{:.2}", u.q[3])).color(pal.muted));
                            ui.end_row();
                        }
                    }
                });
        });
}

/// The statistics people quote, by series: the conditional median with its 90% band, and
/// the deviation from the unconditional forecast.
fn statistics(ui: &mut egui::Ui, stats: &[crate::report::Stat], pal: &Palette) {
    use crate::report::summary::{HEADLINE, StatKind, band};
    ui.strong("Summary statistics");
    ui.label(
        RichText::new(
            "Median and 5% … 95% over the paths; the deviation is a path's statistic minus that of the unconditional path it was made from. Calendar-year averages are in the exports.",
        )
        .small()
        .color(pal.muted),
    );
    egui::Grid::new("statistics grid")
        .striped(true)
        .min_col_width(56.0)
        .show(ui, |ui| {
            for head in [
                "series",
                "statistic",
                "units",
                "when",
                "under the scenario",
                "deviation",
            ] {
                ui.strong(head);
            }
            ui.end_row();
            for c in stats.iter().filter(|s| {
                s.kind == StatKind::Conditional && HEADLINE.contains(&s.statistic.as_str())
            }) {
                let find = |statistic: &str, kind: StatKind| {
                    stats.iter().find(|s| {
                        s.series == c.series && s.statistic == statistic && s.kind == kind
                    })
                };
                let when = find(&format!("{}_period", c.statistic), StatKind::Conditional)
                    .map(|p| p.label.clone())
                    .unwrap_or_default();
                ui.label(&c.series);
                ui.label(c.statistic.replace('_', " "));
                ui.label(RichText::new(&c.units).small().color(pal.muted));
                ui.label(when);
                ui.label(band(&c.quantiles));
                ui.label(
                    find(&c.statistic, StatKind::Deviation)
                        .map(|d| band(&d.quantiles))
                        .unwrap_or_default(),
                );
                ui.end_row();
            }
        });
}
