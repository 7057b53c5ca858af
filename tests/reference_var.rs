//! The estimated and fixed-coefficient VAR against statsmodels (fixtures made by
//! `tests/fixtures/make_fixtures.py` from statsmodels' bundled macro data set).

mod common;

use common::*;
use nalgebra::DMatrix;
use tiltyard::forecast::{ParamSource, Theta};
use tiltyard::scenario;

/// ALGORITHMS §11.4: exact agreement with statsmodels, relative 1e-10.
const EXACT: f64 = 1e-10;

/// Flat-prior limit = OLS: `B̄` equals statsmodels' `params`, `S̄/ν̄` its `sigma_u`.
#[test]
fn flat_prior_posterior_is_statsmodels_ols() {
    let fx = json("var_ols.json");
    let dir = tempfile::tempdir().unwrap();
    let path = write_scenario(&dir, &macro_scenario("flat((lags: 2))", "", 8));
    let setup = scenario::load(&path).unwrap();
    let (source, fit) = setup.estimate().unwrap();
    let ParamSource::Posterior(post) = source else {
        panic!("expected a posterior")
    };
    assert_eq!(
        fit.unwrap().observations,
        fx["nobs"].as_u64().unwrap() as usize
    );
    let params = matrix(&fx["params"]);
    assert!(
        rel_err(&post.b_bar, &params) < EXACT,
        "B̄ vs params: {}",
        rel_err(&post.b_bar, &params)
    );
    let sigma_u = matrix(&fx["sigma_u"]);
    let sigma = &post.s_bar / post.nu_bar;
    assert!(
        rel_err(&sigma, &sigma_u) < EXACT,
        "S̄/ν̄ vs sigma_u: {}",
        rel_err(&sigma, &sigma_u)
    );
    let t = fx["nobs"].as_f64().unwrap();
    let mle = &post.s_bar / t;
    assert!(rel_err(&mle, &matrix(&fx["sigma_u_mle"])) < EXACT);
}

/// Fixed coefficients: the mean path equals statsmodels' `forecast`, the diagonal blocks of
/// `K⁻¹` (from the project's band factor) equal `mse`.
#[test]
fn fixed_coefficient_forecast_is_statsmodels_forecast_and_mse() {
    let fx = json("var_ols.json");
    let params = matrix(&fx["params"]);
    let sigma = matrix(&fx["sigma_u"]);
    let dir = tempfile::tempdir().unwrap();
    let model = fixed_model_ron(&params, &sigma);
    let path = write_scenario(&dir, &macro_scenario(&model, "", 8));
    let setup = scenario::load(&path).unwrap();
    let (ParamSource::Fixed(p), None) = setup.estimate().unwrap() else {
        panic!("fixed")
    };
    let theta = Theta::new(p, &setup.ordering, &setup.tail().unwrap(), 8).unwrap();
    let n = 4;
    let forecast = matrix(&fx["forecast"]);
    let mean = DMatrix::from_fn(8, n, |t, i| theta.mean[t * n + i]);
    assert!(
        rel_err(&mean, &forecast) < EXACT,
        "mean vs forecast: {}",
        rel_err(&mean, &forecast)
    );
    let big_n = 8 * n;
    let mut cov = DMatrix::identity(big_n, big_n);
    theta.covariance_in_place(&mut cov);
    let mse = fx["mse"].as_array().unwrap();
    for (t, block) in mse.iter().enumerate() {
        let expect = matrix(block);
        let got = cov.view((t * n, t * n), (n, n)).into_owned();
        assert!(
            rel_err(&got, &expect) < EXACT,
            "mse block {t}: {}",
            rel_err(&got, &expect)
        );
    }
}
