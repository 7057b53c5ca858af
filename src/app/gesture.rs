//! Gestures on a chart as pure functions: from the chart's conditions (in plot values), the
//! handles on screen and the pointer to actions on the document. Nothing here touches egui's
//! state: the chart feeds in what egui saw, and the tests drive the gestures directly.
//!
//! - [`Handles::pick`]: which handle is under the pointer (pins first, then the nearer edge
//!   or end), within [`PICK`] pixels;
//! - [`Scene::begin`], [`Scene::follow`], [`Scene::release`]: a drag from its first to its
//!   last frame (a pin moves by the pointer's travel; a corridor edge by whole steps; an end
//!   by whole periods, kept within the forecast; a drag over empty future periods draws a
//!   corridor, over a corridor's periods draws that one again);
//! - [`Scene::click`]: Ctrl+click places a pin (or selects the one already there), a click
//!   selects the handle under it or nothing.

use egui::Pos2;
use egui_plot::PlotPoint;

use crate::scenario::Units;

/// Pixels within which a pointer picks a handle (a quarter can be under 10 pixels wide and an
/// edge is one pixel thick: the hit area is much larger than either).
pub const PICK: f32 = 10.0;

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

/// A corridor as drawn: its index, first horizon, and per-period (lower, upper) bounds.
pub type Drawn = (usize, i64, Vec<(Option<f64>, Option<f64>)>);

#[derive(Debug, Default)]
pub struct Handles {
    /// Pin index and screen position.
    pub pins: Vec<(usize, Pos2)>,
    /// Corridor index, upper?, period offset, screen segment (x0, x1, y).
    pub edges: Vec<(usize, bool, usize, f32, f32, f32)>,
    /// Corridor index, last?, horizon, screen segment (x, y0, y1) at its outer side.
    pub ends: Vec<(usize, bool, i64, f32, f32, f32)>,
}

impl Handles {
    /// The handle nearest `pos` within [`PICK`] pixels; pins first, then whichever edge or end
    /// is nearer.
    pub fn pick(&self, pos: Pos2) -> Option<Pick> {
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

#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Pick {
    Pin(usize),
    Edge(usize, bool, usize),
    End(usize, bool, i64),
}

impl Pick {
    pub fn condition(&self) -> CondRef {
        match *self {
            Pick::Pin(k) => CondRef::Pin(k),
            Pick::Edge(c, ..) | Pick::End(c, ..) => CondRef::Corridor(c),
        }
    }
}

/// The conditions drawn on one chart, in its plot values.
#[derive(Debug, Clone)]
pub struct Scene {
    /// Pin index, horizon and value.
    pub pins: Vec<(usize, f64, f64)>,
    pub corridors: Vec<Drawn>,
    /// The last horizon of the forecast.
    pub h: i64,
    /// The chart's units (new conditions are made in them).
    pub units: Units,
}

/// How a chart snaps values and names periods.
pub struct Ruler<'a> {
    pub snap: &'a dyn Fn(f64) -> f64,
    /// The label of a horizon (`None` outside the chart).
    pub label: &'a dyn Fn(i64) -> Option<String>,
}

impl Scene {
    /// A press on `pick` (or on no handle) at `at`: the drag it starts and what it selects.
    pub fn begin(
        &self,
        pick: Option<Pick>,
        at: PlotPoint,
        one_period: bool,
    ) -> (Option<Drag>, Vec<ChartAction>) {
        let Some(pick) = pick else {
            let drag = (at.x.round() >= 1.0).then_some(Drag::NewCorridor { start: at, now: at });
            return (drag, Vec::new());
        };
        let drag = match pick {
            Pick::Pin(k) => {
                let value = self.pins.iter().find(|p| p.0 == k).map_or(at.y, |p| p.2);
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
                period: one_period.then_some(k),
                last_y: at.y,
            },
            Pick::End(c, last, at) => Drag::End {
                corridor: c,
                last,
                at,
            },
        };
        let actions = vec![
            ChartAction::Select(Some(pick.condition())),
            ChartAction::BeginGesture,
        ];
        (Some(drag), actions)
    }

    /// The drag goes on with the pointer at `at`: the edit it makes now, if any.
    pub fn follow(&self, drag: &mut Drag, at: PlotPoint, ruler: &Ruler) -> Option<ChartAction> {
        match drag {
            Drag::Pin {
                pin,
                start,
                start_y,
                value,
            } => {
                let v = (ruler.snap)(*start + at.y - *start_y);
                (at.y != *start_y && v != *value).then(|| {
                    *value = v;
                    ChartAction::SetPin {
                        pin: *pin,
                        value: v,
                    }
                })
            }
            Drag::Bound {
                corridor,
                upper,
                period,
                last_y,
            } => {
                // Move by whole steps of the pointer's travel (any travel when not snapping).
                let delta = (ruler.snap)(at.y - *last_y);
                (delta != 0.0).then(|| {
                    *last_y += delta;
                    ChartAction::MoveBound {
                        corridor: *corridor,
                        upper: *upper,
                        delta,
                        period: *period,
                        periods: self.corridor(*corridor).map_or(0, |d| d.2.len()),
                    }
                })
            }
            Drag::End {
                corridor,
                last,
                at: end,
            } => {
                let x = self.end_within(*corridor, *last, at.x.round() as i64)?;
                let label = (x != *end).then(|| (ruler.label)(x)).flatten()?;
                let shift = x - *end;
                *end = x;
                Some(ChartAction::MoveEnd {
                    corridor: *corridor,
                    last: *last,
                    shift,
                    label,
                })
            }
            Drag::NewCorridor { now, .. } => {
                *now = at;
                None
            }
        }
    }

