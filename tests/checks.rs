//! The scenario checks: every kind of clash is detected and names its conditions; strain is
//! flagged with a corridor probability that matches scipy; blame sets are minimal; the
//! plausibility parts match numpy's conditional moments.

mod common;

use common::*;
use nalgebra::{DMatrix, DVector, SymmetricEigen};
use serde_json::Value;
use tiltyard::checks::{Finding, Severity, Status};
use tiltyard::forecast::{ParamSource, Theta};
use tiltyard::run::{RunError, RunOptions, check, run};
use tiltyard::scenario::{self, Setup};

/// Exact quantities (plausibility parts from closed forms) agree to this, relative.
const EXACT: f64 = 1e-8;
/// Monte Carlo agreement: 4 combined standard errors.
const SE: f64 = 4.0;

fn fixed_model() -> String {
    let fx = json("var_ols.json");
    fixed_model_ron(&matrix(&fx["params"]), &matrix(&fx["sigma_u"]))
}

fn setup_of(model: &str, extra: &str, dir: &tempfile::TempDir) -> Setup {
    let text = macro_scenario(
        model,
        &format!(r#"ordering: ["realgdp", "realinv", "realcons", "tbilrate"], {extra}"#),
        8,
    );
    scenario::load(&write_scenario(dir, &text)).unwrap()
}

fn fixed(extra: &str) -> (Setup, tempfile::TempDir) {
    let dir = tempfile::tempdir().unwrap();
    (setup_of(&fixed_model(), extra, &dir), dir)
}

fn only(findings: &[Finding], kind: &str) -> Finding {
    let hits: Vec<&Finding> = findings.iter().filter(|f| f.kind == kind).collect();
    assert_eq!(
        hits.len(),
        1,
        "one '{kind}' finding expected in {findings:#?}"
    );
    hits[0].clone()
}

fn sorted(v: &[String]) -> Vec<String> {
    let mut v = v.to_vec();
    v.sort();
    v
}

/// Bad conditions are each a clash naming their field; the others are still checked.
#[test]
fn invalid_conditions_are_each_named() {
    let (setup, _dir) = fixed(
        r#"pins: [
            (series: "gdp", period: "2010Q1", value: 1.0),
            (series: "tbilrate", period: "2013Q1", value: 1.0),
            (shock: "nothing", period: "2010Q1", value: 1.0),
            (series: "tbilrate", period: "2010Q2", value: 0.5),
        ],
        corridors: [
            (series: "tbilrate", from: "2010Q1", to: "2010Q2", lower: [1.0, 2.0], upper: [2.0, 1.5]),
            (series: "realgdp", from: "2010Q1", to: "2010Q2", lower: [13000.0]),
            (series: "tbilrate", from: "2010Q3", to: "2010Q2", lower: 0.0),
            (series: "tbilrate", from: "2010Q3", to: "2010Q4", units: year_on_year, lower: 0.0),
            (series: "realinv", from: "2010Q3", to: "2010Q4"),
            (series: "realinv", from: "2010Q3", to: "2010Q3", lower: 5.0, upper: 5.0),
        ]"#,
    );
    let report = check(&setup).unwrap();
    assert_eq!(report.status, Status::Clashing);
    let invalid: Vec<&Finding> = report
        .findings
        .iter()
        .filter(|f| f.kind == "invalid_condition")
        .collect();
    let fields: Vec<String> = invalid.iter().flat_map(|f| f.fields.clone()).collect();
    for want in [
        "pins[0].series",
        "pins[1].period",
        "pins[2].shock",
        "corridors[0]",
        "corridors[1].lower",
        "corridors[2].to",
        "corridors[3]",
        "corridors[4]",
        "corridors[5]",
    ] {
        assert!(fields.iter().any(|f| f == want), "{want} not in {fields:?}");
    }
    let text: Vec<&str> = invalid.iter().map(|f| f.message.as_str()).collect();
    let all = text.join("\n");
    for phrase in [
        "unknown series \"gdp\"",
        "beyond the horizon",
        "unknown shock \"nothing\"",
        "above upper bound 1.5 at 2010Q2",
        "1 values for 2 periods",
        "comes before from",
        "not one linear condition",
        "give a lower bound, an upper bound or both",
        "that is a pin",
    ] {
        assert!(all.contains(phrase), "'{phrase}' not in:\n{all}");
    }
    // The valid pin was still checked.
    assert_eq!(report.pins.as_ref().unwrap().pins, 1);
}

