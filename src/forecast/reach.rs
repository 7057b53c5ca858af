//! Rank condition for drivers: can the moving shocks meet the conditions?
//!
//! With the stacked rows `𝒢 = [R; S]` (pins and corridor rows, independent after
//! [`super::rows`]) and `F = 𝒢 M`, split by columns into drivers `J` and the rest, every draw
//! can meet every condition exactly when `rank(F_J) = m + q` (Antolín-Díaz, Petrella and
//! Rubio-Ramírez 2021; ALGORITHMS §5.3–5.4). A left null vector `v` (`v'F_J = 0`) names a
//! combination of conditions the drivers cannot move: it moves only with shocks that keep
//! their usual distribution (the rows are independent and `M` is invertible, so `v'F ≠ 0`).
//!
//! The check works on the triangular factor of the thin QR `F_J' = Q R`: `F_J = R'Q'` has the
//! singular values of `R`, and its left null vectors are the right null vectors of `R`. Rank is
//! read off them against a `σ_max · max(rows, cols) · 1e−12` threshold (numerical-rank
//! practice, Golub and Van Loan).

use nalgebra::SVD;

use super::factor::Factor;

/// Singular values below `RANK_RTOL · σ_max · max(rows, cols)` count as zero.
const RANK_RTOL: f64 = 1e-12;
/// A null-vector entry above this share of the largest marks its condition as involved.
const INVOLVED: f64 = 1e-3;

/// Check that `F_J` (its factor, k × k, from `width = max(|J|, k)` columns) has full row rank;
/// on failure return the rows involved (indices).
pub fn check(factor: &Factor, width: usize) -> Result<(), Vec<usize>> {
    let r = factor.r();
    let rows = r.ncols();
    if rows == 0 {
        return Ok(());
    }
    let tol = RANK_RTOL * width as f64;
    // σ_min/σ_max ≥ 1/bound: clearly of full rank without a singular value decomposition.
    if factor.raw_condition_bound() * tol < 1.0 {
        return Ok(());
    }
    let svd = SVD::new(r.clone(), false, true);
    let Some(vt) = svd.v_t else {
        return Err((0..rows).collect());
    };
    let smax = svd.singular_values.amax();
    let tol = tol * smax.max(f64::MIN_POSITIVE);
    for (k, s) in svd.singular_values.iter().enumerate() {
        if *s > tol && smax > 0.0 {
            continue;
        }
        let v = vt.row(k);
        return Err((0..rows)
            .filter(|&i| v[i].abs() > INVOLVED * v.amax())
            .map(|p| factor.original(p))
            .collect());
    }
    Ok(())
}
