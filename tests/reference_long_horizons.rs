//! Long horizons and explosive roots: the pinned conditional mean and covariance, and the
//! unconditional variances, against 60-digit references (`tests/fixtures/long_horizons.json`,
//! made by `make_long_horizons.py` with mpmath from the definitions, by 2×2 recursions).
//!
//! A two-series VAR(1) with a coupling term, largest root 0.9, 0.999, 1.05 and 1.2, horizons
//! 40 and 400, four pins (three levels and a change). The engine never forms the precision `K`;
//! these are the cases where factoring it failed (root 1.05 at horizon 400: relative error 1.0;
//! root 1.1 at horizon 200: "not positive definite").
//!
//! Tolerances: a computation that carries relative rounding `ε` at the *unconditional* scale
//! errs by about `ε·κ` relative to the pinned standard deviation, where `κ` = unconditional sd /
//! pinned sd of the cell (the cancellation conditioning performs; stated per cell by the
//! fixture, up to 2e16 at root 1.2 and horizon 400). The checks: mean within `1e−9·κ_a·sd_a`,
//! covariance within `1e−9·κ_a·κ_b·sd_a·sd_b`, unconditional variances within `1e−12·h`
//! relative (rounding accumulates once per period), and every drawn path meets every pin.

mod common;

use common::json;
use nalgebra::{DMatrix, DVector};
use rand::SeedableRng;
use tiltyard::forecast::{Conditions, Pin, Plan, Target, Theta};
use tiltyard::model::Params;

/// Relative rounding allowed at the unconditional scale.
const AT_SCALE: f64 = 1e-9;

fn theta_for(lambda: f64, h: usize) -> Theta {
    let params = Params {
        intercept: DVector::from_vec(vec![0.1, -0.2]),
        lags: vec![DMatrix::from_row_slice(2, 2, &[lambda, 0.8, 0.0, 0.5])],
        sigma: DMatrix::from_row_slice(2, 2, &[1.0, 0.3, 0.3, 0.5]),
    };
    Theta::new(params, &[0, 1], &[vec![1.0, 2.0]], h).unwrap()
}

fn pins(case: &serde_json::Value) -> Conditions {
    let pins = case["pins"]
        .as_array()
        .unwrap()
        .iter()
        .enumerate()
        .map(|(k, p)| Pin {
            label: p["label"].as_str().unwrap().to_string(),
            field: format!("pins[{k}]"),
            target: Target::Path {
                terms: p["terms"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .map(|t| (t[0].as_u64().unwrap() as usize, t[1].as_f64().unwrap()))
                    .collect(),
            },
            value: p["value"].as_f64().unwrap(),
        })
        .collect();
    Conditions {
        pins,
        ..Conditions::default()
    }
}

fn floats(v: &serde_json::Value) -> Vec<Option<f64>> {
    v.as_array().unwrap().iter().map(|x| x.as_f64()).collect()
}

#[test]
fn pinned_moments_match_mpmath_at_long_horizons() {
    let fx = json("long_horizons.json");
    let mut worst = Vec::new();
    for case in fx["cases"].as_array().unwrap() {
        let lambda = case["largest_root"].as_f64().unwrap();
        let h = case["horizon"].as_u64().unwrap() as usize;
        let what = format!("root {lambda}, horizon {h}");
        let theta = theta_for(lambda, h);
        let cond = pins(case);
        let plan = Plan::new(&theta, &cond, None).unwrap_or_else(|e| panic!("{what}: {e}"));
        let (mean, cov) = plan.exact_moments(&theta).unwrap();
        let (ref_mean, sd, kappa) = (
            floats(&case["mean"]),
            floats(&case["cond_sd"]),
            floats(&case["kappa"]),
        );
        let mut ratio: f64 = 0.0;
        for a in 0..theta.len() {
            let want = ref_mean[a].unwrap();
            let err = (mean[a] - want).abs();
            match kappa[a] {
                Some(k) => {
                    let tol = AT_SCALE * k * sd[a].unwrap();
                    assert!(err <= tol, "{what}: mean at cell {a}: {err:e} > {tol:e}");
                    ratio = ratio.max(err / tol);
                }
                // A pinned cell: its value is the pin's.
                None => assert!(err <= AT_SCALE * (1.0 + want.abs()), "{what}: cell {a}"),
            }
        }
        let probes: Vec<usize> = case["probes"]
            .as_array()
            .unwrap()
            .iter()
            .map(|p| p.as_u64().unwrap() as usize)
            .collect();
        for (i, &a) in probes.iter().enumerate() {
            for (j, &b) in probes.iter().enumerate() {
                let want = case["cov"][i][j].as_f64().unwrap();
                let scale = |c: usize| kappa[c].unwrap_or(1.0) * sd[c].unwrap();
                let tol = AT_SCALE * scale(a) * scale(b);
                let err = (cov[(a, b)] - want).abs();
                assert!(err <= tol, "{what}: cov ({a}, {b}): {err:e} > {tol:e}");
                ratio = ratio.max(err / tol);
            }
        }
        // Unconditional variances: the diagonal of K⁻¹ = M M' by the recursions.
        let uncond = floats(&case["uncond_sd"]);
        let mut kinv = DMatrix::identity(theta.len(), theta.len());
        theta.covariance_in_place(&mut kinv);
        for a in 0..theta.len() {
            let want = uncond[a].unwrap().powi(2);
            let rel = (kinv[(a, a)] - want).abs() / want;
            assert!(rel <= 1e-12 * h as f64, "{what}: variance at {a}: {rel:e}");
        }
        // Every drawn path meets every pin.
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        for _ in 0..20 {
            let (y, _) = plan.sample(&theta, &mut rng).unwrap();
            assert!(
                plan.pin_error(&y) <= 1e-9,
                "{what}: pins {:e}",
                plan.pin_error(&y)
            );
        }
        worst.push(format!("{what}: {ratio:.1e} of the allowance"));
    }
    println!("{}", worst.join("\n"));
}
