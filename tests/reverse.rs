//! Reverse stress test: the most plausible path to an outcome, keeping the scenario's pins,
//! against the closed form computed independently with numpy and scipy
//! (`tests/fixtures/reverse.json`, made by `tests/fixtures/make_reverse.py`): the mean path,
//! the divergence of its shocks and the outcome's probability. Also: an outcome the scenario
//! already meets adds nothing, the search over periods picks the least divergent, and an
//! outcome the drivers cannot reach is named.

mod common;

use common::*;
use nalgebra::DMatrix;
use serde_json::Value;
use tiltyard::pipeline::Model;
use tiltyard::reverse::{Outcome, ReverseError, reverse};
use tiltyard::scenario::{self, Setup, Units};

/// Exact parts: relative 1e-9 · cond (ALGORITHMS §11.4; the scaled Gram matrix's condition
/// number is in the fixture, 13 here).
const EXACT: f64 = 1e-9;

fn levels(fx: &Value, edit: impl Fn(&mut Value), dir: &tempfile::TempDir) -> Setup {
    let mut case = fx["cases"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == "levels")
        .unwrap()
        .clone();
    edit(&mut case);
    scenario::load(&write_scenario(dir, &pins_case_scenario(fx, &case))).unwrap()
}

fn realinv(threshold: f64, at_most: bool, from: &str, to: &str) -> Outcome {
    Outcome {
        series: "realinv".into(),
        units: Units::Level,
        threshold,
        at_most,
        from: from.into(),
        to: to.into(),
    }
}

#[test]
fn one_outcome_matches_the_closed_form() {
    let fx = json("pins_gaussian.json");
    let want = json("reverse.json");
    let dir = tempfile::tempdir().unwrap();
    let setup = levels(&fx, |_| {}, &dir);
    let theta = Model::new(&setup).unwrap().central;
    let x = want["threshold_level"].as_f64().unwrap();
    let r = reverse(&setup, &theta, &[realinv(x, true, "2010Q4", "2010Q4")]).unwrap();
    let tol = EXACT * want["condition_number"].as_f64().unwrap();
    assert!(r.at[0].1);
    assert!(r.binding_corridors.is_empty());
    let e = rel_err(
        &DMatrix::from_column_slice(32, 1, &r.path),
        &DMatrix::from_column_slice(32, 1, vector(&want["mean"]).as_slice()),
    );
    let d = want["divergence"].as_f64().unwrap();
    let p = want["probability"].as_f64().unwrap();
    println!(
        "path {e:.1e}, divergence {} ({d}), probability {} ({p})",
        r.divergence, r.probability.0
    );
    assert!(e < tol, "path {e:e}");
    assert!((r.divergence - d).abs() < tol * d, "divergence");
    assert!((r.probability.0 - p).abs() < tol * p, "probability");
    assert_eq!(
        r.probability.1, None,
        "exact for one outcome without corridors"
    );
    // The new scenario carries the outcome as a pin where it happens.
    let pin = r.scenario.pins.last().unwrap();
    assert_eq!((pin.period.as_str(), pin.value), ("2010Q4", x));
    // Under the model alone (no pins): Φ((x − e'μ)/√(e'Ce)) from the fixture's unconditional
    // mean and covariance (statrs' normal distribution function).
    let cell = 4 * 4 + 2; // realinv (series 2 of 4) in 2010Q4 (horizon 5)
    let (mu, c) = (vector(&fx["uncond_mean"]), matrix(&fx["uncond_cov"]));
    let z = (100.0 * x.ln() - mu[cell]) / c[(cell, cell)].sqrt();
    let alone =
        statrs::distribution::ContinuousCDF::cdf(&statrs::distribution::Normal::standard(), z);
    println!("unconditional {} ({alone})", r.unconditional.0);
    assert!(
        (r.unconditional.0 - alone).abs() < tol * alone,
        "unconditional"
    );
    assert_eq!(r.unconditional.1, None);
    // Over one period, drawn paths give the same probability within 4 standard errors.
    let (any, se) = r.probability_any;
    assert!((any - p).abs() < 4.0 * se, "{any} ± {se} against {p}");
}

