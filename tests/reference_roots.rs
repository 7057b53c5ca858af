//! The largest companion root (the explosive-root measure) against numpy: the moduli of the
//! companion matrix's eigenvalues by `numpy.linalg.eigvals` (LAPACK dgeev), fixtures made by
//! `tests/fixtures/make_roots.py`.

mod common;

use common::*;
use nalgebra::{DMatrix, DVector};
use tiltyard::model::{Params, roots};

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

/// The eigenvalue-only QR of `model::roots` against numpy (LAPACK dgeev) on every fixture's
/// companion matrix: every modulus for the randomly drawn cases, whose roots are well
/// conditioned; for all cases, the sums of the roots and of their squares against the
/// closed forms `tr F = tr B_1` and `tr F²`. The fixed-formula cases have rank-two lags, so
/// zero is a root of high multiplicity whose computed copies scatter by about
/// `ε^{1/k}` (Golub and Van Loan 2013, §7.2.2): their moduli are not compared, only their
/// symmetric functions.
#[test]
fn every_root_matches_numpy_and_the_trace() {
    let fx = json("roots.json");
    for case in fx["cases"].as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let lags = lags(case);
        let f = roots::companion(&lags);
        let got = roots::eigenvalues(f.clone()).expect("the QR steps converge");
        let scale = f.norm().max(1.0);
        let sum: (f64, f64) = got.iter().fold((0.0, 0.0), |s, z| (s.0 + z.0, s.1 + z.1));
        assert!(
            (sum.0 - lags[0].trace()).abs() < 1e-12 * scale,
            "{name}: Σλ"
        );
        assert!(sum.1.abs() < 1e-12 * scale, "{name}: Σλ is real");
        let squares = got.iter().map(|(re, im)| re * re - im * im).sum::<f64>();
        let trace_f2 = (&f * &f).trace();
        assert!(
            (squares - trace_f2).abs() < 1e-12 * scale * scale,
            "{name}: Σλ²"
        );
        if name.starts_with("formula") {
            continue;
        }
        let mut moduli: Vec<f64> = got.iter().map(|(re, im)| re.hypot(*im)).collect();
        moduli.sort_by(f64::total_cmp);
        let want = vector(&case["moduli"]);
        assert_eq!(moduli.len(), want.len());
        for (g, w) in moduli.iter().zip(want.iter()) {
            assert!(
                (g - w).abs() <= 1e-8 * want.max().max(1.0),
                "{name}: {g} against {w}"
            );
        }
    }
}