/// A pin outside a corridor on the same quantity, directly or through other pins.
#[test]
fn pin_outside_corridor_is_a_clash_naming_both() {
    let (setup, _dir) = fixed(
        r#"pins: [
            (series: "tbilrate", period: "2010Q2", value: 3.0),
            (series: "realgdp", period: "2010Q1", value: 13100.0),
        ],
        corridors: [(series: "tbilrate", from: "2010Q1", to: "2010Q3", lower: -1.0, upper: 2.0)]"#,
    );
    let report = check(&setup).unwrap();
    let f = only(&report.findings, "pin_outside_corridor");
    assert_eq!(f.severity, Severity::Clash);
    assert_eq!(f.fields, vec!["pins[0]", "corridors[0]"]);
    assert_eq!(f.minimal, Some(true));
    // Through linear dependence: two level pins fix the growth the corridor bounds.
    let (setup, _dir) = fixed(
        r#"pins: [
            (series: "realgdp", period: "2010Q1", value: 13000.0),
            (series: "realgdp", period: "2010Q2", value: 13400.0),
        ],
        corridors: [(series: "realgdp", from: "2010Q2", to: "2010Q2", units: pct_change, upper: 2.0)]"#,
    );
    let f = only(&check(&setup).unwrap().findings, "pin_outside_corridor");
    assert_eq!(
        sorted(&f.fields),
        vec!["corridors[0]", "pins[0]", "pins[1]"]
    );
}

/// Contradictory pins: the same quantity twice with different values, and levels that fix a
/// growth pinned elsewhere (a rank-revealing test on the rows); the unrelated pin is not
/// blamed. A consistent repeat is a note, not a clash.
#[test]
fn contradictory_pins_are_named() {
    let (setup, _dir) = fixed(
        r#"pins: [
            (series: "tbilrate", period: "2010Q2", value: 0.5),
            (series: "realgdp", period: "2010Q1", value: 13000.0),
            (series: "realgdp", period: "2010Q2", value: 13100.0),
            (series: "realgdp", period: "2010Q2", units: pct_change, value: 2.0),
            (series: "realinv", period: "2010Q3", value: 1500.0),
            (series: "realinv", period: "2010Q3", value: 1510.0),
        ]"#,
    );
    let report = check(&setup).unwrap();
    let f = only(&report.findings, "contradictory_pins");
    // The deletion filter keeps one contradiction: each member needed.
    assert_eq!(f.minimal, Some(true));
    let growth = vec!["pins[1]", "pins[2]", "pins[3]"];
    let repeat = vec!["pins[4]", "pins[5]"];
    assert!(
        sorted(&f.fields) == growth || sorted(&f.fields) == repeat,
        "{:?}",
        f.fields
    );
    let g = 100.0 * (13100.0f64 / 13000.0 - 1.0);
    let (setup, _dir) = fixed(&format!(
        r#"pins: [
            (series: "realgdp", period: "2010Q1", value: 13000.0),
            (series: "realgdp", period: "2010Q2", value: 13100.0),
            (series: "realgdp", period: "2010Q2", units: pct_change, value: {g:e}),
        ]"#
    ));
    let report = check(&setup).unwrap();
    assert_ne!(report.status, Status::Clashing);
    assert!(
        report.notes.iter().any(|n| n.contains("implied")),
        "{report:#?}"
    );
}

