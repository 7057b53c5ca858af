//! The scenario window, driven headless with egui_kittest: opening a scenario from a path
//! shows its series; a drag on a chart moves a pin (and undo restores it); a drag across
//! future periods draws a corridor that appears in the table and reaches the engine; Delete
//! removes it; corridor edges and ends move; the shocks view takes conditions on shocks; a
//! clashing scenario shows its clash; unsaved edits come back after a crash; the worker
//! cancels stale jobs and survives a panic. No file dialog is ever opened.
#![cfg(feature = "gui")]

mod common;

use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::atomic::AtomicBool;
use std::sync::mpsc::channel;
use std::time::{Duration, Instant};

use egui::{Modifiers, Pos2, Vec2};
use egui_kittest::Harness;
use egui_kittest::kittest::Queryable;
use egui_plot::PlotPoint;
use tiltyard::app::TiltyardApp;
use tiltyard::app::files::{PathPicker, Pick};
use tiltyard::app::worker::{self, EngineState, Job, Message, Subject};
use tiltyard::scenario;

/// Tests never open a dialog.
struct NoDialogs;

impl PathPicker for NoDialogs {
    fn open(&self, _: &Path) -> Pick {
        panic!("a test opened a file dialog")
    }
    fn save(&self, _: &Path, _: &str) -> Pick {
        panic!("a test opened a file dialog")
    }
    fn dataset(&self, _: &Path) -> Pick {
        panic!("a test opened a file dialog")
    }
}

/// Answers every save dialog with one path (and records that it was asked).
struct SaveTo(PathBuf, Arc<AtomicBool>);

impl PathPicker for SaveTo {
    fn open(&self, _: &Path) -> Pick {
        Pick::Cancelled
    }
    fn save(&self, _: &Path, _: &str) -> Pick {
        self.1.store(true, std::sync::atomic::Ordering::SeqCst);
        Pick::Path(self.0.clone())
    }
    fn dataset(&self, _: &Path) -> Pick {
        Pick::Cancelled
    }
}

/// A desktop without a file-dialog service: every dialog fails to show.
struct NoDialogService;

impl PathPicker for NoDialogService {
    fn open(&self, _: &Path) -> Pick {
        Pick::Unavailable
    }
    fn save(&self, _: &Path, _: &str) -> Pick {
        Pick::Unavailable
    }
    fn dataset(&self, _: &Path) -> Pick {
        Pick::Unavailable
    }
}

/// The adverse demo, copied into a temporary folder (so recovery files land there) with the
/// dataset by absolute path, and fewer draws to keep the tests quick.
fn demo_copy(dir: &tempfile::TempDir) -> PathBuf {
    demo_file(dir, "adverse.ron", |_| {})
}

/// The demo scenario `name`, copied likewise after `edit`.
fn demo_file(
    dir: &tempfile::TempDir,
    name: &str,
    edit: impl FnOnce(&mut scenario::ScenarioFile),
) -> PathBuf {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios-demo");
    let mut file = scenario::read(&root.join(name)).unwrap();
    file.dataset = root.join("economy.csv").display().to_string();
    file.draws = 100;
    edit(&mut file);
    let path = dir.path().join(name);
    std::fs::write(&path, scenario::to_text(&file)).unwrap();
    path
}

fn harness(path: &Path) -> Harness<'static, TiltyardApp> {
    harness_with(path, Arc::new(NoDialogs))
}

fn harness_with(path: &Path, picker: Arc<dyn PathPicker>) -> Harness<'static, TiltyardApp> {
    let app = TiltyardApp::new(path, picker, Arc::new(|| {}));
    Harness::builder()
        .with_size(Vec2::new(1500.0, 950.0))
        .build_ui_state(|ui, app: &mut TiltyardApp| app.ui(ui), app)
}

/// Step the window until the engine has finished the newest job.
fn settle(h: &mut Harness<'static, TiltyardApp>) {
    let start = Instant::now();
    loop {
        h.step();
        let app = h.state();
        if !app.busy() && app.session.results.is_some() {
            break;
        }
        assert!(
            start.elapsed() < Duration::from_secs(120),
            "the engine did not finish: {:?}",
            app.session.state
        );
        std::thread::sleep(Duration::from_millis(20));
    }
    h.run_steps(2);
}

/// Screen position of a value on series chart `i`.
fn screen(h: &Harness<'static, TiltyardApp>, i: usize, x: f64, y: f64) -> Pos2 {
    screen_of(h, Subject::Series, i, x, y)
}

fn screen_of(h: &Harness<'static, TiltyardApp>, s: Subject, i: usize, x: f64, y: f64) -> Pos2 {
    let t = h.state().view.charts[&(s, i)]
        .transform
        .expect("the chart was drawn");
    t.position_from_point(&PlotPoint::new(x, y))
}

/// Press at `from`, move in steps to `to`, release.
fn drag(h: &mut Harness<'static, TiltyardApp>, from: Pos2, to: Pos2) {
    drag_watching(h, from, to, |_| {});
}

