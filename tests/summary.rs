//! Summary statistics (peaks, troughs, peak-to-trough falls, cumulative changes, calendar-year
//! averages, and their path-by-path deviations) against an independent numpy computation on
//! committed paths: `tests/fixtures/summary_draws.csv` and `summary.json`, made by
//! `tests/fixtures/make_summary.py` on the statsmodels macrodata history of `macro4.csv`.

mod common;

use common::*;
use tiltyard::report::statistics;
use tiltyard::report::summary::StatKind;
use tiltyard::scenario::{self, Setup};

/// The same arithmetic in another order (sums, interpolation): agreement to rounding.
const SAME: f64 = 1e-10;

fn setup(dir: &tempfile::TempDir) -> Setup {
    let data = fixtures().join("macro4.csv");
    let text = format!(
        r#"(
    name: "summary reference",
    dataset: "{}",
    series: [
        (name: "realgdp", transform: log100, display: year_on_year),
        (name: "realcons", transform: log100, display: level),
        (name: "realinv", transform: log100, display: pct_change),
        (name: "tbilrate", transform: as_is, display: difference),
    ],
    model: minnesota((lags: 2, tightness: auto)),
    horizon: 8,
)"#,
        data.display()
    );
    scenario::load(&write_scenario(dir, &text)).unwrap()
}

/// The fixture's paths of one kind, stacked as the engine stacks them.
fn paths(kind: &str) -> Vec<Vec<f64>> {
    let mut reader = csv::Reader::from_path(fixtures().join("summary_draws.csv")).unwrap();
    let mut out: Vec<Vec<f64>> = Vec::new();
    for row in reader.records() {
        let row = row.unwrap();
        if &row[0] != kind {
            continue;
        }
        let (p, t): (usize, usize) = (row[1].parse().unwrap(), row[2].parse().unwrap());
        if out.len() <= p {
            out.resize(p + 1, vec![0.0; 4 * 8]);
        }
        for i in 0..4 {
            out[p][(t - 1) * 4 + i] = row[3 + i].parse().unwrap();
        }
    }
    out
}

#[test]
fn statistics_match_numpy() {
    let dir = tempfile::tempdir().unwrap();
    let setup = setup(&dir);
    let stats = statistics(&setup, &paths("conditional"), &paths("unconditional"), None);
    let reference = json("summary.json");
    let rows = reference["rows"].as_array().unwrap();
    assert_eq!(stats.len(), rows.len());
    for want in rows {
        let kind = match want["kind"].as_str().unwrap() {
            "conditional" => StatKind::Conditional,
            "unconditional" => StatKind::Unconditional,
            _ => StatKind::Deviation,
        };
        let statistic = want["statistic"].as_str().unwrap();
        let year = want["year"].as_str().unwrap();
        let got = stats
            .iter()
            .find(|s| {
                s.series == want["series"].as_str().unwrap()
                    && s.statistic == statistic
                    && s.kind == kind
                    && (year.is_empty() || s.label == year)
            })
            .unwrap_or_else(|| panic!("missing {want}"));
        let expected: Vec<f64> = std::iter::once(want["mean"].as_f64().unwrap())
            .chain(
                want["quantiles"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .map(|q| q.as_f64().unwrap()),
            )
            .collect();
        let actual: Vec<f64> = std::iter::once(got.mean).chain(got.quantiles).collect();
        for (a, e) in actual.iter().zip(&expected) {
            assert!(
                (a - e).abs() <= SAME * (1.0 + e.abs()),
                "{} {statistic} {year} {:?}: {a} vs {e}",
                got.series,
                got.kind
            );
        }
    }
}

/// The period of a peak is reported with its label, and a scenario against itself deviates
/// by nothing.
#[test]
fn labels_and_a_scenario_against_itself() {
    let dir = tempfile::tempdir().unwrap();
    let setup = setup(&dir);
    let cond = paths("conditional");
    let stats = statistics(&setup, &cond, &cond, None);
    for s in &stats {
        if s.kind == StatKind::Deviation {
            assert!(
                s.quantiles.iter().chain([&s.mean]).all(|v| *v == 0.0),
                "{s:?}"
            );
        }
        if s.statistic.ends_with("_period") && s.kind != StatKind::Deviation {
            let t = s.quantiles[3].round() as i64;
            assert_eq!(s.label, setup.last_period().offset(t).to_string());
        }
    }
    let years: Vec<&str> = stats
        .iter()
        .filter(|s| s.statistic == "year_average" && s.series == "realgdp")
        .map(|s| s.label.as_str())
        .collect();
    assert_eq!(years, ["2009", "2010", "2009", "2010", "2009", "2010"]);
}
