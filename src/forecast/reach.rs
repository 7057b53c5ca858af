//! Rank condition for pins: can the moving shocks meet them?
//!
//! With `F = R M` (m×N, rows scaled to unit norm) split by columns into drivers `J` and the
//! rest `J̄`, the pins can hold for every draw exactly when `rank(F_J) = m` (Antolín-Díaz,
//! Petrella and Rubio-Ramírez 2021). A left null vector `v` (`v'F_J = 0`) names a combination
//! of pins the drivers cannot move: *unreachable* if `v'F_J̄ ≠ 0` (it moves only with shocks
//! that keep their usual distribution), *contradictory* if `v'F_J̄ = 0` but `v'r̃ ≠ 0`, and
//! *redundant* otherwise. Rank is read off the singular values of `F_J` against
//! `σ_max · max(m, |J|) · ε_mach`-scaled threshold (numerical-rank practice, Golub and Van Loan).

use nalgebra::{DMatrix, DVector, SVD};

use super::ForecastError;

/// Singular values below `RANK_RTOL · σ_max · max(m, cols)` count as zero.
const RANK_RTOL: f64 = 1e-12;
/// `v'F_J̄` and `v'r̃` below this (relative to the size of `F` and of `r̃`) count as zero
/// (ALGORITHMS §9.1 uses 1e−9 for the consistency residual).
const NULL_RTOL: f64 = 1e-9;
/// A null-vector entry above this share marks its pin as involved.
const INVOLVED: f64 = 1e-3;

/// How a pin combination fails.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Failure {
    Unreachable,
    Contradictory,
    Redundant,
}

/// Check `rank(F_J) = m`; on failure return the kind and the pins involved (indices).
pub fn check(
    f: &DMatrix<f64>,
    drivers: Option<&[bool]>,
    rtilde: &DVector<f64>,
) -> Result<(), (Failure, Vec<usize>)> {
    let m = f.nrows();
    if m == 0 {
        return Ok(());
    }
    let cols: Vec<usize> = (0..f.ncols())
        .filter(|&c| drivers.is_none_or(|d| d[c]))
        .collect();
    let width = cols.len().max(m);
    let mut fj = DMatrix::zeros(m, width);
    for (k, &c) in cols.iter().enumerate() {
        fj.set_column(k, &f.column(c));
    }
    let svd = SVD::new(fj, true, false);
    let Some(u) = svd.u else {
        return Err((Failure::Contradictory, (0..m).collect()));
    };
    let smax = svd.singular_values.amax();
    let tol = RANK_RTOL * smax.max(f64::MIN_POSITIVE) * width as f64;
    let scale = 1.0 + rtilde.amax();
    let f_scale = f.amax().max(f64::MIN_POSITIVE);
    for (k, s) in svd.singular_values.iter().enumerate() {
        if *s > tol && smax > 0.0 {
            continue;
        }
        let v = u.column(k);
        let involved: Vec<usize> = (0..m)
            .filter(|&i| v[i].abs() > INVOLVED * v.amax())
            .collect();
        let rest = (0..f.ncols())
            .filter(|&c| drivers.is_some_and(|d| !d[c]))
            .map(|c| v.dot(&f.column(c)).abs())
            .fold(0.0, f64::max);
        let kind = if rest > NULL_RTOL * f_scale {
            Failure::Unreachable
        } else if v.dot(rtilde).abs() > NULL_RTOL * scale {
            Failure::Contradictory
        } else {
            Failure::Redundant
        };
        return Err((kind, involved));
    }
    Ok(())
}

/// Turn a failure into the error the user reads.
pub fn explain(
    kind: Failure,
    involved: &[usize],
    labels: &[String],
    drivers: &str,
    draw: Option<usize>,
) -> ForecastError {
    let pins: Vec<String> = involved.iter().map(|&i| labels[i].clone()).collect();
    match kind {
        Failure::Unreachable => ForecastError::Unreachable {
            pins,
            drivers: drivers.to_string(),
            draw,
        },
        Failure::Contradictory => ForecastError::Contradictory { pins, draw },
        Failure::Redundant => ForecastError::Redundant { pins },
    }
}