    /// The drag ends: a drawn corridor is made (or an existing one drawn again); any other
    /// gesture closes its undo step.
    pub fn release(&self, drag: Drag, ruler: &Ruler) -> Option<ChartAction> {
        let Drag::NewCorridor { start, now } = drag else {
            return Some(ChartAction::EndGesture);
        };
        let (x0, x1, y0, y1) = self.drawn_box(start, now, ruler);
        if x1 < x0 || y1 <= y0 {
            return None;
        }
        let (from, to) = ((ruler.label)(x0)?, (ruler.label)(x1)?);
        // Over periods a corridor on this chart already holds, the drag draws that corridor
        // again rather than stacking a second one on it.
        let under = self.corridors.iter().find(|(_, first, periods)| {
            let last = first + periods.len() as i64 - 1;
            x0 <= last && x1 >= *first
        });
        let units = self.units;
        Some(match under {
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
        })
    }

    /// A click at `at` (on `pick`, if any handle): with `place`, a pin at the period clicked
    /// (or the one already there, selected); else a selection.
    pub fn click(
        &self,
        at: PlotPoint,
        pick: Option<Pick>,
        place: bool,
        ruler: &Ruler,
    ) -> Option<ChartAction> {
        if !place {
            return Some(ChartAction::Select(pick.map(|p| p.condition())));
        }
        let x = at.x.round();
        if let Some(&(k, ..)) = self.pins.iter().find(|p| p.1 == x) {
            return Some(ChartAction::Select(Some(CondRef::Pin(k))));
        }
        let inside = x >= 1.0 && x <= self.h as f64;
        let period = inside.then(|| (ruler.label)(x as i64)).flatten()?;
        Some(ChartAction::AddPin {
            period,
            units: self.units,
            value: (ruler.snap)(at.y),
        })
    }

    /// The box a new-corridor drag from `start` to `now` makes: whole future periods and
    /// snapped values.
    pub fn drawn_box(
        &self,
        start: PlotPoint,
        now: PlotPoint,
        ruler: &Ruler,
    ) -> (i64, i64, f64, f64) {
        (
            start.x.min(now.x).round().max(1.0) as i64,
            start.x.max(now.x).round().min(self.h as f64) as i64,
            (ruler.snap)(start.y.min(now.y)),
            (ruler.snap)(start.y.max(now.y)),
        )
    }

    fn corridor(&self, c: usize) -> Option<&Drawn> {
        self.corridors.iter().find(|d| d.0 == c)
    }

