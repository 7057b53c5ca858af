//! Variable reordering and Cholesky factor of the covariance (Gibson, Glasbey and Elston 1994),
//! as used by the minimax-tilting sampler (Botev 2017, ALGORITHMS §7.1–7.2).
//!
//! The factor `C` (lower, `Σ[perm, perm] = C C'`) is built column by column; at step `j` the
//! remaining variable whose conditional interval is least probable, given the truncated means
//! `z` of the variables already placed, comes next. The result is kept in scaled form:
//! `C = diag(c) (I + L̃)` with `L̃` strictly lower triangular, so that with `w ~ N(0, I)` the event
//! `l ≤ C w ≤ u` reads `l̃_k − Σ_{j<k} L̃_kj w_j ≤ w_k ≤ ũ_k − Σ_{j<k} L̃_kj w_j`,
//! `l̃ = l / c`, `ũ = u / c`.

use nalgebra::DMatrix;

use super::{TruncError, univariate};
use crate::forecast::product::cholesky;

/// A pivot whose squared value falls below `−NEGATIVE_PIVOT · Σ_jj` means `Σ` is not positive
/// semi-definite; between that and zero it is rounding, clamped to zero.
const NEGATIVE_PIVOT: f64 = 1e-10;
/// A pivot below `SINGULAR_PIVOT · sqrt(Σ_jj)` means `Σ` is numerically singular (ALGORITHMS §7.2):
/// one variable is (nearly) a linear combination of others.
const SINGULAR_PIVOT: f64 = 1e-8;

/// The ordered, scaled Cholesky factor of `Σ`.
#[derive(Debug, Clone)]
pub struct Ordered {
    /// `perm[k]` = original index of the k-th variable.
    pub perm: Vec<usize>,
    /// Diagonal `c` of the Cholesky factor (standard deviations of the sequential steps).
    pub diag: Vec<f64>,
    /// `L̃ = diag(c)⁻¹ C − I`, strictly lower triangular (d×d).
    pub lt: DMatrix<f64>,
}

impl Ordered {
    pub fn dim(&self) -> usize {
        self.perm.len()
    }

    /// Bounds in the order and scale of the factor: `l̃_k = l_{perm k} / c_k` (infinities stay).
    pub fn scale_bounds(&self, lower: &[f64], upper: &[f64]) -> (Vec<f64>, Vec<f64>) {
        let scale = |v: &[f64]| -> Vec<f64> {
            self.perm
                .iter()
                .zip(&self.diag)
                .map(|(&p, &c)| v[p] / c)
                .collect()
        };
        (scale(lower), scale(upper))
    }

    /// `c_k(w) = Σ_{j<k} L̃_kj w_j` for the first `len` entries of `w`.
    pub fn shift(&self, k: usize, w: &[f64]) -> f64 {
        let upto = k.min(w.len());
        (0..upto).map(|j| self.lt[(k, j)] * w[j]).sum()
    }

    /// Sequential truncated means (the start of the saddle-point search): `z_k` is the mean
    /// of `N(0, 1)` on `[l̃_k − c_k(z), ũ_k − c_k(z)]`.
    pub fn truncated_means(&self, lo: &[f64], hi: &[f64]) -> Vec<f64> {
        let mut z = Vec::with_capacity(self.dim());
        for k in 0..self.dim() {
            let c = self.shift(k, &z);
            z.push(univariate::mean_var(lo[k] - c, hi[k] - c).0);
        }
        z
    }

    /// `x = C w` in the original order: `x_{perm k} = c_k (w_k + Σ_{j<k} L̃_kj w_j)`.
    pub fn unscale(&self, w: &[f64]) -> Vec<f64> {
        let mut x = vec![0.0; self.dim()];
        for k in 0..self.dim() {
            x[self.perm[k]] = self.diag[k] * (w[k] + self.shift(k, w));
        }
        x
    }
}

