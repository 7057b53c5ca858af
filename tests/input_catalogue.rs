//! The bad-input catalogue: broken data files, scenario files and command lines, each with
//! the place its message must name (file and line, field, series or condition) and what it
//! must say. Every case starts from the demo (its data and its baseline scenario) and breaks
//! one thing, so that the message is the only finding. Messages are also kept short: none may
//! echo a huge cell or header.

use std::path::{Path, PathBuf};
use std::process::Command;

use tiltyard::report::check_text;
use tiltyard::run::check;
use tiltyard::scenario;

fn demo(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("scenarios-demo")
        .join(name)
}

fn demo_csv() -> String {
    std::fs::read_to_string(demo("economy.csv")).unwrap()
}

/// The baseline demo with few draws (the checks re-check the first draws).
fn demo_scenario() -> String {
    std::fs::read_to_string(demo("baseline.ron"))
        .unwrap()
        .replace("draws: 1000", "draws: 20")
}

/// Replace exactly one occurrence (so that a case cannot silently break nothing).
fn swap(text: &str, from: &str, to: &str) -> String {
    assert_eq!(text.matches(from).count(), 1, "{from:?} must occur once");
    text.replacen(from, to, 1)
}

/// The message for a scenario (text) on a dataset (bytes): the load error, or the check
/// report when the scenario loads but clashes; panics when neither finds anything.
fn message(scenario_text: &str, csv: &[u8]) -> String {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("economy.csv"), csv).unwrap();
    let path = dir.path().join("case.ron");
    std::fs::write(&path, scenario_text).unwrap();
    let setup = match scenario::load(&path) {
        Err(e) => return e.to_string(),
        Ok(setup) => setup,
    };
    match check(&setup) {
        Err(e) => e.to_string(),
        Ok(report) if report.clashes() => check_text(&report),
        Ok(_) => panic!("no finding for:\n{scenario_text}"),
    }
}

fn assert_says(case: &str, msg: &str, parts: &[&str]) {
    for p in parts {
        assert!(
            msg.contains(p),
            "{case}: message {msg:?} should mention {p:?}"
        );
    }
    assert!(
        msg.len() < 2_000,
        "{case}: message of {} bytes is too long",
        msg.len()
    );
}

/// The demo CSV with line `line` (1-based) replaced by `with`.
fn csv_line(line: usize, with: &str) -> Vec<u8> {
    let text = demo_csv();
    let mut lines: Vec<&str> = text.lines().collect();
    lines[line - 1] = with;
    (lines.join("\n") + "\n").into_bytes()
}

/// The demo CSV with the cell of `series` on line `line` replaced.
fn csv_cell(line: usize, series: &str, with: &str) -> Vec<u8> {
    let text = demo_csv();
    let column = text
        .lines()
        .next()
        .unwrap()
        .split(',')
        .position(|c| c == series)
        .unwrap();
    let row = text.lines().nth(line - 1).unwrap();
    let mut cells: Vec<&str> = row.split(',').collect();
    cells[column] = with;
    csv_line(line, &cells.join(","))
}