    /// Horizon `x` for the first (or last) period of corridor `c`, kept within the forecast
    /// and on its side of the other end.
    fn end_within(&self, c: usize, last: bool, x: i64) -> Option<i64> {
        let (_, first, periods) = self.corridor(c)?;
        let final_ = first + periods.len() as i64 - 1;
        Some(if last {
            x.clamp(*first, self.h.max(*first))
        } else {
            x.clamp(1.min(final_), final_)
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scene() -> Scene {
        Scene {
            pins: vec![(0, 2.0, 5.0)],
            corridors: vec![(1, 4, vec![(Some(1.0), Some(3.0)); 3])],
            h: 8,
            units: Units::Level,
        }
    }

    fn ruler_test<T>(f: impl FnOnce(&Ruler) -> T) -> T {
        let snap = |y: f64| (y * 2.0).round() / 2.0;
        let label = |t: i64| (1..=8).contains(&t).then(|| format!("P{t}"));
        f(&Ruler {
            snap: &snap,
            label: &label,
        })
    }

    #[test]
    fn the_nearest_handle_is_picked_within_reach() {
        let handles = Handles {
            pins: vec![(0, Pos2::new(100.0, 100.0))],
            edges: vec![(1, true, 0, 90.0, 130.0, 104.0)],
            ends: vec![(1, false, 4, 200.0, 50.0, 150.0)],
        };
        // A pin beats an edge under it; out of reach nothing is picked.
        assert_eq!(handles.pick(Pos2::new(103.0, 103.0)), Some(Pick::Pin(0)));
        assert_eq!(
            handles.pick(Pos2::new(125.0, 110.0)),
            Some(Pick::Edge(1, true, 0))
        );
        assert_eq!(
            handles.pick(Pos2::new(195.0, 60.0)),
            Some(Pick::End(1, false, 4))
        );
        assert_eq!(handles.pick(Pos2::new(125.0, 104.0 + PICK + 1.0)), None);
        assert_eq!(handles.pick(Pos2::new(200.0 + PICK + 1.0, 60.0)), None);
    }

    #[test]
    fn a_pin_moves_by_the_pointers_travel_in_steps() {
        let s = scene();
        // Grabbed off-centre at 5.4: the pin does not jump to the pointer.
        let (drag, actions) = s.begin(Some(Pick::Pin(0)), PlotPoint::new(2.0, 5.4), false);
        assert_eq!(actions[0], ChartAction::Select(Some(CondRef::Pin(0))));
        let mut drag = drag.unwrap();
        ruler_test(|r| {
            assert_eq!(s.follow(&mut drag, PlotPoint::new(2.0, 5.4), r), None);
            assert_eq!(
                s.follow(&mut drag, PlotPoint::new(2.3, 6.5), r),
                Some(ChartAction::SetPin { pin: 0, value: 6.0 })
            );
            // The same snapped value twice is one edit.
            assert_eq!(s.follow(&mut drag, PlotPoint::new(2.3, 6.55), r), None);
            assert_eq!(s.release(drag, r), Some(ChartAction::EndGesture));
        });
    }

    #[test]
    fn an_edge_moves_in_whole_steps_and_one_period_on_request() {
        let s = scene();
        let (drag, _) = s.begin(Some(Pick::Edge(1, true, 2)), PlotPoint::new(6.0, 3.0), true);
        let mut drag = drag.unwrap();
        ruler_test(|r| {
            // A travel under half a step moves nothing; the remainder is kept.
            assert_eq!(s.follow(&mut drag, PlotPoint::new(6.0, 3.2), r), None);
            assert_eq!(
                s.follow(&mut drag, PlotPoint::new(6.0, 3.3), r),
                Some(ChartAction::MoveBound {
                    corridor: 1,
                    upper: true,
                    delta: 0.5,
                    period: Some(2),
                    periods: 3
                })
            );
        });
    }

    #[test]
    fn an_end_stays_within_the_forecast_and_its_side() {
        let s = scene();
        let (drag, _) = s.begin(Some(Pick::End(1, true, 6)), PlotPoint::new(6.0, 2.0), false);
        let mut drag = drag.unwrap();
        ruler_test(|r| {
            // Past the horizon: clamped to 8.
            assert_eq!(
                s.follow(&mut drag, PlotPoint::new(11.0, 2.0), r),
                Some(ChartAction::MoveEnd {
                    corridor: 1,
                    last: true,
                    shift: 2,
                    label: "P8".into()
                })
            );
            // Before its first period (4): clamped there.
            assert_eq!(
                s.follow(&mut drag, PlotPoint::new(1.0, 2.0), r),
                Some(ChartAction::MoveEnd {
                    corridor: 1,
                    last: true,
                    shift: -4,
                    label: "P4".into()
                })
            );
        });
    }

    #[test]
    fn a_drag_over_empty_periods_draws_and_over_a_corridor_redraws() {
        let s = scene();
        ruler_test(|r| {
            let (drag, actions) = s.begin(None, PlotPoint::new(0.8, 2.1), false);
            assert!(actions.is_empty());
            let mut drag = drag.unwrap();
            assert_eq!(s.follow(&mut drag, PlotPoint::new(2.2, 3.9), r), None);
            assert_eq!(
                s.release(drag, r),
                Some(ChartAction::AddCorridor {
                    from: "P1".into(),
                    to: "P2".into(),
                    units: Units::Level,
                    lower: 2.0,
                    upper: 4.0
                })
            );
            let (drag, _) = s.begin(None, PlotPoint::new(3.0, 0.0), false);
            let mut drag = drag.unwrap();
            s.follow(&mut drag, PlotPoint::new(5.0, 2.0), r);
            assert!(matches!(
                s.release(drag, r),
                Some(ChartAction::RedrawCorridor { corridor: 1, .. })
            ));
            // A press on past periods starts nothing; a flat drag makes nothing.
            assert!(s.begin(None, PlotPoint::new(-3.0, 0.0), false).0.is_none());
            let (drag, _) = s.begin(None, PlotPoint::new(6.0, 1.0), false);
            assert_eq!(s.release(drag.unwrap(), r), None);
        });
    }

    #[test]
    fn ctrl_click_places_a_pin_once() {
        let s = scene();
        ruler_test(|r| {
            assert_eq!(
                s.click(PlotPoint::new(3.2, 4.26), None, true, r),
                Some(ChartAction::AddPin {
                    period: "P3".into(),
                    units: Units::Level,
                    value: 4.5
                })
            );
            assert_eq!(
                s.click(PlotPoint::new(1.8, 0.0), None, true, r),
                Some(ChartAction::Select(Some(CondRef::Pin(0))))
            );
            assert_eq!(s.click(PlotPoint::new(-2.0, 0.0), None, true, r), None);
            assert_eq!(
                s.click(
                    PlotPoint::new(5.0, 1.0),
                    Some(Pick::Edge(1, false, 1)),
                    false,
                    r
                ),
                Some(ChartAction::Select(Some(CondRef::Corridor(1))))
            );
        });
    }
}
