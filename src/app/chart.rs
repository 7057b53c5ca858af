//! One series' chart: recent history, the unconditional fan (muted) behind the conditional
//! fan (50/68/90% bands and the median), a line at the last observation, and the pins and
//! corridors on this series in the chart's units, with handles.
//!
//! Gestures (hit-tested in screen pixels, so the tolerance does not depend on zoom):
//! drag a pin up and down; drag a corridor's upper or lower edge (all its periods, or with Alt
//! only the period under the pointer); Ctrl+click a future period to place a pin; Shift+drag
//! across future periods to draw a corridor; right-click a handle to remove its condition.
//! Values snap to readable steps; hold Alt while dragging a pin to move it freely. The chart
//! never pans or zooms, so a drag always means an edit.

use egui::{Color32, Pos2, Stroke};
use egui_plot::{FilledArea, GridMark, Line, LineStyle, Plot, PlotPoint, Points, Polygon, VLine};

use super::palette::Palette;
use super::worker::{Results, SeriesView};
use crate::scenario::{Bound, ScenarioFile, Units};

/// A condition of the scenario file, by list and index.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum CondRef {
    Pin(usize),
    Corridor(usize),
}

impl CondRef {
    /// The scenario-file field, as the checks name it.
    pub fn field(self) -> String {
        match self {
            CondRef::Pin(k) => format!("pins[{k}]"),
            CondRef::Corridor(k) => format!("corridors[{k}]"),
        }
    }
}

/// What a gesture on a chart asks of the document.
#[derive(Debug, Clone, PartialEq)]
pub enum ChartAction {
    BeginGesture,
    EndGesture,
    SetPin {
        pin: usize,
        value: f64,
    },
    /// Shift one bound of a corridor by `delta`, at every period or at `period` only.
    MoveBound {
        corridor: usize,
        upper: bool,
        delta: f64,
        period: Option<usize>,
    },
    AddPin {
        period: String,
        value: f64,
    },
    AddCorridor {
        from: String,
        to: String,
        lower: f64,
        upper: f64,
    },
    Select(Option<CondRef>),
    Remove(CondRef),
    Enlarge,
}

/// A gesture in progress on one chart.
#[derive(Debug, Clone, PartialEq)]
pub enum Drag {
    Pin {
        pin: usize,
    },
    Bound {
        corridor: usize,
        upper: bool,
        period: Option<usize>,
        last_y: f64,
    },
    NewCorridor {
        start: PlotPoint,
        now: PlotPoint,
    },
}

/// Per-chart state kept between frames.
#[derive(Debug, Clone, Default)]
pub struct ChartMemory {
    pub drag: Option<Drag>,
    /// The pointer was over a handle last frame (the plot is told before it runs).
    pub over_handle: bool,
    /// The condition a right-click landed on.
    pub context: Option<CondRef>,
    /// The plot's last transform between values and screen positions.
    pub transform: Option<egui_plot::PlotTransform>,
}

/// Everything a chart needs to draw itself.
pub struct ChartInput<'a> {
    pub index: usize,
    pub view: &'a SeriesView,
    pub results: &'a Results,
    pub file: &'a ScenarioFile,
    /// The last good fans while the conditions clash: drawn greyed.
    pub stale: bool,
    pub selected: Option<CondRef>,
    /// Conditions named by a clash (red) or a strain (amber).
    pub status: &'a dyn Fn(CondRef) -> Option<Color32>,
    pub height: f32,
    pub palette: &'a Palette,
}

/// Pixels within which a pointer picks a handle.
const PICK: f32 = 8.0;

/// A readable step for values spanning `range`: 1, 2 or 5 times a power of ten, about a
/// fiftieth of the range.
pub fn snap_step(range: f64) -> f64 {
    let raw = (range.abs() / 50.0).max(1e-12);
    let base = 10f64.powf(raw.log10().floor());
    let m = raw / base;
    base * if m < 1.5 {
        1.0
    } else if m < 3.5 {
        2.0
    } else if m < 7.5 {
        5.0
    } else {
        10.0
    }
}

