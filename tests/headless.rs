//! The headless command end to end on the demo scenarios: file shapes, pins met in the
//! tables, draws written on request, and a clear non-zero exit on bad input.

use std::path::Path;
use std::process::Command;

use tiltyard::scenario;

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
    // The first line names the scenario and the run, with the caution.
    let stamp = lines.next().unwrap();
    assert!(
        stamp.starts_with("# ") && stamp.contains("baseline.ron") && stamp.contains(" · run "),
        "{stamp}"
    );
    assert!(stamp.contains("not predictions or advice"), "{stamp}");
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
    assert!(draws.starts_with(&format!("{stamp}\ndraw,weight,series,period,value\n")));
    assert_eq!(draws.lines().count(), 2 + 80 * 12 * 10);
    // Unweighted: every path's share is 1/80, the same on each of its rows.
    let mut shares = std::collections::BTreeMap::new();
    for line in draws.lines().skip(2) {
        let mut cells = line.split(',');
        let (d, w) = (cells.next().unwrap(), cells.next().unwrap());
        let w: f64 = w.parse().unwrap();
        assert_eq!(*shares.entry(d.to_string()).or_insert(w), w, "{line}");
    }
    assert_eq!(shares.len(), 80);
    assert!(shares.values().all(|&w| (w - 1.0 / 80.0).abs() < 1e-15));
    let run_id = stamp
        .split(" · run ")
        .nth(1)
        .unwrap()
        .split(' ')
        .next()
        .unwrap();
    let about = std::fs::read_to_string(out.path().join("about.txt")).unwrap();
    assert!(about.contains("not predictions or advice") && about.contains(run_id));
    let checks = std::fs::read_to_string(out.path().join("checks.json")).unwrap();
    assert!(
        checks.contains(&format!("\"run\": \"{run_id}\"")),
        "{checks}"
    );
}