/// Corridors that leave no room: overlapping intervals on the same quantity that do not
/// meet, and a year-on-year corridor that contradicts quarterly corridors (found by the linear
/// programme on the dependent rows).
#[test]
fn corridors_that_cannot_hold_together_are_named() {
    let (setup, _dir) = fixed(
        r#"corridors: [
            (series: "tbilrate", from: "2010Q1", to: "2010Q3", lower: 1.0),
            (series: "tbilrate", from: "2010Q3", to: "2010Q4", upper: 0.5),
        ]"#,
    );
    let f = only(&check(&setup).unwrap().findings, "corridors_contradict");
    assert_eq!(f.fields, vec!["corridors[0]", "corridors[1]"]);
    // Quarterly growth of at least 1% in each quarter of 2010, but at most 2% over the year
    // to 2010Q4: log growth adds up, so the four quarters force at least ≈4.06%.
    let (setup, _dir) = fixed(
        r#"corridors: [
            (series: "realinv", from: "2010Q1", to: "2010Q4", units: pct_change, lower: 1.0),
            (series: "realinv", from: "2010Q4", to: "2010Q4", units: year_on_year, upper: 2.0),
            (series: "tbilrate", from: "2010Q1", to: "2010Q4", lower: -5.0),
        ]"#,
    );
    let f = only(&check(&setup).unwrap().findings, "corridors_contradict");
    assert_eq!(f.fields, vec!["corridors[0]", "corridors[1]"]);
    assert_eq!(f.minimal, Some(true));
    // With room (at most 12% over the year) the same corridors hold together.
    let (setup, _dir) = fixed(
        r#"corridors: [
            (series: "realinv", from: "2010Q1", to: "2010Q4", units: pct_change, lower: 1.0),
            (series: "realinv", from: "2010Q4", to: "2010Q4", units: year_on_year, upper: 12.0),
        ]"#,
    );
    assert_ne!(check(&setup).unwrap().status, Status::Clashing);
}

/// Drivers that cannot reach a pin or a corridor: recursive identification with tbilrate
/// ordered last, so a tbilrate driver cannot move realgdp on impact.
#[test]
fn unreachable_conditions_are_named() {
    let (setup, _dir) = fixed(
        r#"drivers: ["tbilrate"],
        pins: [(series: "tbilrate", period: "2010Q2", value: 1.0)],
        corridors: [(series: "realgdp", from: "2009Q4", to: "2010Q1", lower: 13000.0)]"#,
    );
    let report = check(&setup).unwrap();
    let f = only(&report.findings, "unreachable_by_drivers");
    assert_eq!(f.fields, vec!["corridors[0]"]);
    assert!(f.message.contains("tbilrate") && f.remedy.contains("drivers"));
}

/// Quarterly growth of at least 1% in each quarter of 2010 and at most 5% over the year leave a
/// thin slab (the four quarters add up to at least ≈4.06%): it has room, but the exact sampler
/// would almost never land in it, so the scenario is refused, with the corridors named.
#[test]
fn too_improbable_to_sample_is_refused() {
    let (mut setup, _dir) = fixed(
        r#"corridors: [
            (series: "realinv", from: "2010Q1", to: "2010Q4", units: pct_change, lower: 1.0),
            (series: "realinv", from: "2010Q4", to: "2010Q4", units: year_on_year, upper: 5.0),
        ]"#,
    );
    let report = check(&setup).unwrap();
    let f = only(&report.findings, "too_improbable_to_sample");
    assert_eq!(f.fields, vec!["corridors[0]", "corridors[1]"]);
    let err = run(&mut setup, &RunOptions::default()).unwrap_err();
    assert!(matches!(err, RunError::Clash(_)), "{err}");
}

