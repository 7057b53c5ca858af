//! Edits of the scenario file that the window's gestures, nudges and table make, as plain
//! functions of the file (the app wraps each in one undo step). Values are kept readable
//! ([`tidy`]); per-period bounds follow their corridor's periods.

use super::chart::tidy;
use super::gesture::{ChartAction, CondRef};
use super::worker::Subject;
use crate::scenario::{Bound, CorridorSpec, DriverSpec, PinSpec, ScenarioFile, Units};

/// Apply an editing action of the chart of series or shock `name` to `f`; the condition to
/// select afterwards, if the selection changes (a new or redrawn condition). Actions that do
/// not edit the file change nothing.
pub fn apply(
    f: &mut ScenarioFile,
    subject: Subject,
    name: &str,
    action: ChartAction,
) -> Option<CondRef> {
    let (series, shock) = match subject {
        Subject::Series => (Some(name.to_string()), None),
        Subject::Shock => (None, Some(name.to_string())),
    };
    match action {
        ChartAction::SetPin { pin, value } => {
            if let Some(p) = f.pins.get_mut(pin) {
                p.value = value;
            }
            None
        }
        ChartAction::MoveBound {
            corridor,
            upper,
            delta,
            period,
            periods,
        } => {
            if let Some(c) = f.corridors.get_mut(corridor) {
                move_bound(c, upper, delta, period, periods);
            }
            None
        }
        ChartAction::MoveEnd {
            corridor,
            last,
            shift,
            label,
        } => {
            if let Some(c) = f.corridors.get_mut(corridor) {
                move_end(c, last, shift, label);
            }
            None
        }
        ChartAction::AddPin {
            period,
            units,
            value,
        } => {
            f.pins.push(PinSpec {
                series,
                shock,
                period,
                units,
                value,
                active: true,
            });
            Some(CondRef::Pin(f.pins.len() - 1))
        }
        ChartAction::AddCorridor {
            from,
            to,
            units,
            lower,
            upper,
        } => {
            f.corridors.push(CorridorSpec {
                series,
                shock,
                from,
                to,
                units,
                lower: Some(Bound::Same(lower)),
                upper: Some(Bound::Same(upper)),
                active: true,
            });
            Some(CondRef::Corridor(f.corridors.len() - 1))
        }
        ChartAction::RedrawCorridor {
            corridor,
            from,
            to,
            units,
            lower,
            upper,
        } => {
            let c = f.corridors.get_mut(corridor)?;
            redraw(c, (from, to), units, (lower, upper));
            Some(CondRef::Corridor(corridor))
        }
        ChartAction::BeginGesture
        | ChartAction::EndGesture
        | ChartAction::Select(_)
        | ChartAction::Remove(_)
        | ChartAction::Enlarge => None,
    }
}

/// A corridor drawn again: its periods, units and drawn bounds; an open side stays open.
fn redraw(
    c: &mut CorridorSpec,
    (from, to): (String, String),
    units: Units,
    (lower, upper): (f64, f64),
) {
    c.from = from;
    c.to = to;
    c.units = units;
    if c.lower.is_some() {
        c.lower = Some(Bound::Same(lower));
    }
    if c.upper.is_some() {
        c.upper = Some(Bound::Same(upper));
    }
}

/// Let shock `name` drive the scenario at every period or not, keeping the drivers in
/// identification order (`order`); all shocks driving at every period means no list.
pub fn set_driver(f: &mut ScenarioFile, order: &[String], name: &str, on: bool) {
    let mut d = f
        .drivers
        .clone()
        .unwrap_or_else(|| order.iter().cloned().map(DriverSpec::Always).collect());
    d.retain(|x| x.shock() != name);
    if on {
        d.push(DriverSpec::Always(name.to_string()));
    }
    d.sort_by_key(|x| order.iter().position(|o| o == x.shock()));
    let every = d.len() == order.len() && d.iter().all(|x| matches!(x, DriverSpec::Always(_)));
    f.drivers = (!every).then_some(d);
}

/// Let shock `name` move over `periods` (first and last) only, or at every period (`None`);
/// it becomes a driver if it was not one.
pub fn set_driver_periods(
    f: &mut ScenarioFile,
    order: &[String],
    name: &str,
    periods: Option<(String, String)>,
) {
    set_driver(f, order, name, true);
    let Some((from, to)) = periods else {
        return;
    };
    let mut d = f
        .drivers
        .clone()
        .unwrap_or_else(|| order.iter().cloned().map(DriverSpec::Always).collect());
    for x in d.iter_mut().filter(|x| x.shock() == name) {
        *x = DriverSpec::Timed {
            shock: name.to_string(),
            from: from.clone(),
            to: to.clone(),
        };
    }
    f.drivers = Some(d);
}

