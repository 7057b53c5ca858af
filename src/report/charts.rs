//! Chart images for the briefing pack, drawn off-screen (no display needed) with plotters:
//! a series' recent history, the unconditional fan and its median, the conditional fan
//! (90%, 68%, 50%) and its median, its pins and corridors, a legend, dated axis and units;
//! and a series' attribution as stacked bars. The colours are the window's (light theme).

use std::path::Path;
use std::sync::Once;

use plotters::prelude::*;
use plotters::style::FontStyle;

use super::fans::{FanRow, model_value};
use super::{Kind, ReportError, replace_with};
use crate::scenario::units::display_value;
use crate::scenario::{Bound, Setup};

/// Chart size in pixels.
pub const WIDTH: u32 = 960;
pub const HEIGHT: u32 = 440;
/// Years of history before the forecast.
const HISTORY_YEARS: usize = 6;

const FAN: RGBColor = RGBColor(24, 112, 120);
const MUTED: RGBColor = RGBColor(150, 142, 130);
const HISTORY: RGBColor = RGBColor(55, 55, 58);
const PIN: RGBColor = RGBColor(184, 40, 112);
const CORRIDOR: RGBColor = RGBColor(112, 80, 170);
/// A pin's mark, as in the window: a filled diamond of half-width `r` pixels.
fn diamond(r: i32) -> Polygon<(i32, i32)> {
    Polygon::new(vec![(0, -r), (r, 0), (0, r), (-r, 0)], PIN.filled())
}

/// The charts' font, from the window's own (embedded: no font needs to be installed).
fn font() {
    static ONCE: Once = Once::new();
    ONCE.call_once(|| {
        let _ = plotters::style::register_font(
            "sans-serif",
            FontStyle::Normal,
            epaint_default_fonts::UBUNTU_LIGHT,
        );
    });
}

fn drawing<E: std::fmt::Display>(path: &Path) -> impl Fn(E) -> ReportError + '_ {
    move |e| ReportError::Io {
        path: path.to_path_buf(),
        error: std::io::Error::other(e.to_string()),
    }
}

/// The label of horizon `t` (0: the last observation).
fn period(setup: &Setup, t: i64) -> String {
    setup.last_period().offset(t).to_string()
}