/// A drag, with `watch` called after each frame on the way and after the drop.
fn drag_watching(
    h: &mut Harness<'static, TiltyardApp>,
    from: Pos2,
    to: Pos2,
    mut watch: impl FnMut(&Harness<'static, TiltyardApp>),
) {
    h.hover_at(from);
    h.step();
    h.drag_at(from);
    h.step();
    for k in 1..=5 {
        h.hover_at(from + (to - from) * (k as f32 / 5.0));
        h.step();
        watch(h);
    }
    h.drop_at(to);
    h.step();
    watch(h);
}

fn horizon(h: &Harness<'static, TiltyardApp>, label: &str) -> f64 {
    let r = h.state().session.results.clone().unwrap();
    tiltyard::app::chart::horizon(&r, label).unwrap() as f64
}

#[test]
fn opening_a_scenario_shows_its_series_and_fans() {
    let dir = tempfile::tempdir().unwrap();
    let mut h = harness(&demo_copy(&dir));
    settle(&mut h);
    // Series by the labels the scenario file gives them, units in words, not identifiers.
    for name in ["Real output", "House prices", "Corporate credit spread"] {
        assert!(h.query_all_by_label(name).count() >= 1, "{name} is shown");
    }
    assert!(h.query_all_by_label("% on a year earlier").count() >= 1);
    for raw in ["house_prices", "year_on_year"] {
        assert!(h.query_by_label(raw).is_none(), "{raw} is not shown");
    }
    let app = h.state();
    let r = app.session.results.as_ref().unwrap();
    assert_eq!(r.series.len(), 10);
    assert!(matches!(
        app.session.state,
        EngineState::Done { draws: 100, .. }
    ));
    assert!(!r.preview);
    // The checks are shown, and the caution.
    assert!(app.session.checks.is_some());
    assert!(
        h.query_by_label_contains("not predictions or advice")
            .is_some()
    );
    // Opening is not an edit: no "first fans … after the edit" yet; the file is named.
    assert!(h.query_by_label_contains("after the edit").is_none());
    assert!(h.query_by_label("saved").is_some());
    assert!(h.query_by_label_contains("/adverse.ron").is_some());
}

#[test]
fn dragging_a_pin_changes_its_value_and_undo_restores_it() {
    let dir = tempfile::tempdir().unwrap();
    let mut h = harness(&demo_copy(&dir));
    settle(&mut h);
    // pins[1]: house_prices (series 5) year on year at 2027Q2 = −10, drawn in its chart.
    let before = h.state().doc.file.pins[1].value;
    let x = horizon(&h, "2027Q2");
    let from = screen(&h, 5, x, before);
    let to = screen(&h, 5, x, before + 4.0);
    drag(&mut h, from, to);
    let after = h.state().doc.file.pins[1].value;
    assert!((after - (before + 4.0)).abs() < 0.5, "pin moved to {after}");
    assert!(h.query_by_label("unsaved changes").is_some());
    settle(&mut h);
    assert!(h.query_by_label_contains("after the edit").is_some());
    // The engine got the new value.
    assert_eq!(h.state().sent().unwrap().pins[1].value, after);
    // One drag is one undo step.
    h.key_press_modifiers(Modifiers::COMMAND, egui::Key::Z);
    h.step();
    assert_eq!(h.state().doc.file.pins[1].value, before);
    h.key_press_modifiers(Modifiers::COMMAND | Modifiers::SHIFT, egui::Key::Z);
    h.step();
    assert_eq!(h.state().doc.file.pins[1].value, after);
}

#[test]
fn a_drag_across_future_periods_draws_a_corridor_and_delete_removes_it() {
    let dir = tempfile::tempdir().unwrap();
    let mut h = harness(&demo_copy(&dir));
    settle(&mut h);
    let count = h.state().doc.file.corridors.len();
    // Output (series 0, year on year): from 2026Q3 to 2027Q1, between 0 and 2 percent.
    let (x0, x1) = (horizon(&h, "2026Q3"), horizon(&h, "2027Q1"));
    let from = screen(&h, 0, x0, 0.0);
    let to = screen(&h, 0, x1, 2.0);
    drag(&mut h, from, to);
    let app = h.state();
    assert_eq!(app.doc.file.corridors.len(), count + 1);
    let c = app.doc.file.corridors.last().unwrap().clone();
    assert_eq!(c.series.as_deref(), Some("output"));
    assert_eq!((c.from.as_str(), c.to.as_str()), ("2026Q3", "2027Q1"));
    assert_eq!(c.units, scenario::Units::YearOnYear);
    // It reaches the engine, and the table shows it (its remove button is there).
    assert_eq!(app.sent().unwrap().corridors.last(), Some(&c));
    assert_eq!(
        h.query_all_by_label("remove").count(),
        app.doc.file.pins.len() + app.doc.file.corridors.len()
    );
    // Selected on creation: Delete removes it.
    h.key_press(egui::Key::Delete);
    h.step();
    assert_eq!(h.state().doc.file.corridors.len(), count);
}

/// The worker drops stale jobs: a job cancelled while it samples stops without finishing,
/// and the next one finishes.
#[test]
fn worker_cancels_stale_jobs() {
    let dir = tempfile::tempdir().unwrap();
    let path = demo_copy(&dir);
    let file = scenario::read(&path).unwrap();
    let (jobs, job_rx) = channel();
    let (tx, rx) = channel();
    std::thread::spawn(move || worker::run(job_rx, tx, || {}));
    let old = Arc::new(AtomicBool::new(false));
    let job = |generation, draws, cancel| Job {
        generation,
        file: scenario::ScenarioFile {
            draws,
            ..file.clone()
        },
        path: path.clone(),
        cancel,
    };
    // Job 1 is long enough to be caught in flight.
    jobs.send(job(1, 4000, old.clone())).unwrap();
    // Wait until job 1 is sampling its posterior draws, then cancel it and send job 2.
    loop {
        match rx.recv_timeout(Duration::from_secs(120)).unwrap() {
            Message::State(1, EngineState::Sampling { .. }) => break,
            Message::Failed(g, m) => panic!("job {g} failed: {m}"),
            _ => {}
        }
    }
    old.store(true, std::sync::atomic::Ordering::Relaxed);
    jobs.send(job(2, 100, Arc::new(AtomicBool::new(false))))
        .unwrap();
    let mut done = Vec::new();
    while !done.contains(&2) {
        match rx.recv_timeout(Duration::from_secs(120)).unwrap() {
            Message::State(g, EngineState::Done { .. }) => done.push(g),
            Message::Failed(g, m) => panic!("job {g} failed: {m}"),
            _ => {}
        }
    }
    assert_eq!(done, vec![2], "the cancelled job never finished");
}

/// A panic inside a job is reported as a failure of that job, and the worker takes the next.
#[test]
fn worker_survives_a_panic() {
    let (jobs, job_rx) = channel();
    let (tx, rx) = channel();
    std::thread::spawn(move || {
        worker::run_with(
            job_rx,
            tx,
            || {},
            |job, send| {
                if job.generation == 1 {
                    panic!("deliberate");
                }
                send(Message::State(job.generation, EngineState::Idle));
                Ok(())
            },
        )
    });
    let file =
        scenario::read(&Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios-demo/baseline.ron"))
            .unwrap();
    for g in [1, 2] {
        jobs.send(Job {
            generation: g,
            file: file.clone(),
            path: PathBuf::from("x.ron"),
            cancel: Arc::new(AtomicBool::new(false)),
        })
        .unwrap();
        // One at a time, so the worker does not skip the first as stale.
        let first = rx.recv_timeout(Duration::from_secs(10)).unwrap();
        match (g, first) {
            (1, Message::Failed(1, text)) => assert!(text.contains("deliberate")),
            (2, Message::State(2, EngineState::Idle)) => {}
            (g, other) => panic!("job {g}: unexpected {other:?}"),
        }
        if g == 1 {
            assert!(matches!(
                rx.recv_timeout(Duration::from_secs(10)).unwrap(),
                Message::State(1, EngineState::Failed)
            ));
        }
    }
}

/// The model settings are in the window; changing the lags or the estimation window
/// re-estimates in the background (the model line follows).
#[test]
fn model_settings_re_estimate_in_the_background() {
    let dir = tempfile::tempdir().unwrap();
    let mut h = harness(&demo_copy(&dir));
    settle(&mut h);
    assert!(
        h.state().session.model_line.contains("VAR(2)"),
        "{}",
        h.state().session.model_line
    );
    h.get_by_label("Model settings…").click();
    h.run_steps(2);
    assert!(
        h.query_all_by_label("lags").count() >= 1,
        "the lags field is shown"
    );
    let stale =
        "the model is being run again with the changed settings: these checks are from before";
    assert!(h.query_by_label(stale).is_none());
    h.state_mut().doc.edit(|f| {
        if let scenario::ModelSpec::Minnesota(m) = &mut f.model {
            m.lags = 3;
        }
    });
    // Until the new model's checks arrive, the old ones are greyed and said to be old.
    h.run_steps(2);
    assert!(h.state().checks_of_another_model());
    assert!(h.query_by_label(stale).is_some());
    settle(&mut h);
    assert!(
        h.state().session.model_line.contains("VAR(3)"),
        "{}",
        h.state().session.model_line
    );
    assert!(h.query_by_label(stale).is_none());
    // The estimation window, typed in the panel, applies on Enter: 2000Q1–2025Q4 is 104
    // quarters, 101 usable with three lags.
    h.get_by_label("estimation window from").click();
    h.run_steps(2);
    h.get_by_label("estimation window from").type_text("2000Q1");
    h.run_steps(2);
    assert!(h.state().doc.file == *h.state().sent().unwrap());
    h.key_press(egui::Key::Enter);
    settle(&mut h);
    let line = h.state().session.model_line.clone();
    assert!(
        line.contains("2000Q1–2025Q4") && line.contains("T = 101"),
        "{line}"
    );
    // Output enters the model as it is instead of 100·log: re-estimated, fans drawn.
    h.get_by_label("transform of output").click();
    h.run_steps(2);
    h.get_by_label("as it is").click();
    settle(&mut h);
    let sent = h.state().sent().unwrap().clone();
    assert_eq!(sent.series[0].transform, tiltyard::dataset::Transform::AsIs);
    assert!(h.state().session.engine_error.is_none());
    assert_eq!(h.state().session.results.as_ref().unwrap().draws, 100);
}

/// A corridor's upper edge moves at every period; Ctrl on its lower edge moves one period
/// only (the side becomes one bound per period, as many as the corridor has); its last end
/// moves sideways, taking its per-period bounds along; each drag is one undo step.
#[test]
fn corridor_edges_and_ends_move() {
    let dir = tempfile::tempdir().unwrap();
    let mut h = harness(&demo_copy(&dir));
    settle(&mut h);
    // corridors[2]: policy_rate (series 3, level), 2026Q1–2027Q4, between 1 and 3.
    let original = h.state().doc.file.corridors[2].clone();
    assert_eq!(
        (original.from.as_str(), original.to.as_str()),
        ("2026Q1", "2027Q4")
    );
    let x = horizon(&h, "2026Q3");
    // The upper edge, all periods: up by about half a point.
    let (a, b) = (screen(&h, 3, x, 3.0), screen(&h, 3, x, 3.5));
    drag(&mut h, a, b);
    let c = h.state().doc.file.corridors[2].clone();
    let Some(scenario::Bound::Same(up)) = c.upper else {
        panic!("upper bound {:?}", c.upper)
    };
    assert!((up - 3.5).abs() < 0.15, "upper edge moved to {up}");
    assert_eq!(c.lower, original.lower);
    // The lower edge at 2026Q3 only (Ctrl): down by about half a point.
    h.event(egui::Event::ModifiersChanged(Modifiers::COMMAND));
    let (a, b) = (screen(&h, 3, x, 1.0), screen(&h, 3, x, 0.5));
    drag(&mut h, a, b);
    h.event(egui::Event::ModifiersChanged(Modifiers::NONE));
    h.step();
    let c = h.state().doc.file.corridors[2].clone();
    let Some(scenario::Bound::Each(lower)) = c.lower else {
        panic!("lower bound {:?}", c.lower)
    };
    assert_eq!(lower.len(), 8, "one bound per period of 2026Q1–2027Q4");
    for (k, v) in lower.iter().enumerate() {
        let v = v.expect("no period opened");
        if k == 2 {
            assert!((v - 0.5).abs() < 0.15, "2026Q3 lower bound {v}");
        } else {
            assert_eq!(v, 1.0, "period {k} kept its bound");
        }
    }
    // The last end, from 2027Q4 back to 2027Q2 (grabbed on the corridor's right side).
    let (e0, e1) = (horizon(&h, "2027Q4") + 0.45, horizon(&h, "2027Q2") + 0.45);
    let (a, b) = (screen(&h, 3, e0, 2.0), screen(&h, 3, e1, 2.0));
    drag(&mut h, a, b);
    let c = h.state().doc.file.corridors[2].clone();
    assert_eq!((c.from.as_str(), c.to.as_str()), ("2026Q1", "2027Q2"));
    let Some(scenario::Bound::Each(lower)) = &c.lower else {
        panic!("lower bound {:?}", c.lower)
    };
    assert_eq!(lower.len(), 6);
    // The engine takes the edited corridor: no invalid condition.
    settle(&mut h);
    let checks = h.state().session.checks.clone().unwrap();
    assert!(
        checks
            .findings
            .iter()
            .all(|f| f.kind != "invalid_condition"),
        "{:?}",
        checks.findings
    );
    // Three drags, three undo steps.
    for _ in 0..3 {
        h.key_press_modifiers(Modifiers::COMMAND, egui::Key::Z);
        h.step();
    }
    assert_eq!(h.state().doc.file.corridors[2], original);
}

/// The shocks view draws each structural shock and takes conditions on it. Its fans are
/// checked against what the model implies: without conditions each shock is N(0, 1), so the
/// half-width of the central 90% band from 100 paths averages E[(q̂95 − q̂05)/2] = 1.59602
/// (linear-interpolation quantiles of 100 standard normals; expected order statistics by
/// numerical integration with scipy, not the asymptotic 1.64485); a pinned shock equals its
/// pin on every path; a corridor on a shock holds on every path.
#[test]
fn the_shocks_view_draws_shocks_and_takes_conditions_on_them() {
    let dir = tempfile::tempdir().unwrap();
    let mut h = harness(&demo_copy(&dir));
    settle(&mut h);
    h.get_by_label("Structural shocks").click();
    h.run_steps(3);
    assert_eq!(h.state().view.subject, Subject::Shock);
    // The past half shows the model's historical shocks, one per observed period shown.
    let r = h.state().session.results.clone().unwrap();
    for view in &r.shocks {
        assert_eq!(view.history.len(), r.history, "{}", view.name);
        assert!(view.history.iter().all(|(t, e)| *t <= 0.0 && e.is_finite()));
    }
    assert!(h.query_all_by_label("legend: historical shocks").count() >= 1);
    // Output's shock (index 0): a corridor over 2026Q2–2026Q4 between −2 and −0.5.
    let (x0, x1) = (horizon(&h, "2026Q2"), horizon(&h, "2026Q4"));
    let from = screen_of(&h, Subject::Shock, 0, x0, -2.0);
    let to = screen_of(&h, Subject::Shock, 0, x1, -0.5);
    drag(&mut h, from, to);
    let c = h.state().doc.file.corridors.last().unwrap().clone();
    assert_eq!(c.shock.as_deref(), Some("output"));
    assert_eq!(c.series, None);
    assert_eq!((c.from.as_str(), c.to.as_str()), ("2026Q2", "2026Q4"));
    let (Some(scenario::Bound::Same(lo)), Some(scenario::Bound::Same(hi))) =
        (c.lower.clone(), c.upper.clone())
    else {
        panic!("bounds {c:?}")
    };
    assert!(
        (lo + 2.0).abs() < 0.1 && (hi + 0.5).abs() < 0.1,
        "{lo} … {hi}"
    );
    // And a pin on the credit-spread shock in 2026Q1, as the table would add it.
    h.state_mut().doc.edit(|f| {
        f.pins.push(scenario::PinSpec {
            series: None,
            shock: Some("credit_spread".into()),
            period: "2026Q1".into(),
            units: scenario::Units::Level,
            value: 1.5,
            active: true,
        })
    });
    settle(&mut h);
    let r = h.state().session.results.clone().unwrap();
    assert_eq!(r.draws, 100);
    let shock = |name: &str| r.shocks.iter().find(|s| s.name == name).unwrap();
    // Unconditional fans: 10 shocks × 12 periods, independent cells; the per-cell standard
    // deviation of the half-width is 0.139 (numpy, 200 000 replications), so the mean over
    // 120 cells has standard error 0.0127.
    let widths: Vec<f64> = r
        .shocks
        .iter()
        .flat_map(|s| s.unconditional.iter().map(|f| (f.q[6] - f.q[0]) / 2.0))
        .collect();
    assert_eq!(widths.len(), 120);
    let mean = widths.iter().sum::<f64>() / 120.0;
    assert!(
        (mean - 1.59602).abs() < 4.0 * 0.0127,
        "mean half-width {mean}"
    );
    let centre = r
        .shocks
        .iter()
        .flat_map(|s| s.unconditional.iter().map(|f| f.mean))
        .sum::<f64>()
        / 120.0;
    assert!(
        centre.abs() < 4.0 * 0.1 / 120f64.sqrt(),
        "mean shock {centre}"
    );
    // The pinned shock equals its pin on every path (under each path's own parameters).
    let pinned = shock("credit_spread").conditional[0];
    assert!(
        pinned.q.iter().all(|q| (q - 1.5).abs() < 1e-8),
        "{:?}",
        pinned.q
    );
    // The corridor holds on every path.
    for f in &shock("output").conditional[1..4] {
        assert!(f.q[0] >= lo - 1e-9 && f.q[6] <= hi + 1e-9, "{:?}", f.q);
    }
}

/// A clashing scenario opens on its clash: the engine samples nothing, the checks name the
/// conditions (their rows and the status are red), and the window still shows fans (drawn
/// without the conditions, greyed) rather than an empty screen.
#[test]
fn a_clashing_scenario_opens_on_its_clash() {
    let dir = tempfile::tempdir().unwrap();
    let path = demo_file(&dir, "clash.ron", |_| {});
    let mut h = harness(&path);
    let start = Instant::now();
    while h.state().session.state != EngineState::Clashing || h.state().session.results.is_none() {
        h.step();
        assert!(
            start.elapsed() < Duration::from_secs(120),
            "{:?}",
            h.state().session.state
        );
        std::thread::sleep(Duration::from_millis(20));
    }
    h.run_steps(2);
    let app = h.state();
    assert!(app.stale());
    assert!(app.session.results.as_ref().unwrap().without_conditions);
    let clash = app
        .session
        .checks
        .as_ref()
        .unwrap()
        .findings
        .iter()
        .find(|f| f.severity == tiltyard::checks::Severity::Clash)
        .expect("a clash is reported")
        .clone();
    // The pin at 9% and the unemployment corridor are both to blame, and marked.
    let blamed: Vec<_> = clash
        .fields
        .iter()
        .filter_map(|f| tiltyard::app::panels::parse_field(f))
        .collect();
    assert!(blamed.len() >= 2, "{clash:?}");
    for c in blamed {
        assert_eq!(app.status_of(c), Some(tiltyard::checks::Severity::Clash));
    }
    assert!(
        h.query_all_by_label_contains("conditions clash").count() >= 1,
        "the clash is said"
    );
    // The table says it too, on each row to blame.
    assert!(h.query_all_by_label("clashes: see the checks").count() >= 2);
}

/// Edits kept in the recovery file by a session that did not end cleanly are offered at the
/// next start, come back as one undo step, and are saved with Ctrl+S (which removes the
/// recovery file).
#[test]
fn unsaved_edits_come_back_after_a_crash() {
    let dir = tempfile::tempdir().unwrap();
    let path = demo_copy(&dir);
    let mut edited = scenario::read(&path).unwrap();
    edited.pins[0].value = 4.25;
    let recovery = tiltyard::app::document::recovery_path(&path);
    std::fs::write(&recovery, scenario::to_text(&edited)).unwrap();
    // The scenario file is older than its recovery file.
    let old = std::time::SystemTime::now() - Duration::from_secs(60);
    std::fs::File::options()
        .write(true)
        .open(&path)
        .unwrap()
        .set_modified(old)
        .unwrap();
    let mut h = harness(&path);
    h.run_steps(2);
    assert!(h.query_by_label_contains("Unsaved edits found").is_some());
    // Shortcuts wait while the question is asked.
    h.key_press_modifiers(Modifiers::COMMAND, egui::Key::S);
    h.run_steps(2);
    assert!(!h.state().saving && recovery.exists());
    h.get_by_label("Recover the edits").click();
    h.run_steps(2);
    assert!(h.state().prompt.is_none());
    assert_eq!(h.state().doc.file, edited);
    assert!(h.state().doc.is_dirty() && h.state().doc.can_undo());
    h.key_press_modifiers(Modifiers::COMMAND, egui::Key::S);
    // Saves run on a thread of their own: the window learns of it a frame or so later.
    let start = Instant::now();
    while h.state().doc.is_dirty() || recovery.exists() {
        h.step();
        assert!(start.elapsed() < Duration::from_secs(10), "not saved");
        std::thread::sleep(Duration::from_millis(10));
    }
    assert_eq!(scenario::read(&path).unwrap(), edited);
}

/// Saving from the window keeps the file's comments and layout: the demo, edited (one pin
/// moved), saved with Ctrl+S, has the same lines but that pin's.
#[test]
fn a_save_keeps_the_comments_and_layout() {
    let dir = tempfile::tempdir().unwrap();
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios-demo");
    let text = std::fs::read_to_string(root.join("adverse.ron"))
        .unwrap()
        .replace(
            "dataset: \"economy.csv\"",
            &format!(
                "dataset: {:?}",
                root.join("economy.csv").display().to_string()
            ),
        )
        .replace("draws: 1000", "draws: 100");
    let path = dir.path().join("adverse.ron");
    std::fs::write(&path, &text).unwrap();
    let mut h = harness(&path);
    h.run_steps(2);
    h.state_mut().doc.edit(|f| f.pins[0].value = 3.75);
    h.key_press_modifiers(Modifiers::COMMAND, egui::Key::S);
    let start = Instant::now();
    while h.state().doc.is_dirty() {
        h.step();
        std::thread::sleep(Duration::from_millis(10));
        assert!(start.elapsed() < Duration::from_secs(10), "not saved");
    }
    let saved = std::fs::read_to_string(&path).unwrap();
    let (before, after): (Vec<&str>, Vec<&str>) = (text.lines().collect(), saved.lines().collect());
    assert_eq!(before.len(), after.len(), "{saved}");
    let differ: Vec<(&&str, &&str)> = before.iter().zip(&after).filter(|(a, b)| a != b).collect();
    assert_eq!(differ.len(), 1, "{differ:#?}");
    assert!(differ[0].1.contains("value: 3.75"));
}

/// On a desktop without a file-dialog service, Open… and Save as… fall back to the window's
/// own chooser: a path typed there opens the scenario, and saves it elsewhere; the chooser
/// stays in use for the rest of the session.
#[test]
fn without_a_dialog_service_the_own_chooser_opens_and_saves() {
    let dir = tempfile::tempdir().unwrap();
    let path = demo_copy(&dir);
    let mut other = scenario::read(&path).unwrap();
    other.name = "the other scenario".into();
    let other_path = dir.path().join("other.ron");
    std::fs::write(&other_path, scenario::to_text(&other)).unwrap();
    let app = TiltyardApp::new(&path, Arc::new(NoDialogService), Arc::new(|| {}));
    let mut h = Harness::builder()
        .with_size(Vec2::new(1500.0, 950.0))
        .build_ui_state(|ui, app: &mut TiltyardApp| app.ui(ui), app);
    h.run_steps(2);
    let wait_for = |h: &mut Harness<'static, TiltyardApp>, done: &dyn Fn(&TiltyardApp) -> bool| {
        let start = Instant::now();
        while !done(h.state()) {
            h.step();
            std::thread::sleep(Duration::from_millis(10));
            assert!(
                start.elapsed() < Duration::from_secs(10),
                "timed out: chooser {:?}, path {}",
                h.state().chooser.as_ref().map(|c| c.typed.clone()),
                h.state().doc.path.display()
            );
        }
    };
    h.get_by_label("Open…").click();
    wait_for(&mut h, &|a| a.chooser.is_some());
    h.run_steps(2);
    assert!(
        h.query_by_label_contains("did not open; choose here")
            .is_some()
    );
    // The folder is listed: the other scenario can be picked from it.
    assert!(h.query_by_label("other.ron").is_some());
    h.state_mut().chooser.as_mut().unwrap().typed.clear();
    h.get_by_label("Path").click();
    h.run_steps(1);
    h.get_by_label("Path")
        .type_text(&other_path.display().to_string());
    h.run_steps(1);
    h.get_by_label("Open this scenario").click();
    wait_for(&mut h, &|a| a.doc.path == other_path);
    assert_eq!(h.state().doc.file.name, "the other scenario");
    // Save as: straight to the chooser now; a name without extension gets ".ron".
    h.get_by_label("Save as…").click();
    wait_for(&mut h, &|a| a.chooser.is_some());
    h.run_steps(1);
    let target = dir.path().join("copy");
    h.state_mut().chooser.as_mut().unwrap().typed = target.display().to_string();
    h.run_steps(1);
    h.get_by_label("Save here").click();
    wait_for(&mut h, &|_| dir.path().join("copy.ron").exists());
    assert_eq!(
        scenario::read(&dir.path().join("copy.ron")).unwrap().name,
        "the other scenario"
    );
}

/// An edit reaches the recovery file within about a second, with no further input: a window
/// killed two seconds after an edit loses nothing, and the next start offers the edit back
/// saying what it holds.
#[test]
fn an_edit_survives_a_kill_two_seconds_later() {
    let dir = tempfile::tempdir().unwrap();
    let path = demo_copy(&dir);
    let recovery = tiltyard::app::document::recovery_path(&path);
    let mut h = harness(&path);
    h.run_steps(2);
    h.state_mut().doc.edit(|f| f.pins[0].value = 3.75);
    let edited = h.state().doc.file.clone();
    let start = Instant::now();
    // Frames come only when the window asks for them (as egui does on a quiet desktop).
    while !recovery.exists() {
        h.step();
        std::thread::sleep(Duration::from_millis(20));
        assert!(
            start.elapsed() < Duration::from_secs(2),
            "no recovery file after 2 s"
        );
    }
    // Killed: the harness goes without the window closing.
    drop(h);
    let mut h = harness(&path);
    h.run_steps(2);
    assert!(
        h.query_by_label_contains("1 unsaved change to adverse.ron, the last at")
            .is_some(),
        "the prompt says what the file holds"
    );
    h.get_by_label("Recover the edits").click();
    h.run_steps(2);
    assert_eq!(h.state().doc.file, edited);
}

/// A scenario file that cannot be read opens as a blank scenario, and Save then asks where
/// (the unreadable file is never overwritten).
#[test]
fn a_scenario_that_cannot_be_read_is_never_overwritten() {
    let dir = tempfile::tempdir().unwrap();
    let broken = dir.path().join("broken.ron");
    let text = "(name: \"half typed\", dataset: ";
    std::fs::write(&broken, text).unwrap();
    let elsewhere = dir.path().join("elsewhere.ron");
    let asked = Arc::new(AtomicBool::new(false));
    let mut h = harness_with(&broken, Arc::new(SaveTo(elsewhere.clone(), asked.clone())));
    h.run_steps(2);
    assert!(
        h.query_by_label_contains("cannot open the scenario")
            .is_some()
    );
    assert!(h.state().doc.untitled);
    h.state_mut().doc.edit(|f| f.name = "rescued".into());
    h.key_press_modifiers(Modifiers::COMMAND, egui::Key::S);
    let start = Instant::now();
    while !elsewhere.exists() {
        h.step();
        assert!(start.elapsed() < Duration::from_secs(10), "nothing saved");
        std::thread::sleep(Duration::from_millis(10));
    }
    assert!(asked.load(std::sync::atomic::Ordering::SeqCst));
    assert_eq!(std::fs::read_to_string(&broken).unwrap(), text);
    assert_eq!(scenario::read(&elsewhere).unwrap().name, "rescued");
    // The window learns of the save a frame or so after the file is there.
    while h.state().doc.untitled {
        h.step();
        assert!(
            start.elapsed() < Duration::from_secs(10),
            "the save was not taken"
        );
        std::thread::sleep(Duration::from_millis(10));
    }
    assert_eq!(h.state().doc.path, elsewhere);
}

/// A new scenario starts from a dataset: every column a series, no conditions, unsaved; the
/// engine estimates it and draws its fans.
#[test]
fn a_new_scenario_starts_from_a_dataset() {
    let dir = tempfile::tempdir().unwrap();
    let data = dir.path().join("economy.csv");
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios-demo");
    std::fs::copy(root.join("economy.csv"), &data).unwrap();
    let mut h = harness(&demo_copy(&dir));
    settle(&mut h);
    h.state_mut().new_from_dataset(&data);
    h.state_mut().doc.edit(|f| f.draws = 100);
    settle(&mut h);
    let app = h.state();
    assert!(app.doc.untitled && app.doc.is_dirty());
    assert_eq!(app.doc.file.series.len(), 10);
    assert!(app.doc.file.pins.is_empty() && app.doc.file.corridors.is_empty());
    assert_eq!(app.doc.path, dir.path().join("economy-scenario.ron"));
    let r = app.session.results.as_ref().unwrap();
    assert_eq!((r.series.len(), r.draws), (10, 100));
    assert_eq!(r.series[0].conditional.len(), 8, "two years of quarters");
    assert_eq!(
        app.session.checks.as_ref().unwrap().status,
        tiltyard::checks::Status::Clear
    );
}

/// The arrow keys nudge the selected condition: up and down by its chart's step, left and
/// right by a period (one undo step each); G turns snapping off and on.
#[test]
fn arrow_keys_nudge_the_selected_condition() {
    let dir = tempfile::tempdir().unwrap();
    let mut h = harness(&demo_copy(&dir));
    settle(&mut h);
    // pins[0]: credit_spread (series 7) at 2026Q3 = 3.5.
    h.state_mut().view.selected = Some(tiltyard::app::gesture::CondRef::Pin(0));
    let step = h.state().view.charts[&(Subject::Series, 7)].step;
    assert!(step > 0.0);
    h.key_press(egui::Key::ArrowUp);
    h.key_press(egui::Key::ArrowRight);
    h.step();
    let p = h.state().doc.file.pins[0].clone();
    assert_eq!(p.value, tiltyard::app::chart::tidy(3.5 + step));
    assert_eq!(p.period, "2026Q4");
    h.key_press_modifiers(Modifiers::COMMAND, egui::Key::Z);
    h.step();
    assert_eq!(h.state().doc.file.pins[0].period, "2026Q3");
    // A corridor moves as a whole: corridors[2] (policy rate, 1 … 3) down one step.
    h.state_mut().view.selected = Some(tiltyard::app::gesture::CondRef::Corridor(2));
    h.key_press(egui::Key::ArrowDown);
    h.step();
    let c = h.state().doc.file.corridors[2].clone();
    let step = h.state().view.charts[&(Subject::Series, 3)].step;
    assert_eq!(
        c.lower,
        Some(scenario::Bound::Same(tiltyard::app::chart::tidy(
            1.0 - step
        )))
    );
    assert_eq!(
        c.upper,
        Some(scenario::Bound::Same(tiltyard::app::chart::tidy(
            3.0 - step
        )))
    );
    assert!(h.state().view.snapping);
    h.key_press(egui::Key::G);
    h.step();
    assert!(!h.state().view.snapping);
}

/// The window's fans, streamed in blocks, are the headless run's fans: the same paths, to the
/// last digit (every path has its own random stream), with and without reweighting.
#[test]
fn the_window_draws_the_same_fans_as_the_headless_run() {
    for reweight in [false, true] {
        let dir = tempfile::tempdir().unwrap();
        let path = demo_copy(&dir);
        let mut file = scenario::read(&path).unwrap();
        file.reweight = reweight;
        std::fs::write(&path, scenario::to_text(&file)).unwrap();
        let mut setup = scenario::load(&path).unwrap();
        let out = tiltyard::run::run(&mut setup, &Default::default()).unwrap();
        let mut h = harness(&path);
        settle(&mut h);
        let r = h.state().session.results.clone().unwrap();
        assert_eq!(r.draws, 100);
        assert_eq!(r.effective_draws.is_some(), reweight);
        let mut compared = 0;
        for row in &out.fans {
            let view = r.series.iter().find(|s| s.name == row.series).unwrap();
            let fan = match row.kind {
                tiltyard::report::Kind::Conditional => &view.conditional,
                tiltyard::report::Kind::Unconditional => &view.unconditional,
            };
            let point = fan.iter().find(|f| f.x == row.horizon as f64).unwrap();
            for (a, b) in point.q.iter().zip(&row.quantiles) {
                assert!(
                    (a - b).abs() <= 1e-12 * (1.0 + b.abs()),
                    "{row:?}: {a} vs {b}"
                );
            }
            compared += 1;
        }
        assert_eq!(compared, 2 * 10 * 12);
    }
}

/// A period typed in the table applies when the field is left (not at every keystroke), as
/// one undo step, and a corridor's per-period bounds follow its new length.
#[test]
fn a_period_typed_in_the_table_applies_when_the_field_is_left() {
    let dir = tempfile::tempdir().unwrap();
    let mut h = harness(&demo_copy(&dir));
    settle(&mut h);
    // corridors[1]: unemployment, 2027Q1–2027Q4, lower [6.5, 6.8, 7.0, 7.0].
    let before = h.state().doc.file.corridors[1].clone();
    h.get_all_by_label("to").nth(1).unwrap().click();
    h.run_steps(2);
    h.key_press_modifiers(Modifiers::COMMAND, egui::Key::A);
    h.get_all_by_label("to").nth(1).unwrap().type_text("2028Q2");
    h.run_steps(2);
    assert_eq!(
        h.state().doc.file.corridors[1],
        before,
        "nothing applied while typing"
    );
    h.key_press(egui::Key::Enter);
    h.run_steps(2);
    let c = h.state().doc.file.corridors[1].clone();
    assert_eq!(c.to, "2028Q2");
    assert_eq!(
        c.lower,
        Some(scenario::Bound::Each(vec![
            Some(6.5),
            Some(6.8),
            Some(7.0),
            Some(7.0),
            Some(7.0),
            Some(7.0)
        ]))
    );
    h.key_press_modifiers(Modifiers::COMMAND, egui::Key::Z);
    h.run_steps(2);
    assert_eq!(h.state().doc.file.corridors[1], before);
}

/// With unsaved changes, New asks first; Save there saves (on the chores' thread) and then
/// starts the blank scenario on the same data; Cancel keeps everything.
#[test]
fn new_asks_about_unsaved_changes_first() {
    let dir = tempfile::tempdir().unwrap();
    let path = demo_copy(&dir);
    let mut h = harness(&path);
    settle(&mut h);
    h.state_mut().doc.edit(|f| f.pins[0].value = 3.75);
    h.state_mut().ask(tiltyard::app::AfterSave::New);
    h.run_steps(2);
    assert!(h.query_by_label_contains("Unsaved changes").is_some());
    h.get_by_label("Cancel").click();
    h.run_steps(2);
    assert!(h.state().prompt.is_none() && h.state().doc.is_dirty());
    h.state_mut().ask(tiltyard::app::AfterSave::New);
    h.run_steps(2);
    h.get_by_label("Save first").click();
    let start = Instant::now();
    while !h.state().doc.untitled {
        h.step();
        assert!(
            start.elapsed() < Duration::from_secs(10),
            "New did not follow the save"
        );
        std::thread::sleep(Duration::from_millis(10));
    }
    assert_eq!(scenario::read(&path).unwrap().pins[0].value, 3.75);
    let f = &h.state().doc.file;
    assert!(f.pins.is_empty() && f.corridors.is_empty() && f.series.len() == 10);
    assert_eq!(f.name, "New scenario");
    settle(&mut h);
    // New again gives the same file: the engine still draws it.
    h.state_mut().new_scenario();
    assert!(h.state().session.results.is_none());
    settle(&mut h);
    assert!(h.state().session.checks.is_some());
}

/// "Where it comes from" shows the headless run's attribution (the same draws, split the same
/// way, to the last digit), by shock and by condition, each condition keyed by its colour.
#[test]
fn the_window_splits_the_scenario_as_the_headless_run_does() {
    let dir = tempfile::tempdir().unwrap();
    let path = demo_copy(&dir);
    let mut setup = scenario::load(&path).unwrap();
    let out = tiltyard::run::run(&mut setup, &Default::default()).unwrap();
    let mut h = harness(&path);
    settle(&mut h);
    let (_, sources) = h
        .state()
        .session
        .sources
        .clone()
        .expect("the split came with the draws");
    assert_eq!(Some(&sources.attribution), out.attribution.as_ref());
    assert_eq!(sources.statistics, out.summary);
    h.get_by_label("Where it comes from").click();
    h.run_steps(2);
    assert_eq!(h.state().view.pane, tiltyard::app::grid::Pane::Sources);
    h.get_by_label("total").hover();
    // The shock list on the left, and the table's row.
    assert!(h.query_all_by_label("Unemployment rate shock").count() >= 2);
    // No condition is keyed while the split is by shock; by condition, each is.
    let pin = tiltyard::app::gesture::CondRef::Pin(0);
    assert!(tiltyard::app::sources::colour_of(h.state(), pin).is_none());
    h.get_by_label("by condition").click();
    h.run_steps(2);
    assert_eq!(
        h.state().view.sources_view.split,
        tiltyard::app::sources::Split::Condition
    );
    assert_eq!(
        tiltyard::app::sources::colour_of(h.state(), pin),
        Some(tiltyard::app::sources::condition_colour(0))
    );
    // The chart's legend and the table's row.
    assert_eq!(
        h.query_all_by_label("Corporate credit spread at 2026Q3 = 3.5")
            .count(),
        2
    );
    // Leave one out follows in the background.
    let start = Instant::now();
    while h.state().session.effects.is_none() {
        assert!(
            start.elapsed() < Duration::from_secs(60),
            "no leave-one-out effects"
        );
        h.step();
        std::thread::sleep(Duration::from_millis(20));
    }
    h.run_steps(2);
    h.get_by_label("without Corporate credit spread at 2026Q3 = 3.5")
        .hover();
    let (_, effects) = h.state().session.effects.clone().unwrap();
    assert_eq!(effects.len(), 5);
    assert!(effects.iter().all(|e| e.shift.is_ok()));
    // Back to the charts.
    h.get_by_label("Series paths").click();
    h.run_steps(2);
    assert_eq!(h.state().view.pane, tiltyard::app::grid::Pane::Charts);
}

/// A second scenario on the same series is drawn beside the document, its conditions are set
/// beside the document's, and the differences are tabled; one on other series is refused
/// with a notice.
#[test]
fn a_second_scenario_is_compared_in_the_window() {
    let dir = tempfile::tempdir().unwrap();
    let path = demo_copy(&dir);
    let mut h = harness(&path);
    settle(&mut h);
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios-demo");
    let mut other = scenario::read(&root.join("baseline.ron")).unwrap();
    other.dataset = root.join("economy.csv").display().to_string();
    other.draws = 60;
    let mut fewer = other.clone();
    fewer.series.pop();
    h.state_mut().compare_with(root.join("fewer.ron"), fewer);
    assert!(h.state().second.is_none());
    assert!(
        h.state()
            .notice
            .as_deref()
            .unwrap_or("")
            .contains("cannot compare")
    );
    h.state_mut().compare_with(root.join("baseline.ron"), other);
    let start = Instant::now();
    while !matches!(
        h.state().second.as_ref().map(|s| &s.state),
        Some(EngineState::Done { .. })
    ) {
        assert!(
            start.elapsed() < Duration::from_secs(120),
            "the second scenario did not finish"
        );
        h.step();
        std::thread::sleep(Duration::from_millis(20));
    }
    h.run_steps(2);
    assert!(h.get_by_label("Compared with").rect().width() > 0.0);
    // The document's pins are only here; the baseline's are only there.
    assert!(
        h.query_all_by_label_contains("only here: pin on credit_spread")
            .count()
            == 1
    );
    assert!(
        h.query_all_by_label_contains("only there: pin on policy_rate at 2026Q4")
            .count()
            == 1
    );
    h.get_by_label("Difference").click();
    h.run_steps(2);
    assert_eq!(h.state().view.pane, tiltyard::app::grid::Pane::Difference);
    h.get_by_label("second: median").hover();
    // Both scenarios' statistics side by side.
    h.get_by_label("this one").hover();
    assert!(h.state().second.as_ref().unwrap().sources.is_some());
    // The baseline pins the policy rate at 2.75 in 2026Q4: its median there, in the
    // second's column, is 2.75 (the adverse scenario keeps it anywhere in [1, 3]).
    let r = h.state().second.as_ref().unwrap().results.clone().unwrap();
    let view = r.series.iter().find(|s| s.name == "policy_rate").unwrap();
    assert!((view.conditional[3].q[3] - 2.75).abs() < 1e-9);
    assert!(h.query_all_by_label("2.75").count() >= 1);
    h.get_by_label("stop comparing").click();
    h.run_steps(2);
    assert!(h.state().second.is_none());
    assert_eq!(h.state().view.pane, tiltyard::app::grid::Pane::Charts);
}

/// The table of paths: every series and period with its median and bands, copied to the
/// clipboard and saved (atomically, by the chores) as CSV with the caution.
#[test]
fn the_table_of_paths_is_copied_and_saved() {
    let dir = tempfile::tempdir().unwrap();
    let path = demo_copy(&dir);
    let target = dir.path().join("table.csv");
    let asked = Arc::new(AtomicBool::new(false));
    let mut h = harness_with(&path, Arc::new(SaveTo(target.clone(), asked.clone())));
    settle(&mut h);
    h.get_by_label("Table").click();
    h.run_steps(2);
    assert_eq!(h.state().view.pane, tiltyard::app::grid::Pane::Table);
    h.get_by_label("unconditional median").hover();
    let r = h.state().session.results.clone().unwrap();
    let text = tiltyard::app::paths_table::csv_text(&r);
    assert_eq!(text.lines().count(), 1 + 10 * 12 + 1);
    assert!(text.ends_with(&format!("# {}\n", tiltyard::report::CAUTION)));
    // The unemployment corridor's first period: its row carries the fans' median.
    let row = text
        .lines()
        .find(|l| l.starts_with("unemployment,level,2027Q1,"))
        .unwrap();
    let view = r.series.iter().find(|s| s.name == "unemployment").unwrap();
    let median: f64 = row.split(',').nth(3).unwrap().parse().unwrap();
    assert_eq!(median, view.conditional[4].q[3]);
    h.get_by_label("Copy as CSV").click();
    h.step();
    let copied = h
        .output()
        .platform_output
        .commands
        .iter()
        .any(|c| matches!(c, egui::OutputCommand::CopyText(t) if *t == text));
    assert!(copied, "the table went to the clipboard");
    h.get_by_label("Save as CSV…").click();
    let start = Instant::now();
    while !target.exists() {
        assert!(
            start.elapsed() < Duration::from_secs(10),
            "the table was not saved (asked: {}, notice: {:?})",
            asked.load(std::sync::atomic::Ordering::SeqCst),
            h.state().notice
        );
        h.step();
        std::thread::sleep(Duration::from_millis(20));
    }
    assert!(asked.load(std::sync::atomic::Ordering::SeqCst));
    assert_eq!(std::fs::read_to_string(&target).unwrap(), text);
}

/// Export pack… writes the briefing pack of the scenario as it stands into the folder picked,
/// off the window's thread, and says so.
#[test]
fn the_window_exports_the_briefing_pack() {
    let dir = tempfile::tempdir().unwrap();
    let path = demo_copy(&dir);
    let target = dir.path().join("pack");
    let asked = Arc::new(AtomicBool::new(false));
    let mut h = harness_with(&path, Arc::new(SaveTo(target.clone(), asked.clone())));
    settle(&mut h);
    h.get_by_label("Export pack…").click();
    let start = Instant::now();
    while !h
        .state()
        .notice
        .as_deref()
        .is_some_and(|n| n.contains("briefing pack"))
    {
        assert!(
            start.elapsed() < Duration::from_secs(120),
            "no answer from the export"
        );
        h.step();
        std::thread::sleep(Duration::from_millis(20));
    }
    assert!(
        h.state().notice.as_deref().unwrap().contains("written"),
        "{:?}",
        h.state().notice
    );
    assert!(target.join("briefing.html").is_file());
    assert!(target.join("charts").join("03-unemployment.png").is_file());
}

/// A secondary click on a pin offers to remove it, and the offer removes that pin alone. The
/// readout at the pointer gives both fans' quantiles, but not over a handle or the menu.
#[test]
fn a_secondary_click_on_a_pin_removes_it() {
    let dir = tempfile::tempdir().unwrap();
    let mut h = harness(&demo_copy(&dir));
    settle(&mut h);
    let pins = h.state().doc.file.pins.clone();
    // pins[1]: house_prices (series 5) year on year at 2027Q2 = −10.
    let x = horizon(&h, "2027Q2");
    h.hover_at(screen(&h, 5, x, 5.0));
    h.run_steps(2);
    let readout = h
        .query_by_label_contains("pointer at")
        .map(|n| format!("{n:?}"))
        .expect("a readout away from the handles");
    for part in [
        "2027Q2",
        "scenario: median",
        "without conditions: median",
        "90%",
    ] {
        assert!(readout.contains(part), "{part} in {readout}");
    }
    let at = screen(&h, 5, x, pins[1].value);
    h.hover_at(at);
    h.run_steps(2);
    assert!(h.query_by_label_contains("pointer at").is_none());
    // Press and release in frames of their own, as a real pointer does.
    for pressed in [true, false] {
        h.event(egui::Event::PointerButton {
            pos: at,
            button: egui::PointerButton::Secondary,
            pressed,
            modifiers: Modifiers::NONE,
        });
        h.step();
    }
    h.run_steps(3);
    // The chart's readout (drawn above menus) is held back while the menu is open.
    assert!(h.query_by_label_contains("pointer at").is_none());
    h.get_by_label("Remove this pin").click();
    h.run_steps(2);
    let left = &h.state().doc.file.pins;
    assert_eq!(left.len(), pins.len() - 1);
    assert!(!left.contains(&pins[1]), "the pin under the pointer went");
}

/// Every chart view carries one legend naming each mark the charts draw.
#[test]
fn the_charts_carry_a_legend() {
    let dir = tempfile::tempdir().unwrap();
    let mut h = harness(&demo_copy(&dir));
    settle(&mut h);
    for words in [
        "history",
        "without conditions: 90%, median",
        "scenario: 90/68/50%, median",
        "pin",
        "corridor",
        "strained",
        "clashes",
    ] {
        let name = format!("legend: {words}");
        assert!(h.query_all_by_label(&name).count() >= 1, "{name}");
    }
    h.get_by_label("Structural shocks").click();
    h.run_steps(2);
    assert!(
        h.query_all_by_label("legend: usual N(0, 1): 90%, median")
            .count()
            >= 1
    );
}

/// A chart's value range stays put while the fans update: after a pin elsewhere is moved,
/// every chart whose contents still fit its range keeps it exactly (an automatic fit would
/// move most of them), and a chart whose contents grow is widened to hold them, not refitted.
#[test]
fn the_axes_stay_put_when_the_fans_update() {
    let dir = tempfile::tempdir().unwrap();
    let mut h = harness(&demo_copy(&dir));
    settle(&mut h);
    // (the range kept, the value range drawn, the range the contents want)
    type Ranges = Vec<((f64, f64), (f64, f64), (f64, f64))>;
    let ranges = |h: &Harness<'static, TiltyardApp>| -> Ranges {
        (0..10)
            .map(|i| {
                let m = &h.state().view.charts[&(Subject::Series, i)];
                let b = m.transform.expect("drawn").bounds().to_owned();
                let (lo, hi, _) = m.range.expect("fitted");
                ((lo, hi), (b.min()[1], b.max()[1]), m.wanted)
            })
            .collect()
    };
    let before = ranges(&h);
    // pins[1]: house_prices (series 5) year on year at 2027Q2 = −10, moved up by 4.
    let value = h.state().doc.file.pins[1].value;
    let x = horizon(&h, "2027Q2");
    let (from, to) = (screen(&h, 5, x, value), screen(&h, 5, x, value + 4.0));
    // The range each chart's contents wanted at any frame on the way (fans drawn from an
    // intermediate value may want more than the last ones; how many such frames there are
    // depends on the machine's speed).
    let mut seen: Vec<(f64, f64)> = before.iter().map(|r| r.2).collect();
    let mut record = |h: &Harness<'static, TiltyardApp>| {
        for (i, s) in seen.iter_mut().enumerate() {
            let w = h.state().view.charts[&(Subject::Series, i)].wanted;
            *s = (s.0.min(w.0), s.1.max(w.1));
        }
    };
    drag_watching(&mut h, from, to, &mut record);
    let start = Instant::now();
    while h.state().busy() || h.state().session.results.is_none() {
        h.step();
        record(&h);
        assert!(start.elapsed() < Duration::from_secs(120), "no results");
        std::thread::sleep(Duration::from_millis(20));
    }
    h.run_steps(2);
    record(&h);
    let after = ranges(&h);
    let mut kept = 0;
    for (i, ((old, old_drawn, _), (new, drawn, wanted))) in before.iter().zip(&after).enumerate() {
        let ever = seen[i];
        if ever.0 >= old.0 && ever.1 <= old.1 {
            assert_eq!(old, new, "chart {i} kept its range");
            assert_eq!(old_drawn, drawn, "chart {i} drew the same range");
            kept += 1;
        } else {
            assert!(new.0 <= old.0 && new.1 >= old.1, "chart {i} widened only");
            assert!(
                new.0 <= wanted.0 && new.1 >= wanted.1,
                "chart {i} holds its fans"
            );
        }
    }
    assert!(kept >= 6, "only {kept} charts could keep their range");
}

