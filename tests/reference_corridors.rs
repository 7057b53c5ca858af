//! Corridors (with pins, on shocks, with drivers) for fixed coefficients against an
//! independent numpy/scipy computation (`tests/fixtures/corridors.json`, made by
//! `tests/fixtures/make_corridors.py`): the rows and bounds in model units, the corridor
//! probability given the pins (scipy's multivariate normal distribution function), and the
//! moments of conditional paths from naive rejection sampling (Waggoner and Zha 1999).

mod common;

use std::sync::atomic::AtomicBool;

use common::*;
use nalgebra::{DMatrix, DVector};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use serde_json::Value;
use tiltyard::forecast::rows::Rows;
use tiltyard::forecast::{Plan, Sampling, ThetaSet, sample_paths};
use tiltyard::scenario::{self, Setup};

/// Rows and bounds in model units agree to this (relative; both sides are exact formulas).
const EXACT: f64 = 1e-9;
/// Monte Carlo agreement: 4 combined standard errors for means and probabilities, 5 for
/// variances and covariances (ALGORITHMS §11.4).
const MEAN_SE: f64 = 4.0;
const COV_SE: f64 = 5.0;
/// Every path meets every pin and corridor to this relative error (ALGORITHMS §11.4).
const CONDITION_TOL: f64 = 1e-9;
/// Paths drawn per case.
const PATHS: usize = 20_000;

fn bound_list(v: &Value) -> String {
    let items: Vec<String> = v
        .as_array()
        .unwrap()
        .iter()
        .map(|x| match x.as_f64() {
            Some(f) => format!("{f:e}"),
            None => "None".into(),
        })
        .collect();
    format!("[{}]", items.join(", "))
}

fn case_setup(fx: &Value, case: &Value, dir: &tempfile::TempDir) -> Setup {
    let model = fixed_model_ron(&matrix(&fx["params"]), &matrix(&fx["sigma_u"]));
    let pins: Vec<String> = case["pins"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| {
            format!(
                "(series: {}, period: {}, units: {}, value: {:e})",
                p["series"],
                p["period"],
                units_ron(&p["units"]),
                p["value"].as_f64().unwrap()
            )
        })
        .collect();
    let corridors: Vec<String> = case["corridors"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| {
            let about = match c.get("series") {
                Some(s) => format!("series: {s}, units: {}", units_ron(&c["units"])),
                None => format!("shock: {}", c["shock"]),
            };
            format!(
                "({about}, from: {}, to: {}, lower: {}, upper: {})",
                c["from"],
                c["to"],
                bound_list(&c["lower"]),
                bound_list(&c["upper"])
            )
        })
        .collect();
    let ordering: Vec<String> = fx["ordering"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s.to_string())
        .collect();
    let drivers = match &case["drivers"] {
        Value::Null => String::new(),
        d => format!(
            "drivers: [{}],",
            d.as_array()
                .unwrap()
                .iter()
                .map(|s| s.to_string())
                .collect::<Vec<_>>()
                .join(", ")
        ),
    };
    let extra = format!(
        "ordering: [{}], {drivers} pins: [{}], corridors: [{}], draws: 1, seed: 17",
        ordering.join(", "),
        pins.join(", "),
        corridors.join(", ")
    );
    let path = write_scenario(dir, &macro_scenario(&model, &extra, 8));
    scenario::load(&path).unwrap()
}

fn bounds(v: &Value, open: f64) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap_or(open))
        .collect()
}

/// The engine's corridor rows (scaled to unit norm) are the fixture's rows scaled alike, and
/// so are their bounds: the units of corridors (levels, growth, shocks) in model units.
#[test]
fn corridor_rows_match_numpy() {
    let fx = json("corridors.json");
    for case in fx["cases"].as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let dir = tempfile::tempdir().unwrap();
        let setup = case_setup(&fx, case, &dir);
        let theta = fixed_theta(&setup);
        let rows = Rows::new(&theta, &setup.conditions().unwrap(), None).unwrap();
        let s = matrix(&case["rows"]["S"]);
        let lower = bounds(&case["rows"]["lower"], f64::NEG_INFINITY);
        let upper = bounds(&case["rows"]["upper"], f64::INFINITY);
        assert_eq!(rows.corridors.nrows(), s.nrows(), "{name}");
        let law = rows.law_rows();
        for i in 0..s.nrows() {
            let norm = s.row(i).norm();
            let want = s.row(i) / norm;
            let err = (rows.corridors.row(i) - &want).amax();
            assert!(err < EXACT, "{name}: row {i} differs by {err:e}");
            for (got, want) in [(law.lower[i], lower[i]), (law.upper[i], upper[i])] {
                let want = want / norm;
                assert!(
                    got == want || (got - want).abs() < EXACT * (1.0 + want.abs()),
                    "{name}: bound of row {i}: {got} vs {want}"
                );
            }
        }
    }
}

/// `P(a ≤ S y ≤ b | pins)` by minimax tilting against scipy's distribution function, every
/// shock free (including the strained case, about 1e−5).
#[test]
fn corridor_probability_matches_scipy() {
    let fx = json("corridors.json");
    for case in fx["cases"].as_array().unwrap() {
        if !case["drivers"].is_null() {
            continue;
        }
        let name = case["name"].as_str().unwrap();
        let dir = tempfile::tempdir().unwrap();
        let setup = case_setup(&fx, case, &dir);
        let theta = fixed_theta(&setup);
        let plan = Plan::new(&theta, &setup.conditions().unwrap(), None).unwrap();
        let law = plan.model_law().unwrap().unwrap();
        let est = law
            .probability(&[], &mut ChaCha8Rng::seed_from_u64(3), 20_000)
            .unwrap();
        let (p, p_se) = (
            case["prob"].as_f64().unwrap(),
            case["prob_se"].as_f64().unwrap(),
        );
        let got = est.ln.exp();
        let se = (est.rel_err * got).hypot(p_se);
        assert!(
            (got - p).abs() <= MEAN_SE * se,
            "{name}: {got:e} ± {se:e} vs scipy {p:e}"
        );
    }
}

