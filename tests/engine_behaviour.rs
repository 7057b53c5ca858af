//! Engine behaviour that needs no outside numbers: reproducibility across thread counts,
//! drivers that cannot reach a pin, contradictory pins, and explosive-draw reporting.

mod common;

use std::sync::atomic::AtomicBool;

use common::*;
use nalgebra::{DMatrix, DVector};
use tiltyard::forecast::{ForecastError, Plan, Theta};
use tiltyard::run::{RunError, RunOptions, run};
use tiltyard::scenario;

fn minnesota_scenario(extra: &str) -> String {
    macro_scenario("minnesota((lags: 2, tightness: fixed(0.2)))", extra, 6)
}

fn run_on_threads(text: &str, threads: usize) -> Vec<Vec<f64>> {
    let dir = tempfile::tempdir().unwrap();
    let path = write_scenario(&dir, text);
    let mut setup = scenario::load(&path).unwrap();
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .unwrap();
    let out = pool
        .install(|| run(&mut setup, &RunOptions::default()))
        .unwrap();
    out.paths.conditional
}

/// Same scenario and seed: bit-identical paths on 1 and on 2 threads (posterior draws and
/// paths both), and a different seed gives different paths.
#[test]
fn results_do_not_depend_on_thread_count() {
    let pins = r#"pins: [(series: "realgdp", period: "2010Q2", units: year_on_year, value: 1.0)],
        draws: 64, paths_per_draw: 3, seed: 42"#;
    let text = minnesota_scenario(pins);
    let one = run_on_threads(&text, 1);
    let two = run_on_threads(&text, 2);
    assert_eq!(one.len(), 64 * 3);
    let bits = |v: &Vec<Vec<f64>>| v.iter().flatten().map(|x| x.to_bits()).collect::<Vec<_>>();
    assert_eq!(bits(&one), bits(&two));
    let other = run_on_threads(&text.replace("seed: 42", "seed: 43"), 2);
    assert_ne!(bits(&one), bits(&other));
}

/// Recursive identification with tbilrate ordered last: a tbilrate-only driver has no
/// impact effect on realgdp, so a realgdp pin at the first forecast period is unreachable,
/// and the message names that pin.
#[test]
fn unreachable_pin_is_named() {
    let extra = r#"ordering: ["realgdp", "realcons", "realinv", "tbilrate"],
        drivers: ["tbilrate"],
        pins: [
            (series: "tbilrate", period: "2010Q2", value: 1.0),
            (series: "realgdp", period: "2009Q4", units: level, value: 13000.0),
        ],
        draws: 4"#;
    let dir = tempfile::tempdir().unwrap();
    let path = write_scenario(&dir, &minnesota_scenario(extra));
    let mut setup = scenario::load(&path).unwrap();
    // The run refuses before sampling; its clash report names the pin and the drivers.
    let err = run(&mut setup, &RunOptions::default()).unwrap_err();
    let RunError::Clash(report) = &err else {
        panic!("expected a clash, got {err}")
    };
    let finding = &report.findings[0];
    assert_eq!(finding.kind, "unreachable_by_drivers");
    assert_eq!(
        finding.conditions,
        vec!["realgdp at 2009Q4 = 13000".to_string()]
    );
    assert_eq!(finding.fields, vec!["pins[1]".to_string()]);
    let msg = err.to_string();
    assert!(
        msg.contains("realgdp at 2009Q4") && msg.contains("tbilrate"),
        "{msg}"
    );
    // The engine alone says the same.
    let theta = central(&setup);
    let err = Plan::new(&theta, &setup.conditions().unwrap(), None).unwrap_err();
    let ForecastError::Unreachable { conditions, .. } = &err else {
        panic!("{err}")
    };
    assert_eq!(conditions, &vec!["realgdp at 2009Q4 = 13000".to_string()]);
}

