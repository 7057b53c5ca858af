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

use egui::{Color32, Stroke};
use egui_plot::{FilledArea, GridMark, Line, LineStyle, Plot, PlotPoint, Points, Polygon, VLine};

use super::gesture::{ChartAction, CondRef, Drag, Handles, Pick, Ruler, Scene};
use super::palette::Palette;
use super::worker::{FanPoint, Results, SeriesView, Subject};
use crate::scenario::{Bound, ScenarioFile, Units};

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

/// Date grid steps in whole periods that keep the same period of the year under every mark
/// (counted from the last observation): one period, then 1, 2, 10, 20… years, each a
/// multiple of the one before; the finest at least the plot's smallest step.
pub fn period_steps(per_year: usize, input: egui_plot::GridInput) -> [f64; 3] {
    let y = per_year as f64;
    let years = (0..8).flat_map(|k| [1.0, 2.0].map(|m| m * y * 10f64.powi(k)));
    let steps: Vec<f64> = std::iter::once(1.0).chain(years).collect();
    let first = steps
        .iter()
        .position(|&s| s >= input.base_step_size)
        .unwrap_or(steps.len() - 3)
        .min(steps.len() - 3);
    [steps[first], steps[first + 1], steps[first + 2]]
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

/// Draw the chart and turn gestures into actions.
pub fn show(ui: &mut egui::Ui, input: &ChartInput, memory: &mut ChartMemory) -> Vec<ChartAction> {
    let scene = scene_of(input);
    let frame = frame_of(input, &scene, memory);
    let free = ui.input(|i| i.modifiers.shift) == input.snapping;
    let snap_value = move |y: f64| if free { y } else { snap(y, frame.step) };
    let label = |t: i64| input.results.label(t as f64).map(str::to_string);
    let ruler = Ruler {
        snap: &snap_value,
        label: &label,
    };
    let response = plot_of(input, memory.quiet).show(ui, |pui| {
        pui.set_auto_bounds(false);
        pui.set_plot_bounds_x(-(input.results.history as f64) - 0.5..=scene.h as f64 + 0.6);
        pui.set_plot_bounds_y(frame.lo..=frame.hi);
        draw_fans(pui, input);
        let handles = draw_conditions(pui, input, &scene, memory, &frame);
        if let Some(Drag::NewCorridor { start, now }) = &memory.drag {
            // Drawn as it will be made: whole future periods, snapped values.
            let (x0, x1, y0, y1) = scene.drawn_box(*start, *now, &ruler);
            pui.polygon(
                Polygon::new("new corridor", period_box(x0 as f64, x1 as f64, y0, y1))
                    .fill_color(input.palette.corridor.gamma_multiply(0.2))
                    .stroke(Stroke::new(1.5, input.palette.corridor))
                    .allow_hover(false),
            );
        }
        handles
    });
    memory.transform = Some(response.transform);
    let mut actions = pointer(ui, &response, &scene, memory, &ruler);
    context_menu(ui, &response.response, memory, &mut actions);
    other_units_note(ui, input);
    actions
}

/// The pins and corridors of this chart's series (or shock) in its units, in plot values;
/// only corridors within the forecast are drawn (the checks name the others).
fn scene_of(input: &ChartInput) -> Scene {
    let (view, results) = (input.view, input.results);
    let h = results.labels.len() as i64 - results.history as i64 - 1;
    let pins = input
        .file
        .pins
        .iter()
        .enumerate()
        .filter(|(_, p)| p.active && on_chart(&p.series, &p.shock, p.units, view))
        .filter_map(|(k, p)| horizon(results, &p.period).map(|t| (k, t as f64, p.value)))
        .collect();
    let corridors = input
        .file
        .corridors
        .iter()
        .enumerate()
        .filter(|(_, c)| c.active && on_chart(&c.series, &c.shock, c.units, view))
        .filter_map(|(k, c)| {
            let (a, b) = (horizon(results, &c.from)?, horizon(results, &c.to)?);
            if a < 1 || b > h {
                return None;
            }
            let n = usize::try_from(b - a + 1).ok()?;
            let (lower, upper) = (bounds(&c.lower, n), bounds(&c.upper, n));
            Some((k, a, lower.into_iter().zip(upper).collect()))
        })
        .collect();
    Scene {
        pins,
        corridors,
        h,
        units: view.units,
    }
}

/// The value range shown and the snapping step.
struct Frame {
    lo: f64,
    hi: f64,
    step: f64,
}

/// The chart's value range: what it must hold (the data and fans, the second scenario, every
/// finite bound and pin), shown steadily while the user works ([`steady_range`]); and the
/// snapping step of the data's range.
fn frame_of(input: &ChartInput, scene: &Scene, memory: &mut ChartMemory) -> Frame {
    let view = input.view;
    let data = view.history.iter().map(|&(_, v)| v).chain(
        view.conditional
            .iter()
            .chain(&view.unconditional)
            .flat_map(|f| [f.q[0], f.q[6]]),
    );
    let (mut lo, mut hi) = span(data);
    if !lo.is_finite() || !hi.is_finite() {
        (lo, hi) = (0.0, 1.0);
    }
    let step = snap_step(hi - lo);
    memory.step = step;
    let conditions = scene.pins.iter().map(|p| p.2).chain(
        scene
            .corridors
            .iter()
            .flat_map(|d| d.2.iter().flat_map(|(l, u)| [*l, *u]))
            .flatten(),
    );
    let second = input
        .second
        .into_iter()
        .flat_map(|v| v.conditional.iter().flat_map(|f| [f.q[0], f.q[6]]));
    let (c_lo, c_hi) = span(conditions.chain(second));
    memory.wanted = (lo.min(c_lo), hi.max(c_hi));
    let previous = memory
        .range
        .filter(|r| r.2 == view.units)
        .map(|(a, b, _)| (a, b));
    let dragging = memory.drag.is_some() || input.any_drag;
    let (lo, hi) = steady_range(previous, memory.wanted, dragging);
    memory.range = Some((lo, hi, view.units));
    Frame { lo, hi, step }
}

/// Smallest and largest finite value (infinite when there is none).
fn span(values: impl Iterator<Item = f64>) -> (f64, f64) {
    values
        .filter(|v| v.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
            (lo.min(v), hi.max(v))
        })
}