#[test]
fn broken_data_files_name_file_line_and_column() {
    let text = demo_csv();
    let lines: Vec<&str> = text.lines().collect();
    let header = lines[0];
    let semicolons = text.replace(',', ";");
    let tabs = text.replace(',', "\t");
    let swapped = {
        let mut l = lines.clone();
        l.swap(3, 4);
        l.join("\n") + "\n"
    };
    let gap = {
        let mut l = lines.clone();
        l.remove(5);
        l.join("\n") + "\n"
    };
    let repeated = {
        let mut l = lines.clone();
        l.insert(4, lines[3]);
        l.join("\n") + "\n"
    };
    let duplicate_name = header.replacen("wages", "output", 1);
    let empty_name = header.replacen(",wages", ",", 1);
    let huge = "9".repeat(5_000_000);
    let wide_header = format!(
        "date,output,{},output",
        (0..200_000)
            .map(|i| format!("s{i}"))
            .collect::<Vec<_>>()
            .join(",")
    );
    let mut non_utf8 = text.clone().into_bytes();
    let at = text.find("1990Q3").unwrap();
    non_utf8[at] = 0xff;
    let cases: Vec<(&str, Vec<u8>, Vec<&str>)> = vec![
        ("empty file", Vec::new(), vec!["economy.csv", "is empty"]),
        (
            "header only a date",
            b"date\n1990Q1\n".to_vec(),
            vec!["economy.csv, line 1", "only the date column"],
        ),
        (
            "semicolon separators",
            semicolons.into_bytes(),
            vec!["line 1", "semicolons (;)"],
        ),
        ("tab separators", tabs.into_bytes(), vec!["line 1", "tabs"]),
        (
            "two columns with one name",
            csv_line(1, &duplicate_name),
            vec!["line 1", "\"output\"", "columns 2 and 11"],
        ),
        (
            "an empty series name",
            csv_line(1, &empty_name),
            vec!["line 1", "column 11", "name is empty"],
        ),
        (
            "text in a number cell",
            csv_cell(7, "unemployment", "n/a?"),
            vec![
                "line 7",
                "column 4 (unemployment)",
                "\"n/a?\" is not a number",
            ],
        ),
        (
            "a number beyond f64",
            csv_cell(9, "policy_rate", "1e999"),
            vec!["line 9", "column 5 (policy_rate)", "too large"],
        ),
        (
            "a 5 MB cell",
            csv_cell(9, "policy_rate", &huge),
            vec!["line 9", "column 5", "(5000000 characters)"],
        ),
        (
            "a quarter that does not exist",
            csv_line(4, &lines[3].replacen("1990Q3", "1990Q5", 1)),
            vec!["line 4", "1990Q5", "not a quarter"],
        ),
        (
            "two rows swapped",
            swapped.into_bytes(),
            vec!["line 4", "out of order", "sort the rows"],
        ),
        (
            "a quarter missing",
            gap.into_bytes(),
            vec!["line 6", "1991Q1 is missing"],
        ),
        (
            "a quarter twice",
            repeated.into_bytes(),
            vec!["line 5", "appears again", "line 4"],
        ),
        (
            "dates in two styles",
            csv_line(6, &lines[5].replacen("1991Q1", "1991-01-01", 1)),
            vec!["line 6", "one date style"],
        ),
        (
            "a byte that is not UTF-8",
            non_utf8,
            vec!["economy.csv, line 4", "UTF-8"],
        ),
        (
            "a row with a cell too few",
            csv_line(8, &lines[7][..lines[7].rfind(',').unwrap()]),
            vec!["economy.csv", "line 8"],
        ),
        (
            "a log series at zero",
            csv_cell(10, "wages", "0"),
            vec!["wages", "line 10"],
        ),
        (
            "200,000 columns, one name twice",
            csv_line(1, &wide_header),
            vec!["line 1", "\"output\"", "columns 2 and 200003"],
        ),
    ];
    for (case, csv, parts) in cases {
        let msg = message(&demo_scenario(), &csv);
        assert_says(case, &msg, &parts);
    }
}

