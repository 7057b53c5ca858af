//! One legend for every chart of a view: a row of small swatches, each drawn as the charts
//! draw it, saying what it stands for. Each meaning has its own colour or shape: pins are
//! diamonds (their own colour), strain and clash are rings and edges (amber, red), corridors
//! are boxes.

use egui::{Color32, CornerRadius, Pos2, Rect, RichText, Sense, Shape, Stroke, Vec2};

use super::palette::Palette;
use super::worker::Subject;

/// How a swatch is drawn.
#[derive(Debug, Clone, Copy)]
enum Swatch {
    Line(Color32, f32),
    Dashed(Color32),
    Band(Color32),
    /// Nested bands (outer first) with a median line.
    Fan([Color32; 3], Color32),
    Pin(Color32),
    Ring(Color32),
    Box(Color32),
}

/// What the legend shows for one view.
pub struct Legend<'a> {
    pub subject: Subject,
    /// The fans are greyed: `Some(what they are)` (the last good ones, or the forecast without
    /// the conditions).
    pub stale: Option<&'a str>,
    /// The name of a compared scenario, drawn in its own colour.
    pub second: Option<&'a str>,
}

/// The entries of a legend, in reading order: (swatches, words).
fn entries(legend: &Legend, pal: &Palette) -> Vec<(Vec<Swatch>, String)> {
    let fan = if legend.stale.is_some() {
        pal.stale
    } else {
        pal.fan
    };
    let mut out = Vec::new();
    match legend.subject {
        Subject::Series => {
            out.push((vec![Swatch::Line(pal.history, 1.6)], "history".to_string()));
            out.push((
                vec![
                    Swatch::Band(pal.muted.gamma_multiply(0.35)),
                    Swatch::Dashed(pal.muted),
                ],
                "without conditions: 90%, median".to_string(),
            ));
        }
        Subject::Shock => {
            out.push((
                vec![Swatch::Line(pal.history, 1.6)],
                "historical shocks".to_string(),
            ));
            out.push((
                vec![
                    Swatch::Band(pal.muted.gamma_multiply(0.35)),
                    Swatch::Dashed(pal.muted),
                ],
                "usual N(0, 1): 90%, median".to_string(),
            ));
        }
    }
    let scenario = match legend.stale {
        Some(what) => format!("greyed: {what}"),
        None => "scenario: 90/68/50%, median".to_string(),
    };
    let bands = [0.22, 0.30, 0.42].map(|a| fan.gamma_multiply(a));
    out.push((vec![Swatch::Fan(bands, fan)], scenario));
    if let Some(name) = legend.second {
        out.push((
            vec![Swatch::Line(pal.second, 2.0)],
            format!("{name}: median, 5% and 95%"),
        ));
    }
    out.push((vec![Swatch::Pin(pal.pin)], "pin".to_string()));
    out.push((vec![Swatch::Box(pal.corridor)], "corridor".to_string()));
    out.push((vec![Swatch::Ring(pal.strain)], "strained".to_string()));
    out.push((vec![Swatch::Ring(pal.clash)], "clashes".to_string()));
    out
}

/// The legend as one row of small text, of one height whatever it holds (cut at the edge of
/// a narrow window rather than wrapped: the charts below must not move).
pub fn show(ui: &mut egui::Ui, legend: &Legend, pal: &Palette) {
    // Clipped to the width there is, so a long row never widens the charts' panel.
    egui::ScrollArea::horizontal()
        .id_salt("legend")
        .scroll_bar_visibility(egui::scroll_area::ScrollBarVisibility::AlwaysHidden)
        .show(ui, |ui| row(ui, legend, pal));
}

fn row(ui: &mut egui::Ui, legend: &Legend, pal: &Palette) {
    ui.horizontal(|ui| {
        ui.spacing_mut().item_spacing.x = 4.0;
        for (swatches, words) in entries(legend, pal) {
            for s in swatches {
                draw(ui, s, &words);
            }
            ui.label(RichText::new(&words).small().color(pal.muted));
            ui.add_space(10.0);
        }
    });
}

/// One swatch, named for assistive technology (and tests) as "legend: " and its words.
fn draw(ui: &mut egui::Ui, swatch: Swatch, words: &str) {
    let width = if matches!(swatch, Swatch::Fan(..)) {
        26.0
    } else {
        18.0
    };
    let (rect, response) = ui.allocate_exact_size(Vec2::new(width, 12.0), Sense::hover());
    response.widget_info(|| {
        egui::WidgetInfo::labeled(egui::Role::Image, true, format!("legend: {words}"))
    });
    let p = ui.painter();
    let c = rect.center();
    let across = |y: f32| [Pos2::new(rect.left(), y), Pos2::new(rect.right(), y)];
    match swatch {
        Swatch::Line(colour, width) => {
            p.line_segment(across(c.y), Stroke::new(width, colour));
        }
        Swatch::Dashed(colour) => {
            p.extend(Shape::dashed_line(
                &across(c.y),
                Stroke::new(1.2, colour),
                4.0,
                3.0,
            ));
        }
        Swatch::Band(colour) => {
            p.rect_filled(
                rect.shrink2(Vec2::new(0.0, 1.0)),
                CornerRadius::ZERO,
                colour,
            );
        }
        Swatch::Fan(bands, median) => {
            // The charts draw the bands over each other, so the inner ones come out darker.
            for (k, colour) in bands.into_iter().enumerate() {
                let half = 6.0 - 2.0 * k as f32;
                let r = Rect::from_center_size(c, Vec2::new(rect.width(), 2.0 * half));
                p.rect_filled(r, CornerRadius::ZERO, colour);
            }
            p.line_segment(across(c.y), Stroke::new(2.0, median));
        }
        Swatch::Pin(colour) => {
            p.add(Shape::convex_polygon(diamond(c, 5.5), colour, Stroke::NONE));
        }
        Swatch::Ring(colour) => {
            p.circle_stroke(c, 5.0, Stroke::new(2.0, colour));
        }
        Swatch::Box(colour) => {
            let r = Rect::from_center_size(c, Vec2::new(10.0, 11.0));
            p.rect_filled(r, CornerRadius::ZERO, colour.gamma_multiply(0.12));
            p.rect_stroke(
                r,
                CornerRadius::ZERO,
                Stroke::new(1.2, colour),
                egui::StrokeKind::Inside,
            );
        }
    }
}

/// The corners of a diamond of half-width `r` about `c`.
fn diamond(c: Pos2, r: f32) -> Vec<Pos2> {
    vec![
        Pos2::new(c.x, c.y - r),
        Pos2::new(c.x + r, c.y),
        Pos2::new(c.x, c.y + r),
        Pos2::new(c.x - r, c.y),
    ]
}
