//! One series' chart: recent history, the unconditional fan (muted) behind the conditional
//! fan (50/68/90% bands and the median), a line at the last observation, and the pins and
//! corridors on this series in the chart's units, with handles.
//!
//! The same chart shows a structural shock (standardised, future periods only) in the shocks
//! view, with the conditions on that shock.
//!
//! Gestures (hit-tested in screen pixels, so the tolerance does not depend on zoom):
//! drag a pin up and down; drag a corridor's upper or lower edge (all its periods, or with Ctrl
//! only the period under the pointer) or its first or last period sideways; Ctrl+click a future
//! period to place a pin; drag across empty future periods to draw a corridor (across periods
//! a corridor on the chart holds, to draw that one again); right-click a handle to remove its
//! condition. The handle under the pointer is drawn as if selected. Values snap to readable steps; hold Shift to move freely
//! (G turns snapping off and on; Shift then snaps).
//! The chart never pans or zooms, so a drag always means an edit. Its value range is fitted
//! once and then kept steady as fans update: it widens only when something would leave it,
//! never during a drag, and "re-fit" fits it again.

use egui::{Color32, Pos2, Stroke};
use egui_plot::{FilledArea, GridMark, Line, LineStyle, Plot, PlotPoint, Points, Polygon, VLine};

use super::palette::Palette;
use super::worker::{Results, SeriesView, Subject};
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
    /// Shift one bound of a corridor by `delta`, at every period or at `period` only (of
    /// `periods`).
    MoveBound {
        corridor: usize,
        upper: bool,
        delta: f64,
        period: Option<usize>,
        periods: usize,
    },
    /// Move a corridor's first (or last) period by `shift` periods, to `label`.
    MoveEnd {
        corridor: usize,
        last: bool,
        shift: i64,
        label: String,
    },
    /// A new pin, in the chart's units.
    AddPin {
        period: String,
        units: Units,
        value: f64,
    },
    /// Draw an existing corridor again (a new-corridor drag over periods it holds): its
    /// periods and both bounds become the drawn ones, in the chart's units.
    RedrawCorridor {
        corridor: usize,
        from: String,
        to: String,
        units: Units,
        lower: f64,
        upper: f64,
    },
    /// A new corridor, in the chart's units.
    AddCorridor {
        from: String,
        to: String,
        units: Units,
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
    /// The pin moves by the pointer's travel from where it was grabbed (so grabbing it
    /// off-centre does not make it jump): `start` value and pointer, `value` now.
    Pin {
        pin: usize,
        start: f64,
        start_y: f64,
        value: f64,
    },
    Bound {
        corridor: usize,
        upper: bool,
        period: Option<usize>,
        last_y: f64,
    },
    End {
        corridor: usize,
        last: bool,
        /// Horizon the end now sits at.
        at: i64,
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
    /// The condition a right-click landed on.
    pub context: Option<CondRef>,
    /// The plot's last transform between values and screen positions.
    pub transform: Option<egui_plot::PlotTransform>,
    /// The chart's snapping step (the arrow keys nudge by it).
    pub step: f64,
    /// The value range shown, and the units it was fitted in: kept steady while the user
    /// works, widened only when something would leave it (see [`steady_range`]).
    pub range: Option<(f64, f64, Units)>,
    /// The range the chart's contents span (history, both fans, conditions).
    pub wanted: (f64, f64),
    /// The condition whose handle the pointer was over last frame (drawn highlighted).
    pub hover: Option<CondRef>,
    /// The hover readout is held back: a handle is under the pointer, a drag is on or the
    /// remove menu is open (the readout is drawn above menus and would hide them). Decided
    /// from the previous frame, as the plot is built before its handles are known.
    pub quiet: bool,
}

/// Everything a chart needs to draw itself.
pub struct ChartInput<'a> {
    /// A drag is on somewhere in the window: every chart keeps its range meanwhile.
    pub any_drag: bool,
    pub index: usize,
    /// What the values are measured in, in words (the value axis says it).
    pub measure: &'a str,
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
    /// Values snap to readable steps (Shift inverts this while held).
    pub snapping: bool,
    /// The same series in a second scenario, drawn beside this one's fans.
    pub second: Option<&'a SeriesView>,
}

/// Pixels within which a pointer picks a handle (a quarter can be under 10 pixels wide and an
/// edge is one pixel thick: the hit area is much larger than either).
const PICK: f32 = 10.0;