#[test]
fn broken_scenario_files_name_the_field_or_line() {
    let base = demo_scenario();
    let csv = demo_csv().into_bytes();
    let pins = "    pins: [\n";
    let with_pin = |pin: &str| swap(&base, pins, &format!("{pins}        {pin},\n"));
    let with = |field: &str| {
        swap(
            &base,
            "    seed: 2026,\n",
            &format!("    seed: 2026,\n    {field},\n"),
        )
    };
    let model = "model: minnesota((lags: 2, tightness: auto, sum_of_coefficients: 1.0, single_unit_root: 1.0)),";
    let with_model = |m: &str| swap(&base, model, &format!("model: {m},"));
    let cases: Vec<(&str, String, Vec<&str>)> = vec![
        (
            "dataset not found",
            swap(&base, "\"economy.csv\"", "\"nowhere.csv\""),
            vec!["dataset:", "nowhere.csv", "scenario's own folder"],
        ),
        (
            "a string left open",
            swap(
                &base,
                "name: \"Vellmark baseline\",",
                "name: \"Vellmark baseline,",
            ),
            vec!["case.ron:4:", "line 3 has a string that is not closed"],
        ),
        (
            "an unknown field",
            with("colour: \"red\""),
            vec!["case.ron:", "colour"],
        ),
        (
            "an unknown series in the list",
            swap(&base, "(name: \"wages\",", "(name: \"salaries\","),
            vec!["series[9]", "salaries", "wages"],
        ),
        (
            "a series listed twice",
            swap(
                &base,
                "(name: \"wages\", transform: log100, display: year_on_year, label: \"Wages\", unit: \"index\"),",
                "(name: \"wages\", transform: log100, display: year_on_year, label: \"Wages\", unit: \"index\"),\n        (name: \"wages\"),",
            ),
            vec!["series", "wages", "twice"],
        ),
        (
            "a pin on an unknown series",
            with_pin("(series: \"gdp\", period: \"2026Q2\", value: 1.0)"),
            vec!["pins[0]", "gdp"],
        ),
        (
            "a pin beyond the horizon",
            with_pin("(series: \"wages\", period: \"2035Q1\", value: 1.0)"),
            vec!["pins[0]", "2035Q1"],
        ),
        (
            "a pin in the past",
            with_pin("(series: \"wages\", period: \"2020Q1\", value: 1.0)"),
            vec!["pins[0]", "2020Q1"],
        ),
        (
            "a pin on an average reaching before the data",
            with_pin(
                "(series: \"unemployment\", period: \"2026Q1\", units: average(18446744073709551615), value: 5.0)",
            ),
            vec!["pins[0]", "before the first observation"],
        ),
        (
            "two pins on one value",
            with_pin("(series: \"policy_rate\", period: \"2026Q4\", value: 9.0)"),
            vec!["clash", "Policy rate", "2026Q4", "pins[0]"],
        ),
        (
            "an empty corridor",
            swap(
                &base,
                "    pins: [\n",
                "    corridors: [(series: \"unemployment\", from: \"2026Q2\", to: \"2026Q3\", lower: 6.0, upper: 5.0)],\n    pins: [\n",
            ),
            vec!["corridors[0]", "Unemployment rate"],
        ),
        (
            "lags at the integer limit",
            swap(&base, "lags: 2,", "lags: 18446744073709551615,"),
            vec!["18446744073709551615 lags", "1990Q1–2025Q4"],
        ),
        (
            "no lags",
            swap(&base, "lags: 2,", "lags: 0,"),
            vec!["lags", "at least 1"],
        ),
        (
            "a display average longer than the data",
            swap(
                &base,
                "(name: \"output\", transform: log100, display: year_on_year,",
                "(name: \"output\", transform: log100, display: average(18446744073709551615),",
            ),
            vec!["series[0].display", "from 1 to 144"],
        ),
        (
            "no horizon",
            swap(&base, "horizon: 12,", "horizon: 0,"),
            vec!["horizon"],
        ),
        (
            "a horizon of a million",
            swap(&base, "horizon: 12,", "horizon: 1000000,"),
            vec!["horizon", "between 1 and 400"],
        ),
        (
            "no draws",
            swap(&base, "draws: 20,", "draws: 0,"),
            vec!["draws"],
        ),
        (
            "a negative probability threshold",
            with("checks: (corridor_probability: -1.0)"),
            vec!["checks.corridor_probability", "-1"],
        ),
        (
            "a threshold that is not a number",
            with("checks: (pin_z: NaN)"),
            vec!["checks.pin_z", "NaN"],
        ),
        (
            "an acceptance share above one",
            with("checks: (min_acceptance: 2.0)"),
            vec!["checks.min_acceptance"],
        ),
        (
            "a pin tail of zero",
            with("checks: (pin_tail: 0.0)"),
            vec!["checks.pin_tail"],
        ),
        (
            "no blame budget",
            with("checks: (blame_budget: 0)"),
            vec!["checks.blame_budget"],
        ),
        (
            "a failed share above one",
            with("checks: (max_failed_share: 1.5)"),
            vec!["checks.max_failed_share", "1.5"],
        ),
        (
            "a stationarity bound that is not a number",
            with("largest_root: below(NaN)"),
            vec!["largest_root"],
        ),
        (
            "a lag decay of 1e308",
            with_model("minnesota((lags: 2, lag_decay: 1e308))"),
            vec!["lag_decay", "from 0 to 10"],
        ),
        (
            "a negative tightness",
            with_model("minnesota((lags: 2, tightness: fixed(-1.0)))"),
            vec!["tightness"],
        ),
        (
            "a flat prior one row short",
            // k = 1 + 2·10 = 21, n = 10: 33 usable rows needed; 2017Q3–2025Q4 is 34
            // periods, 2 of them presample: 32.
            with_model("flat((lags: 2, window: (from: \"2017Q3\", to: \"2025Q4\")))"),
            vec!["k + n + 2", "have 32, need 33"],
        ),
        (
            "a shock ordering naming a series twice",
            swap(
                &base,
                "\"output\", \"consumer_prices\",",
                "\"output\", \"output\",",
            ),
            vec!["ordering[1]", "twice"],
        ),
    ];
    for (case, text, parts) in cases {
        let msg = message(&text, &csv);
        assert_says(case, &msg, &parts);
    }
}

