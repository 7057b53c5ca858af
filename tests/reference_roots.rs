//! The largest companion root (the explosive-root measure) against numpy: the moduli of the
//! companion matrix's eigenvalues by `numpy.linalg.eigvals` (LAPACK dgeev), fixtures made by
//! `tests/fixtures/make_roots.py`.

mod common;

use common::*;
use nalgebra::{DMatrix, DVector};
use tiltyard::model::Params;

/// Agreement with LAPACK, relative to the largest modulus or 1 (both are backward stable;
/// the fixtures' largest roots are simple or a conjugate pair).
const AGREE: f64 = 1e-10;

fn lags(case: &serde_json::Value) -> Vec<DMatrix<f64>> {
    case["lags"]
        .as_array()
        .unwrap()
        .iter()
        .map(matrix)
        .collect()
}

/// `Params::spectral_radius` is numpy's largest modulus, for stable, near-unit-root,
/// explosive (1.05, 1.2), complex, all-zero and 40-series cases.
#[test]
fn largest_root_matches_numpy() {
    let fx = json("roots.json");
    for case in fx["cases"].as_array().unwrap() {
        let lags = lags(case);
        let n = lags[0].nrows();
        let params = Params {
            intercept: DVector::zeros(n),
            lags,
            sigma: DMatrix::identity(n, n),
        };
        let moduli = vector(&case["moduli"]);
        let want = moduli.max();
        let got = params.spectral_radius();
        assert!(
            (got - want).abs() <= AGREE * want.max(1.0),
            "{}: {got} against {want}",
            case["name"]
        );
    }
}