/// The plot: fixed (no pan or zoom), dated axis, units on the value axis, and a readout of
/// both fans' quantiles at the hovered period (held back while `quiet`).
fn plot_of<'a>(input: &'a ChartInput, quiet: bool) -> Plot<'a> {
    let results = input.results;
    let view = input.view;
    Plot::new(("chart", view.subject, input.index))
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
        .x_grid_spacer(egui_plot::uniform_grid_spacer(move |g| {
            period_steps(results.last.freq.periods_per_year(), g)
        }))
        .x_axis_formatter(move |mark: GridMark, _| {
            results
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
            (!quiet).then(|| readout(results, view, p)).flatten()
        })
}

/// The hover readout at `p`: the period, the pointer's value, and both fans' quantiles there.
fn readout(results: &Results, view: &SeriesView, p: PlotPoint) -> Option<String> {
    let date = results.label(p.x)?;
    let mut text = format!("{date}   pointer at {:.3}", p.y);
    let at = |fans: &[FanPoint]| {
        fans.iter()
            .find(|f| (f.x - p.x.round()).abs() < 0.5)
            .copied()
    };
    if let Some(f) = at(&view.conditional) {
        text.push_str(&format!(
            "\nscenario: median {:.3}\n  50% {:.3} … {:.3}\n  90% {:.3} … {:.3}",
            f.q[3], f.q[2], f.q[4], f.q[0], f.q[6]
        ));
    }
    if let Some(f) = at(&view.unconditional) {
        let what = match view.subject {
            Subject::Series => "without conditions",
            Subject::Shock => "usual N(0, 1)",
        };
        text.push_str(&format!(
            "\n{what}: median {:.3}\n  90% {:.3} … {:.3}",
            f.q[3], f.q[0], f.q[6]
        ));
    }
    Some(text)
}

