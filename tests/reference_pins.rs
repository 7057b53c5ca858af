//! Pins and drivers for fixed coefficients against textbook Gaussian conditioning and the
//! drivers closed form, both computed independently in numpy (`tests/fixtures/pins_gaussian.json`,
//! made by `tests/fixtures/make_fixtures.py`); their attribution by shock and by pin against
//! `tests/fixtures/attribution.json` (made by `tests/fixtures/make_attribution.py`).

mod common;

use std::sync::atomic::AtomicBool;

use common::*;
use nalgebra::{DMatrix, DVector};
use serde_json::Value;
use tiltyard::attribution::attribute;
use tiltyard::forecast::{Plan, Sampling, ThetaSet, sample_paths};
use tiltyard::scenario::{self, Setup};

/// Exact moments: relative 1e-8 (ALGORITHMS §11.4 allows `1e-9 · cond(G)`).
const EXACT: f64 = 1e-8;
/// Monte Carlo checks: 4 standard errors for means (ALGORITHMS §11.4).
const MEAN_SE: f64 = 4.0;
/// Every path meets every pin to this relative error.
const PIN_TOL: f64 = 1e-9;

fn case_setup(fx: &Value, case: &Value, dir: &tempfile::TempDir) -> Setup {
    let path = write_scenario(dir, &pins_case_scenario(fx, case));
    scenario::load(&path).unwrap()
}

#[test]
fn exact_conditional_moments_match_numpy() {
    let fx = json("pins_gaussian.json");
    for case in fx["cases"].as_array().unwrap() {
        let dir = tempfile::tempdir().unwrap();
        let setup = case_setup(&fx, case, &dir);
        let theta = fixed_theta(&setup);
        let cond = setup.conditions().unwrap();
        let plan = Plan::new(&theta, &cond, None).unwrap();
        let (mean, cov) = plan.exact_moments(&theta).expect("pins only");
        let name = case["name"].as_str().unwrap();
        let em = rel_err(
            &DMatrix::from_column_slice(32, 1, mean.as_slice()),
            &DMatrix::from_column_slice(32, 1, vector(&case["mean"]).as_slice()),
        );
        let ec = rel_err(&cov, &matrix(&case["cov"]));
        // ALGORITHMS §11.4: exact parts to 1e-9 · cond(G), G = R C R' the pins' covariance
        // (numpy's rows R and unconditional covariance C; cond from 6 to 415 here).
        let rows = matrix(&case["rows"]["R"]);
        let g = &rows * matrix(&fx["uncond_cov"]) * rows.transpose();
        let sv = g.singular_values();
        let tolerance = 1e-9 * sv.max() / sv.min();
        println!("{name}: mean {em:.1e}, covariance {ec:.1e}, tolerance {tolerance:.1e}");
        assert!(em < tolerance, "{name}: mean error {em:e}");
        assert!(ec < tolerance, "{name}: covariance error {ec:e}");
    }
}

/// Sampled moments within Monte Carlo error of the numpy moments; every path meets the pins.
#[test]
fn sampled_paths_match_numpy_within_monte_carlo_error() {
    let fx = json("pins_gaussian.json");
    let paths = 20_000;
    for case in fx["cases"].as_array().unwrap() {
        let dir = tempfile::tempdir().unwrap();
        let setup = case_setup(&fx, case, &dir);
        let set = ThetaSet::single(fixed_theta(&setup));
        let cond = setup.conditions().unwrap();
        let how = Sampling {
            paths_per_theta: paths,
            seed: 5,
            reweight: false,
            min_acceptance: 1e-5,
            engine: tiltyard::crosscheck::EngineKind::Main,
        };
        let out = sample_paths(&set, 0..1, &cond, how, &AtomicBool::new(false)).unwrap();
        let name = case["name"].as_str().unwrap();
        assert!(
            out.max_pin_error < PIN_TOL,
            "{name}: pin error {:e}",
            out.max_pin_error
        );
        let mean = vector(&case["mean"]);
        let cov = matrix(&case["cov"]);
        let big_n = mean.len();
        let mut sum = DVector::zeros(big_n);
        for y in &out.conditional {
            sum += DVector::from_column_slice(y);
        }
        let sample_mean = sum / paths as f64;
        for c in 0..big_n {
            let se = (cov[(c, c)].max(0.0) / paths as f64).sqrt();
            let gap = (sample_mean[c] - mean[c]).abs();
            // Pinned cells have zero variance: they must match to rounding.
            let allowed = MEAN_SE * se + 1e-9 * (1.0 + mean[c].abs());
            assert!(
                gap <= allowed,
                "{name}: cell {c}: mean {} vs {} (se {se:e})",
                sample_mean[c],
                mean[c]
            );
        }
        // Variances within 5 standard errors, s.e. of a variance ≈ σ² sqrt(2/n).
        for c in 0..big_n {
            let v: f64 = out
                .conditional
                .iter()
                .map(|y| (y[c] - sample_mean[c]).powi(2))
                .sum::<f64>()
                / (paths - 1) as f64;
            let se = cov[(c, c)].max(0.0) * (2.0 / paths as f64).sqrt();
            assert!(
                (v - cov[(c, c)]).abs() <= 5.0 * se + 1e-12 * (1.0 + mean[c].abs()).powi(2),
                "{name}: cell {c}: variance {v} vs {}",
                cov[(c, c)]
            );
        }
    }
}