/// A drag across periods that a corridor on the chart already holds draws that corridor
/// again (its periods and bounds), rather than stacking a second one on it.
#[test]
fn a_drag_over_an_existing_corridor_edits_it() {
    let dir = tempfile::tempdir().unwrap();
    let mut h = harness(&demo_copy(&dir));
    settle(&mut h);
    // corridors[2]: policy_rate (series 3), level, 2026Q1–2027Q4, between 1 and 3.
    let before = h.state().doc.file.corridors.clone();
    assert_eq!(before[2].series.as_deref(), Some("policy_rate"));
    let (x0, x1) = (horizon(&h, "2026Q3"), horizon(&h, "2027Q2"));
    let (from, to) = (screen(&h, 3, x0, 1.5), screen(&h, 3, x1, 2.5));
    drag(&mut h, from, to);
    let after = &h.state().doc.file.corridors;
    assert_eq!(after.len(), before.len(), "no corridor was added");
    let c = &after[2];
    assert_eq!((c.from.as_str(), c.to.as_str()), ("2026Q3", "2027Q2"));
    let bound = |b: &Option<scenario::Bound>| match b {
        Some(scenario::Bound::Same(v)) => *v,
        other => panic!("one value expected, got {other:?}"),
    };
    assert!((bound(&c.lower) - 1.5).abs() < 0.2, "{:?}", c.lower);
    assert!((bound(&c.upper) - 2.5).abs() < 0.2, "{:?}", c.upper);
    assert_eq!(
        &after[..2],
        &before[..2],
        "the other corridors are untouched"
    );
    // One undo step brings it back.
    h.key_press_modifiers(Modifiers::COMMAND, egui::Key::Z);
    h.step();
    assert_eq!(h.state().doc.file.corridors, before);
}