/// Reorder and factor `Σ` for the box `[lower, upper]` (centred: the mean is already
/// subtracted). Requires `lower < upper` everywhere (checked by the caller).
pub fn reorder(sigma: &DMatrix<f64>, lower: &[f64], upper: &[f64]) -> Result<Ordered, TruncError> {
    let d = sigma.nrows();
    let mut s = sigma.clone();
    let mut l = lower.to_vec();
    let mut u = upper.to_vec();
    let mut perm: Vec<usize> = (0..d).collect();
    let mut c = DMatrix::<f64>::zeros(d, d);
    let mut z = vec![0.0; d];
    for j in 0..d {
        // Pick the remaining variable with the least probable conditional interval.
        let mut best = (j, f64::INFINITY);
        for i in j..d {
            let done: f64 = (0..j).map(|t| c[(i, t)] * c[(i, t)]).sum();
            let sd = (s[(i, i)] - done).max(f64::MIN_POSITIVE).sqrt();
            let shift: f64 = (0..j).map(|t| c[(i, t)] * z[t]).sum();
            let score = univariate::ln_prob((l[i] - shift) / sd, (u[i] - shift) / sd);
            if score < best.1 {
                best = (i, score);
            }
        }
        let i = best.0;
        if i != j {
            s.swap_rows(i, j);
            s.swap_columns(i, j);
            for t in 0..j {
                c.swap((i, t), (j, t));
            }
            l.swap(i, j);
            u.swap(i, j);
            perm.swap(i, j);
        }
        let done: f64 = (0..j).map(|t| c[(j, t)] * c[(j, t)]).sum();
        let pivot = s[(j, j)] - done;
        if !pivot.is_finite() || pivot < -NEGATIVE_PIVOT * s[(j, j)].abs() {
            return Err(TruncError::NotPositiveDefinite { index: perm[j] });
        }
        let cjj = pivot.max(0.0).sqrt();
        if cjj <= SINGULAR_PIVOT * s[(j, j)].abs().sqrt() {
            return Err(TruncError::Singular { index: perm[j] });
        }
        c[(j, j)] = cjj;
        for i in j + 1..d {
            let dot: f64 = (0..j).map(|t| c[(i, t)] * c[(j, t)]).sum();
            c[(i, j)] = (s[(i, j)] - dot) / cjj;
        }
        let shift: f64 = (0..j).map(|t| c[(j, t)] * z[t]).sum();
        z[j] = univariate::mean_var((l[j] - shift) / cjj, (u[j] - shift) / cjj).0;
    }
    let diag: Vec<f64> = (0..d).map(|k| c[(k, k)]).collect();
    let lt = DMatrix::from_fn(d, d, |k, j| if j < k { c[(k, j)] / diag[k] } else { 0.0 });
    Ok(Ordered { perm, diag, lt })
}

/// Factor `Σ[perm, perm]` in a given order (no search): another covariance laid out like an
/// earlier problem's, so that its saddle point can start from that problem's. The order only
/// affects efficiency, never the law (ALGORITHMS §7.2).
pub fn in_order(sigma: &DMatrix<f64>, perm: &[usize]) -> Result<Ordered, TruncError> {
    let d = sigma.nrows();
    let s = DMatrix::from_fn(d, d, |a, b| sigma[(perm[a], perm[b])]);
    // The column-oriented Cholesky (much faster than the row-wise loop below), which names
    // nothing when it fails: then the loop finds the pivot that does.
    let c = match cholesky(s.clone()) {
        Some(chol) => chol.unpack(),
        None => return Err(failing_pivot(&s, perm)),
    };
    let diag: Vec<f64> = (0..d).map(|k| c[(k, k)]).collect();
    if !(0..d).all(|j| diag[j] > SINGULAR_PIVOT * s[(j, j)].abs().sqrt()) {
        return Err(failing_pivot(&s, perm));
    }
    let lt = DMatrix::from_fn(d, d, |k, j| if j < k { c[(k, j)] / diag[k] } else { 0.0 });
    Ok(Ordered {
        perm: perm.to_vec(),
        diag,
        lt,
    })
}

