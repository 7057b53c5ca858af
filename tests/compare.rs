//! Comparing scenarios: a scenario against itself differs by nothing; baseline against
//! adverse lists the conditions added, removed and changed, and with the same model and seed
//! its paths pair up; scenarios on other series are refused by name.

use std::path::Path;

use tiltyard::compare::{Change, CompareError, compare, condition_changes};
use tiltyard::run::{RunOptions, RunOutcome, run};
use tiltyard::scenario::{self, Setup};

fn demo(name: &str, edit: impl Fn(&mut scenario::ScenarioFile)) -> (Setup, RunOutcome) {
    let path = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("scenarios-demo")
        .join(name);
    let mut file = scenario::read(&path).unwrap();
    file.draws = 60;
    edit(&mut file);
    let mut setup = Setup::new(file, &path).unwrap();
    let out = run(&mut setup, &RunOptions::default()).unwrap();
    (setup, out)
}

#[test]
fn a_scenario_against_itself_differs_by_nothing() {
    let (a, ra) = demo("adverse.ron", |_| {});
    let (b, rb) = demo("adverse.ron", |_| {});
    let c = compare(&a, &ra, &b, &rb).unwrap();
    assert!(c.paired);
    assert!(c.conditions.is_empty());
    assert_eq!(c.rows.len(), 10 * 12);
    for r in &c.rows {
        assert_eq!(r.first, r.second, "{r:?}");
        assert_eq!(r.median_difference, 0.0);
        assert_eq!(r.difference, Some([0.0; 3]));
    }
    assert!(!c.statistics.is_empty());
    for s in &c.statistics {
        assert!(s.quantiles.iter().all(|v| *v == 0.0), "{s:?}");
    }
}

#[test]
fn baseline_against_adverse() {
    // The same seed: the paths pair up (same posterior draws, same shocks).
    let (a, ra) = demo("baseline.ron", |f| f.seed = 5);
    let (b, rb) = demo("adverse.ron", |f| f.seed = 5);
    let c = compare(&a, &ra, &b, &rb).unwrap();
    assert!(c.paired);
    let count = |f: fn(&Change) -> bool| c.conditions.iter().filter(|x| f(x)).count();
    assert_eq!(count(|x| matches!(x, Change::Removed(_))), 3);
    assert_eq!(count(|x| matches!(x, Change::Added(_))), 5);
    assert_eq!(
        count(|x| matches!(x, Change::Changed { .. })),
        1,
        "the drivers"
    );
    for r in &c.rows {
        assert_eq!(r.median_difference, r.second[1] - r.first[1]);
        let d = r.difference.unwrap();
        assert!(d[0] <= d[1] && d[1] <= d[2], "{r:?}");
    }
    // The adverse pin holds in every path of the second scenario: its 5% and 95% agree.
    let pin = c
        .rows
        .iter()
        .find(|r| r.series == "credit_spread" && r.period == "2026Q3")
        .unwrap();
    assert!((pin.second[0] - 3.5).abs() < 1e-9 && (pin.second[2] - 3.5).abs() < 1e-9);
    // Other seeds: not paired, no bands for the difference.
    let (b, rb) = demo("adverse.ron", |f| f.seed = 6);
    let c = compare(&a, &ra, &b, &rb).unwrap();
    assert!(!c.paired && c.rows.iter().all(|r| r.difference.is_none()));
}

#[test]
fn a_changed_condition_is_named_as_changed() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios-demo/adverse.ron");
    let a = scenario::read(&path).unwrap();
    let mut b = a.clone();
    b.pins[0].value = 4.0;
    b.corridors[2].active = false;
    let changes = condition_changes(&a, &b);
    assert_eq!(changes.len(), 2, "{changes:?}");
    assert!(changes.iter().all(|c| matches!(c, Change::Changed { .. })));
}

#[test]
fn scenarios_on_other_series_are_refused() {
    let (a, ra) = demo("adverse.ron", |_| {});
    let (b, rb) = demo("baseline.ron", |f| {
        f.series.pop();
        f.ordering = None;
    });
    match compare(&a, &ra, &b, &rb) {
        Err(e @ CompareError::OtherSeries { .. }) => assert!(e.to_string().contains("wages")),
        other => panic!("{other:?}"),
    }
}