/// The value range to show for contents spanning `wanted`: the previous range while a drag
/// lasts or while it holds the contents; else each side the contents pass moves out to them
/// plus a margin of 5% of their span (so the range only widens, and only where needed). The margin is
/// also the slack that keeps small changes of the fans from moving the frame.
pub fn steady_range(
    previous: Option<(f64, f64)>,
    wanted: (f64, f64),
    dragging: bool,
) -> (f64, f64) {
    let margin = 0.05 * (wanted.1 - wanted.0).max(1e-6);
    let fitted = (wanted.0 - margin, wanted.1 + margin);
    match previous {
        None => fitted,
        Some(range) if dragging || (range.0 <= wanted.0 && wanted.1 <= range.1) => range,
        Some((lo, hi)) => (
            if wanted.0 < lo { fitted.0 } else { lo },
            if wanted.1 > hi { fitted.1 } else { hi },
        ),
    }
}

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
    tidy((value / step).round() * step)
}

/// `x` rounded to 12 significant digits, so that sums of readable steps stay readable
/// (0.7, not 0.7000000000000001).
pub fn tidy(x: f64) -> f64 {
    if x == 0.0 || !x.is_finite() {
        return x;
    }
    let digits = 12 - x.abs().log10().ceil() as i32;
    if !(0..=290).contains(&digits) {
        return x;
    }
    let scale = 10f64.powi(digits);
    let y = (x * scale).round() / scale;
    if y.is_finite() { y } else { x }
}

/// Value grid steps of 1, 2 or 5 times a power of ten (three levels, the finest at least the
/// plot's smallest step, each a multiple of the one before so that labels stay evenly spaced),
/// so that every chart gets a few labelled values.
pub fn steps_125(input: egui_plot::GridInput) -> [f64; 3] {
    // 1 → 2 → 10, 2 → 10, 5 → 10.
    let next = |s: f64| {
        let p = 10f64.powf(s.log10().floor());
        p * if s / p < 1.5 { 2.0 } else { 10.0 }
    };
    let base = input.base_step_size.max(1e-12);
    let p = 10f64.powf(base.log10().floor());
    let s = [1.0, 2.0, 5.0, 10.0]
        .into_iter()
        .map(|m| m * p)
        .find(|&s| s >= base)
        .unwrap_or(10.0 * p);
    [s, next(s), next(next(s))]
}

/// The box drawn over periods `x0…x1` between values `y0` and `y1` (a little narrower than
/// the periods, so that neighbouring boxes stay apart).
fn period_box(x0: f64, x1: f64, y0: f64, y1: f64) -> Vec<[f64; 2]> {
    vec![
        [x0 - 0.45, y0],
        [x1 + 0.45, y0],
        [x1 + 0.45, y1],
        [x0 - 0.45, y1],
    ]
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

/// Whether a condition on `series` or `shock` in `units` is drawn on the chart of `view`.
fn on_chart(
    series: &Option<String>,
    shock: &Option<String>,
    units: Units,
    view: &SeriesView,
) -> bool {
    match view.subject {
        Subject::Series => series.as_deref() == Some(&view.name) && units == view.units,
        Subject::Shock => shock.as_deref() == Some(&view.name),
    }
}

/// A corridor as drawn: its index, first horizon, and per-period (lower, upper) bounds.
type Drawn = (usize, i64, Vec<(Option<f64>, Option<f64>)>);

struct Handles {
    /// Pin index and screen position.
    pins: Vec<(usize, Pos2)>,
    /// Corridor index, upper?, period offset, screen segment (x0, x1, y).
    edges: Vec<(usize, bool, usize, f32, f32, f32)>,
    /// Corridor index, last?, horizon, screen segment (x, y0, y1) at its outer side.
    ends: Vec<(usize, bool, i64, f32, f32, f32)>,
}

impl Handles {
    /// The handle nearest `pos` within [`PICK`] pixels; pins first, then whichever edge or end
    /// is nearer.
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
        let edges = self
            .edges
            .iter()
            .filter(|&&(_, _, _, x0, x1, y)| {
                pos.x >= x0 && pos.x <= x1 && (pos.y - y).abs() <= PICK
            })
            .map(|&(c, upper, period, _, _, y)| ((pos.y - y).abs(), Pick::Edge(c, upper, period)));
        let ends = self
            .ends
            .iter()
            .filter(|&&(_, _, _, x, y0, y1)| {
                pos.y >= y0.min(y1) && pos.y <= y0.max(y1) && (pos.x - x).abs() <= PICK
            })
            .map(|&(c, last, at, x, ..)| ((pos.x - x).abs(), Pick::End(c, last, at)));
        edges
            .chain(ends)
            .min_by(|a, b| a.0.total_cmp(&b.0))
            .map(|(_, pick)| pick)
    }
}

