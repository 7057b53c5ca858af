//! The cross-check engines against the main engine (ALGORITHMS §11.4), on fixed coefficients
//! estimated by statsmodels on its bundled macro data (`var_ols.json`):
//!
//! - exact parts: the pinned mean and covariance of the main engine, the dense engine's
//!   textbook formulas and the Kalman smoother's mean, to 1e-8 relative;
//! - sampled parts: paths of the main engine against paths of each cross-check engine drawn
//!   with other seeds — means within 4 combined Monte Carlo standard errors, variances within
//!   5, and a two-sample Kolmogorov–Smirnov test on every marginal with p > 1e−3 (asymptotic
//!   p-value `Q(λ) = 2 Σ_{j≥1} (−1)^{j−1} e^{−2j²λ²}`, `λ = D √(n₁n₂/(n₁+n₂))`; Kolmogorov
//!   1933, Smirnov 1948; the formula scipy's `ks_2samp` uses in its asymptotic mode);
//! - limits: the Kalman engine refuses corridors and drivers, naive rejection gives up after
//!   its cap, naming the cause.

mod common;

use std::sync::atomic::AtomicBool;

use common::*;
use nalgebra::{DMatrix, DVector};
use tiltyard::crosscheck::{EngineKind, dense::DensePlan, kalman::KalmanPlan};
use tiltyard::forecast::{ParamSource, Plan, Sampling, Theta, ThetaSet, rows::Rows, sample_paths};
use tiltyard::scenario::{self, Setup};

const EXACT: f64 = 1e-8;
const MEAN_SE: f64 = 4.0;
const VAR_SE: f64 = 5.0;
const KS_P: f64 = 1e-3;
const PATHS: usize = 4000;

fn setup(extra: &str, dir: &tempfile::TempDir) -> Setup {
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

fn rel(a: &DMatrix<f64>, b: &DMatrix<f64>) -> f64 {
    (a - b).amax() / b.amax().max(1.0)
}

const PINS: &str = r#"pins: [
    (series: "tbilrate", period: "2010Q1", value: 0.3),
    (series: "realgdp", period: "2010Q3", units: year_on_year, value: -2.0),
    (series: "realinv", period: "2010Q4", units: pct_change, value: 1.0),
]"#;

#[test]
fn exact_parts_agree_across_engines() {
    let dir = tempfile::tempdir().unwrap();
    let setup = setup(PINS, &dir);
    let theta = theta_of(&setup);
    let cond = setup.conditions().unwrap();
    let rows = || Rows::new(&theta, &cond, None).unwrap();
    let main = Plan::new(&theta, &cond, None).unwrap();
    let (mean, cov) = main.exact_moments(&theta).unwrap();
    let dense = DensePlan::new(&theta, rows(), &cond, None).unwrap();
    let (dmean, dcov) = dense.exact_moments().unwrap();
    let mean_m = DMatrix::from_column_slice(mean.len(), 1, mean.as_slice());
    let dmean_m = DMatrix::from_column_slice(dmean.len(), 1, dmean.as_slice());
    assert!(
        rel(&mean_m, &dmean_m) < EXACT,
        "mean: {:e}",
        rel(&mean_m, &dmean_m)
    );
    assert!(rel(&cov, &dcov) < EXACT, "cov: {:e}", rel(&cov, &dcov));
    let kalman = KalmanPlan::new(&theta, rows(), &cond, None).unwrap();
    let kmean = DMatrix::from_vec(mean.len(), 1, kalman.mean(&theta));
    assert!(
        rel(&kmean, &dmean_m) < EXACT,
        "Kalman mean: {:e}",
        rel(&kmean, &dmean_m)
    );
}

/// Paths of one engine for the fixed θ of `setup`.
fn paths(setup: &Setup, engine: EngineKind, seed: u64, count: usize) -> Vec<DVector<f64>> {
    let set = ThetaSet::single(theta_of(setup));
    let how = Sampling {
        paths_per_theta: count,
        seed,
        reweight: false,
        min_acceptance: 1e-5,
        engine,
    };
    let out = sample_paths(
        &set,
        0..1,
        &setup.conditions().unwrap(),
        how,
        &AtomicBool::new(false),
    )
    .unwrap()
    .within(0.0)
    .unwrap();
    assert!(out.max_pin_error < 1e-9 && out.max_corridor_violation < 1e-9);
    out.conditional
        .iter()
        .map(|y| DVector::from_column_slice(y))
        .collect()
}