/// The narrative is edited in the window (one undo step); moving a pin on a series it
/// mentions marks it "may be out of date" until the user says it still holds.
#[test]
fn the_narrative_is_edited_and_marked_when_its_conditions_change() {
    let dir = tempfile::tempdir().unwrap();
    let mut h = harness(&demo_copy(&dir));
    settle(&mut h);
    assert!(
        h.query_by_label_contains("The conditions in words: ")
            .is_some()
    );
    h.get_by_label("edit narrative").click();
    h.run_steps(2);
    h.get_by_label("narrative").focus();
    h.run_steps(1);
    h.key_press_modifiers(Modifiers::COMMAND, egui::Key::A);
    h.get_by_label("narrative")
        .type_text("House prices fall by a tenth.");
    h.run_steps(2);
    h.get_by_label("done").click();
    h.run_steps(2);
    assert_eq!(
        h.state().doc.file.narrative,
        "House prices fall by a tenth."
    );
    assert!(h.query_by_label_contains("may be out of date").is_none());
    // pins[1]: house_prices at 2027Q2, moved by a drag.
    let value = h.state().doc.file.pins[1].value;
    let x = horizon(&h, "2027Q2");
    let (from, to) = (screen(&h, 5, x, value), screen(&h, 5, x, value + 3.0));
    drag(&mut h, from, to);
    h.run_steps(2);
    assert!(
        h.query_by_label_contains("may be out of date: conditions on House prices")
            .is_some()
    );
    h.get_by_label("still right").click();
    h.run_steps(2);
    assert!(h.query_by_label_contains("may be out of date").is_none());
}