/// Series `i`'s fan chart as a PNG at `path`.
pub fn series_chart(
    path: &Path,
    setup: &Setup,
    rows: &[FanRow],
    i: usize,
) -> Result<(), ReportError> {
    font();
    let h = setup.file.horizon as i64;
    let f = setup.periods_per_year();
    let name = &setup.names[i];
    let pick = |kind: Kind| -> Vec<&FanRow> {
        rows.iter()
            .filter(|r| &r.series == name && r.kind == kind)
            .collect()
    };
    let (cond, uncond) = (pick(Kind::Conditional), pick(Kind::Unconditional));
    let x = model_value(setup, &[], i);
    let first = -((HISTORY_YEARS * f).min(setup.columns[i].len().saturating_sub(1)) as i64);
    let history: Vec<(f64, f64)> = (first..=0)
        .filter_map(|t| {
            display_value(setup.display[i], setup.transforms[i], f, t, &x)
                .filter(|v| v.is_finite())
                .map(|v| (t as f64, v))
        })
        .collect();
    let units = setup.display[i];
    let pins: Vec<(f64, f64)> = setup
        .file
        .pins
        .iter()
        .filter(|p| p.active && p.series.as_deref() == Some(name) && p.units == units)
        .filter_map(|p| {
            setup
                .horizon_of(&p.period, "pin")
                .ok()
                .map(|t| (t as f64, p.value))
        })
        .collect();
    let mut boxes: Vec<(f64, Option<f64>, Option<f64>)> = Vec::new();
    for c in &setup.file.corridors {
        if !(c.active && c.series.as_deref() == Some(name) && c.units == units) {
            continue;
        }
        let (Ok(a), Ok(b)) = (
            setup.horizon_of(&c.from, "corridor"),
            setup.horizon_of(&c.to, "corridor"),
        ) else {
            continue;
        };
        let at = |bound: &Option<Bound>, k: usize| match bound {
            None => None,
            Some(Bound::Same(v)) => Some(*v),
            Some(Bound::Each(v)) => v.get(k).copied().flatten(),
        };
        for (k, t) in (a..=b).enumerate() {
            boxes.push((t as f64, at(&c.lower, k), at(&c.upper, k)));
        }
    }
    let mut values: Vec<f64> = history.iter().map(|p| p.1).collect();
    for r in cond.iter().chain(&uncond) {
        values.push(r.quantiles[0]);
        values.push(r.quantiles[6]);
    }
    values.extend(pins.iter().map(|p| p.1));
    values.extend(boxes.iter().flat_map(|b| [b.1, b.2]).flatten());
    let values: Vec<f64> = values.into_iter().filter(|v| v.is_finite()).collect();
    let (lo, hi) = values
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
            (a.min(*v), b.max(*v))
        });
    let pad = ((hi - lo) * 0.08).max(1e-6);
    let (lo, hi) = if lo.is_finite() {
        (lo - pad, hi + pad)
    } else {
        (-1.0, 1.0)
    };
    replace_with(path, |tmp| {
        let err = drawing(tmp);
        let root = BitMapBackend::new(tmp, (WIDTH, HEIGHT)).into_drawing_area();
        root.fill(&WHITE).map_err(&err)?;
        let mut chart = ChartBuilder::on(&root)
            .caption(
                format!("{}, {}", setup.shown(i), setup.measure(i, units)),
                ("sans-serif", 22),
            )
            .margin(12)
            .x_label_area_size(32)
            .y_label_area_size(56)
            .build_cartesian_2d(first as f64 - 0.5..h as f64 + 0.5, lo..hi)
            .map_err(&err)?;
        let label_of = |v: &f64| {
            let t = v.round() as i64;
            if (v - t as f64).abs() < 1e-9 && t.rem_euclid(f as i64) == h.rem_euclid(f as i64) {
                period(setup, t)
            } else {
                String::new()
            }
        };
        chart
            .configure_mesh()
            .disable_x_mesh()
            .max_light_lines(0)
            .x_labels((h - first) as usize + 1)
            .x_label_formatter(&label_of)
            .y_desc(setup.measure(i, units))
            .label_style(("sans-serif", 14))
            .draw()
            .map_err(&err)?;
        let band = |list: &[&FanRow], k0: usize, k1: usize| -> Vec<(f64, f64)> {
            let mut pts: Vec<(f64, f64)> = list
                .iter()
                .map(|r| (r.horizon as f64, r.quantiles[k0]))
                .collect();
            pts.extend(
                list.iter()
                    .rev()
                    .map(|r| (r.horizon as f64, r.quantiles[k1])),
            );
            pts
        };
        chart
            .draw_series(std::iter::once(Polygon::new(
                band(&uncond, 0, 6),
                MUTED.mix(0.3).filled(),
            )))
            .map_err(&err)?
            .label("unconditional 90%")
            .legend(|(x, y)| {
                Rectangle::new([(x, y - 5), (x + 18, y + 5)], MUTED.mix(0.3).filled())
            });
        for (k0, k1, alpha, label) in [
            (0, 6, 0.22, "conditional 90%"),
            (1, 5, 0.32, "conditional 68%"),
            (2, 4, 0.45, "conditional 50%"),
        ] {
            chart
                .draw_series(std::iter::once(Polygon::new(
                    band(&cond, k0, k1),
                    FAN.mix(alpha).filled(),
                )))
                .map_err(&err)?
                .label(label)
                .legend(move |(x, y)| {
                    Rectangle::new([(x, y - 5), (x + 18, y + 5)], FAN.mix(alpha).filled())
                });
        }
        let median = |list: &[&FanRow]| -> Vec<(f64, f64)> {
            list.iter()
                .map(|r| (r.horizon as f64, r.quantiles[3]))
                .collect()
        };
        chart
            .draw_series(DashedLineSeries::new(
                median(&uncond),
                6,
                4,
                MUTED.stroke_width(2),
            ))
            .map_err(&err)?
            .label("unconditional median")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], MUTED.stroke_width(2)));
        chart
            .draw_series(LineSeries::new(median(&cond), FAN.stroke_width(3)))
            .map_err(&err)?
            .label("conditional median")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], FAN.stroke_width(3)));
        chart
            .draw_series(LineSeries::new(history.clone(), HISTORY.stroke_width(2)))
            .map_err(&err)?
            .label("history")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], HISTORY.stroke_width(2)));
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(0.0, lo), (0.0, hi)],
                MUTED.stroke_width(1),
            )))
            .map_err(&err)?;
        if !boxes.is_empty() {
            let boxes = boxes.iter().map(|&(t, a, b)| {
                Rectangle::new(
                    [(t - 0.4, a.unwrap_or(lo)), (t + 0.4, b.unwrap_or(hi))],
                    CORRIDOR.stroke_width(2),
                )
            });
            chart
                .draw_series(boxes)
                .map_err(&err)?
                .label("corridor")
                .legend(|(x, y)| {
                    Rectangle::new([(x, y - 5), (x + 18, y + 5)], CORRIDOR.stroke_width(2))
                });
        }
        if !pins.is_empty() {
            chart
                .draw_series(pins.iter().map(|&p| EmptyElement::at(p) + diamond(7)))
                .map_err(&err)?
                .label("pin")
                .legend(|(x, y)| EmptyElement::at((x + 9, y)) + diamond(6));
        }
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperLeft)
            .background_style(WHITE.mix(0.85))
            .border_style(MUTED)
            .label_font(("sans-serif", 13))
            .draw()
            .map_err(&err)?;
        root.present().map_err(&err)
    })
}