/// The flat prior's rule, both sides of the boundary: with `k + n + 2` usable rows the
/// checks run; with one fewer the scenario is refused (the case above).
#[test]
fn the_flat_prior_runs_at_its_documented_minimum() {
    let base = demo_scenario();
    let model = "model: minnesota((lags: 2, tightness: auto, sum_of_coefficients: 1.0, single_unit_root: 1.0)),";
    // 2017Q2–2025Q4 is 35 periods: 2 presample rows and 33 usable.
    let text = swap(
        &base,
        model,
        "model: flat((lags: 2, window: (from: \"2017Q2\", to: \"2025Q4\"))),",
    );
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("economy.csv"), demo_csv()).unwrap();
    let path = dir.path().join("case.ron");
    std::fs::write(&path, text).unwrap();
    let setup = scenario::load(&path).unwrap();
    let report = check(&setup).unwrap();
    assert!(!report.clashes(), "{}", check_text(&report));
}

fn tiltyard() -> Command {
    Command::new(env!("CARGO_BIN_EXE_tiltyard"))
}

#[test]
fn broken_command_lines_name_the_argument() {
    let dir = tempfile::tempdir().unwrap();
    let blocked = dir.path().join("a-file");
    std::fs::write(&blocked, "").unwrap();
    let baseline = demo("baseline.ron").display().to_string();
    let cases: Vec<(&str, Vec<String>, Vec<&str>)> = vec![
        (
            "a scenario that does not exist",
            vec!["run".into(), "no-such.ron".into()],
            vec!["no-such.ron"],
        ),
        (
            "an output folder inside a file",
            vec![
                "run".into(),
                baseline.clone(),
                "--out".into(),
                blocked.join("out").display().to_string(),
            ],
            vec!["a-file"],
        ),
        (
            "zero draws",
            vec!["run".into(), baseline.clone(), "--draws".into(), "0".into()],
            vec!["draws"],
        ),
        (
            "draws that are not a number",
            vec![
                "run".into(),
                baseline.clone(),
                "--draws".into(),
                "many".into(),
            ],
            vec!["--draws", "many"],
        ),
        (
            "an unknown engine",
            vec![
                "run".into(),
                baseline.clone(),
                "--engine".into(),
                "fast".into(),
            ],
            vec!["--engine", "fast"],
        ),
    ];
    for (case, args, parts) in cases {
        let out = tiltyard()
            .args(&args)
            .current_dir(dir.path())
            .output()
            .unwrap();
        assert!(!out.status.success(), "{case}: should fail");
        let err = String::from_utf8_lossy(&out.stderr);
        assert_says(case, &err, &parts);
    }
}

/// `--threads` beyond the machine's cores is capped, with a note, and the run completes.
#[test]
fn too_many_threads_are_capped() {
    let out = tempfile::tempdir().unwrap();
    let done = tiltyard()
        .args([
            "run",
            &demo("baseline.ron").display().to_string(),
            "--draws",
            "20",
            "--threads",
            "100000",
            "--out",
        ])
        .arg(out.path())
        .output()
        .unwrap();
    assert!(done.status.success());
    let err = String::from_utf8_lossy(&done.stderr);
    assert!(
        err.contains("--threads 100000") && err.contains("cores"),
        "{err}"
    );
}