/// Enter enlarges the chart of the selected condition, Enter again or Escape goes back to
/// all the charts.
#[test]
fn the_keyboard_enlarges_the_selected_conditions_chart() {
    let dir = tempfile::tempdir().unwrap();
    let mut h = harness(&demo_copy(&dir));
    settle(&mut h);
    // pins[1] is on house_prices, series 5.
    h.state_mut().view.selected = Some(tiltyard::app::gesture::CondRef::Pin(1));
    h.key_press(egui::Key::Enter);
    h.run_steps(2);
    assert_eq!(h.state().view.enlarged, Some((Subject::Series, 5)));
    assert!(h.query_by_label("back to all").is_some());
    h.key_press(egui::Key::Enter);
    h.run_steps(2);
    assert_eq!(h.state().view.enlarged, None);
    h.key_press(egui::Key::Enter);
    h.run_steps(2);
    h.key_press(egui::Key::Escape);
    h.run_steps(2);
    assert_eq!(h.state().view.enlarged, None);
}

/// The checks panel shows the severity against history that an independent dense numpy
/// computation gives for the same fixed VAR, pins and drivers (`tests/fixtures/severity.json`
/// by `make_severity.py`): the share of windows the scenario goes beyond and the window of
/// history on a par with it.
#[test]
fn the_checks_show_the_severity_against_history() {
    let fx = common::json("pins_gaussian.json");
    let reference = common::json("severity.json");
    let want = &reference["cases"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == "drivers")
        .expect("the drivers case");
    let case = fx["cases"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == "drivers")
        .unwrap();
    let dir = tempfile::tempdir().unwrap();
    let path = common::write_scenario(&dir, &common::pins_case_scenario(&fx, case));
    let mut h = harness(&path);
    settle(&mut h);
    let pct = 100.0 * want["below"].as_f64().unwrap() / want["windows"].as_f64().unwrap();
    let headline = format!(
        "Against history: further than {pct:.0}% of the {}-quarter windows since {}",
        reference["horizon"],
        want["history_from"].as_str().unwrap()
    );
    assert!(h.query_by_label(&headline).is_some(), "{headline}");
    let par = format!(
        "on a par with {}–{}",
        want["nearest"]["from"].as_str().unwrap(),
        want["nearest"]["to"].as_str().unwrap()
    );
    assert!(h.query_by_label_contains(&par).is_some(), "{par}");
}

