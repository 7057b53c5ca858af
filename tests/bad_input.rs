//! Bad scenarios and bad data give clear messages naming the file, line, field, series or pin.
//! (CSV-level cases are unit tests of the dataset module.)

mod common;

use common::*;
use tiltyard::run::{RunOptions, run};
use tiltyard::scenario;

fn load_err(text: &str) -> String {
    let dir = tempfile::tempdir().unwrap();
    let path = write_scenario(&dir, text);
    match scenario::load(&path) {
        Err(e) => e.to_string(),
        Ok(mut setup) => run(
            &mut setup,
            &RunOptions {
                draws: Some(2),
                ..Default::default()
            },
        )
        .err()
        .map(|e| e.to_string())
        .unwrap_or_else(|| panic!("no error for:\n{text}")),
    }
}

fn base(extra: &str) -> String {
    macro_scenario("minnesota((lags: 2))", extra, 4)
}

fn assert_mentions(msg: &str, parts: &[&str]) {
    for p in parts {
        assert!(msg.contains(p), "message {msg:?} should mention {p:?}");
    }
}

#[test]
fn unknown_field_names_the_field_and_position() {
    let text = base("colour: \"red\",");
    let msg = load_err(&text);
    assert_mentions(&msg, &["scenario.ron:", "colour"]);
    let line = text.lines().position(|l| l.contains("colour")).unwrap() + 1;
    assert!(
        msg.contains(&format!(":{line}:")),
        "{msg} should give line {line}"
    );
}

#[test]
fn unknown_field_inside_a_pin_is_named() {
    let msg = load_err(&base(
        r#"pins: [(series: "realgdp", period: "2010Q1", valu: 1.0)]"#,
    ));
    assert_mentions(&msg, &["valu", "in a pin", "value"]);
}

#[test]
fn bad_value_type_is_reported() {
    let msg = load_err(&base("horizon: \"twelve\","));
    assert!(msg.contains("scenario.ron:"), "{msg}");
}

#[test]
fn unknown_series_is_named_with_choices() {
    let text = base("").replace(
        "(name: \"realinv\", transform: log100)",
        "(name: \"investment\")",
    );
    let msg = load_err(&text);
    assert_mentions(&msg, &["series[2]", "investment", "realinv"]);
}