/// Scale: the model is equivariant to the units of a series (the Minnesota prior scales each
/// coefficient by the series' own residual scales, the dummies by their own means, and the
/// marginal likelihood moves by a constant in the tightness), so a series recorded a billion
/// times smaller, and another a trillion times larger, must give the same fans in their own
/// units — neither "constant" nor "collinear". Tolerance: the tightness is found to 1e-7 in
/// ln λ (`LN_LAMBDA_TOL`), which moves every quantile by about 1e-7 of its band; 1e-5 of the
/// band leaves a hundredfold margin.
#[test]
fn series_far_from_unit_scale_give_the_same_fans_in_their_units() {
    let factors = [("unemployment", 1e-9), ("credit_spread", 1e12)];
    let text = demo_csv();
    let header: Vec<&str> = text.lines().next().unwrap().split(',').collect();
    let scaled: String = text
        .lines()
        .enumerate()
        .map(|(k, line)| {
            if k == 0 {
                return line.to_string();
            }
            line.split(',')
                .enumerate()
                .map(
                    |(c, cell)| match factors.iter().find(|(s, _)| *s == header[c]) {
                        Some((_, f)) => format!("{:e}", cell.parse::<f64>().unwrap() * f),
                        None => cell.to_string(),
                    },
                )
                .collect::<Vec<_>>()
                .join(",")
        })
        .collect::<Vec<_>>()
        .join("\n");
    let fans = |csv: &str| {
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(dir.path().join("economy.csv"), csv).unwrap();
        let path = dir.path().join("case.ron");
        std::fs::write(&path, demo_scenario()).unwrap();
        let mut setup = scenario::load(&path).unwrap();
        tiltyard::run::run(
            &mut setup,
            &tiltyard::run::RunOptions {
                draws: Some(100),
                ..Default::default()
            },
        )
        .unwrap()
        .fans
    };
    let (plain, rescaled) = (fans(&text), fans(&scaled));
    assert_eq!(plain.len(), rescaled.len());
    for (a, b) in plain.iter().zip(&rescaled) {
        let f = factors
            .iter()
            .find(|(s, _)| *s == a.series)
            .map_or(1.0, |(_, f)| *f);
        let band = a.quantiles[6] - a.quantiles[0];
        for (x, y) in a.quantiles.iter().zip(&b.quantiles) {
            // Pinned values (a band of width 0) agree to rounding: the engine meets a pin
            // to a few units in the last place, not bit for bit.
            assert!(
                (y / f - x).abs() <= 1e-5 * band + 1e-13 * (1.0 + x.abs()),
                "{} {}: {x} against {} (band {band})",
                a.series,
                a.period,
                y / f
            );
        }
    }
}

/// Values that overflow: a pin of 1e308 % on a year earlier, and explosive fixed coefficients
/// (1.5·I) at horizon 40, stop the run with the cause and what to change; a pin of 1e5 % runs
/// (it is reported as strained) and every number written is finite.
#[test]
fn overflow_is_refused_with_its_cause_and_never_written() {
    let run = |text: &str| {
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(dir.path().join("economy.csv"), demo_csv()).unwrap();
        let path = dir.path().join("case.ron");
        std::fs::write(&path, text).unwrap();
        let mut setup = scenario::load(&path).unwrap();
        tiltyard::run::run(
            &mut setup,
            &tiltyard::run::RunOptions {
                draws: Some(40),
                ..Default::default()
            },
        )
    };
    let pin = "(series: \"output\", period: \"2026Q4\", units: year_on_year, value: 1.5)";
    let huge = swap(
        &demo_scenario(),
        pin,
        "(series: \"output\", period: \"2026Q4\", units: year_on_year, value: 1e308)",
    );
    let msg = run(&huge).expect_err("refused").to_string();
    assert_says(
        "a pin of 1e308",
        &msg,
        &["overflow", "conditions' values and units"],
    );
    let fixed = r#"(
    name: "explosive",
    dataset: "economy.csv",
    series: [(name: "output", transform: log100, display: year_on_year), (name: "unemployment")],
    model: fixed((intercept: [0.0, 0.0], lags: [[[1.5, 0.0], [0.0, 1.5]]], sigma: [[1.0, 0.0], [0.0, 1.0]])),
    horizon: 40,
    pins: [(series: "unemployment", period: "2026Q2", value: 8.0)],
)"#;
    let msg = run(fixed).expect_err("refused").to_string();
    assert_says(
        "fixed 1.5·I",
        &msg,
        &["overflow", "explosive", "largest_root"],
    );
    let large = swap(
        &demo_scenario(),
        pin,
        "(series: \"output\", period: \"2026Q4\", units: year_on_year, value: 1e5)",
    );
    let out = run(&large).expect("runs");
    assert!(
        out.checks
            .findings
            .iter()
            .any(|f| f.message.contains("100000"))
    );
    assert!(
        out.fans
            .iter()
            .all(|r| r.mean.is_finite() && r.quantiles.iter().all(|q| q.is_finite()))
    );
    assert!(
        out.summary
            .iter()
            .all(|s| s.mean.is_finite() && s.quantiles.iter().all(|q| q.is_finite()))
    );
}