#[test]
fn an_outcome_already_met_adds_nothing_and_the_search_picks_the_least_divergent() {
    let fx = json("pins_gaussian.json");
    let dir = tempfile::tempdir().unwrap();
    let setup = levels(&fx, |_| {}, &dir);
    let theta = Model::new(&setup).unwrap().central;
    let met = reverse(&setup, &theta, &[realinv(1e9, true, "2010Q4", "2010Q4")]).unwrap();
    assert!(!met.at[0].1);
    assert_eq!(met.scenario.pins.len(), setup.file.pins.len());
    let want = json("reverse.json");
    let x = want["threshold_level"].as_f64().unwrap();
    let r = reverse(&setup, &theta, &[realinv(x, true, "2010Q1", "2011Q3")]).unwrap();
    let least = r
        .tried
        .iter()
        .filter_map(|(p, d)| d.as_ref().ok().map(|d| (&p[0], *d)))
        .min_by(|a, b| a.1.total_cmp(&b.1))
        .unwrap();
    assert_eq!(least.0, &r.at[0].0);
    assert_eq!(least.1, r.divergence);
    assert_eq!(r.tried.len(), 7);
}

#[test]
fn an_outcome_the_drivers_cannot_reach_is_named() {
    let fx = json("pins_gaussian.json");
    let dir = tempfile::tempdir().unwrap();
    // No pins; realgdp's shock may move only from 2011Q1 on.
    let setup = levels(
        &fx,
        |c| {
            c["pins"] = Value::Array(Vec::new());
            c["drivers"] = serde_json::json!(["realgdp"]);
        },
        &dir,
    );
    let mut file = setup.file.clone();
    file.drivers = Some(vec![scenario::DriverSpec::Timed {
        shock: "realgdp".into(),
        from: "2011Q1".into(),
        to: "2011Q3".into(),
    }]);
    let setup = Setup::new(file, &setup.path).unwrap();
    let theta = Model::new(&setup).unwrap().central;
    let err = reverse(&setup, &theta, &[realinv(1.0, true, "2010Q2", "2010Q4")]).unwrap_err();
    // A range that ends before it starts is named, not searched.
    let backwards = reverse(&setup, &theta, &[realinv(1.0, true, "2010Q4", "2010Q2")]);
    assert!(
        matches!(&backwards, Err(ReverseError::EmptyRange { field, .. }) if field == "outcome 1"),
        "{backwards:?}"
    );
    assert!(matches!(err, ReverseError::Unreachable { .. }));
    let text = err.to_string();
    assert!(
        text.contains("realinv") && text.contains("no shock may move before 2011Q1"),
        "{text}"
    );
}