/// A folder holds one command's files: a run without `--keep-draws` removes an earlier
/// `draws.csv`, a clashing run removes the earlier fans beside its clash report, and no
/// temporary file is left behind.
#[test]
fn a_run_removes_the_files_of_an_earlier_one() {
    let out = tempfile::tempdir().unwrap();
    let run = |scenario: &str, extra: &[&str]| {
        tiltyard()
            .args(["run", scenario, "--draws", "20", "--out"])
            .arg(out.path())
            .args(extra)
            .output()
            .unwrap()
    };
    assert!(
        run(&demo("baseline.ron"), &["--keep-draws"])
            .status
            .success()
    );
    assert!(out.path().join("draws.csv").exists());
    let done = run(&demo("baseline.ron"), &[]);
    assert!(done.status.success());
    assert!(!out.path().join("draws.csv").exists());
    assert!(String::from_utf8_lossy(&done.stdout).contains("removed    draws.csv"));
    let done = run(&demo("clash.ron"), &[]);
    assert_eq!(
        done.status.code(),
        Some(2),
        "{}",
        String::from_utf8_lossy(&done.stderr)
    );
    let names: Vec<String> = std::fs::read_dir(out.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert_eq!(names, vec!["checks.json".to_string()], "{names:?}");
}

/// Killed at any moment, a run leaves each of its files whole: the earlier run's or its own,
/// never a torn one (each is written to a temporary file and renamed into place); the next
/// run clears the temporary files a killed one left.
#[test]
fn a_killed_run_leaves_whole_files() {
    let out = tempfile::tempdir().unwrap();
    let run = |draws: &str| {
        tiltyard()
            .args([
                "run",
                &demo("adverse.ron"),
                "--keep-draws",
                "--draws",
                draws,
                "--out",
            ])
            .arg(out.path())
            .spawn()
            .unwrap()
    };
    assert!(run("100").wait().unwrap().success());
    // Whole files: the stamp line, the header, and complete records (a whole draws.csv has
    // one row per draw, period and series of either run).
    let whole = |name: &str, fields: usize| {
        let text = std::fs::read_to_string(out.path().join(name)).unwrap();
        let mut lines = text.lines();
        assert!(lines.next().unwrap().starts_with("# "), "{name}: no stamp");
        let rows: Vec<&str> = lines.skip(1).collect();
        assert!(
            rows.iter().all(|r| r.split(',').count() == fields),
            "{name}: a torn record"
        );
        assert!(text.ends_with('\n'), "{name}: cut short");
        rows.len()
    };
    for delay in [150, 300, 450, 600, 750, 900] {
        let mut child = run("3000");
        std::thread::sleep(std::time::Duration::from_millis(delay));
        let _ = child.kill();
        let _ = child.wait();
        assert_eq!(whole("fans.csv", 13), 10 * 12 * 2);
        let draws = whole("draws.csv", 5);
        assert!(
            draws == 100 * 120 || draws == 3000 * 120,
            "draws.csv has {draws} rows"
        );
        whole("summary.csv", 13);
        let checks = std::fs::read_to_string(out.path().join("checks.json")).unwrap();
        serde_json::from_str::<serde_json::Value>(&checks).expect("checks.json whole");
    }
    assert!(run("20").wait().unwrap().success());
    let left: Vec<String> = std::fs::read_dir(out.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains(".tmp"))
        .collect();
    assert!(left.is_empty(), "temporary files left: {left:?}");
}

/// An output folder that cannot be written is refused before any sampling.
#[test]
fn an_unwritable_output_folder_is_refused_first() {
    let dir = tempfile::tempdir().unwrap();
    let blocked = dir.path().join("a-file");
    std::fs::write(&blocked, "not a folder").unwrap();
    let done = tiltyard()
        .args(["run", &demo("adverse.ron"), "--draws", "100000", "--out"])
        .arg(blocked.join("out"))
        .output()
        .unwrap();
    assert!(!done.status.success());
    let err = String::from_utf8_lossy(&done.stderr);
    assert!(err.contains("a-file"), "{err}");
    // 100,000 draws of the demo take minutes: the test would time out had they been made.
    assert!(!String::from_utf8_lossy(&done.stdout).contains("forecast "));
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

/// `check` on the demo: the adverse scenario is strained (exit 0) and its checks.json names the
/// findings; the clashing one exits with status 2, names the pin and the corridor, and `run`
/// refuses to sample it (no fans.csv).
#[test]
fn check_command_reports_strain_and_clash() {
    let out = tempfile::tempdir().unwrap();
    let strained = tiltyard()
        .args(["check", &demo("adverse.ron"), "--out"])
        .arg(out.path())
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&strained.stdout);
    assert!(strained.status.success(), "{stdout}");
    assert!(stdout.contains("strained") && stdout.contains("not predictions or advice"));
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.path().join("checks.json")).unwrap())
            .unwrap();
    assert_eq!(json["status"], "strained");
    assert!(
        json["caution"]
            .as_str()
            .unwrap()
            .contains("not predictions")
    );
    assert!(json["corridors"]["log10_probability"].as_f64().unwrap() < -3.0);
    // The coin in the file solves its defining equation −½ ln(4q(1 − q)) = D (McCulloch
    // 1989) for the divergence in the file: 1 − q = (1 − √(1 − e^{−2D}))/2 ≈ e^{−2D}/4, which
    // rounds q to exactly 1 once D > ½ ln(1/(4·2⁻⁵³)) ≈ 17.7.
    let (q, d) = (
        json["plausibility"]["coin"].as_f64().unwrap(),
        json["plausibility"]["divergence"].as_f64().unwrap(),
    );
    if q < 1.0 {
        assert!(
            (-0.5 * (4.0 * q * (1.0 - q)).ln() - d).abs() < 1e-6 * d,
            "{q} {d}"
        );
    } else {
        assert!(d > 17.7, "coin 1 needs a divergence above 17.7, got {d}");
    }

    let clash = tiltyard()
        .args(["check", &demo("clash.ron"), "--out"])
        .arg(out.path())
        .output()
        .unwrap();
    assert_eq!(clash.status.code(), Some(2));
    // The README shows this report: its lines are what the command prints.
    let readme =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("README.md")).unwrap();
    let shown = readme
        .split("$ tiltyard check scenarios-demo/clash.ron\n")
        .nth(1)
        .and_then(|rest| rest.split("```").next())
        .expect("the README shows the clash report");
    let printed = String::from_utf8_lossy(&clash.stdout);
    for line in shown.lines() {
        assert!(
            printed.contains(line),
            "README line not printed: {line}\n{printed}"
        );
    }
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.path().join("checks.json")).unwrap())
            .unwrap();
    assert_eq!(json["status"], "clashing");
    assert_eq!(json["findings"][0]["kind"], "pin_outside_corridor");
    assert_eq!(
        json["findings"][0]["fields"],
        serde_json::json!(["pins[2]", "corridors[1]"])
    );

    let run_dir = tempfile::tempdir().unwrap();
    let refused = tiltyard()
        .args(["run", &demo("clash.ron"), "--out"])
        .arg(run_dir.path())
        .output()
        .unwrap();
    assert_eq!(refused.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&refused.stdout).contains("nothing sampled"));
    assert!(!run_dir.path().join("fans.csv").exists());
    assert!(run_dir.path().join("checks.json").exists());
}

/// The adverse demo with corridors runs: every corridor met, the summary carries the checks.
#[test]
fn adverse_demo_with_corridors_runs() {
    let out = tempfile::tempdir().unwrap();
    let run = tiltyard()
        .args(["run", &demo("adverse.ron"), "--draws", "100", "--out"])
        .arg(out.path())
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&run.stdout);
    assert!(run.status.success(), "{stdout}");
    assert!(
        stdout.contains("3 corridors met in every path (largest violation 0.0e0)"),
        "{stdout}"
    );
    assert!(stdout.contains("plausibility"));
}