enum Pick {
    Pin(usize),
    Edge(usize, bool, usize),
    End(usize, bool, i64),
}

impl Pick {
    fn condition(&self) -> CondRef {
        match *self {
            Pick::Pin(k) => CondRef::Pin(k),
            Pick::Edge(c, ..) | Pick::End(c, ..) => CondRef::Corridor(c),
        }
    }
}

/// Draw the chart and turn gestures into actions.
pub fn show(ui: &mut egui::Ui, input: &ChartInput, memory: &mut ChartMemory) -> Vec<ChartAction> {
    let mut actions = Vec::new();
    let view = input.view;
    let pal = input.palette;
    let results = input.results;
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
    let step = snap_step(hi - lo);
    memory.step = step;

    let pins: Vec<(usize, f64, f64)> = input
        .file
        .pins
        .iter()
        .enumerate()
        .filter(|(_, p)| p.active && on_chart(&p.series, &p.shock, p.units, view))
        .filter_map(|(k, p)| horizon(results, &p.period).map(|t| (k, t as f64, p.value)))
        .collect();
    // Corridors: (index, first horizon, per-period (lower, upper)).
    let corridors: Vec<Drawn> = input
        .file
        .corridors
        .iter()
        .enumerate()
        .filter(|(_, c)| c.active && on_chart(&c.series, &c.shock, c.units, view))
        .filter_map(|(k, c)| {
            let (a, b) = (horizon(results, &c.from)?, horizon(results, &c.to)?);
            // Only corridors within the forecast are drawn (the checks name the others).
            if a < 1 || b > h {
                return None;
            }
            let n = usize::try_from(b - a + 1).ok()?;
            let lower = bounds(&c.lower, n);
            let upper = bounds(&c.upper, n);
            Some((k, a, lower.into_iter().zip(upper).collect()))
        })
        .collect();

    let dragging = memory.drag.is_some();
    // What the chart must hold: the data and fans, the second scenario, every finite bound
    // and pin; then the range shown, steady while the user works.
    let (mut want_lo, mut want_hi) = (lo, hi);
    let extra = pins.iter().map(|p| p.2).chain(
        corridors
            .iter()
            .flat_map(|d| d.2.iter().flat_map(|(l, u)| [*l, *u]))
            .flatten(),
    );
    let second = input
        .second
        .into_iter()
        .flat_map(|v| v.conditional.iter().flat_map(|f| [f.q[0], f.q[6]]));
    for v in extra.chain(second).filter(|v| v.is_finite()) {
        want_lo = want_lo.min(v);
        want_hi = want_hi.max(v);
    }
    memory.wanted = (want_lo, want_hi);
    let previous = memory
        .range
        .filter(|r| r.2 == view.units)
        .map(|(a, b, _)| (a, b));
    let (y_lo, y_hi) = steady_range(previous, memory.wanted, dragging || input.any_drag);
    memory.range = Some((y_lo, y_hi, view.units));
    // Open corridor sides run past the frame.
    let pad = 0.15 * (y_hi - y_lo);
    let (open_lo, open_hi) = (y_lo - pad, y_hi + pad);
    let free = ui.input(|i| i.modifiers.shift) == input.snapping;
    let free_or_snap = |y: f64| if free { y } else { snap(y, step) };
    let label_results = results;
    let label_view = view;
    let quiet = memory.quiet;
    // Both views show the same past: the data, or the model's historical shocks.
    let first_x = -(results.history as f64) - 0.5;
    let plot = Plot::new(("chart", view.subject, input.index))
        .height(input.height)
        .allow_drag(false)
        .allow_zoom(false)
        .allow_scroll(false)
        .allow_boxed_zoom(false)
        .allow_double_click_reset(false)
        .show_grid([false, true])
        .y_axis_min_width(36.0)
        .y_axis_label(input.measure)
        .y_grid_spacer(egui_plot::uniform_grid_spacer(steps_125))
        .x_axis_formatter(move |mark: GridMark, _| {
            label_results
                .label(mark.value)
                .filter(|_| (mark.value - mark.value.round()).abs() < 1e-9)
                .unwrap_or("")
                .to_string()
        })
        .label_formatter(move |pos| {
            if quiet {
                return None;
            }
            let p = match pos {
                egui_plot::HoverPosition::NearDataPoint { position, .. } => *position,
                egui_plot::HoverPosition::Elsewhere { position } => *position,
            };
            let date = label_results.label(p.x)?;
            let mut text = format!("{date}   pointer at {:.3}", p.y);
            let at = |fans: &[super::worker::FanPoint]| {
                fans.iter()
                    .find(|f| (f.x - p.x.round()).abs() < 0.5)
                    .copied()
            };
            if let Some(f) = at(&label_view.conditional) {
                text.push_str(&format!(
                    "\nscenario: median {:.3}\n  50% {:.3} … {:.3}\n  90% {:.3} … {:.3}",
                    f.q[3], f.q[2], f.q[4], f.q[0], f.q[6]
                ));
            }
            if let Some(f) = at(&label_view.unconditional) {
                let what = match label_view.subject {
                    Subject::Series => "without conditions",
                    Subject::Shock => "usual N(0, 1)",
                };
                text.push_str(&format!(
                    "\n{what}: median {:.3}\n  90% {:.3} … {:.3}",
                    f.q[3], f.q[0], f.q[6]
                ));
            }
            Some(text)
        });
    let response = plot.show(ui, |pui| {
        pui.set_auto_bounds(false);
        pui.set_plot_bounds_x(first_x..=h as f64 + 0.6);
        pui.set_plot_bounds_y(y_lo..=y_hi);
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
        if let Some(other) = input.second {
            // The second scenario: its median, and its 90% band as two thin lines.
            let line = |name: &str, k: usize, width: f32| {
                Line::new(
                    name.to_string(),
                    other
                        .conditional
                        .iter()
                        .map(|f| [f.x, f.q[k]])
                        .collect::<Vec<_>>(),
                )
                .color(pal.second)
                .width(width)
                .allow_hover(false)
            };
            pui.line(line("second scenario 5%", 0, 1.0));
            pui.line(line("second scenario 95%", 6, 1.0));
            pui.line(line("second scenario median", 3, 2.0));
        }
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
            ends: Vec::new(),
        };
        for (c, first, periods) in &corridors {
            let cref = CondRef::Corridor(*c);
            let selected = input.selected == Some(cref) || memory.hover == Some(cref);
            let edge = (input.status)(cref).unwrap_or(pal.corridor);
            for (k, (l, u)) in periods.iter().enumerate() {
                let x = (*first + k as i64) as f64;
                let (yl, yu) = (l.unwrap_or(open_lo), u.unwrap_or(open_hi));
                pui.polygon(
                    Polygon::new("corridor", period_box(x, x, yl, yu))
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
                // The outer sides of the first and last periods move the ends.
                let (y0, y1) = (t.position_from_point_y(yl), t.position_from_point_y(yu));
                let last = *first + periods.len() as i64 - 1;
                if k == 0 {
                    let xe = t.position_from_point_x(x - 0.45);
                    handles.ends.push((*c, false, *first, xe, y0, y1));
                }
                if k + 1 == periods.len() {
                    let xe = t.position_from_point_x(x + 0.45);
                    handles.ends.push((*c, true, last, xe, y0, y1));
                }
            }
        }
        for &(k, x, v) in &pins {
            let cref = CondRef::Pin(k);
            let ring = (input.status)(cref);
            let selected = input.selected == Some(cref) || memory.hover == Some(cref);
            if let Some(ring) = ring {
                // A ring two pixels thick.
                for radius in [9.5, 10.5] {
                    pui.points(
                        Points::new("pin status", vec![[x, v]])
                            .radius(radius)
                            .color(ring)
                            .filled(false)
                            .allow_hover(false),
                    );
                }
            }
            pui.points(
                Points::new("pin", vec![[x, v]])
                    .shape(egui_plot::MarkerShape::Diamond)
                    .radius(if selected { 8.0 } else { 6.5 })
                    .color(pal.pin)
                    .filled(true),
            );
            handles
                .pins
                .push((k, t.position_from_point(&PlotPoint::new(x, v))));
        }
        if let Some(Drag::NewCorridor { start, now }) = &memory.drag {
            // Drawn as it will be made: whole future periods, snapped values.
            let (x0, x1) = (
                start.x.min(now.x).round().max(1.0),
                start.x.max(now.x).round().min(h as f64),
            );
            let (y0, y1) = (
                free_or_snap(start.y.min(now.y)),
                free_or_snap(start.y.max(now.y)),
            );
            pui.polygon(
                Polygon::new("new corridor", period_box(x0, x1, y0, y1))
                    .fill_color(pal.corridor.gamma_multiply(0.2))
                    .stroke(Stroke::new(1.5, pal.corridor))
                    .allow_hover(false),
            );
        }
        (handles, t)
    });
    let (handles, t) = response.inner;
    memory.transform = Some(response.transform);
    let r = &response.response;
    let (pointer, press, modifiers, primary_released) = ui.input(|i| {
        (
            i.pointer.interact_pos(),
            i.pointer.press_origin(),
            i.modifiers,
            i.pointer.primary_released(),
        )
    });
    let hovered = pointer
        .filter(|p| r.rect.contains(*p))
        .and_then(|p| handles.pick(p));
    // The cursor says what a drag would do.
    let cursor = match (&memory.drag, &hovered) {
        (Some(Drag::NewCorridor { .. }), _) => Some(egui::CursorIcon::Crosshair),
        (Some(Drag::End { .. }), _) | (None, Some(Pick::End(..))) => {
            Some(egui::CursorIcon::ResizeHorizontal)
        }
        (Some(_), _) | (None, Some(_)) => Some(egui::CursorIcon::ResizeVertical),
        (None, None) => None,
    };
    if let Some(c) = cursor {
        ui.ctx().set_cursor_icon(c);
    }
    let value_at = |p: Pos2| t.value_from_position(p);

    // Start of a gesture.
    if r.drag_started()
        && let Some(origin) = press
    {
        let at = value_at(origin);
        match handles.pick(origin) {
            Some(pick) => {
                memory.drag = Some(match pick {
                    Pick::Pin(k) => {
                        let value = pins.iter().find(|p| p.0 == k).map_or(at.y, |p| p.2);
                        Drag::Pin {
                            pin: k,
                            start: value,
                            start_y: at.y,
                            value,
                        }
                    }
                    Pick::Edge(c, upper, k) => Drag::Bound {
                        corridor: c,
                        upper,
                        period: modifiers.command.then_some(k),
                        last_y: at.y,
                    },
                    Pick::End(c, last, at) => Drag::End {
                        corridor: c,
                        last,
                        at,
                    },
                });
                actions.push(ChartAction::Select(Some(pick.condition())));
                actions.push(ChartAction::BeginGesture);
            }
            None if at.x.round() >= 1.0 => {
                memory.drag = Some(Drag::NewCorridor { start: at, now: at });
            }
            None => {}
        }
    }
    // The gesture goes on.
    if let (Some(drag), Some(p)) = (memory.drag.as_mut(), pointer) {
        let at = value_at(p);
        match drag {
            Drag::Pin {
                pin,
                start,
                start_y,
                value,
            } => {
                let v = free_or_snap(*start + at.y - *start_y);
                if at.y != *start_y && v != *value {
                    actions.push(ChartAction::SetPin {
                        pin: *pin,
                        value: v,
                    });
                    *value = v;
                }
            }
            Drag::Bound {
                corridor,
                upper,
                period,
                last_y,
            } => {
                // Move by whole steps of the pointer's travel (any travel with Shift).
                let travel = at.y - *last_y;
                let delta = free_or_snap(travel);
                if delta != 0.0 {
                    let periods = corridors
                        .iter()
                        .find(|(c, ..)| c == corridor)
                        .map_or(0, |d| d.2.len());
                    actions.push(ChartAction::MoveBound {
                        corridor: *corridor,
                        upper: *upper,
                        delta,
                        period: *period,
                        periods,
                    });
                    *last_y += delta;
                }
            }
            Drag::End {
                corridor,
                last,
                at: end,
            } => {
                // Keep the end within the forecast and on its side of the other end.
                let other =
                    corridors
                        .iter()
                        .find(|(c, ..)| c == corridor)
                        .map(|(_, first, periods)| {
                            if *last {
                                *first
                            } else {
                                first + periods.len() as i64 - 1
                            }
                        });
                let x = at.x.round() as i64;
                let x = match (other, *last) {
                    (Some(o), true) => x.clamp(o, h),
                    (Some(o), false) => x.clamp(1, o),
                    (None, _) => *end,
                };
                if x != *end
                    && let Some(label) = results.label(x as f64)
                {
                    actions.push(ChartAction::MoveEnd {
                        corridor: *corridor,
                        last: *last,
                        shift: x - *end,
                        label: label.to_string(),
                    });
                    *end = x;
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
                    free_or_snap(start.y.min(now.y)),
                    free_or_snap(start.y.max(now.y)),
                );
                // Over periods a corridor on this chart already holds, the drag draws that
                // corridor again rather than stacking a second one on it.
                let under = corridors.iter().find(|(_, first, periods)| {
                    let last = first + periods.len() as i64 - 1;
                    (x0 as i64) <= last && (x1 as i64) >= *first
                });
                if x1 >= x0
                    && y1 > y0
                    && let (Some(from), Some(to)) = (results.label(x0), results.label(x1))
                {
                    let (from, to, units) = (from.to_string(), to.to_string(), view.units);
                    actions.push(match under {
                        Some(&(corridor, ..)) => ChartAction::RedrawCorridor {
                            corridor,
                            from,
                            to,
                            units,
                            lower: y0,
                            upper: y1,
                        },
                        None => ChartAction::AddCorridor {
                            from,
                            to,
                            units,
                            lower: y0,
                            upper: y1,
                        },
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
            // A second click on a period that has a pin selects it (no duplicate pins).
            if let Some(&(k, ..)) = pins.iter().find(|p| p.1 == x) {
                actions.push(ChartAction::Select(Some(CondRef::Pin(k))));
            } else if x >= 1.0
                && x <= h as f64
                && let Some(period) = results.label(x)
            {
                actions.push(ChartAction::AddPin {
                    period: period.to_string(),
                    units: view.units,
                    value: free_or_snap(at.y),
                });
            }
        } else {
            actions.push(ChartAction::Select(handles.pick(p).map(|k| k.condition())));
        }
    }
    if r.double_clicked() && !modifiers.command {
        actions.push(ChartAction::Enlarge);
    }
    if r.secondary_clicked() {
        memory.context = pointer.and_then(|p| handles.pick(p)).map(|k| k.condition());
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
    let menu_open = egui::Popup::is_id_open(ui.ctx(), egui::Popup::default_response_id(r));
    if !menu_open {
        memory.context = None;
    }
    memory.quiet = hovered.is_some() || memory.drag.is_some() || menu_open;
    memory.hover = hovered.map(|p| p.condition());
    let elsewhere_units = |series: &Option<String>, units: Units| {
        view.subject == Subject::Series
            && series.as_deref() == Some(view.name.as_str())
            && units != view.units
    };
    let elsewhere = input
        .file
        .pins
        .iter()
        .filter(|p| p.active && elsewhere_units(&p.series, p.units))
        .count()
        + input
            .file
            .corridors
            .iter()
            .filter(|c| c.active && elsewhere_units(&c.series, c.units))
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

#[cfg(test)]
mod tests {
    use super::*;

    /// The range is fitted once with 5% margins, kept while the contents fit it or while a
    /// drag lasts, and otherwise only widened (arithmetic by hand).
    #[test]
    fn ranges_stay_steady_and_only_widen() {
        let first = steady_range(None, (0.0, 10.0), false);
        assert_eq!(first, (-0.5, 10.5));
        // Narrower contents, or contents in the margin: unchanged.
        assert_eq!(steady_range(Some(first), (2.0, 8.0), false), first);
        assert_eq!(steady_range(Some(first), (-0.4, 10.4), false), first);
        // Beyond it while dragging: unchanged; after the drag: widened on that side only.
        assert_eq!(steady_range(Some(first), (0.0, 20.0), true), first);
        assert_eq!(steady_range(Some(first), (0.0, 20.0), false), (-0.5, 21.0));
    }

    /// Steps are 1, 2 or 5 times a power of ten near a fiftieth of the range, and snapped
    /// values print as typed (decimal arithmetic by hand).
    #[test]
    fn steps_and_snapped_values_are_readable() {
        assert_eq!(snap_step(10.0), 0.2);
        assert_eq!(snap_step(3.0), 0.05);
        assert_eq!(snap_step(400.0), 10.0);
        assert_eq!(snap(-4.79, 0.2).to_string(), "-4.8");
        assert_eq!(snap(0.31, 0.1).to_string(), "0.3");
        assert_eq!(tidy(1.0 - 0.1 - 0.1 - 0.1).to_string(), "0.7");
        assert_eq!(tidy(123456.7 + 0.1), 123456.8);
        assert_eq!(tidy(-1e-320), -1e-320);
    }
}
