//! Timed drivers: shocks that may move only over some periods. Against an independent dense
//! numpy computation (`tests/fixtures/timed_drivers.json`, made by
//! `tests/fixtures/make_timed_drivers.py`): two pins met by two shocks of the first forecast
//! period, a 2 × 2 linear system; timed drivers over every period are the untimed ones
//! exactly; an unreachable timed pin is named with what the timing rules out.

mod common;

use common::*;
use nalgebra::{DMatrix, DVector};
use serde_json::Value;
use tiltyard::forecast::Plan;
use tiltyard::scenario::{self, Setup};

/// Exact moments: relative 1e-9 · cond(F_J) (ALGORITHMS §11.4; cond 6.3 here).
const EXACT: f64 = 1e-9;

/// The "drivers" case of pins_gaussian.json with its first `pins` pins, drivers written as
/// `drivers` (RON list items).
fn setup(fx: &Value, pins: usize, drivers: &str, dir: &tempfile::TempDir) -> Setup {
    let mut case = fx["cases"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == "drivers")
        .unwrap()
        .clone();
    let kept: Vec<Value> = case["pins"].as_array().unwrap()[..pins].to_vec();
    case["pins"] = Value::Array(kept);
    let text = pins_case_scenario(fx, &case).replace(
        r#"drivers: ["realgdp", "tbilrate"],"#,
        &format!("drivers: [{drivers}],"),
    );
    assert!(text.contains(drivers), "the drivers were replaced");
    scenario::load(&write_scenario(dir, &text)).unwrap()
}

const FIRST_PERIOD: &str = r#"(shock: "realgdp", from: "2009Q4", to: "2009Q4"), (shock: "tbilrate", from: "2009Q4", to: "2009Q4")"#;

#[test]
fn first_period_drivers_match_numpy() {
    let fx = json("pins_gaussian.json");
    let want = json("timed_drivers.json");
    let dir = tempfile::tempdir().unwrap();
    let setup = setup(&fx, 2, FIRST_PERIOD, &dir);
    let theta = fixed_theta(&setup);
    let plan = Plan::new(&theta, &setup.conditions().unwrap(), None).unwrap();
    let (mean, cov) = plan.exact_moments(&theta).expect("pins only");
    let tol = EXACT * want["condition_number"].as_f64().unwrap();
    let em = rel_err(
        &DMatrix::from_column_slice(32, 1, mean.as_slice()),
        &DMatrix::from_column_slice(32, 1, vector(&want["mean"]).as_slice()),
    );
    let ec = rel_err(&cov, &matrix(&want["cov"]));
    println!("mean {em:.1e}, covariance {ec:.1e}, tolerance {tol:.1e}");
    assert!(em < tol && ec < tol);
    // The driver shocks' values: the pins' shock law's mean at the two first-period cells
    // (realgdp is series 0, tbilrate series 3; cells are period-major).
    let law = plan.pin_shock_law(&theta).unwrap();
    let got = DVector::from_vec(vec![law.mean[0], law.mean[3]]);
    let shocks = vector(&want["driver_shocks"]);
    assert!(
        (got - &shocks).amax() < tol * shocks.amax(),
        "driver shocks"
    );
    // Every other shock has mean zero: none of them moves for the pins.
    let others = law
        .mean
        .iter()
        .enumerate()
        .filter(|(c, _)| *c != 0 && *c != 3);
    assert!(others.map(|(_, v)| v.abs()).fold(0.0, f64::max) < 1e-12);
}