/// History, the unconditional fan (muted) behind the conditional one, the second scenario,
/// and the line at the last observation.
fn draw_fans(pui: &mut egui_plot::PlotUi, input: &ChartInput) {
    let (view, pal) = (input.view, input.palette);
    let fan_colour = if input.stale { pal.stale } else { pal.fan };
    let band = |k0: usize, k1: usize, v: &[FanPoint]| {
        (
            v.iter().map(|f| f.q[k0]).collect::<Vec<_>>(),
            v.iter().map(|f| f.q[k1]).collect::<Vec<_>>(),
        )
    };
    let median = |v: &[FanPoint]| v.iter().map(|f| [f.x, f.q[3]]).collect::<Vec<_>>();
    let xs: Vec<f64> = view.unconditional.iter().map(|f| f.x).collect();
    let (u0, u1) = band(0, 6, &view.unconditional);
    pui.add(
        FilledArea::new("unconditional 90%", &xs, &u0, &u1)
            .fill_color(pal.muted.gamma_multiply(0.35))
            .allow_hover(false),
    );
    pui.line(
        Line::new("unconditional median", median(&view.unconditional))
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
        Line::new("conditional median", median(&view.conditional))
            .color(fan_colour)
            .width(2.0),
    );
    if let Some(other) = input.second {
        // The second scenario: its median, and its 90% band as two thin lines.
        for (name, k, width) in [
            ("second scenario 5%", 0, 1.0),
            ("second scenario 95%", 6, 1.0),
            ("second scenario median", 3, 2.0),
        ] {
            let points: Vec<[f64; 2]> = other.conditional.iter().map(|f| [f.x, f.q[k]]).collect();
            pui.line(
                Line::new(name, points)
                    .color(pal.second)
                    .width(width)
                    .allow_hover(false),
            );
        }
    }
    let history: Vec<[f64; 2]> = view.history.iter().map(|&(x, y)| [x, y]).collect();
    pui.line(Line::new("history", history).color(pal.history).width(1.6));
    pui.vline(
        VLine::new("last observation", 0.0)
            .color(pal.muted)
            .width(1.0),
    );
}

/// The corridors (a box per period; open sides run past the frame) and pins (a diamond, a
/// ring when a check names it), with their handles on screen.
fn draw_conditions(
    pui: &mut egui_plot::PlotUi,
    input: &ChartInput,
    scene: &Scene,
    memory: &ChartMemory,
    frame: &Frame,
) -> Handles {
    let pal = input.palette;
    let t = *pui.transform();
    let mut handles = Handles::default();
    let pad = 0.15 * (frame.hi - frame.lo);
    let (open_lo, open_hi) = (frame.lo - pad, frame.hi + pad);
    let marked = |cref| input.selected == Some(cref) || memory.hover == Some(cref);
    for (c, first, periods) in &scene.corridors {
        let cref = CondRef::Corridor(*c);
        let width = if marked(cref) { 2.5 } else { 1.2 };
        let edge = (input.status)(cref).unwrap_or(pal.corridor);
        for (k, (l, u)) in periods.iter().enumerate() {
            let x = (*first + k as i64) as f64;
            let (yl, yu) = (l.unwrap_or(open_lo), u.unwrap_or(open_hi));
            pui.polygon(
                Polygon::new("corridor", period_box(x, x, yl, yu))
                    .fill_color(pal.corridor.gamma_multiply(0.12))
                    .stroke(Stroke::new(width, edge))
                    .allow_hover(false),
            );
            let x0 = t.position_from_point_x(x - 0.5);
            let x1 = t.position_from_point_x(x + 0.5);
            for (upper, v) in [(false, l), (true, u)] {
                if let Some(v) = v {
                    let y = t.position_from_point_y(*v);
                    handles.edges.push((*c, upper, k, x0, x1, y));
                }
            }
            // The outer sides of the first and last periods move the ends.
            let (y0, y1) = (t.position_from_point_y(yl), t.position_from_point_y(yu));
            if k == 0 {
                let xe = t.position_from_point_x(x - 0.45);
                handles.ends.push((*c, false, *first, xe, y0, y1));
            }
            if k + 1 == periods.len() {
                let xe = t.position_from_point_x(x + 0.45);
                handles.ends.push((*c, true, x as i64, xe, y0, y1));
            }
        }
    }
    for &(k, x, v) in &scene.pins {
        let cref = CondRef::Pin(k);
        if let Some(ring) = (input.status)(cref) {
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
                .radius(if marked(cref) { 8.0 } else { 6.5 })
                .color(pal.pin)
                .filled(true),
        );
        let at = t.position_from_point(&PlotPoint::new(x, v));
        handles.pins.push((k, at));
    }
    handles
}