/// The probability of dependent corridors counts the extra inequality, whatever the order in
/// which the corridors are written (the year-on-year row is the dependent one in one order,
/// a quarterly row in the other).
#[test]
fn dependent_corridor_probability_does_not_depend_on_order() {
    let quarterly =
        r#"(series: "realinv", from: "2010Q1", to: "2010Q4", units: pct_change, lower: 0.0)"#;
    let yearly =
        r#"(series: "realinv", from: "2010Q4", to: "2010Q4", units: year_on_year, upper: 6.0)"#;
    let mut estimates = Vec::new();
    for order in [[quarterly, yearly], [yearly, quarterly]] {
        let (setup, _dir) = fixed(&format!("corridors: [{}, {}]", order[0], order[1]));
        let c = check(&setup).unwrap().corridors.unwrap();
        estimates.push((10f64.powf(c.log10_probability), c.relative_error));
    }
    let ((a, ea), (b, eb)) = (estimates[0], estimates[1]);
    let se = (a * ea).hypot(b * eb);
    assert!((a - b).abs() <= SE * se, "{a:e} vs {b:e} (s.e. {se:e})");
}

/// The acceptance limit is a setting: raised, an ordinary corridor trips it.
#[test]
fn acceptance_limit_is_a_setting() {
    let extra = r#"corridors: [(series: "tbilrate", from: "2010Q1", to: "2010Q4", lower: -0.2, upper: 0.0)],
        checks: (min_acceptance: 0.99999)"#;
    let (mut setup, _dir) = fixed(extra);
    let report = check(&setup).unwrap();
    let acceptance = report.corridors.as_ref().unwrap().acceptance;
    assert!(acceptance < 0.99999, "acceptance {acceptance}");
    only(&report.findings, "too_improbable_to_sample");
    let err = run(&mut setup, &RunOptions::default()).unwrap_err();
    assert!(matches!(err, RunError::Clash(_)), "{err}");
}

fn corridor_case(name: &str) -> (Value, Value) {
    let fx = json("corridors.json");
    let case = fx["cases"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == name)
        .unwrap()
        .clone();
    (fx, case)
}

fn list(v: &Value) -> String {
    let items: Vec<String> = v
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().map_or("None".into(), |f| format!("{f:e}")))
        .collect();
    format!("[{}]", items.join(", "))
}

/// The fixture's strained case (corridor probability ≈ 1.2e−5 given the pin, from scipy):
/// flagged as strain, with a probability that matches scipy's within its errors, and the
/// corridor blamed.
#[test]
fn strained_scenario_matches_scipy() {
    let (_, case) = corridor_case("strained");
    let pin = &case["pins"][0];
    let c = &case["corridors"][0];
    let extra = format!(
        r#"pins: [(series: {}, period: {}, value: {:e})],
        corridors: [(series: {}, from: {}, to: {}, units: year_on_year, upper: {})]"#,
        pin["series"],
        pin["period"],
        pin["value"].as_f64().unwrap(),
        c["series"],
        c["from"],
        c["to"],
        list(&c["upper"])
    );
    let (setup, _dir) = fixed(&extra);
    let report = check(&setup).unwrap();
    assert_eq!(report.status, Status::Strained);
    let strain = report.corridors.as_ref().unwrap();
    let got = 10f64.powf(strain.log10_probability);
    let (p, p_se) = (
        case["prob"].as_f64().unwrap(),
        case["prob_se"].as_f64().unwrap(),
    );
    let se = (strain.relative_error * got).hypot(p_se);
    assert!(
        (got - p).abs() <= SE * se,
        "{got:e} ± {se:e} vs scipy {p:e}"
    );
    assert!(strain.log10_bound >= p.log10());
    let f = only(&report.findings, "corridors_improbable");
    assert!(f.fields.contains(&"corridors[0]".to_string()), "{f:#?}");
    assert_eq!(f.minimal, Some(true));
}

/// Pin values `z` unconditional standard deviations from numpy's unconditional mean.
fn pin_at(fx: &Value, cell: usize, z: f64) -> f64 {
    let mu = vector(&fx["uncond_mean"]);
    let c = matrix(&fx["uncond_cov"]);
    mu[cell] + z * c[(cell, cell)].sqrt()
}