/// Several outcomes together, with a corridor that binds on the way: against the least-norm
/// shocks a general-purpose solver finds (`tests/fixtures/reverse_programme.json`, made by
/// `make_reverse_programme.py`: scipy's SLSQP finds the active set, numpy solves it exactly and
/// checks the multipliers' signs). Each combination of periods tried, the one chosen, the
/// path, the corridor rows that bind and the outcomes pinned in the new scenario.
#[test]
fn several_outcomes_and_a_binding_corridor_match_a_general_solver() {
    let fx = json("pins_gaussian.json");
    let want = json("reverse_programme.json");
    let dir = tempfile::tempdir().unwrap();
    let setup = levels(&fx, |_| {}, &dir);
    let mut file = setup.file.clone();
    let floor: Vec<Option<f64>> = want["floor_level"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64())
        .collect();
    file.corridors.push(scenario::CorridorSpec {
        series: Some("realcons".into()),
        shock: None,
        from: "2010Q2".into(),
        to: "2011Q1".into(),
        units: Units::Level,
        lower: Some(scenario::Bound::Each(floor)),
        upper: None,
        active: true,
    });
    let setup = Setup::new(file, &setup.path).unwrap();
    let theta = Model::new(&setup).unwrap().central;
    let inv = want["realinv_at_most_level"].as_f64().unwrap();
    let rate = Outcome {
        series: "tbilrate".into(),
        units: Units::Level,
        threshold: want["tbilrate_at_least"].as_f64().unwrap(),
        at_most: false,
        from: "2011Q2".into(),
        to: "2011Q3".into(),
    };
    let outcomes = [realinv(inv, true, "2010Q4", "2010Q4"), rate];
    let r = reverse(&setup, &theta, &outcomes).unwrap();
    let tried = want["tried"].as_array().unwrap();
    assert_eq!(r.tried.len(), tried.len());
    for (got, w) in r.tried.iter().zip(tried) {
        let tol = EXACT * w["condition_number"].as_f64().unwrap();
        let d = w["divergence"].as_f64().unwrap();
        assert_eq!(
            got.0,
            vec!["2010Q4".to_string(), w["period"].as_str().unwrap().into()]
        );
        let gd = *got.1.as_ref().unwrap();
        assert!((gd - d).abs() < tol * d, "{gd} against {d}");
    }
    let best = tried.iter().find(|t| t["period"] == want["best"]).unwrap();
    let tol = EXACT * best["condition_number"].as_f64().unwrap();
    assert_eq!(r.at[1].0, want["best"].as_str().unwrap());
    assert!(r.at.iter().all(|a| a.1), "both outcomes bind");
    let e = rel_err(
        &DMatrix::from_column_slice(32, 1, &r.path),
        &DMatrix::from_column_slice(32, 1, vector(&best["path"]).as_slice()),
    );
    println!(
        "path {e:.1e}, corridors at their bounds: {:?}",
        r.binding_corridors
    );
    assert!(e < tol, "path {e:e}");
    let binds: Vec<&str> = best["floor_binds"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| p.as_str().unwrap())
        .collect();
    assert_eq!(r.binding_corridors.len(), binds.len());
    for (label, period) in r.binding_corridors.iter().zip(&binds) {
        assert!(label.ends_with(&format!(" at {period}")), "{label}");
    }
    // Both outcomes become pins of the new scenario; with a corridor, the probability is
    // drawn (with its standard error).
    let n = setup.file.pins.len();
    assert_eq!(r.scenario.pins.len(), n + 2);
    assert_eq!(
        r.scenario.pins[n + 1].period,
        want["best"].as_str().unwrap()
    );
    assert!(r.probability.1.is_some());
}

/// A cumulative outcome ("realinv at most so many percent above its last observation by
/// 2010Q4", 29.9% here) is the same condition as the level it implies: the closed form's path again
/// (`reverse.json`), the threshold written as a percent change on the last observed level
/// (`pins_gaussian.json`'s history, in 100 ln units).
#[test]
fn a_cumulative_outcome_is_the_level_it_implies() {
    let fx = json("pins_gaussian.json");
    let want = json("reverse.json");
    let dir = tempfile::tempdir().unwrap();
    let setup = levels(&fx, |_| {}, &dir);
    let theta = Model::new(&setup).unwrap().central;
    let last = fx["history_tail"]["values"]
        .as_array()
        .unwrap()
        .last()
        .unwrap()[2]
        .as_f64()
        .unwrap();
    let level = want["threshold_level"].as_f64().unwrap();
    let percent = 100.0 * (level / (last / 100.0).exp() - 1.0);
    let outcome = Outcome {
        units: Units::Cumulative,
        threshold: percent,
        ..realinv(0.0, true, "2010Q4", "2010Q4")
    };
    let r = reverse(&setup, &theta, &[outcome]).unwrap();
    let tol = EXACT * want["condition_number"].as_f64().unwrap();
    let e = rel_err(
        &DMatrix::from_column_slice(32, 1, &r.path),
        &DMatrix::from_column_slice(32, 1, vector(&want["mean"]).as_slice()),
    );
    println!("{percent:.2}% since the last observation: path {e:.1e}");
    assert!(e < tol, "path {e:e}");
}