/// The first pivot of the Cholesky factor of `s` (`Σ[perm, perm]`) that is negative beyond
/// rounding or too small, as the error naming its variable; if rounding lets every pivot pass
/// here, the smallest relative to its variance.
fn failing_pivot(s: &DMatrix<f64>, perm: &[usize]) -> TruncError {
    let d = s.nrows();
    let mut c = DMatrix::<f64>::zeros(d, d);
    let mut smallest = (f64::INFINITY, 0);
    for j in 0..d {
        let done: f64 = (0..j).map(|t| c[(j, t)] * c[(j, t)]).sum();
        let pivot = s[(j, j)] - done;
        if !pivot.is_finite() || pivot < -NEGATIVE_PIVOT * s[(j, j)].abs() {
            return TruncError::NotPositiveDefinite { index: perm[j] };
        }
        let cjj = pivot.max(0.0).sqrt();
        let relative = cjj / s[(j, j)].abs().sqrt();
        if relative.is_nan() || relative <= SINGULAR_PIVOT {
            return TruncError::Singular { index: perm[j] };
        }
        if relative < smallest.0 {
            smallest = (relative, j);
        }
        c[(j, j)] = cjj;
        for i in j + 1..d {
            let dot: f64 = (0..j).map(|t| c[(i, t)] * c[(j, t)]).sum();
            c[(i, j)] = (s[(i, j)] - dot) / cjj;
        }
    }
    TruncError::Singular {
        index: perm[smallest.1],
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// In a given order: the factor reproduces `Σ[perm, perm]`; a variable that repeats another
    /// is named as singular, one that makes `Σ` indefinite as not positive definite (the first
    /// in the order whose pivot fails, by hand: with `Σ = [[1, ρ], [ρ, 1]]` the second pivot
    /// is `1 − ρ²`).
    #[test]
    fn in_order_factors_or_names_the_failing_variable() {
        let g = DMatrix::from_fn(6, 6, |i, j| ((i * 5 + j * 2) as f64 * 0.41).cos());
        let sigma = &g * g.transpose() + DMatrix::identity(6, 6) * 0.3;
        let perm = [3, 0, 5, 1, 4, 2];
        let o = in_order(&sigma, &perm).unwrap();
        let cmat = DMatrix::from_fn(6, 6, |k, j| {
            o.diag[k] * (o.lt[(k, j)] + if j == k { 1.0 } else { 0.0 })
        });
        let permuted = DMatrix::from_fn(6, 6, |a, b| sigma[(perm[a], perm[b])]);
        assert!((&cmat * cmat.transpose() - &permuted).amax() < 1e-12 * sigma.amax());
        let pair = |rho: f64| DMatrix::from_row_slice(2, 2, &[1.0, rho, rho, 1.0]);
        assert!(matches!(
            in_order(&pair(1.0), &[1, 0]),
            Err(TruncError::Singular { index: 0 })
        ));
        assert!(matches!(
            in_order(&pair(1.5), &[0, 1]),
            Err(TruncError::NotPositiveDefinite { index: 1 })
        ));
        assert!(in_order(&pair(0.999), &[0, 1]).is_ok());
    }

    /// `Σ[perm, perm] = C C'` with `C = diag(c)(I + L̃)`, on a random SPD matrix.
    #[test]
    fn factor_reproduces_sigma() {
        for d in [1, 2, 5, 17] {
            let g = DMatrix::from_fn(d, d, |i, j| ((i * 7 + j * 3) as f64 * 0.37).sin());
            let sigma = &g * g.transpose() + DMatrix::identity(d, d) * 0.5;
            let lower: Vec<f64> = (0..d).map(|i| -1.0 + 0.3 * i as f64).collect();
            let upper: Vec<f64> = (0..d)
                .map(|i| if i % 3 == 0 { f64::INFINITY } else { 2.0 })
                .collect();
            let o = reorder(&sigma, &lower, &upper).unwrap();
            let cmat = DMatrix::from_fn(d, d, |k, j| {
                o.diag[k] * (o.lt[(k, j)] + if j == k { 1.0 } else { 0.0 })
            });
            let permuted = DMatrix::from_fn(d, d, |a, b| sigma[(o.perm[a], o.perm[b])]);
            let err = (&cmat * cmat.transpose() - &permuted).amax();
            assert!(err < 1e-12 * d as f64 * sigma.amax(), "d = {d}: {err:e}");
            let mut sorted = o.perm.clone();
            sorted.sort();
            assert_eq!(sorted, (0..d).collect::<Vec<_>>());
        }
    }

    /// A given order reproduces the searched factor when it is the searched order.
    #[test]
    fn given_order_matches_search() {
        let d = 6;
        let g = DMatrix::from_fn(d, d, |i, j| ((i * 5 + j * 2) as f64 * 0.71).cos());
        let sigma = &g * g.transpose() + DMatrix::identity(d, d) * 0.3;
        let lower = vec![-0.5; d];
        let upper: Vec<f64> = (0..d).map(|i| 0.2 + 0.4 * i as f64).collect();
        let searched = reorder(&sigma, &lower, &upper).unwrap();
        let given = in_order(&sigma, &searched.perm).unwrap();
        assert!((&given.lt - &searched.lt).amax() < 1e-12);
        assert!(
            given
                .diag
                .iter()
                .zip(&searched.diag)
                .all(|(a, b)| (a - b).abs() < 1e-12)
        );
    }

    /// The least probable interval comes first.
    #[test]
    fn hardest_variable_first() {
        let sigma = DMatrix::identity(3, 3);
        let o = reorder(&sigma, &[-1.0, 2.0, -5.0], &[1.0, 3.0, 5.0]).unwrap();
        assert_eq!(o.perm, vec![1, 0, 2]);
    }

    #[test]
    fn singular_and_indefinite_are_named() {
        let singular = DMatrix::from_row_slice(2, 2, &[1.0, 1.0, 1.0, 1.0]);
        assert!(matches!(
            reorder(&singular, &[0.0, 0.0], &[1.0, 1.0]),
            Err(TruncError::Singular { .. })
        ));
        let indefinite = DMatrix::from_row_slice(2, 2, &[1.0, 2.0, 2.0, 1.0]);
        assert!(matches!(
            reorder(&indefinite, &[0.0, 0.0], &[1.0, 1.0]),
            Err(TruncError::NotPositiveDefinite { .. })
        ));
    }
}
