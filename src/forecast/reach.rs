//! Rank condition for drivers: can the moving shocks meet the conditions?
//!
//! With the stacked rows `𝒢 = [R; S]` (pins and corridor rows, independent after
//! [`super::rows`]) and `F = 𝒢 M`, split by columns into drivers `J` and the rest, every draw
//! can meet every condition exactly when `rank(F_J) = m + q` (Antolín-Díaz, Petrella and
//! Rubio-Ramírez 2021; ALGORITHMS §5.3–5.4). A left null vector `v` (`v'F_J = 0`) names a
//! combination of conditions the drivers cannot move: it moves only with shocks that keep
//! their usual distribution (the rows are independent and `M` is invertible, so `v'F ≠ 0`).
//! Rank is read off the singular values of `F_J` against a `σ_max · max(rows, cols) · 1e−12`
//! threshold (numerical-rank practice, Golub and Van Loan).

use nalgebra::{DMatrix, SVD};

/// Singular values below `RANK_RTOL · σ_max · max(rows, cols)` count as zero.
const RANK_RTOL: f64 = 1e-12;
/// A null-vector entry above this share of the largest marks its condition as involved.
const INVOLVED: f64 = 1e-3;

/// Check `rank(F_J) = rows`; on failure return the rows involved (indices).
pub fn check(f: &DMatrix<f64>, drivers: &[bool]) -> Result<(), Vec<usize>> {
    let rows = f.nrows();
    if rows == 0 {
        return Ok(());
    }
    let cols: Vec<usize> = (0..f.ncols()).filter(|&c| drivers[c]).collect();
    let width = cols.len().max(rows);
    let mut fj = DMatrix::zeros(rows, width);
    for (k, &c) in cols.iter().enumerate() {
        fj.set_column(k, &f.column(c));
    }
    let svd = SVD::new(fj, true, false);
    let Some(u) = svd.u else {
        return Err((0..rows).collect());
    };
    let smax = svd.singular_values.amax();
    let tol = RANK_RTOL * smax.max(f64::MIN_POSITIVE) * width as f64;
    for (k, s) in svd.singular_values.iter().enumerate() {
        if *s > tol && smax > 0.0 {
            continue;
        }
        let v = u.column(k);
        return Err((0..rows)
            .filter(|&i| v[i].abs() > INVOLVED * v.amax())
            .collect());
    }
    Ok(())
}
