//! Corridors against the dense cross-check engine (ALGORITHMS §11.1 and §11.3): dense
//! Gaussian conditioning on the pins and naive rejection for the corridors, written here
//! independently of the engine's kriging, drivers and truncated-normal code (it shares only
//! the shock map `M`, which `reference_pins.rs` checks against statsmodels). Also: every draw
//! meets every corridor under parameter uncertainty, whatever the seed.

mod common;

use std::sync::atomic::AtomicBool;

use common::*;
use nalgebra::{DMatrix, DVector};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use tiltyard::forecast::{ParamSource, Sampling, Theta, ThetaSet, sample_paths};
use tiltyard::run::{RunOptions, run};
use tiltyard::scenario::{self, Setup};

/// 4 combined standard errors for means, 5 for variances and covariances (ALGORITHMS §11.4).
const MEAN_SE: f64 = 4.0;
const VAR_SE: f64 = 5.0;
const PATHS: usize = 20_000;

fn fixed_setup(extra: &str, dir: &tempfile::TempDir) -> Setup {
    let fx = json("var_ols.json");
    let model = fixed_model_ron(&matrix(&fx["params"]), &matrix(&fx["sigma_u"]));
    let text = macro_scenario(
        &model,
        &format!(r#"ordering: ["realgdp", "realinv", "realcons", "tbilrate"], {extra}"#),
        6,
    );
    scenario::load(&write_scenario(dir, &text)).unwrap()
}

fn theta_of(setup: &Setup) -> Theta {
    let (ParamSource::Fixed(p), _) = setup.estimate().unwrap() else {
        panic!("fixed")
    };
    Theta::new(p, &setup.ordering, &setup.tail().unwrap(), 6).unwrap()
}

/// Dense `M` from unit shocks.
fn dense_m(theta: &Theta) -> DMatrix<f64> {
    let big_n = theta.len();
    let mu = DVector::from_column_slice(&theta.mean);
    let mut m = DMatrix::zeros(big_n, big_n);
    for c in 0..big_n {
        let mut e = vec![0.0; big_n];
        e[c] = 1.0;
        m.set_column(c, &(DVector::from_vec(theta.path_from_shocks(&e)) - &mu));
    }
    m
}

/// Conditions as dense rows on the path: `(R, r)` and `(S, a, b)` in model units.
struct Dense {
    r: DMatrix<f64>,
    rv: DVector<f64>,
    s: DMatrix<f64>,
    a: DVector<f64>,
    b: DVector<f64>,
}

/// Rows of path conditions only (no shock targets), straight from the scenario layer.
fn dense_rows(setup: &Setup, big_n: usize) -> Dense {
    let cond = setup.conditions().unwrap();
    let row = |t: &tiltyard::forecast::Target| {
        let tiltyard::forecast::Target::Path { terms } = t else {
            panic!("path conditions only")
        };
        let mut v = DVector::zeros(big_n);
        for &(c, a) in terms {
            v[c] += a;
        }
        v
    };
    let pins: Vec<_> = cond
        .pins
        .iter()
        .map(|p| (row(&p.target), p.value))
        .collect();
    let bounded: Vec<_> = cond
        .corridors
        .iter()
        .flat_map(|c| c.rows.iter().map(|b| (row(&b.target), b.lower, b.upper)))
        .collect();
    Dense {
        r: DMatrix::from_fn(pins.len(), big_n, |i, j| pins[i].0[j]),
        rv: DVector::from_iterator(pins.len(), pins.iter().map(|p| p.1)),
        s: DMatrix::from_fn(bounded.len(), big_n, |i, j| bounded[i].0[j]),
        a: DVector::from_iterator(bounded.len(), bounded.iter().map(|b| b.1)),
        b: DVector::from_iterator(bounded.len(), bounded.iter().map(|b| b.2)),
    }
}

fn inside(d: &Dense, y: &DVector<f64>) -> bool {
    let v = &d.s * y;
    (0..v.len()).all(|i| d.a[i] <= v[i] && v[i] <= d.b[i])
}

fn normals(rng: &mut ChaCha8Rng, k: usize) -> DVector<f64> {
    DVector::from_fn(k, |_, _| StandardNormal.sample(rng))
}

/// Naive rejection: paths with shocks `ε` where the drivers `J` are `N(0, I)` conditioned on
/// the pins given the rest (dense pseudo-inverse), redrawn until the corridors hold; with
/// every shock driving this is textbook conditioning followed by rejection.
fn dense_paths(theta: &Theta, d: &Dense, drivers: &[bool], count: usize) -> Vec<DVector<f64>> {
    let m = dense_m(theta);
    let mu = DVector::from_column_slice(&theta.mean);
    let big_n = mu.len();
    let f = &d.r * &m;
    let cells: Vec<usize> = (0..big_n).filter(|&c| drivers[c]).collect();
    let fj = DMatrix::from_fn(f.nrows(), cells.len(), |i, k| f[(i, cells[k])]);
    let fjt = fj.transpose();
    let solve = (&fj * &fjt).try_inverse().unwrap();
    let mut rng = ChaCha8Rng::seed_from_u64(77);
    let mut out = Vec::with_capacity(count);
    while out.len() < count {
        let mut eps = normals(&mut rng, big_n);
        // No cap on the tries: giving up on a hard ε_J̄ would reweight the non-drivers.
        loop {
            for &c in &cells {
                eps[c] = StandardNormal.sample(&mut rng);
            }
            let gap = &d.rv - &d.r * (&mu + &m * &eps);
            let step = &fjt * (&solve * gap);
            let mut e = eps.clone();
            for (k, &c) in cells.iter().enumerate() {
                e[c] += step[k];
            }
            let y = &mu + &m * &e;
            if inside(d, &y) {
                out.push(y);
                break;
            }
        }
    }
    out
}

/// Sample mean and covariance.
fn moments(ys: &[DVector<f64>]) -> (DVector<f64>, DMatrix<f64>) {
    let n = ys.len() as f64;
    let big_n = ys[0].len();
    let mean = ys.iter().fold(DVector::zeros(big_n), |a, y| a + y) / n;
    let mut cov = DMatrix::zeros(big_n, big_n);
    for y in ys {
        let d = y - &mean;
        cov += &d * d.transpose();
    }
    (mean, cov / (n - 1.0))
}

/// Variance of the products `(y_i − m_i)(y_j − m_j)` over the sample: its square root over
/// `√n` is the standard error of the sample covariance.
fn product_var(ys: &[DVector<f64>], m: &DVector<f64>, (i, j): (usize, usize), c: f64) -> f64 {
    ys.iter()
        .map(|y| ((y[i] - m[i]) * (y[j] - m[j]) - c).powi(2))
        .sum::<f64>()
        / ys.len() as f64
}

/// Compare the engine with the dense cross-check: means within 4 combined standard errors,
/// variances and covariances within 5 (their standard errors from the samples' own
/// products, ALGORITHMS §11.4).
fn compare(name: &str, engine: &[DVector<f64>], dense: &[DVector<f64>]) {
    let (m1, c1) = moments(engine);
    let (m2, c2) = moments(dense);
    let (n1, n2) = (engine.len() as f64, dense.len() as f64);
    for i in 0..m1.len() {
        let se = (c1[(i, i)] / n1 + c2[(i, i)] / n2).sqrt();
        assert!(
            (m1[i] - m2[i]).abs() <= MEAN_SE * se + 1e-9 * (1.0 + m2[i].abs()),
            "{name}: mean[{i}] {} vs {} (s.e. {se:e})",
            m1[i],
            m2[i]
        );
        for j in 0..=i {
            let se = (product_var(engine, &m1, (i, j), c1[(i, j)]) / n1
                + product_var(dense, &m2, (i, j), c2[(i, j)]) / n2)
                .sqrt();
            let scale = (1.0 + m2[i].abs()) * (1.0 + m2[j].abs());
            assert!(
                (c1[(i, j)] - c2[(i, j)]).abs() <= VAR_SE * se + 1e-12 * scale,
                "{name}: cov[{i},{j}] {} vs {} (s.e. {se:e})",
                c1[(i, j)],
                c2[(i, j)]
            );
        }
    }
}

fn engine_paths(setup: &Setup, theta: Theta) -> Vec<DVector<f64>> {
    let set = ThetaSet::single(theta);
    let how = Sampling {
        paths_per_theta: PATHS,
        seed: 5,
        reweight: false,
        min_acceptance: 1e-5,
        engine: tiltyard::crosscheck::EngineKind::Main,
    };
    let out = sample_paths(
        &set,
        0..1,
        &setup.conditions().unwrap(),
        how,
        &AtomicBool::new(false),
    )
    .unwrap();
    assert!(out.max_pin_error < 1e-9 && out.max_corridor_violation < 1e-9);
    out.conditional
        .iter()
        .map(|y| DVector::from_column_slice(y))
        .collect()
}

/// Corridor bounds `[level·(1 − lo), level·(1 + hi_t)]` around the unconditional mean of
/// series `i` at horizons `from..=to`, in levels.
fn bounds_around(
    theta: &Theta,
    i: usize,
    (from, to): (usize, usize),
    lo: f64,
    hi: f64,
) -> (String, String) {
    let level = |t: usize| (theta.mean[(t - 1) * 4 + i] / 100.0).exp();
    let lower: Vec<String> = (from..=to)
        .map(|t| format!("{:.2}", level(t) * (1.0 - lo)))
        .collect();
    let upper: Vec<String> = (from..=to)
        .map(|t| {
            format!(
                "{:.2}",
                level(t) * (1.0 + hi * (1.0 + 0.5 * (t - from) as f64))
            )
        })
        .collect();
    (lower.join(", "), upper.join(", "))
}

/// Every shock free: a level corridor on realgdp with bounds by period, a realinv growth
/// corridor and a tbilrate pin.
#[test]
fn corridors_match_the_dense_cross_check() {
    let dir = tempfile::tempdir().unwrap();
    let theta = theta_of(&fixed_setup("", &dir));
    let (lower, upper) = bounds_around(&theta, 0, (3, 5), 0.005, 0.006);
    let conditions = format!(
        r#"pins: [(series: "tbilrate", period: "2010Q1", value: 0.3)],
        corridors: [
            (series: "realgdp", from: "2010Q2", to: "2010Q4", lower: [{lower}], upper: [{upper}]),
            (series: "realinv", from: "2010Q3", to: "2010Q3", units: year_on_year, lower: -8.0),
        ]"#
    );
    let setup = fixed_setup(&conditions, &dir);
    let theta = theta_of(&setup);
    let d = dense_rows(&setup, theta.len());
    let dense = dense_paths(&theta, &d, &[true; 24], PATHS);
    compare("all shocks", &engine_paths(&setup, theta), &dense);
}

/// Drivers tbilrate and realcons: a tbilrate level corridor and a realgdp pin. The non-driver
/// shocks (realgdp's above all) shift the corridor quantities path by path, and the corridor
/// law must follow them (a law that ignored them misses the realgdp–tbilrate covariances by
/// about 15 standard errors). Naive rejection needs finitely many tries on average only while
/// the non-drivers move the corridor quantities less than the drivers do (otherwise
/// `E[1/P(corridor | ε_J̄)]` diverges), which limits the cases this engine can check.
#[test]
fn corridors_with_drivers_match_the_dense_cross_check() {
    let dir = tempfile::tempdir().unwrap();
    let conditions = r#"drivers: ["tbilrate", "realcons"],
        pins: [(series: "realgdp", period: "2010Q4", value: 13400.0)],
        corridors: [(series: "tbilrate", from: "2010Q1", to: "2010Q4", lower: [-1.0, -1.2, -1.0, -0.8], upper: [0.5, 0.7, 1.0, 1.2])]"#;
    let setup = fixed_setup(conditions, &dir);
    let theta = theta_of(&setup);
    let d = dense_rows(&setup, theta.len());
    let mask = setup.conditions().unwrap().driver_cells(4, 6).unwrap();
    let dense = dense_paths(&theta, &d, &mask, PATHS);
    compare("drivers", &engine_paths(&setup, theta), &dense);
}

/// Under parameter uncertainty (Minnesota posterior draws), every path of every seed meets
/// every pin and every corridor.
#[test]
fn every_draw_meets_every_corridor() {
    let extra = r#"pins: [(series: "realgdp", period: "2010Q2", units: year_on_year, value: -1.0)],
        corridors: [
            (series: "tbilrate", from: "2009Q4", to: "2010Q4", lower: [0.0, 0.0, 0.25, 0.5, 0.5], upper: 1.5),
            (series: "realinv", from: "2010Q1", to: "2010Q3", units: pct_change, upper: [0.0, None, -1.0]),
            (shock: "realcons", from: "2010Q1", to: "2010Q2", lower: -1.0, upper: 1.0),
        ],
        draws: 200, paths_per_draw: 5"#;
    let text = macro_scenario("minnesota((lags: 2, tightness: fixed(0.2)))", extra, 6);
    for seed in 1..=4 {
        let dir = tempfile::tempdir().unwrap();
        let mut setup = scenario::load(&write_scenario(&dir, &text)).unwrap();
        let options = RunOptions {
            seed: Some(seed),
            ..RunOptions::default()
        };
        let out = run(&mut setup, &options).unwrap();
        assert_eq!(out.paths.conditional.len(), 1000);
        assert!(out.paths.max_pin_error < 1e-9, "seed {seed}");
        assert!(
            out.paths.max_corridor_violation < 1e-9,
            "seed {seed}: violation {:e}",
            out.paths.max_corridor_violation
        );
    }
}

/// A constructed two-series random walk (coefficients chosen for the test; history from the
/// fixture data set): the tbilrate shock (a non-driver, ordered first) moves realgdp by 0.6 on
/// impact, the realgdp shock (the driver) by 1. Corridors on realgdp's quarterly growth in
/// every period and a level pin at the end that fixes their sum: the last growth corridor is
/// a combination of the pin and the other corridors (an extra inequality kept by rejection),
/// and the non-drivers move every corridor quantity, so the law of the corridors must follow
/// them path by path. Sharp against a law that ignored the non-drivers (checked once by
/// breaking it on purpose: the tbilrate–realgdp covariances then miss by about 15 standard
/// errors).
#[test]
fn dependent_corridors_with_drivers_match_the_dense_cross_check() {
    let data = fixtures().join("macro4.csv");
    let dir = tempfile::tempdir().unwrap();
    let last = 100.0 * 12990.341_f64.ln(); // realgdp 2009Q3 (macro4.csv)
    let pin = ((last + 2.0) / 100.0).exp();
    let text = format!(
        r#"(
    name: "random walk",
    dataset: "{}",
    series: [(name: "tbilrate"), (name: "realgdp", transform: log100)],
    model: fixed((intercept: [0.0, 0.5], lags: [[[1.0, 0.0], [0.0, 1.0]]], sigma: [[1.0, 0.6], [0.6, 1.36]])),
    drivers: ["realgdp"],
    horizon: 4,
    pins: [(series: "realgdp", period: "2010Q3", value: {pin})],
    corridors: [(series: "realgdp", from: "2009Q4", to: "2010Q3", units: pct_change, lower: 0.0, upper: 1.0)],
)"#,
        data.display()
    );
    let setup = scenario::load(&write_scenario(&dir, &text)).unwrap();
    let (ParamSource::Fixed(p), _) = setup.estimate().unwrap() else {
        panic!("fixed")
    };
    let theta = Theta::new(p, &setup.ordering, &setup.tail().unwrap(), 4).unwrap();
    let plan = tiltyard::forecast::Plan::new(&theta, &setup.conditions().unwrap(), None).unwrap();
    assert_eq!(
        plan.corridor_count(),
        3,
        "one growth row depends on the pin and the others"
    );
    let d = dense_rows(&setup, theta.len());
    let mask = setup.conditions().unwrap().driver_cells(2, 4).unwrap();
    let dense = dense_paths(&theta, &d, &mask, PATHS);
    compare("dependent corridors", &engine_paths(&setup, theta), &dense);
}