/// A timed driver is shown with its periods under its shock, editable; "every period" makes it
/// move at every period, and "only some periods…" times it again (one undo step each).
#[test]
fn a_timed_driver_shows_its_periods() {
    let dir = tempfile::tempdir().unwrap();
    let path = demo_file(&dir, "adverse-pins.ron", |file| {
        file.drivers = Some(vec![
            scenario::DriverSpec::Always("output".into()),
            scenario::DriverSpec::Timed {
                shock: "credit_spread".into(),
                from: "2026Q1".into(),
                to: "2026Q2".into(),
            },
            scenario::DriverSpec::Always("house_prices".into()),
            scenario::DriverSpec::Always("unemployment".into()),
        ]);
    });
    let mut h = harness(&path);
    settle(&mut h);
    assert!(h.query_by_label("credit_spread moves from").is_some());
    assert!(h.query_by_label("output moves from").is_none());
    // The only "every period" button is the timed driver's.
    h.get_by_label("every period").click();
    h.run_steps(2);
    assert!(h.query_by_label("credit_spread moves from").is_none());
    let drivers = h.state().doc.file.drivers.clone().unwrap();
    assert!(drivers.contains(&scenario::DriverSpec::Always("credit_spread".into())));
    assert!(h.state().doc.can_undo());
    settle(&mut h);
    assert!(!h.state().stale(), "the edited drivers still meet the pins");
}