/// With drivers, `E over ε_J̄ of P(corridors | ε_J̄, pins)` equals the fixture's probability
/// under the pins-only drivers distribution (scipy).
#[test]
fn driver_corridor_probability_matches_scipy() {
    let fx = json("corridors.json");
    let case = fx["cases"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == "drivers_corridor")
        .unwrap();
    let dir = tempfile::tempdir().unwrap();
    let setup = case_setup(&fx, case, &dir);
    let theta = fixed_theta(&setup);
    let plan = Plan::new(&theta, &setup.conditions().unwrap(), None).unwrap();
    let mut rng = ChaCha8Rng::seed_from_u64(4);
    let k = 4_000;
    let values: Vec<f64> = (0..k)
        .map(|_| {
            let e: Vec<f64> = (0..plan.nondriver_count())
                .map(|_| rand_distr::Distribution::sample(&rand_distr::StandardNormal, &mut rng))
                .collect();
            plan.corridor_probability(&e, &mut rng, 200)
                .unwrap()
                .unwrap()
                .ln
                .exp()
        })
        .collect();
    let mean = values.iter().sum::<f64>() / k as f64;
    let sd = (values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (k - 1) as f64).sqrt();
    let (p, p_se) = (
        case["prob"].as_f64().unwrap(),
        case["prob_se"].as_f64().unwrap(),
    );
    let se = (sd / (k as f64).sqrt()).hypot(p_se);
    assert!((mean - p).abs() <= MEAN_SE * se, "{mean} ± {se} vs {p}");
}

/// Exact draws: every path meets every pin and corridor; path means, variances and a few
/// covariances agree with the rejection sample within Monte Carlo error.
#[test]
fn sampled_paths_match_rejection_sampling() {
    let fx = json("corridors.json");
    for case in fx["cases"].as_array().unwrap() {
        if case.get("mean").is_none() {
            continue;
        }
        let name = case["name"].as_str().unwrap();
        let dir = tempfile::tempdir().unwrap();
        let setup = case_setup(&fx, case, &dir);
        let set = ThetaSet::single(fixed_theta(&setup));
        let how = Sampling {
            paths_per_theta: PATHS,
            seed: 9,
            reweight: false,
            min_acceptance: 1e-5,
            engine: tiltyard::crosscheck::EngineKind::Main,
        };
        let cond = setup.conditions().unwrap();
        let out = sample_paths(&set, 0..1, &cond, how, &AtomicBool::new(false)).unwrap();
        assert!(out.max_pin_error < CONDITION_TOL, "{name}: pins");
        assert!(
            out.max_corridor_violation < CONDITION_TOL,
            "{name}: corridor violated by {:e}",
            out.max_corridor_violation
        );
        let ys: Vec<DVector<f64>> = out
            .conditional
            .iter()
            .map(|y| DVector::from_column_slice(y))
            .collect();
        let n = ys.len() as f64;
        let big_n = ys[0].len();
        let mean = ys.iter().fold(DVector::zeros(big_n), |a, y| a + y) / n;
        let mut cov = DMatrix::zeros(big_n, big_n);
        for y in &ys {
            let d = y - &mean;
            cov += &d * d.transpose();
        }
        cov /= n - 1.0;
        let (want_mean, want_sd) = (vector(&case["mean"]), vector(&case["sd"]));
        let (mean_se, var_se) = (vector(&case["mean_se"]), vector(&case["var_se"]));
        let n_ref = case["n_accepted"].as_f64().unwrap();
        for i in 0..big_n {
            // Our standard errors from the reference's spread, scaled to our sample size.
            let se = (want_sd[i] / n.sqrt()).hypot(mean_se[i]);
            let scale = 1.0 + want_mean[i].abs();
            assert!(
                (mean[i] - want_mean[i]).abs() <= MEAN_SE * se + CONDITION_TOL * scale,
                "{name}: mean[{i}] {} vs {} (s.e. {se:e})",
                mean[i],
                want_mean[i]
            );
            let var_ref = want_sd[i].powi(2);
            let se = (var_se[i] * (n_ref / n).sqrt()).hypot(var_se[i]);
            assert!(
                (cov[(i, i)] - var_ref).abs() <= COV_SE * se + 1e-12 * scale * scale,
                "{name}: var[{i}] {} vs {var_ref} (s.e. {se:e})",
                cov[(i, i)]
            );
        }
        let cells = case["cells"].as_array().unwrap();
        let (cc, cc_se) = (vector(&case["cell_cov"]), vector(&case["cell_cov_se"]));
        for (k, cell) in cells.iter().enumerate() {
            let (a, b) = (
                cell[0].as_u64().unwrap() as usize,
                cell[1].as_u64().unwrap() as usize,
            );
            let se = (cc_se[k] * (n_ref / n).sqrt()).hypot(cc_se[k]);
            assert!(
                (cov[(a, b)] - cc[k]).abs() <= COV_SE * se + 1e-12,
                "{name}: cov[{a},{b}] {} vs {} (s.e. {se:e})",
                cov[(a, b)],
                cc[k]
            );
        }
    }
}