pub fn snap(value: f64, step: f64) -> f64 {
    (value / step).round() * step
}

/// Horizon of a period label (`None` if it does not parse).
pub fn horizon(results: &Results, label: &str) -> Option<i64> {
    crate::dataset::Period::parse(label, results.last.freq)
        .ok()
        .map(|p| p.periods_since(&results.last))
}

/// The per-period bounds of a corridor (`None` for an open side).
pub fn bounds(b: &Option<Bound>, periods: usize) -> Vec<Option<f64>> {
    match b {
        None => vec![None; periods],
        Some(Bound::Same(v)) => vec![Some(*v); periods],
        Some(Bound::Each(list)) => (0..periods)
            .map(|k| list.get(k).copied().flatten())
            .collect(),
    }
}

/// Whether a condition on `series`/`units` is drawn on a chart of `name` in `chart_units`.
fn on_chart(series: &Option<String>, units: Units, name: &str, chart_units: Units) -> bool {
    series.as_deref() == Some(name) && units == chart_units
}

/// A corridor as drawn: its index, first horizon, and per-period (lower, upper) bounds.
type Drawn = (usize, i64, Vec<(Option<f64>, Option<f64>)>);

struct Handles {
    /// Pin index and screen position.
    pins: Vec<(usize, Pos2)>,
    /// Corridor index, upper?, period offset, screen segment (x0, x1, y).
    edges: Vec<(usize, bool, usize, f32, f32, f32)>,
}

impl Handles {
    fn pick(&self, pos: Pos2) -> Option<Pick> {
        let pin = self
            .pins
            .iter()
            .map(|&(k, p)| (k, p.distance(pos)))
            .filter(|&(_, d)| d <= PICK)
            .min_by(|a, b| a.1.total_cmp(&b.1));
        if let Some((k, _)) = pin {
            return Some(Pick::Pin(k));
        }
        self.edges
            .iter()
            .filter(|&&(_, _, _, x0, x1, y)| {
                pos.x >= x0 && pos.x <= x1 && (pos.y - y).abs() <= PICK
            })
            .min_by(|a, b| (pos.y - a.5).abs().total_cmp(&(pos.y - b.5).abs()))
            .map(|&(c, upper, period, ..)| Pick::Edge(c, upper, period))
    }
}

enum Pick {
    Pin(usize),
    Edge(usize, bool, usize),
}