/// Press Find in the reverse stress test and wait for its answer.
fn find_reverse(h: &mut Harness<'static, TiltyardApp>) {
    h.get_by_label("Find").click();
    let start = Instant::now();
    while h.state().reverse.answer.is_none() {
        h.step();
        std::thread::sleep(Duration::from_millis(20));
        assert!(start.elapsed() < Duration::from_secs(60), "no answer");
    }
    h.run_steps(2);
}

/// The reverse stress test from the window: the outcome found off the window's thread is the
/// headless command's (same period), and its button adds the outcome as a pin (one undo step);
/// then two outcomes together, the second added in the form, their pins added in one step.
#[test]
fn the_reverse_stress_test_adds_its_outcome_as_a_pin() {
    let dir = tempfile::tempdir().unwrap();
    let path = demo_file(&dir, "adverse-pins.ron", |_| {});
    let mut h = harness(&path);
    settle(&mut h);
    h.get_by_label("reverse stress test…").click();
    h.run_steps(2);
    {
        let r = &mut h.state_mut().reverse.outcomes[0];
        r.series = "bank_lending".into();
        r.units = scenario::Units::YearOnYear;
        r.at_most = true;
        r.threshold = -10.0;
        r.from = "2026Q1".into();
        r.to = "2028Q4".into();
    }
    h.run_steps(2);
    find_reverse(&mut h);
    // The headless engine on the same file.
    let setup = scenario::load(&path).unwrap();
    let model = tiltyard::pipeline::Model::new(&setup).unwrap();
    let outcome = tiltyard::reverse::Outcome {
        series: "bank_lending".into(),
        units: scenario::Units::YearOnYear,
        threshold: -10.0,
        at_most: true,
        from: "2026Q1".into(),
        to: "2028Q4".into(),
    };
    let want =
        tiltyard::reverse::reverse(&setup, &model.central, std::slice::from_ref(&outcome)).unwrap();
    let period = &want.at[0].0;
    let said = format!("{} in {period}", tiltyard::reverse::describe(&outcome));
    assert!(h.query_by_label_contains(&said).is_some(), "{said}");
    let pins = h.state().doc.file.pins.len();
    h.get_by_label("Add the outcome as a pin").click();
    h.run_steps(2);
    let file = &h.state().doc.file;
    assert_eq!(file.pins.len(), pins + 1);
    assert_eq!(&file.pins[pins].period, period);
    assert!(h.state().doc.can_undo());
    // Two outcomes together: the second added in the form, the answer the headless one, and
    // both pins added in one undo step.
    h.get_by_label("+ another outcome").click();
    h.run_steps(2);
    {
        let r = &mut h.state_mut().reverse.outcomes[1];
        r.series = "unemployment".into();
        r.units = scenario::Units::Level;
        r.threshold = 9.5;
        r.at_most = false;
        r.from = "2027Q1".into();
        r.to = "2027Q4".into();
    }
    h.run_steps(2);
    find_reverse(&mut h);
    let file = h.state().doc.file.clone();
    let setup = scenario::Setup::new(file.clone(), &path).unwrap();
    let model = tiltyard::pipeline::Model::new(&setup).unwrap();
    let second = tiltyard::reverse::Outcome {
        series: "unemployment".into(),
        units: scenario::Units::Level,
        threshold: 9.5,
        at_most: false,
        from: "2027Q1".into(),
        to: "2027Q4".into(),
    };
    let both = [outcome.clone(), second.clone()];
    let want = tiltyard::reverse::reverse(&setup, &model.central, &both).unwrap();
    let said = format!(
        "{} in {}",
        tiltyard::reverse::describe(&second),
        want.at[1].0
    );
    assert!(
        want.at[1].1 && h.query_by_label_contains(&said).is_some(),
        "{said}: {:?}",
        h.state().reverse.answer
    );
    let binding = want.at.iter().filter(|a| a.1).count();
    let button = if binding == 1 {
        "Add the outcome as a pin"
    } else {
        "Add the outcomes as pins"
    };
    h.get_by_label(button).click();
    h.run_steps(2);
    assert_eq!(h.state().doc.file.pins.len(), file.pins.len() + binding);
    assert!(h.state_mut().doc.undo());
    assert_eq!(h.state().doc.file.pins.len(), file.pins.len());
}

