//! The Minnesota posterior and its closed-form marginal likelihood against an independent
//! computation: scipy's matrix-normal and inverse-Wishart densities in the three-density
//! identity `p(Y) = p(Y|B,Σ) p(B,Σ) / p(B,Σ|Y)` (`tests/fixtures/marglik.json`, made by
//! `tests/fixtures/make_fixtures.py` on statsmodels' bundled macro data set).

mod common;

use common::*;
use tiltyard::model::{
    MinnesotaPrior, Regression, choose_tightness, log_ml, posterior_and_log_ml, residual_scales,
};

/// Posterior moments: relative 1e-9 (the fixture's own two-point check agrees to 3e-10).
const EXACT: f64 = 1e-9;

fn regression(fx: &serde_json::Value) -> Regression {
    let rows = matrix(&fx["data_rows"]);
    let columns: Vec<Vec<f64>> = (0..rows.ncols())
        .map(|j| rows.column(j).iter().copied().collect())
        .collect();
    let p = fx["p"].as_u64().unwrap() as usize;
    Regression::new(&columns, 0, rows.nrows() - 1, p)
}

fn prior(case: &serde_json::Value, s2: Vec<f64>) -> MinnesotaPrior {
    MinnesotaPrior {
        lambda: case["lambda"].as_f64().unwrap(),
        lag_decay: case["alpha"].as_f64().unwrap(),
        intercept_scale: case["kappa0"].as_f64().unwrap(),
        delta: vector(&case["delta"]).iter().copied().collect(),
        s2,
        sum_of_coefficients: case["soc"].as_f64(),
        single_unit_root: case["sur"].as_f64(),
    }
}

#[test]
fn posterior_and_marginal_likelihood_match_scipy_densities() {
    let fx = json("marglik.json");
    let reg = regression(&fx);
    assert_eq!(reg.t(), fx["T"].as_u64().unwrap() as usize);
    let (s2, floored) = residual_scales(&reg);
    assert!(floored.is_empty());
    for case in fx["cases"].as_array().unwrap() {
        let id = &case["case"];
        let expect_s2 = vector(&case["s2"]);
        for (a, b) in s2.iter().zip(expect_s2.iter()) {
            assert!((a - b).abs() < EXACT * b, "case {id}: s² {a} vs {b}");
        }
        let (value, post) = posterior_and_log_ml(&reg, &prior(case, s2.clone())).unwrap();
        let expect = case["log_ml"].as_f64().unwrap();
        assert!(
            (value - expect).abs() < 1e-8 * expect.abs(),
            "case {id}: ln p(Y) {value} vs {expect}"
        );
        // The same number in the data's dimension (T × T, the search's form when rows are
        // few), against scipy too.
        let dual = log_ml(&reg, &prior(case, s2.clone())).unwrap();
        assert!(
            (dual - expect).abs() < 1e-8 * expect.abs(),
            "case {id}: ln p(Y) by V = I + XΩ0X': {dual} vs {expect}"
        );
        let eb = rel_err(&post.b_bar, &matrix(&case["B_bar"]));
        let es = rel_err(&post.s_bar, &matrix(&case["S_bar"]));
        assert!(eb < EXACT && es < EXACT, "case {id}: B̄ {eb:e}, S̄ {es:e}");
        assert_eq!(post.nu_bar, case["nu_bar"].as_f64().unwrap());
    }
}

/// The automatic tightness finds scipy's maximiser (which the fixture locates with a finer
/// grid because ln p(Y|λ) has a second, lower local maximum at the lower bound).
#[test]
fn automatic_tightness_finds_the_maximum() {
    let fx = json("marglik.json");
    let reg = regression(&fx);
    let (s2, _) = residual_scales(&reg);
    let case = &fx["cases"][0];
    let choice = choose_tightness(&reg, &prior(case, s2.clone())).unwrap();
    let opt = &fx["lambda_opt"];
    let lambda = opt["lambda"].as_f64().unwrap();
    assert!(
        (choice.lambda.ln() - lambda.ln()).abs() < 1e-5,
        "λ {} vs {lambda}",
        choice.lambda
    );
    // Both searches stop near the maximum, where ln p(Y|λ) is flat to second order: the two
    // values may differ by ½ |f''| Δ² (Δ the gap in ln λ, f'' the curvature in ln λ, by
    // central differences here), plus the densities' own agreement with scipy (`EXACT`).
    let f = |ln_lambda: f64| {
        let mut pr = prior(case, s2.clone());
        pr.lambda = ln_lambda.exp();
        posterior_and_log_ml(&reg, &pr).unwrap().0
    };
    let (x, step) = (lambda.ln(), 1e-3);
    let curvature = (f(x + step) - 2.0 * f(x) + f(x - step)) / (step * step);
    let gap = choice.lambda.ln() - x;
    let want = opt["log_ml"].as_f64().unwrap();
    let tolerance = 0.5 * curvature.abs() * gap * gap + EXACT * want.abs();
    assert!(
        (choice.log_ml - want).abs() <= tolerance,
        "log ML {} against {want} (tolerance {tolerance:e})",
        choice.log_ml
    );
    assert!(!choice.on_boundary);
}