/// One part of an attribution chart: its name and its values by horizon.
pub struct BarPart<'a> {
    pub name: &'a str,
    pub values: Vec<f64>,
}

/// Stacked bars by horizon (positive parts upwards, negative downwards) with the total as a
/// line: a series' attribution, as a PNG at `path`.
pub fn stacked_chart(
    path: &Path,
    setup: &Setup,
    title: &str,
    units: &str,
    parts: &[BarPart],
    total: &[f64],
) -> Result<(), ReportError> {
    font();
    let h = total.len();
    let mut up = vec![0.0f64; h];
    let mut down = vec![0.0f64; h];
    for p in parts {
        for (t, v) in p.values.iter().enumerate() {
            if *v >= 0.0 {
                up[t] += v;
            } else {
                down[t] += v;
            }
        }
    }
    let hi = up.iter().chain(total).fold(0.0f64, |m, v| m.max(*v));
    let lo = down.iter().chain(total).fold(0.0f64, |m, v| m.min(*v));
    let pad = ((hi - lo) * 0.1).max(1e-6);
    replace_with(path, |tmp| {
        let err = drawing(tmp);
        let root = BitMapBackend::new(tmp, (WIDTH, HEIGHT)).into_drawing_area();
        root.fill(&WHITE).map_err(&err)?;
        let mut chart = ChartBuilder::on(&root)
            .caption(title, ("sans-serif", 20))
            .margin(12)
            .x_label_area_size(32)
            .y_label_area_size(56)
            .build_cartesian_2d(0.5..h as f64 + 0.5, lo - pad..hi + pad)
            .map_err(&err)?;
        let f = setup.periods_per_year().max(1);
        let label_of = |v: &f64| {
            let t = v.round() as i64;
            if (v - t as f64).abs() < 1e-9 && t >= 1 && (t - 1) % (f as i64) == 0 {
                period(setup, t)
            } else {
                String::new()
            }
        };
        chart
            .configure_mesh()
            .disable_x_mesh()
            .max_light_lines(0)
            .x_labels(h + 1)
            .x_label_formatter(&label_of)
            .y_desc(units)
            .label_style(("sans-serif", 14))
            .draw()
            .map_err(&err)?;
        let mut base_up = vec![0.0f64; h];
        let mut base_down = vec![0.0f64; h];
        for (k, p) in parts.iter().enumerate() {
            let (r, g, b) =
                super::attribution::PART_COLOURS[k % super::attribution::PART_COLOURS.len()];
            let colour = RGBColor(r, g, b);
            let bars: Vec<Rectangle<(f64, f64)>> = p
                .values
                .iter()
                .enumerate()
                .map(|(t, &v)| {
                    let base = if v >= 0.0 {
                        &mut base_up[t]
                    } else {
                        &mut base_down[t]
                    };
                    let (a, b) = (*base, *base + v);
                    *base = b;
                    let x = (t + 1) as f64;
                    Rectangle::new([(x - 0.35, a), (x + 0.35, b)], colour.filled())
                })
                .collect();
            chart
                .draw_series(bars)
                .map_err(&err)?
                .label(p.name)
                .legend(move |(x, y)| {
                    Rectangle::new([(x, y - 5), (x + 18, y + 5)], colour.filled())
                });
        }
        chart
            .draw_series(LineSeries::new(
                total.iter().enumerate().map(|(t, &v)| ((t + 1) as f64, v)),
                HISTORY.stroke_width(3),
            ))
            .map_err(&err)?
            .label("total")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], HISTORY.stroke_width(3)));
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperLeft)
            .background_style(WHITE.mix(0.85))
            .border_style(MUTED)
            .label_font(("sans-serif", 13))
            .draw()
            .map_err(&err)?;
        root.present().map_err(&err)
    })
}