/// θ at the posterior mean.
fn central(setup: &scenario::Setup) -> Theta {
    let (tiltyard::forecast::ParamSource::Posterior(post), _) = setup.estimate().unwrap() else {
        panic!("posterior")
    };
    Theta::new(
        post.mean().unwrap(),
        &setup.ordering,
        &setup.tail().unwrap(),
        setup.file.horizon,
    )
    .unwrap()
}

/// A later pin on the same series is reachable by its own shock (same setting as above).
#[test]
fn driver_reaches_later_periods_through_dynamics() {
    let extra = r#"ordering: ["realgdp", "realcons", "realinv", "tbilrate"],
        drivers: ["tbilrate"],
        pins: [(series: "realgdp", period: "2010Q3", units: level, value: 13000.0)],
        draws: 4"#;
    let dir = tempfile::tempdir().unwrap();
    let path = write_scenario(&dir, &minnesota_scenario(extra));
    let mut setup = scenario::load(&path).unwrap();
    let out = run(&mut setup, &RunOptions::default()).unwrap();
    assert!(out.paths.max_pin_error < 1e-9);
}

/// Levels pinned in two periods fix their growth; pinning that growth to another value
/// contradicts them, and the message names all three pins.
#[test]
fn contradictory_pins_are_named() {
    let fx = json("var_ols.json");
    let model = fixed_model_ron(&matrix(&fx["params"]), &matrix(&fx["sigma_u"]));
    let extra = r#"pins: [
            (series: "realgdp", period: "2010Q1", value: 13000.0),
            (series: "realgdp", period: "2010Q2", value: 13100.0),
            (series: "realgdp", period: "2010Q2", units: pct_change, value: 2.0),
            (series: "tbilrate", period: "2010Q2", value: 0.5),
        ]"#;
    let dir = tempfile::tempdir().unwrap();
    let path = write_scenario(&dir, &macro_scenario(&model, extra, 4));
    let setup = scenario::load(&path).unwrap();
    let (tiltyard::forecast::ParamSource::Fixed(p), _) = setup.estimate().unwrap() else {
        panic!()
    };
    let theta = Theta::new(p, &setup.ordering, &setup.tail().unwrap(), 4).unwrap();
    let err = Plan::new(&theta, &setup.conditions().unwrap(), None).unwrap_err();
    let ForecastError::Contradictory { pins, .. } = &err else {
        panic!("{err}")
    };
    assert_eq!(pins.len(), 3, "{err}");
    assert!(!err.to_string().contains("tbilrate"), "{err}");
    // Consistent growth (13100/13000 − 1 = 0.769…%) is redundant, not contradictory: it is
    // dropped with a note naming it, and still met by every path.
    let g = 100.0 * (13100.0f64 / 13000.0 - 1.0);
    let text = macro_scenario(
        &model,
        &extra.replace("value: 2.0", &format!("value: {g:e}")),
        4,
    );
    let path = write_scenario(&dir, &text);
    let setup = scenario::load(&path).unwrap();
    let plan = Plan::new(&theta, &setup.conditions().unwrap(), None).unwrap();
    assert_eq!(plan.pin_count(), 3);
    assert!(
        plan.notes()
            .iter()
            .any(|n| n.contains("% change on the previous period") && n.contains("implied")),
        "{:?}",
        plan.notes()
    );
    let mut rng = <rand_chacha::ChaCha8Rng as rand::SeedableRng>::seed_from_u64(1);
    let (y, _) = plan.sample(&theta, &mut rng).unwrap();
    assert!(plan.pin_error(&y) < 1e-9, "{}", plan.pin_error(&y));
}

/// A cancelled run stops with `Cancelled`.
#[test]
fn cancelled_sampling_stops() {
    let dir = tempfile::tempdir().unwrap();
    let path = write_scenario(&dir, &minnesota_scenario("draws: 8"));
    let setup = scenario::load(&path).unwrap();
    let (source, _) = setup.estimate().unwrap();
    let cancel = AtomicBool::new(true);
    let err = tiltyard::forecast::build_thetas(
        &source,
        &setup.ordering,
        &setup.tail().unwrap(),
        6,
        tiltyard::forecast::DrawSpec {
            count: 8,
            seed: 1,
            below: None,
            min_kept_share: 0.05,
        },
        &cancel,
    )
    .unwrap_err();
    assert_eq!(err, ForecastError::Cancelled);
}