/// Each posterior draw's corridor sampler is checked before its paths are drawn: a draw that
/// would accept too rarely is set aside at once, named with its corridor, and the run fails
/// when more draws are set aside than the scenario allows (here the limit is raised so that
/// an ordinary corridor trips it in every draw; even a share of 1 fails when no draw is left).
#[test]
fn hopeless_draws_fail_fast_and_are_named() {
    let extra = r#"corridors: [(series: "tbilrate", from: "2009Q4", to: "2010Q2", lower: 0.0, upper: 1.0)],
        draws: 3"#;
    let text = macro_scenario("minnesota((lags: 2, tightness: fixed(0.2)))", extra, 6);
    let dir = tempfile::tempdir().unwrap();
    let setup = scenario::load(&write_scenario(&dir, &text)).unwrap();
    let (source, _) = setup.estimate().unwrap();
    let cancel = AtomicBool::new(false);
    let set = tiltyard::forecast::build_thetas(
        &source,
        &setup.ordering,
        &setup.tail().unwrap(),
        6,
        tiltyard::forecast::DrawSpec {
            count: 3,
            seed: 1,
            below: None,
            min_kept_share: 0.05,
        },
        &cancel,
    )
    .unwrap();
    let how = Sampling {
        paths_per_theta: 1,
        seed: 1,
        reweight: false,
        min_acceptance: 0.99999,
        engine: tiltyard::crosscheck::EngineKind::Main,
    };
    let paths = sample_paths(&set, 0..3, &setup.conditions().unwrap(), how, &cancel).unwrap();
    assert_eq!((paths.failures.len(), paths.attempted), (3, 3));
    assert!(paths.conditional.is_empty());
    let first = &paths.failures[0];
    let tiltyard::forecast::ForecastError::TooImprobable {
        corridors, draw, ..
    } = &first.error
    else {
        panic!("{}", first.error)
    };
    assert_eq!((first.index, *draw), (0, Some(0)));
    assert_eq!(corridors.len(), 1);
    for allowed in [0.05, 1.0] {
        let err = paths.clone().within(allowed).unwrap_err();
        let text = err.to_string();
        assert!(
            matches!(
                err,
                tiltyard::forecast::ForecastError::TooManyFailed { failed: 3, .. }
            ),
            "{text}"
        );
        assert!(
            text.contains("posterior draw 0") && text.contains("tbilrate"),
            "{text}"
        );
    }
}