/// Two pins, each unremarkable alone (|z| = 2.3, χ²(1) tail 0.021 > 0.01), strain jointly
/// (correlation makes their χ²(2) tail < 0.01, computed here from numpy's covariance); a third
/// pin at its mean is tried first and left out. Minimality is checked by re-running the blamed
/// set without each member.
#[test]
fn strain_blame_is_minimal() {
    let fx = json("pins_gaussian.json");
    let mu = vector(&fx["uncond_mean"]);
    let c = matrix(&fx["uncond_cov"]);
    // tbilrate 2010Q1 (cell 7) up, realgdp 2011Q1 (cell 20) down; realcons 2010Q2 (cell 9) at
    // its mean.
    let cells = [7usize, 20, 9];
    let zs = [2.3, -2.3, 0.0];
    let values: Vec<f64> = cells
        .iter()
        .zip(zs)
        .map(|(&k, z)| pin_at(&fx, k, z))
        .collect();
    let sub = DMatrix::from_fn(2, 2, |i, j| c[(cells[i], cells[j])]);
    let dev = DVector::from_fn(2, |i, _| values[i] - mu[cells[i]]);
    let d2 = dev.dot(&(sub.try_inverse().unwrap() * &dev));
    assert!(
        (-d2 / 2.0).exp() < 0.01,
        "construction: joint tail {}",
        (-d2 / 2.0).exp()
    );
    let pins = |keep: &[bool]| {
        let all = [
            format!(
                "(series: \"tbilrate\", period: \"2010Q1\", value: {:e}, active: {})",
                values[0], keep[0]
            ),
            format!(
                "(series: \"realgdp\", period: \"2011Q1\", value: {:e}, active: {})",
                (values[1] / 100.0).exp(),
                keep[1]
            ),
            format!(
                "(series: \"realcons\", period: \"2010Q2\", value: {:e}, active: {})",
                (values[2] / 100.0).exp(),
                keep[2]
            ),
        ];
        format!("pins: [{}]", all.join(", "))
    };
    let (setup, _dir) = fixed(&pins(&[true, true, true]));
    let report = check(&setup).unwrap();
    assert_eq!(report.status, Status::Strained, "{report:#?}");
    let f = only(&report.findings, "pins_far_from_forecast");
    assert_eq!(sorted(&f.fields), vec!["pins[0]", "pins[1]"]);
    assert_eq!(f.minimal, Some(true));
    for keep in [[false, true, false], [true, false, false]] {
        let (setup, _dir) = fixed(&pins(&keep));
        assert_eq!(check(&setup).unwrap().status, Status::Clear, "{keep:?}");
    }
}