/// Reweighting (off by default): the same draws and paths, with weights per posterior draw;
/// the unconditional fans are unchanged, the conditional ones move, and the effective sample
/// size is reported (its value is checked against an independent computation below).
#[test]
fn reweighting_changes_only_the_conditional_fans() {
    let conditions = r#"pins: [(series: "realgdp", period: "2010Q2", units: year_on_year, value: -3.0)],
        corridors: [(series: "tbilrate", from: "2009Q4", to: "2010Q2", lower: 0.5)],
        draws: 150, seed: 8"#;
    let dir = tempfile::tempdir().unwrap();
    let plain = write_scenario(&dir, &minnesota_scenario(conditions));
    let mut setup = scenario::load(&plain).unwrap();
    let a = run(&mut setup, &RunOptions::default()).unwrap();
    assert!(a.effective_draws.is_none());
    let dir2 = tempfile::tempdir().unwrap();
    let weighted = write_scenario(
        &dir2,
        &minnesota_scenario(&format!("{conditions}, reweight: true")),
    );
    let mut setup = scenario::load(&weighted).unwrap();
    let b = run(&mut setup, &RunOptions::default()).unwrap();
    assert!(b.effective_draws.is_some());
    assert_eq!(a.paths.conditional, b.paths.conditional);
    let (uncond_a, uncond_b): (Vec<_>, Vec<_>) = (
        a.fans
            .iter()
            .filter(|r| r.kind == tiltyard::report::Kind::Unconditional)
            .collect(),
        b.fans
            .iter()
            .filter(|r| r.kind == tiltyard::report::Kind::Unconditional)
            .collect(),
    );
    assert_eq!(uncond_a, uncond_b);
    let moved = a
        .fans
        .iter()
        .zip(&b.fans)
        .filter(|(x, y)| x.kind == tiltyard::report::Kind::Conditional && x.mean != y.mean)
        .count();
    assert!(moved > 0);
    assert!(tiltyard::run::summary(&setup, &b).contains("effective sample size"));
}

/// Fixed coefficients: one θ whose paths are split into chunks across threads; the paths are
/// bit-identical on 1, 2 and 4 threads.
#[test]
fn fixed_coefficients_split_paths_reproducibly() {
    let fx = json("var_ols.json");
    let model = fixed_model_ron(&matrix(&fx["params"]), &matrix(&fx["sigma_u"]));
    let extra = r#"pins: [(series: "realgdp", period: "2010Q2", units: year_on_year, value: 1.0)],
        corridors: [(series: "tbilrate", from: "2009Q4", to: "2010Q3", lower: 0.0)],
        draws: 300, seed: 5"#;
    let text = macro_scenario(&model, extra, 6);
    let one = run_on_threads(&text, 1);
    assert_eq!(one.len(), 300);
    for threads in [2, 4] {
        assert_eq!(one, run_on_threads(&text, threads), "{threads} threads");
    }
}

