//! The scenario window, driven headless with egui_kittest: opening a scenario from a path
//! shows its series; a drag on a chart moves a pin (and undo restores it); a Shift+drag draws a
//! corridor that appears in the table and reaches the engine; Delete removes it; the worker
//! cancels stale jobs and survives a panic. No file dialog is ever opened.
#![cfg(feature = "gui")]

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
use tiltyard::app::files::PathPicker;
use tiltyard::app::worker::{self, EngineState, Job, Message};
use tiltyard::scenario;

/// Tests never open a dialog.
struct NoDialogs;

impl PathPicker for NoDialogs {
    fn open(&self, _: &Path) -> Option<PathBuf> {
        panic!("a test opened a file dialog")
    }
    fn save(&self, _: &Path, _: &str) -> Option<PathBuf> {
        panic!("a test opened a file dialog")
    }
}

/// The adverse demo, copied into a temporary folder (so recovery files land there) with the
/// dataset by absolute path, and fewer draws to keep the tests quick.
fn demo_copy(dir: &tempfile::TempDir) -> PathBuf {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios-demo");
    let mut file = scenario::read(&root.join("adverse.ron")).unwrap();
    file.dataset = root.join("economy.csv").display().to_string();
    file.draws = 100;
    let path = dir.path().join("adverse.ron");
    std::fs::write(&path, scenario::to_text(&file)).unwrap();
    path
}

fn harness(path: &Path) -> Harness<'static, TiltyardApp> {
    let app = TiltyardApp::new(path, Arc::new(NoDialogs), Arc::new(|| {}));
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
        if !app.busy() && app.results.is_some() {
            break;
        }
        assert!(
            start.elapsed() < Duration::from_secs(120),
            "the engine did not finish: {:?}",
            app.state
        );
        std::thread::sleep(Duration::from_millis(20));
    }
    h.run_steps(2);
}

/// Screen position of a value on chart `i`.
fn screen(h: &Harness<'static, TiltyardApp>, i: usize, x: f64, y: f64) -> Pos2 {
    let t = h.state().charts[&i].transform.expect("the chart was drawn");
    t.position_from_point(&PlotPoint::new(x, y))
}

fn horizon(h: &Harness<'static, TiltyardApp>, label: &str) -> f64 {
    let r = h.state().results.clone().unwrap();
    tiltyard::app::chart::horizon(&r, label).unwrap() as f64
}

#[test]
fn opening_a_scenario_shows_its_series_and_fans() {
    let dir = tempfile::tempdir().unwrap();
    let mut h = harness(&demo_copy(&dir));
    settle(&mut h);
    for name in ["output", "house_prices", "credit_spread"] {
        assert!(h.query_all_by_label(name).count() >= 1, "{name} is shown");
    }
    let app = h.state();
    let r = app.results.as_ref().unwrap();
    assert_eq!(r.series.len(), 10);
    assert!(matches!(app.state, EngineState::Done { draws: 100, .. }));
    assert!(!r.preview);
    // The checks are shown, and the caution.
    assert!(app.checks.is_some());
    assert!(
        h.query_by_label_contains("not predictions or advice")
            .is_some()
    );
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
    h.hover_at(from);
    h.step();
    h.drag_at(from);
    h.step();
    for k in 1..=5 {
        h.hover_at(from + (to - from) * (k as f32 / 5.0));
        h.step();
    }
    h.drop_at(to);
    h.step();
    let after = h.state().doc.file.pins[1].value;
    assert!((after - (before + 4.0)).abs() < 0.5, "pin moved to {after}");
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
fn shift_drag_draws_a_corridor_and_delete_removes_it() {
    let dir = tempfile::tempdir().unwrap();
    let mut h = harness(&demo_copy(&dir));
    settle(&mut h);
    let count = h.state().doc.file.corridors.len();
    // Output (series 0, year on year): from 2026Q3 to 2027Q1, between 0 and 2 percent.
    let (x0, x1) = (horizon(&h, "2026Q3"), horizon(&h, "2027Q1"));
    let from = screen(&h, 0, x0, 0.0);
    let to = screen(&h, 0, x1, 2.0);
    h.event(egui::Event::ModifiersChanged(Modifiers::SHIFT));
    h.hover_at(from);
    h.step();
    h.drag_at(from);
    h.step();
    for k in 1..=5 {
        h.hover_at(from + (to - from) * (k as f32 / 5.0));
        h.step();
    }
    h.drop_at(to);
    h.step();
    h.event(egui::Event::ModifiersChanged(Modifiers::NONE));
    h.step();
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

/// The worker drops stale jobs: of two jobs sent back to back, only the newer one finishes;
/// a job cancelled in flight stops without a result.
#[test]
fn worker_cancels_stale_jobs() {
    let dir = tempfile::tempdir().unwrap();
    let path = demo_copy(&dir);
    let file = scenario::read(&path).unwrap();
    let (jobs, job_rx) = channel();
    let (tx, rx) = channel();
    std::thread::spawn(move || worker::run(job_rx, tx, || {}));
    let old = Arc::new(AtomicBool::new(false));
    for (g, cancel) in [(1, old.clone()), (2, Arc::new(AtomicBool::new(false)))] {
        jobs.send(Job {
            generation: g,
            file: file.clone(),
            path: path.clone(),
            cancel,
        })
        .unwrap();
    }
    old.store(true, std::sync::atomic::Ordering::Relaxed);
    let mut done = Vec::new();
    while done.is_empty() {
        match rx.recv_timeout(Duration::from_secs(120)).unwrap() {
            Message::State(g, EngineState::Done { .. }) => done.push(g),
            Message::Failed(g, m) => panic!("job {g} failed: {m}"),
            _ => {}
        }
    }
    assert_eq!(done, vec![2]);
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

/// The model settings are in the window; changing the lags re-estimates in the background
/// (the model line follows), while an edit of a condition does not re-estimate.
#[test]
fn model_settings_re_estimate_in_the_background() {
    let dir = tempfile::tempdir().unwrap();
    let mut h = harness(&demo_copy(&dir));
    settle(&mut h);
    assert!(
        h.state().model_line.contains("VAR(2)"),
        "{}",
        h.state().model_line
    );
    h.get_by_label("Model settings").click();
    h.run_steps(2);
    assert!(
        h.query_all_by_label("lags").count() >= 1,
        "the lags field is shown"
    );
    h.state_mut().doc.edit(|f| {
        if let scenario::ModelSpec::Minnesota(m) = &mut f.model {
            m.lags = 3;
        }
    });
    settle(&mut h);
    assert!(
        h.state().model_line.contains("VAR(3)"),
        "{}",
        h.state().model_line
    );
}