/// A target on the distribution added in the window tilts the fans (the footer says so and the
/// chart's median moves towards it); undo takes it away.
#[test]
fn a_target_added_in_the_window_tilts_the_fans() {
    let dir = tempfile::tempdir().unwrap();
    let mut h = harness(&demo_copy(&dir));
    settle(&mut h);
    h.get_by_label("+ target").click();
    h.run_steps(2);
    assert_eq!(h.state().doc.file.targets.len(), 1);
    let mean_of = |h: &Harness<'static, TiltyardApp>| {
        let r = h.state().session.results.clone().unwrap();
        let v = r.series.iter().find(|v| v.name == "unemployment").unwrap();
        v.conditional.iter().find(|f| f.x == 8.0).unwrap().q[3]
    };
    let before = mean_of(&h);
    h.state_mut().doc.edit(|f| {
        let t = &mut f.targets[0];
        t.series = "unemployment".into();
        t.period = "2027Q4".into();
        t.mean = Some(before + 0.2);
    });
    settle(&mut h);
    assert!(
        h.query_by_label_contains("targets met by tilting")
            .is_some()
    );
    assert!(mean_of(&h) > before, "the median moves towards the target");
    h.state_mut().doc.undo();
    h.state_mut().doc.undo();
    assert!(h.state().doc.file.targets.is_empty());
}

/// With timed drivers, "Where it comes from" also splits by the date the shocks hit: the
/// headless run's split (the same to the last digit), one part a date, named by its period.
#[test]
fn timed_drivers_split_by_shock_date_in_the_window() {
    let dir = tempfile::tempdir().unwrap();
    let path = demo_file(&dir, "adverse.ron", |file| {
        file.drivers = Some(
            ["output", "unemployment", "credit_spread", "house_prices"]
                .iter()
                .map(|s| scenario::DriverSpec::Timed {
                    shock: s.to_string(),
                    from: "2026Q1".into(),
                    to: "2027Q4".into(),
                })
                .collect(),
        );
    });
    let mut setup = scenario::load(&path).unwrap();
    let out = tiltyard::run::run(&mut setup, &Default::default()).unwrap();
    let dates = out.attribution.as_ref().unwrap().by_date.as_ref().unwrap();
    // Shocks hit from 2026Q1 to 2027Q4 only: the 2028 dates carry nothing.
    assert!(dates[8..].iter().flatten().all(|v| *v == 0.0));
    let mut h = harness(&path);
    settle(&mut h);
    let (_, sources) = h.state().session.sources.clone().expect("a split");
    assert_eq!(Some(&sources.attribution), out.attribution.as_ref());
    h.get_by_label("Where it comes from").click();
    h.run_steps(2);
    h.get_by_label("by shock date").click();
    h.run_steps(2);
    assert_eq!(
        h.state().view.sources_view.split,
        tiltyard::app::sources::Split::Date
    );
    assert!(h.query_all_by_label("shocks in 2026Q1").count() >= 1);
    assert!(h.query_all_by_label("shocks in 2028Q1").next().is_none());
}