/// The stationarity filter keeps exactly the first `draws` posterior draws whose largest
/// companion root is below the bound, reports how many were tried, and refuses when too few
/// pass. The roots of the kept draws are recomputed here from their coefficients (companion
/// matrix built in the test, eigenvalues by nalgebra's Schur decomposition).
#[test]
fn stationarity_filter_keeps_draws_below_the_bound() {
    let dir = tempfile::tempdir().unwrap();
    let text = minnesota_scenario("draws: 40, seed: 3, largest_root: below(1.004)");
    let mut setup = scenario::load(&write_scenario(&dir, &text)).unwrap();
    let out = run(&mut setup, &RunOptions::default()).unwrap();
    let roots = &out.roots;
    assert_eq!((roots.kept, roots.below), (40, Some(1.004)));
    assert_eq!(roots.measured.len(), roots.tried);
    let passing = roots.measured.iter().filter(|&&r| r < 1.004).count();
    assert_eq!(passing, 40, "the last draw tried is the 40th kept");
    assert!(
        roots.tried > 40,
        "some draws were above the bound: {:?}",
        roots.measured
    );
    let (source, _) = setup.estimate().unwrap();
    let spec = tiltyard::forecast::DrawSpec {
        count: 40,
        seed: 3,
        below: Some(1.004),
        min_kept_share: 0.05,
    };
    let cancel = AtomicBool::new(false);
    let set = tiltyard::forecast::build_thetas(
        &source,
        &setup.ordering,
        &setup.tail().unwrap(),
        6,
        spec,
        &cancel,
    )
    .unwrap();
    for theta in &set.thetas {
        let (n, p) = (theta.n(), theta.p());
        let mut companion = nalgebra::DMatrix::zeros(n * p, n * p);
        for (l, b) in theta.lags.iter().enumerate() {
            companion.view_mut((0, l * n), (n, n)).copy_from(b);
        }
        for i in n..n * p {
            companion[(i, i - n)] = 1.0;
        }
        let root = companion
            .complex_eigenvalues()
            .iter()
            .map(|z| z.norm())
            .fold(0.0, f64::max);
        assert!(root < 1.004, "kept a draw with root {root}");
    }
    let text = minnesota_scenario("draws: 40, seed: 3, largest_root: below(0.9)");
    let mut setup = scenario::load(&write_scenario(&dir, &text)).unwrap();
    let err = run(&mut setup, &RunOptions::default()).unwrap_err();
    let msg = err.to_string();
    assert!(
        msg.contains("largest root below 0.9") && msg.contains("min_kept_share"),
        "{msg}"
    );
}

/// Fixed coefficients with an explosive root: refused by the filter, naming the root; kept
/// (the default) they run, and at a horizon where year-on-year growth overflows every path is
/// set aside and the run fails saying why and what to change — no infinity reaches a table.
#[test]
fn explosive_fixed_coefficients_are_refused_or_reported() {
    let dir = tempfile::tempdir().unwrap();
    let n = 4;
    let b = nalgebra::DMatrix::from_fn(1 + 2 * n, n, |r, c| if r == 1 + c { 1.5 } else { 0.0 });
    let sigma = nalgebra::DMatrix::identity(n, n);
    let model = fixed_model_ron(&b, &sigma);
    let growth = r#"series: [
        (name: "realgdp", transform: log100, display: year_on_year),
        (name: "realcons", transform: log100),
        (name: "realinv", transform: log100),
        (name: "tbilrate", transform: as_is),
    ],"#;
    let with = |extra: &str, h: usize| {
        let text = macro_scenario(&model, extra, h);
        let start = text.find("series: [").unwrap();
        let end = start + text[start..].find("],").unwrap() + 2;
        format!("{}{growth}{}", &text[..start], &text[end..])
    };
    let mut setup =
        scenario::load(&write_scenario(&dir, &with("largest_root: below(1.0)", 4))).unwrap();
    let msg = run(&mut setup, &RunOptions::default())
        .unwrap_err()
        .to_string();
    assert!(
        msg.contains("1.5000") && msg.contains("largest_root"),
        "{msg}"
    );
    let mut setup = scenario::load(&write_scenario(&dir, &with("draws: 50", 40))).unwrap();
    let msg = run(&mut setup, &RunOptions::default())
        .unwrap_err()
        .to_string();
    assert!(
        msg.contains("50 of 50 paths") && msg.contains("overflow") && msg.contains("horizon"),
        "{msg}"
    );
}