/// All shocks as drivers gives the same distribution as plain conditioning (exactly, and
/// both equal to the numpy reference).
#[test]
fn all_shocks_as_drivers_equals_plain_conditioning() {
    let fx = json("pins_gaussian.json");
    let case = fx["cases"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == "drivers_all")
        .unwrap()
        .clone();
    let dir = tempfile::tempdir().unwrap();
    let with_drivers = case_setup(&fx, &case, &dir);
    let mut plain_case = case.clone();
    plain_case["drivers"] = Value::Null;
    let dir2 = tempfile::tempdir().unwrap();
    let plain = case_setup(&fx, &plain_case, &dir2);
    let theta = fixed_theta(&plain);
    let (m1, c1) = Plan::new(&theta, &with_drivers.conditions().unwrap(), None)
        .unwrap()
        .exact_moments(&theta)
        .unwrap();
    let (m2, c2) = Plan::new(&theta, &plain.conditions().unwrap(), None)
        .unwrap()
        .exact_moments(&theta)
        .unwrap();
    // Both against numpy's textbook conditioning on the same rows (the fixture script
    // checks that its drivers_all moments equal it): neither side is the other's reference.
    let (mean, cov) = (vector(&case["mean"]), matrix(&case["cov"]));
    for (what, m, c) in [("drivers", &m1, &c1), ("plain", &m2, &c2)] {
        let em = (m - &mean).amax() / mean.amax();
        assert!(em < EXACT, "{what}: mean error {em:e}");
        assert!(rel_err(c, &cov) < EXACT, "{what}: covariance");
    }
}

/// `ln p(r | θ)`, the weight of a parameter draw under reweighting (ALGORITHMS §8.4), equals
/// the Gaussian log density of the fixture's unscaled pin rows `R y = r` under numpy's
/// unconditional mean and covariance: `−½ (m ln 2π + ln|RCR'| + r̃'(RCR')⁻¹r̃)`, `r̃ = r − Rμ`.
/// Includes a shock pin, whose row scale depends on θ.
#[test]
fn pin_log_density_matches_numpy() {
    let fx = json("pins_gaussian.json");
    let mu = vector(&fx["uncond_mean"]);
    let c = matrix(&fx["uncond_cov"]);
    for case in fx["cases"].as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let dir = tempfile::tempdir().unwrap();
        let setup = case_setup(&fx, case, &dir);
        let theta = fixed_theta(&setup);
        let plan = Plan::new(&theta, &setup.conditions().unwrap(), None).unwrap();
        let r_rows = matrix(&case["rows"]["R"]);
        let r = vector(&case["rows"]["r"]);
        let g = &r_rows * &c * r_rows.transpose();
        let rt = &r - &r_rows * &mu;
        let chol = g.clone().cholesky().unwrap();
        let logdet: f64 = 2.0 * chol.l().diagonal().iter().map(|d| d.ln()).sum::<f64>();
        let m = r.len() as f64;
        let want =
            -0.5 * (m * (2.0 * std::f64::consts::PI).ln() + logdet + rt.dot(&chol.solve(&rt)));
        let got = plan.pin_log_density();
        assert!(
            (got - want).abs() < EXACT * want.abs().max(1.0),
            "{name}: {got} vs {want}"
        );
    }
}

/// The conditional mean shift split by structural shock and by pin (ALGORITHMS §10) against
/// the dense numpy split of `tests/fixtures/attribution.json` (made by `make_attribution.py`
/// from the same cases): `ε̄ = D⁺(r̃; 0)`, shock `j`'s part `M_{·j} ε̄_j`, pin `k`'s part
/// `M D⁺ e_k r̃_k`. With pins only the split is exact whatever the paths (every path meets
/// the pins), so a few paths serve; the parts also add up to the total.
#[test]
fn attribution_matches_numpy() {
    let fx = json("pins_gaussian.json");
    let reference = json("attribution.json");
    for (case, want) in fx["cases"]
        .as_array()
        .unwrap()
        .iter()
        .zip(reference["cases"].as_array().unwrap())
    {
        let name = case["name"].as_str().unwrap();
        assert_eq!(want["name"], case["name"]);
        let dir = tempfile::tempdir().unwrap();
        let setup = case_setup(&fx, case, &dir);
        let set = ThetaSet::single(fixed_theta(&setup));
        let cond = setup.conditions().unwrap();
        let how = Sampling {
            paths_per_theta: 7,
            seed: 3,
            reweight: false,
            min_acceptance: 1e-5,
            engine: tiltyard::crosscheck::EngineKind::Main,
        };
        let out = sample_paths(&set, 0..1, &cond, how, &AtomicBool::new(false)).unwrap();
        let a = attribute(&set.thetas, &cond, &out.parts, None, None).unwrap();
        let total = vector(&want["total"]);
        let scale = total.amax().max(1.0);
        let close = |got: &[f64], want: &DVector<f64>, what: &str| {
            let err = (DVector::from_column_slice(got) - want).amax() / scale;
            assert!(err < EXACT, "{name}: {what}: error {err:e}");
        };
        close(&a.total, &total, "total");
        for (j, part) in want["by_shock"].as_array().unwrap().iter().enumerate() {
            close(&a.by_shock[j], &vector(part), &format!("shock {j}"));
        }
        let pins = want["by_pin"].as_array().unwrap();
        assert_eq!(a.by_condition.len(), pins.len(), "{name}");
        for (k, part) in pins.iter().enumerate() {
            close(&a.by_condition[k], &vector(part), &format!("pin {k}"));
        }
    }
}