#[test]
fn drivers_timed_over_every_period_are_the_untimed_ones() {
    let fx = json("pins_gaussian.json");
    let dir = tempfile::tempdir().unwrap();
    let untimed = setup(&fx, 3, r#""realgdp", "tbilrate""#, &dir);
    let dir2 = tempfile::tempdir().unwrap();
    let all = r#"(shock: "realgdp", from: "2009Q4", to: "2011Q3"), (shock: "tbilrate", from: "2009Q4", to: "2011Q3")"#;
    let timed = setup(&fx, 3, all, &dir2);
    let theta = fixed_theta(&untimed);
    let (a, b) = (untimed.conditions().unwrap(), timed.conditions().unwrap());
    assert_eq!(a.driver_cells(4, 8), b.driver_cells(4, 8));
    assert_eq!(a.driver_names(), b.driver_names());
    let ma = Plan::new(&theta, &a, None)
        .unwrap()
        .exact_moments(&theta)
        .unwrap();
    let mb = Plan::new(&theta, &b, None)
        .unwrap()
        .exact_moments(&theta)
        .unwrap();
    assert_eq!(ma, mb, "bit for bit");
}

#[test]
fn an_unreachable_timed_pin_is_named_with_what_the_timing_rules_out() {
    let fx = json("pins_gaussian.json");
    // The first pin (2010Q3) with drivers that start only after it.
    let dir = tempfile::tempdir().unwrap();
    let late = r#"(shock: "realgdp", from: "2010Q4", to: "2011Q3")"#;
    let s = setup(&fx, 1, late, &dir);
    let err = Plan::new(&fixed_theta(&s), &s.conditions().unwrap(), None).unwrap_err();
    let text = err.to_string();
    println!("{text}");
    assert!(text.contains("realgdp at 2010Q3"), "{text}");
    assert!(text.contains("no shock may move before 2010Q4"), "{text}");
    // Three pins and two first-period cells: one pin too many.
    let dir = tempfile::tempdir().unwrap();
    let s = setup(&fx, 3, FIRST_PERIOD, &dir);
    let text = Plan::new(&fixed_theta(&s), &s.conditions().unwrap(), None)
        .unwrap_err()
        .to_string();
    println!("{text}");
    assert!(text.contains("no shock may move after 2009Q4"), "{text}");
}

#[test]
fn a_timed_driver_with_its_periods_reversed_names_the_field() {
    let fx = json("pins_gaussian.json");
    let dir = tempfile::tempdir().unwrap();
    let s = setup(
        &fx,
        1,
        r#"(shock: "realgdp", from: "2010Q4", to: "2010Q1")"#,
        &dir,
    );
    let text = s.conditions().unwrap_err().to_string();
    assert!(text.contains("drivers[0].to"), "{text}");
}

/// A timed driver survives a save: printed, read back the same; and a save that changes
/// only its period rewrites only that (the file's other lines and comments are kept).
#[test]
fn timed_drivers_are_saved_and_read_back() {
    let fx = json("pins_gaussian.json");
    let dir = tempfile::tempdir().unwrap();
    let s = setup(&fx, 2, FIRST_PERIOD, &dir);
    let text = scenario::to_text(&s.file);
    let back = scenario::parse(&text, std::path::Path::new("x.ron")).unwrap();
    assert_eq!(back, s.file);
    let original = std::fs::read_to_string(&s.path).unwrap();
    let mut moved = s.file.clone();
    if let Some(scenario::DriverSpec::Timed { to, .. }) =
        moved.drivers.as_mut().and_then(|d| d.get_mut(1))
    {
        *to = "2010Q1".into();
    }
    let saved = scenario::layout::save_text(Some(&original), &moved);
    let changed: Vec<_> = original
        .lines()
        .zip(saved.lines())
        .filter(|(a, b)| a != b)
        .collect();
    assert_eq!(changed.len(), 1, "{changed:?}");
    assert!(changed[0].1.contains(r#"to: "2010Q1""#));
}

/// The split by shock date: with the drivers timed to the first period only, every shock of
/// the scenario hits then, so the first date's part is the whole move — the conditional mean
/// less the unconditional one, against numpy's (`timed_drivers.json`) — and every later
/// date's part is zero; the dates' parts add up to the shocks' parts.
#[test]
fn the_split_by_shock_date_puts_a_first_period_scenario_in_its_first_period() {
    let fx = json("pins_gaussian.json");
    let want = json("timed_drivers.json");
    let dir = tempfile::tempdir().unwrap();
    let mut setup = setup(&fx, 2, FIRST_PERIOD, &dir);
    let theta = fixed_theta(&setup);
    let out = tiltyard::run::run(&mut setup, &Default::default()).unwrap();
    let a = out.attribution.expect("a split");
    let dates = a.by_date.as_ref().expect("timed drivers split by date");
    assert_eq!(dates.len(), 8);
    let moved = vector(&want["mean"]) - DVector::from_column_slice(&theta.mean);
    let tol = EXACT * want["condition_number"].as_f64().unwrap();
    let first = rel_err(
        &DMatrix::from_column_slice(32, 1, &dates[0]),
        &DMatrix::from_column_slice(32, 1, moved.as_slice()),
    );
    println!("first date against numpy's move: {first:.1e}");
    assert!(first < tol, "{first:e}");
    let later = dates[1..]
        .iter()
        .flatten()
        .map(|v| v.abs())
        .fold(0.0, f64::max);
    assert!(later < tol * moved.amax(), "{later:e}");
    for c in 0..32 {
        let by_date: f64 = dates.iter().map(|d| d[c]).sum();
        let by_shock: f64 = a.by_shock.iter().map(|s| s[c]).sum();
        assert!((by_date - by_shock).abs() < 1e-9 * (1.0 + by_shock.abs()));
    }
}