/// Draw the chart and turn gestures into actions.
pub fn show(ui: &mut egui::Ui, input: &ChartInput, memory: &mut ChartMemory) -> Vec<ChartAction> {
    let mut actions = Vec::new();
    let view = input.view;
    let pal = input.palette;
    let results = input.results;
    let name = view.name.clone();
    let units = view.units;
    let h = results.labels.len() as i64 - results.history as i64 - 1;
    // Value range of the data, for open corridor sides and snapping.
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for &(_, v) in &view.history {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    for f in view.conditional.iter().chain(&view.unconditional) {
        lo = lo.min(f.q[0]);
        hi = hi.max(f.q[6]);
    }
    if !lo.is_finite() || !hi.is_finite() {
        (lo, hi) = (0.0, 1.0);
    }
    let pad = 0.15 * (hi - lo).max(1e-6);
    let (open_lo, open_hi) = (lo - pad, hi + pad);
    let step = snap_step(hi - lo);

    let pins: Vec<(usize, f64, f64)> = input
        .file
        .pins
        .iter()
        .enumerate()
        .filter(|(_, p)| p.active && on_chart(&p.series, p.units, &name, units))
        .filter_map(|(k, p)| horizon(results, &p.period).map(|t| (k, t as f64, p.value)))
        .collect();
    // Corridors: (index, first horizon, per-period (lower, upper)).
    let corridors: Vec<Drawn> = input
        .file
        .corridors
        .iter()
        .enumerate()
        .filter(|(_, c)| c.active && on_chart(&c.series, c.units, &name, units))
        .filter_map(|(k, c)| {
            let (a, b) = (horizon(results, &c.from)?, horizon(results, &c.to)?);
            let n = usize::try_from(b - a + 1).ok()?;
            let lower = bounds(&c.lower, n);
            let upper = bounds(&c.upper, n);
            Some((k, a, lower.into_iter().zip(upper).collect()))
        })
        .collect();

    let dragging = memory.drag.is_some();
    let label_results = results;
    let label_view = view;
    let plot = Plot::new(("chart", input.index))
        .height(input.height)
        .include_x(-(results.history as f64) - 0.5)
        .include_x(h as f64 + 0.6)
        .allow_drag(false)
        .allow_zoom(false)
        .allow_scroll(false)
        .allow_boxed_zoom(false)
        .allow_double_click_reset(false)
        .show_grid([false, true])
        .y_axis_min_width(36.0)
        .x_axis_formatter(move |mark: GridMark, _| {
            label_results
                .label(mark.value)
                .filter(|_| (mark.value - mark.value.round()).abs() < 1e-9)
                .unwrap_or("")
                .to_string()
        })
        .label_formatter(move |pos| {
            let p = match pos {
                egui_plot::HoverPosition::NearDataPoint { position, .. } => *position,
                egui_plot::HoverPosition::Elsewhere { position } => *position,
            };
            let date = label_results.label(p.x)?;
            let mut text = format!("{date}\n{:.3}", p.y);
            if let Some(f) = label_view
                .conditional
                .iter()
                .find(|f| (f.x - p.x.round()).abs() < 0.5)
            {
                text.push_str(&format!(
                    "\nmedian {:.3}\n50% {:.3} … {:.3}\n90% {:.3} … {:.3}",
                    f.q[3], f.q[2], f.q[4], f.q[0], f.q[6]
                ));
            }
            Some(text)
        });
    let plot = if dragging {
        plot.include_y(open_lo).include_y(open_hi)
    } else {
        plot
    };
    let response = plot.show(ui, |pui| {
        if dragging {
            pui.set_auto_bounds(false);
        }
        let fan_colour = if input.stale { pal.stale } else { pal.fan };
        // Unconditional fan, muted, then the conditional one.
        let xs: Vec<f64> = view.unconditional.iter().map(|f| f.x).collect();
        let band = |k0: usize, k1: usize, v: &[super::worker::FanPoint]| {
            (
                v.iter().map(|f| f.q[k0]).collect::<Vec<_>>(),
                v.iter().map(|f| f.q[k1]).collect::<Vec<_>>(),
            )
        };
        let (u0, u1) = band(0, 6, &view.unconditional);
        pui.add(
            FilledArea::new("unconditional 90%", &xs, &u0, &u1)
                .fill_color(pal.muted.gamma_multiply(0.35))
                .allow_hover(false),
        );
        pui.line(
            Line::new(
                "unconditional median",
                view.unconditional
                    .iter()
                    .map(|f| [f.x, f.q[3]])
                    .collect::<Vec<_>>(),
            )
            .color(pal.muted)
            .style(LineStyle::dashed_loose())
            .width(1.2),
        );
        let xs: Vec<f64> = view.conditional.iter().map(|f| f.x).collect();
        for (k0, k1, alpha) in [(0, 6, 0.22), (1, 5, 0.30), (2, 4, 0.42)] {
            let (a, b) = band(k0, k1, &view.conditional);
            pui.add(
                FilledArea::new("conditional band", &xs, &a, &b)
                    .fill_color(fan_colour.gamma_multiply(alpha))
                    .allow_hover(false),
            );
        }
        pui.line(
            Line::new(
                "conditional median",
                view.conditional
                    .iter()
                    .map(|f| [f.x, f.q[3]])
                    .collect::<Vec<_>>(),
            )
            .color(fan_colour)
            .width(2.0),
        );
        pui.line(
            Line::new(
                "history",
                view.history
                    .iter()
                    .map(|&(x, y)| [x, y])
                    .collect::<Vec<_>>(),
            )
            .color(pal.history)
            .width(1.6),
        );
        pui.vline(
            VLine::new("last observation", 0.0)
                .color(pal.muted)
                .width(1.0),
        );

        let t = *pui.transform();
        let mut handles = Handles {
            pins: Vec::new(),
            edges: Vec::new(),
        };
        for (c, first, periods) in &corridors {
            let cref = CondRef::Corridor(*c);
            let selected = input.selected == Some(cref);
            let edge = (input.status)(cref).unwrap_or(pal.corridor);
            for (k, (l, u)) in periods.iter().enumerate() {
                let x = (*first + k as i64) as f64;
                let (yl, yu) = (l.unwrap_or(open_lo), u.unwrap_or(open_hi));
                pui.polygon(
                    Polygon::new(
                        "corridor",
                        vec![
                            [x - 0.45, yl],
                            [x + 0.45, yl],
                            [x + 0.45, yu],
                            [x - 0.45, yu],
                        ],
                    )
                    .fill_color(pal.corridor.gamma_multiply(0.12))
                    .stroke(Stroke::new(if selected { 2.5 } else { 1.2 }, edge))
                    .allow_hover(false),
                );
                let x0 = t.position_from_point_x(x - 0.5);
                let x1 = t.position_from_point_x(x + 0.5);
                if let Some(v) = l {
                    handles
                        .edges
                        .push((*c, false, k, x0, x1, t.position_from_point_y(*v)));
                }
                if let Some(v) = u {
                    handles
                        .edges
                        .push((*c, true, k, x0, x1, t.position_from_point_y(*v)));
                }
            }
        }
        for &(k, x, v) in &pins {
            let cref = CondRef::Pin(k);
            let ring = (input.status)(cref);
            let selected = input.selected == Some(cref);
            if let Some(ring) = ring {
                pui.points(
                    Points::new("pin status", vec![[x, v]])
                        .radius(9.0)
                        .color(ring)
                        .filled(true),
                );
            }
            pui.points(
                Points::new("pin", vec![[x, v]])
                    .radius(if selected { 7.0 } else { 5.5 })
                    .color(pal.pin)
                    .filled(true),
            );
            handles
                .pins
                .push((k, t.position_from_point(&PlotPoint::new(x, v))));
        }
        if let Some(Drag::NewCorridor { start, now }) = &memory.drag {
            let (x0, x1) = (start.x.min(now.x).round(), start.x.max(now.x).round());
            let (y0, y1) = (start.y.min(now.y), start.y.max(now.y));
            pui.polygon(
                Polygon::new(
                    "new corridor",
                    vec![
                        [x0 - 0.45, y0],
                        [x1 + 0.45, y0],
                        [x1 + 0.45, y1],
                        [x0 - 0.45, y1],
                    ],
                )
                .fill_color(pal.corridor.gamma_multiply(0.2))
                .stroke(Stroke::new(1.5, pal.corridor))
                .allow_hover(false),
            );
        }
        (handles, t)
    });
    let (handles, t) = response.inner;
    memory.transform = Some(t);
    let r = &response.response;
    let (pointer, press, modifiers, primary_released) = ui.input(|i| {
        (
            i.pointer.interact_pos(),
            i.pointer.press_origin(),
            i.modifiers,
            i.pointer.primary_released(),
        )
    });
    memory.over_handle = pointer.is_some_and(|p| r.rect.contains(p) && handles.pick(p).is_some());
    if memory.over_handle || memory.drag.is_some() {
        ui.ctx().set_cursor_icon(egui::CursorIcon::ResizeVertical);
    }
    let value_at = |p: Pos2| t.value_from_position(p);
    let snapped = |y: f64| if modifiers.alt { y } else { snap(y, step) };

    // Start of a gesture.
    if r.drag_started()
        && let Some(origin) = press
    {
        let at = value_at(origin);
        if modifiers.shift {
            if at.x.round() >= 1.0 {
                memory.drag = Some(Drag::NewCorridor { start: at, now: at });
            }
        } else {
            match handles.pick(origin) {
                Some(Pick::Pin(k)) => {
                    memory.drag = Some(Drag::Pin { pin: k });
                    actions.push(ChartAction::Select(Some(CondRef::Pin(k))));
                    actions.push(ChartAction::BeginGesture);
                }
                Some(Pick::Edge(c, upper, k)) => {
                    memory.drag = Some(Drag::Bound {
                        corridor: c,
                        upper,
                        period: modifiers.alt.then_some(k),
                        last_y: snap(at.y, step),
                    });
                    actions.push(ChartAction::Select(Some(CondRef::Corridor(c))));
                    actions.push(ChartAction::BeginGesture);
                }
                None => {}
            }
        }
    }
    // The gesture goes on.
    if let (Some(drag), Some(p)) = (memory.drag.as_mut(), pointer) {
        let at = value_at(p);
        match drag {
            Drag::Pin { pin } => actions.push(ChartAction::SetPin {
                pin: *pin,
                value: snapped(at.y),
            }),
            Drag::Bound {
                corridor,
                upper,
                period,
                last_y,
            } => {
                let y = snap(at.y, step);
                if y != *last_y {
                    actions.push(ChartAction::MoveBound {
                        corridor: *corridor,
                        upper: *upper,
                        delta: y - *last_y,
                        period: *period,
                    });
                    *last_y = y;
                }
            }
            Drag::NewCorridor { now, .. } => *now = at,
        }
    }
    // The gesture ends.
    if primary_released && let Some(drag) = memory.drag.take() {
        match drag {
            Drag::NewCorridor { start, now } => {
                let (x0, x1) = (
                    start.x.min(now.x).round().max(1.0),
                    start.x.max(now.x).round().min(h as f64),
                );
                let (y0, y1) = (
                    snap(start.y.min(now.y), step),
                    snap(start.y.max(now.y), step),
                );
                if x1 >= x0
                    && y1 > y0
                    && let (Some(from), Some(to)) = (results.label(x0), results.label(x1))
                {
                    actions.push(ChartAction::AddCorridor {
                        from: from.to_string(),
                        to: to.to_string(),
                        lower: y0,
                        upper: y1,
                    });
                }
            }
            _ => actions.push(ChartAction::EndGesture),
        }
    }
    // Clicks: Ctrl+click places a pin, a click on a handle selects, elsewhere deselects.
    if r.clicked()
        && let Some(p) = pointer
    {
        let at = value_at(p);
        if modifiers.command {
            let x = at.x.round();
            if x >= 1.0
                && x <= h as f64
                && let Some(period) = results.label(x)
            {
                actions.push(ChartAction::AddPin {
                    period: period.to_string(),
                    value: snapped(at.y),
                });
            }
        } else {
            let picked = handles.pick(p).map(|pick| match pick {
                Pick::Pin(k) => CondRef::Pin(k),
                Pick::Edge(c, ..) => CondRef::Corridor(c),
            });
            actions.push(ChartAction::Select(picked));
        }
    }
    if r.double_clicked() {
        actions.push(ChartAction::Enlarge);
    }
    if r.secondary_clicked() {
        memory.context = pointer
            .and_then(|p| handles.pick(p))
            .map(|pick| match pick {
                Pick::Pin(k) => CondRef::Pin(k),
                Pick::Edge(c, ..) => CondRef::Corridor(c),
            });
    }
    if let Some(cref) = memory.context {
        r.context_menu(|ui| {
            let what = match cref {
                CondRef::Pin(_) => "Remove this pin",
                CondRef::Corridor(_) => "Remove this corridor",
            };
            if ui.button(what).clicked() {
                actions.push(ChartAction::Remove(cref));
                ui.close();
            }
        });
    }
    let elsewhere = input
        .file
        .pins
        .iter()
        .filter(|p| p.active && p.series.as_deref() == Some(name.as_str()) && p.units != units)
        .count()
        + input
            .file
            .corridors
            .iter()
            .filter(|c| c.active && c.series.as_deref() == Some(name.as_str()) && c.units != units)
            .count();
    if elsewhere > 0 {
        ui.label(
            egui::RichText::new(format!(
                "{elsewhere} condition(s) on this series in other units: see the table"
            ))
            .small()
            .color(pal.muted),
        );
    }
    actions
}