/// Move a condition's value by `delta` (a corridor's bounds all together) and its periods to
/// where `shifted` takes them (a corridor only when both ends stay within the forecast).
pub fn nudge(
    f: &mut ScenarioFile,
    cref: CondRef,
    delta: Option<f64>,
    shifted: &dyn Fn(&str) -> Option<String>,
) {
    match cref {
        CondRef::Pin(k) => {
            if let Some(p) = f.pins.get_mut(k) {
                if let Some(d) = delta {
                    p.value = tidy(p.value + d);
                }
                if let Some(label) = shifted(&p.period) {
                    p.period = label;
                }
            }
        }
        CondRef::Corridor(k) => {
            if let Some(c) = f.corridors.get_mut(k) {
                if let Some(d) = delta {
                    move_bound(c, false, d, None, 0);
                    move_bound(c, true, d, None, 0);
                }
                if let (Some(from), Some(to)) = (shifted(&c.from), shifted(&c.to)) {
                    c.from = from;
                    c.to = to;
                }
            }
        }
    }
}

/// Shift one side of a corridor of `periods` periods by `delta`, at every period or at one
/// (which turns the side into per-period bounds).
pub fn move_bound(
    c: &mut CorridorSpec,
    upper: bool,
    delta: f64,
    period: Option<usize>,
    periods: usize,
) {
    let side = if upper { &mut c.upper } else { &mut c.lower };
    match (side.as_mut(), period) {
        (Some(Bound::Same(v)), None) => *v = tidy(*v + delta),
        (Some(Bound::Each(list)), None) => {
            for v in list.iter_mut().flatten() {
                *v = tidy(*v + delta);
            }
        }
        (Some(Bound::Same(v)), Some(k)) => {
            let n = periods.max(k + 1);
            let mut list = vec![Some(*v); n];
            if let Some(x) = list[k].as_mut() {
                *x = tidy(*x + delta);
            }
            *side = Some(Bound::Each(list));
        }
        (Some(Bound::Each(list)), Some(k)) => {
            if let Some(Some(x)) = list.get_mut(k) {
                *x = tidy(*x + delta);
            }
        }
        (None, _) => {}
    }
}

