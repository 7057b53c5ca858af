//! Shared helpers for the integration tests: fixture loading and scenario building.
#![allow(dead_code)]

use std::path::{Path, PathBuf};

use nalgebra::{DMatrix, DVector};
use serde_json::Value;

pub fn fixtures() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures")
}

pub fn json(name: &str) -> Value {
    let text = std::fs::read_to_string(fixtures().join(name)).expect("fixture present");
    serde_json::from_str(&text).expect("fixture is JSON")
}

pub fn vector(v: &Value) -> DVector<f64> {
    DVector::from_vec(
        v.as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect(),
    )
}

pub fn matrix(v: &Value) -> DMatrix<f64> {
    let rows: Vec<Vec<f64>> = v
        .as_array()
        .unwrap()
        .iter()
        .map(|r| {
            r.as_array()
                .unwrap()
                .iter()
                .map(|x| x.as_f64().unwrap())
                .collect()
        })
        .collect();
    DMatrix::from_fn(rows.len(), rows[0].len(), |i, j| rows[i][j])
}

/// Largest entrywise difference relative to the largest entry of `b` (at least 1).
pub fn rel_err(a: &DMatrix<f64>, b: &DMatrix<f64>) -> f64 {
    assert_eq!(a.shape(), b.shape());
    (a - b).amax() / b.amax().max(1.0)
}

/// RON for a fixed-coefficient model from a statsmodels `params` (k×n) and `sigma_u`.
pub fn fixed_model_ron(params: &DMatrix<f64>, sigma: &DMatrix<f64>) -> String {
    let n = params.ncols();
    let p = (params.nrows() - 1) / n;
    let list = |v: Vec<f64>| {
        format!(
            "[{}]",
            v.iter()
                .map(|x| format!("{x:e}"))
                .collect::<Vec<_>>()
                .join(", ")
        )
    };
    let intercept = list(params.row(0).iter().copied().collect());
    let lags: Vec<String> = (0..p)
        .map(|l| {
            let rows: Vec<String> = (0..n)
                .map(|i| list((0..n).map(|j| params[(1 + l * n + j, i)]).collect()))
                .collect();
            format!("[{}]", rows.join(", "))
        })
        .collect();
    let sig: Vec<String> = (0..n)
        .map(|i| list((0..n).map(|j| sigma[(i, j)]).collect()))
        .collect();
    format!(
        "fixed((intercept: {intercept}, lags: [{}], sigma: [{}]))",
        lags.join(", "),
        sig.join(", ")
    )
}

/// Units of a fixture pin in scenario syntax.
pub fn units_ron(u: &Value) -> String {
    match u {
        Value::String(s) => s.clone(),
        Value::Object(o) => format!("average({})", o["average"].as_u64().unwrap()),
        other => panic!("units {other}"),
    }
}

/// Write `text` as `scenario.ron` in a fresh temporary folder and return its path.
pub fn write_scenario(dir: &tempfile::TempDir, text: &str) -> PathBuf {
    let path = dir.path().join("scenario.ron");
    std::fs::write(&path, text).unwrap();
    path
}

/// A scenario on the fixture macro data set (`macro4.csv`) with the given model and extras.
pub fn macro_scenario(model: &str, extra: &str, horizon: usize) -> String {
    let data = fixtures().join("macro4.csv");
    format!(
        r#"(
    name: "reference",
    dataset: "{}",
    series: [
        (name: "realgdp", transform: log100),
        (name: "realcons", transform: log100),
        (name: "realinv", transform: log100),
        (name: "tbilrate", transform: as_is),
    ],
    model: {model},
    horizon: {horizon},
    {extra}
)"#,
        data.display()
    )
}

/// The scenario text of a case of `pins_gaussian.json`: its fixed VAR on `macro4.csv` with the
/// case's ordering, drivers and pins, horizon 8.
pub fn pins_case_scenario(fx: &Value, case: &Value) -> String {
    let model = fixed_model_ron(&matrix(&fx["params"]), &matrix(&fx["sigma_u"]));
    let mut pins = Vec::new();
    for p in case["pins"].as_array().unwrap() {
        pins.push(format!(
            "(series: {}, period: {}, units: {}, value: {:e})",
            p["series"],
            p["period"],
            units_ron(&p["units"]),
            p["value"].as_f64().unwrap()
        ));
    }
    for p in case["shock_pins"].as_array().unwrap() {
        pins.push(format!(
            "(shock: {}, period: {}, value: {:e})",
            p["shock"],
            p["period"],
            p["value"].as_f64().unwrap()
        ));
    }
    let ordering: Vec<String> = case["ordering"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s.to_string())
        .collect();
    let drivers = match &case["drivers"] {
        Value::Null => String::new(),
        d => format!(
            "drivers: [{}],",
            d.as_array()
                .unwrap()
                .iter()
                .map(|s| s.to_string())
                .collect::<Vec<_>>()
                .join(", ")
        ),
    };
    let extra = format!(
        "ordering: [{}], {drivers} pins: [{}], draws: 1, seed: 11",
        ordering.join(", "),
        pins.join(", ")
    );
    macro_scenario(&model, &extra, 8)
}

/// The central θ of a fixed-coefficient scenario, over its own horizon.
pub fn fixed_theta(setup: &tiltyard::scenario::Setup) -> tiltyard::forecast::Theta {
    let (tiltyard::forecast::ParamSource::Fixed(p), _) = setup.estimate().unwrap() else {
        panic!("fixed")
    };
    tiltyard::forecast::Theta::new(
        p,
        &setup.ordering,
        &setup.tail().unwrap(),
        setup.file.horizon,
    )
    .unwrap()
}