fn moments(ys: &[DVector<f64>]) -> (DVector<f64>, DVector<f64>) {
    let n = ys.len() as f64;
    let mean = ys.iter().fold(DVector::zeros(ys[0].len()), |a, y| a + y) / n;
    let var = ys.iter().fold(DVector::zeros(mean.len()), |a, y| {
        a + (y - &mean).map(|d| d * d)
    }) / (n - 1.0);
    (mean, var)
}

/// Asymptotic two-sample Kolmogorov–Smirnov p-value of the samples `a` and `b`.
fn ks_p(mut a: Vec<f64>, mut b: Vec<f64>) -> f64 {
    a.sort_by(f64::total_cmp);
    b.sort_by(f64::total_cmp);
    let (n1, n2) = (a.len() as f64, b.len() as f64);
    let (mut i, mut j, mut d) = (0, 0, 0.0f64);
    while i < a.len() && j < b.len() {
        let x = a[i].min(b[j]);
        while i < a.len() && a[i] <= x {
            i += 1;
        }
        while j < b.len() && b[j] <= x {
            j += 1;
        }
        d = d.max((i as f64 / n1 - j as f64 / n2).abs());
    }
    let lambda = d * (n1 * n2 / (n1 + n2)).sqrt();
    if lambda < 1e-3 {
        return 1.0;
    }
    // For small λ the alternating series converges slowly; its Jacobi-transformed form
    // 1 − (√(2π)/λ) Σ e^{−(2k−1)²π²/(8λ²)} converges fast there (switch at λ = 1.18, as in
    // Press et al., Numerical Recipes, probks).
    let q: f64 = if lambda < 1.18 {
        let pi2 = std::f64::consts::PI.powi(2);
        1.0 - (2.0 * std::f64::consts::PI).sqrt() / lambda
            * (1..=50)
                .map(|k| {
                    let odd = (2 * k - 1) as f64;
                    (-odd * odd * pi2 / (8.0 * lambda * lambda)).exp()
                })
                .sum::<f64>()
    } else {
        (1..=100)
            .map(|k| {
                let k = k as f64;
                2.0 * (-1f64).powi(k as i32 - 1) * (-2.0 * k * k * lambda * lambda).exp()
            })
            .sum()
    };
    q.clamp(0.0, 1.0)
}

/// Means within 4 combined standard errors, variances within 5 (s.e. of a variance from the
/// fourth moment: `sqrt((m4 − σ⁴)/n)`), KS p-value above 1e−3 on every non-constant cell.
fn compare(name: &str, a: &[DVector<f64>], b: &[DVector<f64>]) {
    let (ma, va) = moments(a);
    let (mb, vb) = moments(b);
    let (na, nb) = (a.len() as f64, b.len() as f64);
    for c in 0..ma.len() {
        if va[c] <= 1e-20 * (1.0 + ma[c] * ma[c]) {
            continue;
        }
        let se = (va[c] / na + vb[c] / nb).sqrt();
        assert!(
            (ma[c] - mb[c]).abs() <= MEAN_SE * se,
            "{name}: mean[{c}] {} vs {} (s.e. {se:e})",
            ma[c],
            mb[c]
        );
        let m4 = |ys: &[DVector<f64>], m: f64| {
            ys.iter().map(|y| (y[c] - m).powi(4)).sum::<f64>() / ys.len() as f64
        };
        let se_var = ((m4(a, ma[c]) - va[c] * va[c]) / na + (m4(b, mb[c]) - vb[c] * vb[c]) / nb)
            .max(0.0)
            .sqrt();
        assert!(
            (va[c] - vb[c]).abs() <= VAR_SE * se_var,
            "{name}: var[{c}] {} vs {} (s.e. {se_var:e})",
            va[c],
            vb[c]
        );
        let p = ks_p(
            a.iter().map(|y| y[c]).collect(),
            b.iter().map(|y| y[c]).collect(),
        );
        assert!(p > KS_P, "{name}: KS p = {p:e} at cell {c}");
    }
}

