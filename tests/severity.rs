//! Severity against history (ALGORITHMS §9.2): the scenario's mean structural shocks against
//! the model's own historical shocks over windows as long as the horizon, for the pins-only
//! cases of `pins_gaussian.json` (fixed VAR on macro4.csv), against an independent dense
//! numpy computation (`tests/fixtures/severity.json`, made by
//! `tests/fixtures/make_severity.py`: residuals, `L⁻¹`, `pinv([RM; E_nd])`, projections).

mod common;

use common::*;
use serde_json::Value;
use tiltyard::checks::HistorySeverity;
use tiltyard::pipeline::{Model, check_central, read_conditions};
use tiltyard::scenario;

/// Scores: relative 1e-9 (dense pseudo-inverse against the plan's QR and recursions; the
/// pins' Gram matrices here have condition numbers below 415, ALGORITHMS §11.4).
const EXACT: f64 = 1e-9;

fn severity_of(fx: &Value, name: &str) -> HistorySeverity {
    let case = fx["cases"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == name)
        .expect("case in pins_gaussian.json");
    let dir = tempfile::tempdir().unwrap();
    let setup = scenario::load(&write_scenario(&dir, &pins_case_scenario(fx, case))).unwrap();
    let model = Model::new(&setup).unwrap();
    let (conditions, invalid) = read_conditions(&setup);
    let report = check_central(&setup, &model, &conditions, invalid);
    report.against_history.expect("severity computed")
}

#[test]
fn severity_against_history_matches_numpy() {
    let fx = json("pins_gaussian.json");
    let reference = json("severity.json");
    let cases = reference["cases"].as_array().unwrap();
    assert!(cases.len() >= 4, "the fixture has its cases");
    for want in cases {
        let name = want["name"].as_str().unwrap();
        let got = severity_of(&fx, name);
        let close = |a: f64, b: &Value| {
            let b = b.as_f64().unwrap();
            (a - b).abs() <= EXACT * b.abs().max(1.0)
        };
        println!(
            "{name}: score {:.12} (numpy {}), below {} of {}",
            got.score, want["score"], got.share_exceeded, got.windows
        );
        assert!(close(got.score, &want["score"]), "{name}: score");
        assert_eq!(
            got.windows as u64,
            want["windows"].as_u64().unwrap(),
            "{name}"
        );
        let below = want["below"].as_f64().unwrap() / want["windows"].as_f64().unwrap();
        assert_eq!(got.share_exceeded, below, "{name}: share");
        for (span, key) in [(&got.nearest, "nearest"), (&got.largest, "largest")] {
            assert_eq!(
                span.from,
                want[key]["from"].as_str().unwrap(),
                "{name}: {key}"
            );
            assert_eq!(span.to, want[key]["to"].as_str().unwrap(), "{name}: {key}");
            assert!(
                close(span.score, &want[key]["score"]),
                "{name}: {key} score"
            );
        }
        assert_eq!(got.history_from, want["history_from"].as_str().unwrap());
        assert_eq!(got.history_to, want["history_to"].as_str().unwrap());
        assert!(
            got.reading
                .contains(&format!("{}–{}", got.nearest.from, got.nearest.to))
                || got.share_exceeded >= 1.0
        );
    }
}

/// With corridors the mean departures are estimated from draws of the corridor law: the
/// score moves with the seed only by Monte Carlo error, and a corridor wide enough never to
/// bind leaves the pins' figure (its mean departure is the unconditional one given the pins,
/// which the pins' gain already implies: the mean shocks are the same).
#[test]
fn a_corridor_that_never_binds_leaves_the_pins_figure() {
    let fx = json("pins_gaussian.json");
    let case = &fx["cases"][0];
    let pins_only = severity_of(&fx, case["name"].as_str().unwrap());
    let text = pins_case_scenario(&fx, case).replace(
        "draws: 1,",
        r#"draws: 1, corridors: [(series: "tbilrate", from: "2010Q2", to: "2010Q4", lower: -1e3, upper: 1e3)],"#,
    );
    let dir = tempfile::tempdir().unwrap();
    let setup = scenario::load(&write_scenario(&dir, &text)).unwrap();
    let model = Model::new(&setup).unwrap();
    let (conditions, invalid) = read_conditions(&setup);
    let report = check_central(&setup, &model, &conditions, invalid);
    let with = report.against_history.expect("severity computed");
    assert!(with.estimated);
    // 400 draws of three corridor quantities of unit-order standard deviation: the mean's
    // error moves the score by about sqrt(3/400) ≈ 0.09 at most (4 s.e. ≈ 0.35).
    println!(
        "pins only {:.4}, with the corridor {:.4}",
        pins_only.score, with.score
    );
    assert!((with.score - pins_only.score).abs() < 0.35);
}
