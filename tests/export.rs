//! The briefing pack on the demo: every file is there, the charts decode at their stated
//! size, and the page holds each condition, each check and the caution, is well formed and
//! loads nothing from elsewhere.

use std::path::Path;
use std::process::Command;

use tiltyard::report::charts::{HEIGHT, WIDTH};
use tiltyard::report::pack::{corridor_words, pin_words};
use tiltyard::scenario;

fn demo(name: &str) -> String {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("scenarios-demo")
        .join(name)
        .display()
        .to_string()
}

fn escape(text: &str) -> String {
    text.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// Every element opened is closed, in order (void elements excepted).
fn well_formed(html: &str) -> Result<(), String> {
    const VOID: [&str; 4] = ["meta", "img", "br", "hr"];
    let mut open: Vec<String> = Vec::new();
    let mut rest = html;
    while let Some(start) = rest.find('<') {
        let end = rest[start..].find('>').ok_or("an unclosed tag")? + start;
        let tag = &rest[start + 1..end];
        rest = &rest[end + 1..];
        if tag.starts_with('!') {
            continue;
        }
        let name: String = tag
            .trim_start_matches('/')
            .chars()
            .take_while(|c| c.is_ascii_alphanumeric())
            .collect();
        if tag.starts_with('/') {
            match open.pop() {
                Some(o) if o == name => {}
                other => return Err(format!("</{name}> closes {other:?}")),
            }
        } else if !VOID.contains(&name.as_str()) {
            open.push(name);
        }
    }
    if open.is_empty() {
        Ok(())
    } else {
        Err(format!("left open: {open:?}"))
    }
}

#[test]
fn the_demo_pack_is_complete_and_self_contained() {
    let out = tempfile::tempdir().unwrap();
    let done = Command::new(env!("CARGO_BIN_EXE_tiltyard"))
        .args([
            "export",
            &demo("adverse.ron"),
            "--compare",
            &demo("baseline.ron"),
            "--draws",
            "60",
            "--seed",
            "8",
            "--out",
        ])
        .arg(out.path())
        .output()
        .unwrap();
    assert!(
        done.status.success(),
        "{}\n{}",
        String::from_utf8_lossy(&done.stdout),
        String::from_utf8_lossy(&done.stderr)
    );
    let file = scenario::read(Path::new(&demo("adverse.ron"))).unwrap();
    let dir = out.path();
    for name in [
        "briefing.html",
        "fans.csv",
        "summary.csv",
        "attribution.csv",
        "checks.json",
        "compare.csv",
        "compare-summary.csv",
    ] {
        assert!(dir.join(name).is_file(), "{name} is missing");
    }
    let mut charts = 0;
    for (k, s) in file.series.iter().enumerate() {
        let png = dir
            .join("charts")
            .join(format!("{:02}-{}.png", k + 1, s.name));
        let image = image::open(&png).unwrap_or_else(|e| panic!("{}: {e}", png.display()));
        assert_eq!((image.width(), image.height()), (WIDTH, HEIGHT));
        charts += 1;
    }
    assert_eq!(charts, 10);
    // Where it comes from: one chart per conditioned series.
    for s in [
        "credit_spread",
        "house_prices",
        "unemployment",
        "policy_rate",
    ] {
        let k = file.series.iter().position(|x| x.name == s).unwrap();
        let png = dir
            .join("charts")
            .join(format!("{:02}-{s}-sources.png", k + 1));
        assert_eq!(image::open(&png).unwrap().width(), WIDTH);
    }
    let html = std::fs::read_to_string(dir.join("briefing.html")).unwrap();
    well_formed(&html).unwrap();
    for p in &file.pins {
        assert!(
            html.contains(&escape(&pin_words(&file, p))),
            "{}",
            pin_words(&file, p)
        );
    }
    for c in &file.corridors {
        assert!(
            html.contains(&escape(&corridor_words(&file, c))),
            "{}",
            corridor_words(&file, c)
        );
    }
    let checks: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("checks.json")).unwrap()).unwrap();
    let findings = checks["findings"].as_array().unwrap();
    assert!(!findings.is_empty());
    for f in findings {
        let message = f["message"].as_str().unwrap().trim_end_matches('.');
        assert!(html.contains(&escape(message)), "{message}");
    }
    assert!(html.contains(&escape(tiltyard::report::CAUTION)));
    assert_eq!(html.matches("<img ").count(), 14);
    assert_eq!(
        html.matches("src=\"data:image/png;base64,").count(),
        14,
        "every image inline"
    );
    for remote in ["http://", "https://", "src=\"//", "url(", "@import"] {
        assert!(!html.contains(remote), "the page refers to {remote}");
    }
    assert!(html.contains("Compared with Vellmark baseline"));
    assert!(html.contains("@media print"));
}

#[test]
fn a_clashing_scenario_exports_nothing() {
    let out = tempfile::tempdir().unwrap();
    let done = Command::new(env!("CARGO_BIN_EXE_tiltyard"))
        .args(["export", &demo("clash.ron"), "--draws", "40", "--out"])
        .arg(out.path())
        .output()
        .unwrap();
    assert_eq!(done.status.code(), Some(2));
    assert!(!out.path().join("briefing.html").exists());
}