/// Move the first (or last) period of a corridor by `shift` periods to `label`; per-period
/// bounds gain copies of their end value or lose the periods left behind.
pub fn move_end(c: &mut CorridorSpec, last: bool, shift: i64, label: String) {
    let grow = if last { shift } else { -shift };
    for side in [&mut c.lower, &mut c.upper] {
        let Some(Bound::Each(list)) = side.as_mut() else {
            continue;
        };
        let n = grow.unsigned_abs() as usize;
        if grow > 0 {
            let fill = if last { list.last() } else { list.first() };
            let fill = fill.copied().flatten();
            if last {
                list.extend(std::iter::repeat_n(fill, n));
            } else {
                list.splice(0..0, std::iter::repeat_n(fill, n));
            }
        } else {
            let n = n.min(list.len().saturating_sub(1));
            if last {
                list.truncate(list.len() - n);
            } else {
                list.drain(..n);
            }
        }
    }
    if last {
        c.to = label;
    } else {
        c.from = label;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::Units;

    /// The demo scenario without its corridors.
    fn file() -> ScenarioFile {
        let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
        let mut f = crate::scenario::read(&root.join("scenarios-demo/adverse.ron")).unwrap();
        f.corridors.clear();
        f
    }

    fn corridor(lower: Option<Bound>, upper: Option<Bound>) -> CorridorSpec {
        CorridorSpec {
            series: Some("x".into()),
            shock: None,
            from: "2026Q1".into(),
            to: "2026Q3".into(),
            units: Units::Level,
            lower,
            upper,
            active: true,
        }
    }

    #[test]
    fn one_period_of_a_bound_moves_alone() {
        let mut c = corridor(Some(Bound::Same(1.0)), Some(Bound::Same(3.0)));
        move_bound(&mut c, true, 0.1, Some(1), 3);
        assert_eq!(
            c.upper,
            Some(Bound::Each(vec![Some(3.0), Some(3.1), Some(3.0)]))
        );
        // The whole side moves together, readably (0.1 + 0.2, not 0.30000000000000004).
        move_bound(&mut c, false, -0.7, None, 3);
        assert_eq!(c.lower, Some(Bound::Same(0.3)));
    }

    #[test]
    fn ends_carry_per_period_bounds_along() {
        let each = Bound::Each(vec![Some(1.0), Some(2.0), Some(3.0)]);
        let mut c = corridor(Some(each), None);
        move_end(&mut c, true, 2, "2026Q5".into());
        assert_eq!(
            c.lower,
            Some(Bound::Each(vec![
                Some(1.0),
                Some(2.0),
                Some(3.0),
                Some(3.0),
                Some(3.0)
            ]))
        );
        move_end(&mut c, false, 1, "2026Q2".into());
        assert_eq!(
            c.lower,
            Some(Bound::Each(vec![
                Some(2.0),
                Some(3.0),
                Some(3.0),
                Some(3.0)
            ]))
        );
        assert_eq!((c.from.as_str(), c.to.as_str()), ("2026Q2", "2026Q5"));
    }

    #[test]
    fn a_redrawn_corridor_keeps_its_open_side_and_is_selected() {
        let mut f = file();
        f.corridors.push(corridor(None, Some(Bound::Same(3.0))));
        let select = apply(
            &mut f,
            Subject::Series,
            "x",
            ChartAction::RedrawCorridor {
                corridor: 0,
                from: "2026Q2".into(),
                to: "2026Q4".into(),
                units: Units::Level,
                lower: 0.5,
                upper: 2.5,
            },
        );
        assert_eq!(select, Some(CondRef::Corridor(0)));
        assert_eq!(f.corridors[0].lower, None);
        assert_eq!(f.corridors[0].upper, Some(Bound::Same(2.5)));
        assert_eq!(f.corridors[0].from, "2026Q2");
    }

    #[test]
    fn drivers_keep_the_identification_order() {
        let mut f = file();
        let order: Vec<String> = ["a", "b", "c"].map(String::from).to_vec();
        f.drivers = None;
        set_driver(&mut f, &order, "b", false);
        let always = |names: &[&str]| {
            Some(
                names
                    .iter()
                    .map(|n| DriverSpec::Always(n.to_string()))
                    .collect(),
            )
        };
        assert_eq!(f.drivers, always(&["a", "c"]));
        set_driver(&mut f, &order, "a", false);
        set_driver(&mut f, &order, "a", true);
        assert_eq!(f.drivers, always(&["a", "c"]));
        // A timed driver ticked again moves at every period.
        f.drivers = Some(vec![DriverSpec::Timed {
            shock: "b".into(),
            from: "2026Q1".into(),
            to: "2026Q1".into(),
        }]);
        set_driver(&mut f, &order, "b", true);
        assert_eq!(f.drivers, always(&["b"]));
        set_driver(&mut f, &order, "a", true);
        set_driver(&mut f, &order, "c", true);
        // Timed, then at every period again.
        set_driver_periods(
            &mut f,
            &order,
            "a",
            Some(("2026Q1".into(), "2026Q1".into())),
        );
        assert!(
            matches!(&f.drivers.as_ref().unwrap()[0], DriverSpec::Timed { shock, .. } if shock == "a")
        );
        set_driver_periods(&mut f, &order, "a", None);
        assert_eq!(f.drivers, None);
        // Every shock ticked again: no list.
        set_driver(&mut f, &order, "b", true);
        assert_eq!(f.drivers, None);
    }

    #[test]
    fn a_nudge_moves_value_and_period_within_the_forecast() {
        let mut f = file();
        f.corridors
            .push(corridor(Some(Bound::Same(1.0)), Some(Bound::Same(3.0))));
        let shifted = |label: &str| (label != "2026Q3").then(|| format!("{label}+"));
        nudge(&mut f, CondRef::Corridor(0), Some(0.5), &shifted);
        let c = &f.corridors[0];
        assert_eq!(
            (c.lower.clone(), c.upper.clone()),
            (Some(Bound::Same(1.5)), Some(Bound::Same(3.5)))
        );
        // Its last period would leave the forecast: the corridor stays where it is.
        assert_eq!((c.from.as_str(), c.to.as_str()), ("2026Q1", "2026Q3"));
    }
}
