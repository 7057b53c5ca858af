//! The headless command end to end on the demo scenarios: file shapes, pins met in the
//! tables, draws written on request, and a clear non-zero exit on bad input.

use std::path::Path;
use std::process::Command;

fn tiltyard() -> Command {
    Command::new(env!("CARGO_BIN_EXE_tiltyard"))
}

fn demo(name: &str) -> String {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("scenarios-demo")
        .join(name)
        .display()
        .to_string()
}

#[test]
fn run_writes_fans_and_draws_for_the_demo() {
    let out = tempfile::tempdir().unwrap();
    let status = tiltyard()
        .args([
            "run",
            &demo("baseline.ron"),
            "--draws",
            "80",
            "--threads",
            "2",
            "--keep-draws",
            "--out",
        ])
        .arg(out.path())
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&status.stdout);
    assert!(
        status.status.success(),
        "{stdout}\n{}",
        String::from_utf8_lossy(&status.stderr)
    );
    assert!(
        stdout.contains("Minnesota prior") && stdout.contains("not predictions or advice"),
        "{stdout}"
    );
    let fans = std::fs::read_to_string(out.path().join("fans.csv")).unwrap();
    let mut lines = fans.lines();
    assert_eq!(
        lines.next().unwrap(),
        "series,period,horizon,kind,units,mean,q05,q16,q25,q50,q75,q84,q95"
    );
    let rows: Vec<Vec<String>> = lines
        .map(|l| l.split(',').map(String::from).collect())
        .collect();
    assert_eq!(rows.len(), 10 * 12 * 2, "10 series × 12 periods × 2 kinds");
    // The demo pins the policy rate at 2026Q4: every conditional quantile sits on the pin.
    let scenario = std::fs::read_to_string(demo("baseline.ron")).unwrap();
    let pin = scenario
        .lines()
        .find(|l| l.contains("\"policy_rate\", period: \"2026Q4\""))
        .and_then(|l| l.split("value: ").nth(1))
        .and_then(|v| {
            v.trim_end_matches(&['(', ')', ',', ' '][..])
                .parse::<f64>()
                .ok()
        })
        .expect("the demo pins policy_rate at 2026Q4");
    let row = rows
        .iter()
        .find(|r| r[0] == "policy_rate" && r[1] == "2026Q4" && r[3] == "conditional")
        .unwrap();
    for q in &row[5..] {
        let q: f64 = q.parse().unwrap();
        assert!((q - pin).abs() < 1e-9 * (1.0 + pin.abs()), "{row:?}");
    }
    let draws = std::fs::read_to_string(out.path().join("draws.csv")).unwrap();
    assert!(draws.starts_with("draw,series,period,value\n"));
    assert_eq!(draws.lines().count(), 1 + 80 * 12 * 10);
    let about = std::fs::read_to_string(out.path().join("about.txt")).unwrap();
    assert!(about.contains("not predictions or advice"));
}

#[test]
fn bad_scenario_exits_non_zero_with_the_reason() {
    let dir = tempfile::tempdir().unwrap();
    let bad = dir.path().join("bad.ron");
    std::fs::write(
        &bad,
        "(name: \"x\", dataset: \"missing.csv\", series: [], model: flat((lags: 1)), horizon: 4)",
    )
    .unwrap();
    let out = tiltyard().args(["run"]).arg(&bad).output().unwrap();
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("missing.csv"), "{err}");
    let out = tiltyard()
        .args(["run", "no-such-scenario.ron"])
        .output()
        .unwrap();
    assert!(!out.status.success());
    assert!(String::from_utf8_lossy(&out.stderr).contains("no-such-scenario.ron"));
}

/// The example in docs/scenario-format.md is a working scenario on the demo data.
#[test]
fn documented_example_runs() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let doc = std::fs::read_to_string(root.join("docs/scenario-format.md")).unwrap();
    let example: String = doc
        .split("```ron\n")
        .nth(1)
        .and_then(|rest| rest.split("```").next())
        .expect("a ron block")
        .into();
    let dir = tempfile::tempdir().unwrap();
    let text = example.replace(
        "\"economy.csv\"",
        &format!(
            "{:?}",
            root.join("scenarios-demo/economy.csv")
                .display()
                .to_string()
        ),
    );
    let path = dir.path().join("example.ron");
    std::fs::write(&path, text).unwrap();
    let out = tiltyard()
        .args(["run", "--draws", "20", "--out"])
        .arg(dir.path().join("out"))
        .arg(&path)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}