#[test]
fn pin_on_unknown_series_or_shock_is_named() {
    let msg = load_err(&base(
        r#"pins: [(series: "gdp", period: "2010Q1", value: 1.0)]"#,
    ));
    assert_mentions(&msg, &["pins[0].series", "gdp"]);
    let msg = load_err(&base(
        r#"pins: [(shock: "demand", period: "2010Q1", value: 1.0)]"#,
    ));
    assert_mentions(&msg, &["pins[0].shock", "demand"]);
    let msg = load_err(&base(r#"drivers: ["supply"],"#));
    assert_mentions(&msg, &["drivers[0]", "supply"]);
}

#[test]
fn pin_beyond_the_horizon_or_in_the_past_is_refused() {
    let msg = load_err(&base(
        r#"pins: [(series: "realgdp", period: "2011Q1", value: 1.0)]"#,
    ));
    assert_mentions(&msg, &["pins[0].period", "beyond the horizon", "2010Q3"]);
    let msg = load_err(&base(
        r#"pins: [(series: "realgdp", period: "2009Q3", value: 1.0)]"#,
    ));
    assert_mentions(&msg, &["pins[0].period", "not after the last observation"]);
    let msg = load_err(&base(
        r#"pins: [(series: "realgdp", period: "2010Q9", value: 1.0)]"#,
    ));
    assert_mentions(&msg, &["pins[0].period", "2010Q9"]);
}

#[test]
fn pin_units_that_do_not_fit_are_refused() {
    let msg = load_err(&base(
        r#"pins: [(series: "realgdp", period: "2010Q1", units: difference, value: 1.0)]"#,
    ));
    assert_mentions(
        &msg,
        &[
            "pins[0]",
            "realgdp, change on the previous period",
            "log100",
        ],
    );
    let msg = load_err(&base(
        r#"pins: [(series: "realgdp", period: "2010Q1", value: -5.0)]"#,
    ));
    assert_mentions(&msg, &["pins[0]", "positive"]);
    let msg = load_err(&base(
        r#"pins: [(series: "realgdp", shock: "realgdp", period: "2010Q1", value: 1.0)]"#,
    ));
    assert_mentions(&msg, &["pins[0]", "exactly one of series or shock"]);
}

#[test]
fn bad_ordering_is_named() {
    let msg = load_err(&base(
        r#"ordering: ["realgdp", "realgdp", "realinv", "tbilrate"],"#,
    ));
    assert_mentions(&msg, &["ordering[1]", "twice"]);
    let msg = load_err(&base(r#"ordering: ["realgdp", "tbilrate"],"#));
    assert_mentions(&msg, &["ordering", "realcons", "realinv"]);
}

#[test]
fn bad_model_settings_are_named() {
    let msg = load_err(&macro_scenario("minnesota((lags: 0))", "", 4));
    assert_mentions(&msg, &["lags"]);
    let msg = load_err(&macro_scenario(
        "minnesota((lags: 2, tightness: fixed(-1.0)))",
        "",
        4,
    ));
    assert_mentions(&msg, &["tightness"]);
    let msg = load_err(&macro_scenario(
        "minnesota((lags: 2, window: (from: \"1800Q1\")))",
        "",
        4,
    ));
    assert_mentions(&msg, &["model.window.from", "1800Q1", "1959Q1"]);
    let msg = load_err(&macro_scenario(
        "fixed((intercept: [1.0], lags: [[[0.5]]], sigma: [[1.0]]))",
        "",
        4,
    ));
    assert_mentions(&msg, &["intercept", "1 entries", "4 series"]);
    let msg = load_err(&macro_scenario(
        "fixed((intercept: [0,0,0,0], lags: [[[1,0,0,0],[0,1,0,0],[0,0,1,0],[0,0,0,1]]], sigma: [[1,0,0,0],[0,1,0,0],[0,0,-1,0],[0,0,0,1]]))",
        "",
        4,
    ));
    assert_mentions(&msg, &["sigma", "not positive definite"]);
}

#[test]
fn too_few_observations_for_the_lags_is_explained() {
    let msg = load_err(&macro_scenario(
        "minnesota((lags: 4, window: (from: \"2008Q3\", to: \"2009Q3\")))",
        "",
        4,
    ));
    assert_mentions(
        &msg,
        &["too few observations", "2008Q3", "4 lags", "5 periods"],
    );
}

#[test]
fn non_positive_data_under_log_transform_names_series_and_line() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("data.csv"),
        "date,a,b\n2000Q1,1.0,2\n2000Q2,1.1,0\n2000Q3,1.2,2\n2000Q4,1.3,2\n2001Q1,1.4,2\n2001Q2,1.5,2\n",
    )
    .unwrap();
    let text = r#"(name: "x", dataset: "data.csv",
        series: [(name: "a", transform: log100), (name: "b", transform: log100)],
        model: minnesota((lags: 1)), horizon: 2)"#;
    let path = write_scenario(&dir, text);
    let msg = scenario::load(&path).unwrap_err().to_string();
    assert_mentions(&msg, &["data.csv", "line 3", "b"]);
}

#[test]
fn missing_dataset_names_the_file() {
    let dir = tempfile::tempdir().unwrap();
    let text = r#"(name: "x", dataset: "nowhere.csv", series: [(name: "a")], model: minnesota(()), horizon: 2)"#;
    let path = write_scenario(&dir, text);
    let msg = scenario::load(&path).unwrap_err().to_string();
    assert_mentions(&msg, &["nowhere.csv"]);
}

/// A scenario written back to text reads back to the same scenario.
#[test]
fn scenario_text_round_trips() {
    let dir = tempfile::tempdir().unwrap();
    let text = base(
        r#"ordering: ["tbilrate", "realgdp", "realcons", "realinv"], drivers: ["tbilrate"],
        pins: [(series: "realgdp", period: "2010Q1", units: average(2), value: 13000.0, active: false),
               (shock: "tbilrate", period: "2009Q4", value: -1.0)], seed: 9"#,
    );
    let path = write_scenario(&dir, &text);
    let file = scenario::read(&path).unwrap();
    let again = scenario::parse(&scenario::to_text(&file), &path).unwrap();
    assert_eq!(file, again);
}

#[test]
fn overrides_are_range_checked() {
    let dir = tempfile::tempdir().unwrap();
    let path = write_scenario(&dir, &base(""));
    for options in [
        RunOptions {
            draws: Some(0),
            ..Default::default()
        },
        RunOptions {
            paths_per_draw: Some(0),
            ..Default::default()
        },
        RunOptions {
            draws: Some(usize::MAX),
            paths_per_draw: Some(2),
            ..Default::default()
        },
    ] {
        let mut setup = scenario::load(&path).unwrap();
        let msg = run(&mut setup, &options).unwrap_err().to_string();
        assert!(
            msg.contains("draws") || msg.contains("paths_per_draw"),
            "{msg}"
        );
    }
}

#[test]
fn absurd_average_spans_are_refused_not_allocated() {
    let msg = load_err(&base(
        r#"pins: [(series: "realgdp", period: "2010Q1", units: average(4000000000), value: 13000.0)]"#,
    ));
    assert_mentions(&msg, &["pins[0]", "before the first observation"]);
    let text = base("").replace(
        "(name: \"tbilrate\", transform: as_is)",
        "(name: \"tbilrate\", display: average(0))",
    );
    assert_mentions(&load_err(&text), &["series[3].display", "average"]);
}

#[test]
fn file_errors_are_not_repeated() {
    let msg = scenario::load(std::path::Path::new("no-such.ron")).unwrap_err();
    let text = format!("{:#}", anyhow::Error::from(msg));
    assert_eq!(text.matches("No such file").count(), 1, "{text}");
}