#[test]
fn kolmogorov_smirnov_p_values_are_right() {
    // Identical samples: D = 0, p = 1. Disjoint samples of 50 each: D = 1, λ = 5,
    // p = 2e^{−50} − … ≈ 3.9e−22 (the series' first term).
    let a: Vec<f64> = (0..50).map(f64::from).collect();
    assert!((ks_p(a.clone(), a.clone()) - 1.0).abs() < 1e-12);
    let b: Vec<f64> = (100..150).map(f64::from).collect();
    let p = ks_p(a, b);
    assert!((p / (2.0 * (-50f64).exp()) - 1.0).abs() < 1e-9, "{p:e}");
    // Samples of 100 with D = 0.17 (λ = 0.17·√50 = 1.2021): every 6th value of b shifted
    // beyond a; scipy.special.kolmogorov(1.2020815280171309) = 0.11113334490733646.
    let a: Vec<f64> = (0..100).map(f64::from).collect();
    let b: Vec<f64> = (0..100)
        .map(|i| {
            if i % 6 == 0 {
                1000.0 + i as f64
            } else {
                i as f64
            }
        })
        .collect();
    let p = ks_p(a, b);
    assert!((p - 0.11113334490733646).abs() < 1e-12, "{p}");
    // The small-λ form: 7 values moved, D = 0.07, λ = 0.49497…;
    // scipy.special.kolmogorov(0.07·√50) = 0.9670684917555935.
    let a: Vec<f64> = (0..100).map(f64::from).collect();
    let b: Vec<f64> = (0..100)
        .map(|i| {
            if i % 15 == 0 {
                1000.0 + i as f64
            } else {
                i as f64
            }
        })
        .collect();
    let p = ks_p(a, b);
    assert!((p - 0.9670684917555935).abs() < 1e-12, "{p}");
}

#[test]
fn kalman_paths_match_the_main_engine() {
    let dir = tempfile::tempdir().unwrap();
    let setup = setup(PINS, &dir);
    let main = paths(&setup, EngineKind::Main, 1, PATHS);
    let kalman = paths(&setup, EngineKind::Kalman, 2, PATHS);
    compare("kalman", &main, &kalman);
}

#[test]
fn dense_and_rejection_paths_match_the_main_engine_with_corridors_and_drivers() {
    let dir = tempfile::tempdir().unwrap();
    let corridors = r#"pins: [(series: "tbilrate", period: "2010Q1", value: 0.3)],
        corridors: [
            (series: "realgdp", from: "2010Q2", to: "2010Q4", units: year_on_year, lower: -4.0, upper: 2.0),
            (series: "tbilrate", from: "2010Q2", to: "2010Q3", lower: 0.0),
        ]"#;
    for drivers in ["", r#"drivers: ["realgdp", "tbilrate"],"#] {
        let setup = setup(&format!("{drivers} {corridors}"), &dir);
        let main = paths(&setup, EngineKind::Main, 1, PATHS);
        let dense = paths(&setup, EngineKind::Dense, 2, PATHS);
        compare(&format!("dense {drivers}"), &main, &dense);
        let rejection = paths(&setup, EngineKind::Rejection { cap: 100_000 }, 3, PATHS);
        compare(&format!("rejection {drivers}"), &main, &rejection);
    }
}

#[test]
fn engines_state_their_limits() {
    let dir = tempfile::tempdir().unwrap();
    let with_corridor = setup(
        r#"corridors: [(series: "tbilrate", from: "2010Q2", to: "2010Q3", lower: 0.0)]"#,
        &dir,
    );
    let theta = theta_of(&with_corridor);
    let cond = with_corridor.conditions().unwrap();
    let rows = Rows::new(&theta, &cond, None).unwrap();
    let err = KalmanPlan::new(&theta, rows, &cond, None)
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("pins only") && err.contains("--engine main"),
        "{err}"
    );
    // A corridor far in the tail: rejection gives up after its cap and says so.
    let rare = setup(
        r#"corridors: [(series: "tbilrate", from: "2010Q1", to: "2010Q4", lower: 6.0)]"#,
        &dir,
    );
    let set = ThetaSet::single(theta_of(&rare));
    let how = Sampling {
        paths_per_theta: 1,
        seed: 1,
        reweight: false,
        min_acceptance: 1e-5,
        engine: EngineKind::Rejection { cap: 500 },
    };
    let out = sample_paths(
        &set,
        0..1,
        &rare.conditions().unwrap(),
        how,
        &AtomicBool::new(false),
    )
    .unwrap();
    let err = out.within(0.05).unwrap_err().to_string();
    assert!(err.contains("gave up after 500 proposals"), "{err}");
}