/// What the pointer does this frame: the cursor, and a gesture's start, course and end, or a
/// click, as actions ([`Scene`] decides them; this only reads egui's input).
fn pointer(
    ui: &egui::Ui,
    response: &egui_plot::PlotResponse<Handles>,
    scene: &Scene,
    memory: &mut ChartMemory,
    ruler: &Ruler,
) -> Vec<ChartAction> {
    let (handles, t, r) = (&response.inner, &response.transform, &response.response);
    let (pointer, press, modifiers, released) = ui.input(|i| {
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
    if let Some(c) = cursor(memory.drag.as_ref(), hovered) {
        ui.ctx().set_cursor_icon(c);
    }
    let mut actions = Vec::new();
    if r.drag_started()
        && let Some(origin) = press
    {
        let pick = handles.pick(origin);
        let (drag, started) = scene.begin(pick, t.value_from_position(origin), modifiers.command);
        memory.drag = drag;
        actions.extend(started);
    }
    if let (Some(drag), Some(p)) = (memory.drag.as_mut(), pointer) {
        actions.extend(scene.follow(drag, t.value_from_position(p), ruler));
    }
    if released && let Some(drag) = memory.drag.take() {
        actions.extend(scene.release(drag, ruler));
    }
    if r.clicked()
        && let Some(p) = pointer
    {
        let at = t.value_from_position(p);
        actions.extend(scene.click(at, handles.pick(p), modifiers.command, ruler));
    }
    if r.double_clicked() && !modifiers.command {
        actions.push(ChartAction::Enlarge);
    }
    if r.secondary_clicked() {
        memory.context = pointer.and_then(|p| handles.pick(p)).map(|k| k.condition());
    }
    memory.hover = hovered.map(|p| p.condition());
    memory.quiet = hovered.is_some() || memory.drag.is_some();
    actions
}

/// The cursor says what a drag would do.
fn cursor(drag: Option<&Drag>, hovered: Option<Pick>) -> Option<egui::CursorIcon> {
    match (drag, hovered) {
        (Some(Drag::NewCorridor { .. }), _) => Some(egui::CursorIcon::Crosshair),
        (Some(Drag::End { .. }), _) | (None, Some(Pick::End(..))) => {
            Some(egui::CursorIcon::ResizeHorizontal)
        }
        (Some(_), _) | (None, Some(_)) => Some(egui::CursorIcon::ResizeVertical),
        (None, None) => None,
    }
}

/// The menu of a right-clicked handle: remove its condition. While it is open the hover
/// readout is held back (it is drawn above menus and would hide them).
fn context_menu(
    ui: &egui::Ui,
    r: &egui::Response,
    memory: &mut ChartMemory,
    actions: &mut Vec<ChartAction>,
) {
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
    memory.quiet |= menu_open;
}

/// A note under the chart when the series has conditions in other units (they are in the
/// table, not on this chart).
fn other_units_note(ui: &mut egui::Ui, input: &ChartInput) {
    let view = input.view;
    let elsewhere = |series: &Option<String>, units: Units| {
        view.subject == Subject::Series
            && series.as_deref() == Some(view.name.as_str())
            && units != view.units
    };
    let file = input.file;
    let count = file
        .pins
        .iter()
        .filter(|p| p.active && elsewhere(&p.series, p.units))
        .count()
        + file
            .corridors
            .iter()
            .filter(|c| c.active && elsewhere(&c.series, c.units))
            .count();
    if count > 0 {
        ui.label(
            egui::RichText::new(format!(
                "{count} condition(s) on this series in other units: see the table"
            ))
            .small()
            .color(input.palette.muted),
        );
    }
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
    fn date_steps_keep_the_period_of_the_year() {
        let at = |base: f64, per_year: usize| {
            let input = egui_plot::GridInput {
                bounds: (-100.0, 40.0),
                base_step_size: base,
            };
            period_steps(per_year, input)
        };
        assert_eq!(at(0.5, 4), [1.0, 4.0, 8.0]);
        assert_eq!(at(3.0, 4), [4.0, 8.0, 40.0]);
        assert_eq!(at(9.0, 4), [40.0, 80.0, 400.0]);
        assert_eq!(at(2.0, 12), [12.0, 24.0, 120.0]);
        assert_eq!(at(13.0, 12), [24.0, 120.0, 240.0]);
        // Each step a multiple of the one before.
        for base in [0.3, 1.5, 5.0, 30.0, 300.0] {
            for per_year in [4, 12] {
                let s = at(base, per_year);
                assert!(s[0] >= base && s[1] % s[0] == 0.0 && s[2] % s[1] == 0.0);
            }
        }
    }

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