/// Reweighting against an independent computation. With one level pin `y_{i,T+t} = r`, the
/// weight of posterior draw θ is the normal density of r under θ's unconditional forecast:
/// mean from iterating the VAR on the history, variance `Σ_{j<t} (Ψ_j Σ Ψ_j')_{ii}` from the
/// moving-average weights `Ψ_0 = I, Ψ_j = Σ_l B_l Ψ_{j−l}` (Lütkepohl 2005, §2.2). From those
/// weights, computed here without the engine's conditioning code: the effective sample size
/// `(Σω)²/Σω²` and the weighted mean of an unpinned cell over the run's own paths must be the
/// run's, to rounding.
#[test]
fn reweighting_matches_weights_from_the_moving_average_form() {
    let text = minnesota_scenario(
        r#"pins: [(series: "tbilrate", period: "2010Q1", value: 0.5)], draws: 150, seed: 8,
        reweight: true"#,
    );
    let dir = tempfile::tempdir().unwrap();
    let path = write_scenario(&dir, &text);
    let mut setup = scenario::load(&path).unwrap();
    let out = run(&mut setup, &RunOptions::default()).unwrap();
    let model = tiltyard::pipeline::Model::new(&setup).unwrap();
    let set = model
        .draw(&setup, setup.file.draws, &AtomicBool::new(false))
        .unwrap();
    let (n, i) = (setup.n(), 3); // tbilrate
    let t = (1..=setup.file.horizon)
        .find(|&t| setup.last_period().offset(t as i64).to_string() == "2010Q1")
        .unwrap();
    let tail = setup.tail().unwrap();
    let log_weight = |theta: &Theta| {
        // Mean: the VAR iterated from the last p observations.
        let p = theta.lags.len();
        let mut history: Vec<DVector<f64>> =
            tail.iter().map(|r| DVector::from_vec(r.clone())).collect();
        for _ in 0..t {
            let mut next = theta.intercept.clone();
            for (l, b) in theta.lags.iter().enumerate() {
                next += b * &history[history.len() - 1 - l];
            }
            history.push(next);
        }
        let mean = history.last().unwrap()[i];
        // Variance: Σ_{j<t} (Ψ_j Σ Ψ_j')_ii.
        let sigma = &theta.impact * theta.impact.transpose();
        let mut psi: Vec<DMatrix<f64>> = vec![DMatrix::identity(n, n)];
        for j in 1..t {
            let mut next = DMatrix::zeros(n, n);
            for l in 1..=p.min(j) {
                next += &theta.lags[l - 1] * &psi[j - l];
            }
            psi.push(next);
        }
        let var: f64 = psi
            .iter()
            .map(|m| (m * &sigma * m.transpose())[(i, i)])
            .sum();
        -0.5 * ((2.0 * std::f64::consts::PI * var).ln() + (0.5 - mean).powi(2) / var)
    };
    let lw: Vec<f64> = out
        .paths
        .sources
        .iter()
        .map(|&k| log_weight(&set.thetas[k]))
        .collect();
    let top = lw.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let w: Vec<f64> = lw.iter().map(|l| (l - top).exp()).collect();
    let (sum, sq): (f64, f64) = (w.iter().sum(), w.iter().map(|x| x * x).sum());
    let ess = out.effective_draws.unwrap();
    assert!(
        (ess - sum * sum / sq).abs() < 1e-9 * ess,
        "{ess} against {}",
        sum * sum / sq
    );
    // The weighted mean of tbilrate at the last period (as_is, level: model units).
    let h = setup.file.horizon;
    let cell = (h - 1) * n + i;
    let mean: f64 = out
        .paths
        .conditional
        .iter()
        .zip(&w)
        .map(|(y, wk)| y[cell] * wk)
        .sum::<f64>()
        / sum;
    let row = out
        .fans
        .iter()
        .find(|r| {
            r.series == "tbilrate"
                && r.horizon == h
                && r.kind == tiltyard::report::Kind::Conditional
        })
        .unwrap();
    assert!(
        (row.mean - mean).abs() < 1e-9 * mean.abs().max(1.0),
        "{} against {mean}",
        row.mean
    );
}