/// The adverse demo at horizon 400 — where factoring the forecast precision used to fail
/// ("not positive definite" in one posterior draw, which stopped the run) — runs, meets its
/// conditions, and writes finite numbers only.
#[test]
fn the_demo_runs_at_a_horizon_of_400() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(demo("adverse.ron"))
        .unwrap()
        .replace("horizon: 12", "horizon: 400")
        .replace("\"economy.csv\"", &format!("{:?}", demo("economy.csv")));
    let path = dir.path().join("long.ron");
    std::fs::write(&path, text).unwrap();
    let out = dir.path().join("out");
    let status = tiltyard()
        .args(["run", path.to_str().unwrap(), "--draws", "24", "--out"])
        .arg(&out)
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&status.stdout);
    assert!(
        status.status.success(),
        "{stdout}\n{}",
        String::from_utf8_lossy(&status.stderr)
    );
    assert!(stdout.contains("met in every path"), "{stdout}");
    let fans = std::fs::read_to_string(out.join("fans.csv")).unwrap();
    let numbers: Vec<f64> = fans
        .lines()
        .skip(2)
        .flat_map(|l| l.split(',').skip(5).map(|v| v.parse::<f64>().unwrap()))
        .collect();
    assert_eq!(numbers.len(), 10 * 400 * 2 * 8);
    assert!(numbers.iter().all(|v| v.is_finite()));
}

/// `compare` writes its three files (the text with the caution) and exits 2 when either
/// scenario clashes.
#[test]
fn compare_writes_its_tables_and_refuses_a_clash() {
    let out = tempfile::tempdir().unwrap();
    let done = tiltyard()
        .args([
            "compare",
            &demo("baseline.ron"),
            &demo("adverse.ron"),
            "--draws",
            "40",
            "--seed",
            "3",
            "--out",
        ])
        .arg(out.path())
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&done.stdout);
    assert!(done.status.success(), "{stdout}");
    assert!(stdout.contains("paired"), "{stdout}");
    let table = std::fs::read_to_string(out.path().join("compare.csv")).unwrap();
    assert_eq!(table.lines().count(), 2 + 10 * 12);
    assert!(out.path().join("compare-summary.csv").exists());
    let text = std::fs::read_to_string(out.path().join("compare.txt")).unwrap();
    assert!(text.contains("added") && text.contains("not predictions or advice"));
    let clash = tiltyard()
        .args([
            "compare",
            &demo("baseline.ron"),
            &demo("clash.ron"),
            "--draws",
            "40",
            "--out",
        ])
        .arg(out.path())
        .output()
        .unwrap();
    assert_eq!(clash.status.code(), Some(2));
}

/// `tiltyard reverse` writes the new scenario where it is told, with two outcomes (`--also`),
/// and the file loads from there (its dataset path follows the move), carrying the outcomes
/// that bind as pins (here unemployment's; reaching it takes bank lending past its threshold
/// already).
#[test]
fn reverse_writes_a_scenario_that_loads_where_it_is_written() {
    let out = tempfile::tempdir().unwrap();
    let written = out.path().join("elsewhere.ron");
    let done = tiltyard()
        .args([
            "reverse",
            &demo("adverse-pins.ron"),
            "--series",
            "bank_lending",
            "--units",
            "year_on_year",
            "--at-most",
            "-10",
            "--from",
            "2026Q1",
            "--to",
            "2028Q4",
            "--also",
            "unemployment level at-least 9.5 2027Q1 2027Q4",
            "--out",
        ])
        .arg(&written)
        .output()
        .unwrap();
    let said = String::from_utf8_lossy(&done.stdout);
    assert!(
        done.status.success(),
        "{said}\n{}",
        String::from_utf8_lossy(&done.stderr)
    );
    assert!(
        said.contains("history ") && said.contains("Shocks it needs"),
        "{said}"
    );
    let before = scenario::read(Path::new(&demo("adverse-pins.ron"))).unwrap();
    let setup = scenario::load(&written).unwrap();
    // Each outcome says where it happens; those the rest already meets add no pin.
    let binding = said
        .lines()
        .filter(|l| l.starts_with("bank_lending (") || l.starts_with("unemployment ("))
        .filter(|l| !l.contains("nothing to add"))
        .count();
    assert!(binding >= 1, "{said}");
    assert_eq!(setup.file.pins.len(), before.pins.len() + binding, "{said}");
    let last = setup.file.pins.last().unwrap();
    assert_eq!(
        (last.series.as_deref(), last.value),
        (Some("unemployment"), 9.5)
    );
    // A malformed --also is refused with the form it takes.
    let bad = tiltyard()
        .args([
            "reverse",
            &demo("adverse-pins.ron"),
            "--series",
            "output",
            "--at-most",
            "0",
        ])
        .args(["--from", "2026Q1", "--also", "unemployment 9"])
        .output()
        .unwrap();
    assert!(!bad.status.success());
    assert!(
        String::from_utf8_lossy(&bad.stderr)
            .contains("SERIES UNITS at-most|at-least VALUE FROM [TO]")
    );
}