/// Plausibility parts against numpy's conditional moments (`pins_gaussian.json`): the shocks
/// of the scenario mean, `μ_ε = M⁻¹(mean − μ)`, give `½‖μ_ε‖²`, and the shock covariance
/// `M⁻¹ C M⁻ᵀ` gives `½ Σ (λ − 1 − ln λ)` over its non-zero eigenvalues. With every shock free
/// the shape part is zero and the mean part is `½ d²` (ALGORITHMS §5.2).
#[test]
fn plausibility_matches_numpy_moments() {
    let fx = json("pins_gaussian.json");
    for name in ["levels", "drivers"] {
        let case = fx["cases"]
            .as_array()
            .unwrap()
            .iter()
            .find(|c| c["name"] == name)
            .unwrap();
        let pins: Vec<String> = case["pins"]
            .as_array()
            .unwrap()
            .iter()
            .map(|p| {
                format!(
                    "(series: {}, period: {}, units: {}, value: {:e})",
                    p["series"],
                    p["period"],
                    units_ron(&p["units"]),
                    p["value"].as_f64().unwrap()
                )
            })
            .collect();
        let drivers = match &case["drivers"] {
            Value::Null => String::new(),
            d => format!("drivers: {d},"),
        };
        let (setup, _dir) = fixed(&format!("{drivers} pins: [{}]", pins.join(", ")));
        let report = check(&setup).unwrap();
        let p = report.plausibility.unwrap();
        // Shocks of numpy's mean and covariance.
        let (ParamSource::Fixed(params), _) = setup.estimate().unwrap() else {
            panic!()
        };
        let theta = Theta::new(params, &setup.ordering, &setup.tail().unwrap(), 8).unwrap();
        let mean = vector(&case["mean"]);
        let mut paths = vec![mean.as_slice().to_vec()];
        let big_n = mean.len();
        let mu = DVector::from_column_slice(&theta.mean);
        for k in 0..big_n {
            let mut e = DVector::zeros(big_n);
            e[k] = 1.0;
            paths.push((&mu + e).as_slice().to_vec());
        }
        let shocks = theta.shocks_from_paths(&paths).unwrap();
        let eps = DVector::from_vec(shocks[0].clone());
        let minv = DMatrix::from_fn(big_n, big_n, |i, k| shocks[k + 1][i]);
        let cov = &minv * matrix(&case["cov"]) * minv.transpose();
        let shape: f64 = SymmetricEigen::new((&cov + cov.transpose()) * 0.5)
            .eigenvalues
            .iter()
            .filter(|&&l| l > 1e-6)
            .map(|&l| 0.5 * (l - 1.0 - l.ln()))
            .sum();
        let mean_part = 0.5 * eps.norm_squared();
        assert!(
            (p.mean_part - mean_part).abs() < EXACT * mean_part.max(1.0),
            "{name}: mean part {} vs {mean_part}",
            p.mean_part
        );
        assert!(
            (p.shape_part - shape).abs() < 1e-6 * shape.max(1.0),
            "{name}: shape part {} vs {shape}",
            p.shape_part
        );
        if name == "levels" {
            let d2 = report.pins.as_ref().unwrap().mahalanobis;
            assert!((p.mean_part - 0.5 * d2).abs() < EXACT * d2);
            assert!(p.shape_part.abs() < 1e-9);
        } else {
            assert!(p.shape_part > 1e-3, "drivers must offset non-drivers");
        }
        // The coin's defining equation (McCulloch 1989): KL(Bernoulli(½) ‖ Bernoulli(q)) =
        // −½ ln(4q(1 − q)) = D, to rounding where q is not within 1e-6 of 1.
        if p.coin < 1.0 - 1e-6 {
            let kl = -0.5 * (4.0 * p.coin * (1.0 - p.coin)).ln();
            assert!(
                (kl - p.divergence).abs() < 1e-9 * p.divergence.max(1e-3),
                "{kl} against {}",
                p.divergence
            );
        }
    }
}

/// The demo's clashing scenario: the pin and the corridor it breaks are named; the run
/// refuses to sample.
#[test]
fn demo_clash_is_named() {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios-demo/clash.ron");
    let mut setup = scenario::load(&path).unwrap();
    setup.file.draws = 20;
    let report = check(&setup).unwrap();
    let f = only(&report.findings, "pin_outside_corridor");
    assert_eq!(f.fields, vec!["pins[2]", "corridors[1]"]);
    assert!(matches!(
        run(&mut setup, &RunOptions::default()),
        Err(RunError::Clash(_))
    ));
}

/// Nearly dependent conditions (a pin on tbilrate's percent change of 1e−6, i.e. the row
/// `x_t − 1.00000001 x_{t−1}`, beside a corridor on its difference `x_t − x_{t−1}`) are a clash
/// naming both, not a failure deep in the sampler.
#[test]
fn nearly_dependent_conditions_are_named() {
    let (mut setup, _dir) = fixed(
        r#"pins: [(series: "tbilrate", period: "2010Q1", units: pct_change, value: 1e-6)],
        corridors: [(series: "tbilrate", from: "2010Q1", to: "2010Q1", units: difference, lower: -0.5, upper: 0.5)]"#,
    );
    let report = check(&setup).unwrap();
    let f = only(&report.findings, "nearly_redundant");
    assert_eq!(f.fields, vec!["pins[0]", "corridors[0]"]);
    assert!(matches!(
        run(&mut setup, &RunOptions::default()),
        Err(RunError::Clash(_))
    ));
}
