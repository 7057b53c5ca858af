//! Triangular solves and products with the band Cholesky factor `A = P Pᵀ`.
//!
//! With `lo(i) = max(0, i − bw)` and vectors of length `N`:
//!
//! ```text
//! forward   P x = v:   x[i] = (v[i] − Σ_{k=lo(i)}^{i−1} P[i][k] x[k]) / P[i][i],  i = 0, 1, …
//! backward  Pᵀ x = v:  x[i] = (v[i] − Σ_{k=i+1}^{min(N−1, i+bw)} P[k][i] x[k]) / P[i][i],  i = N−1, …
//! A⁻¹ v = P⁻ᵀ (P⁻¹ v);   (P x)[i] = Σ_{k=lo(i)}^{i} P[i][k] x[k]
//! ```
//!
//! Each costs about `N·bw` multiply-adds. `P` is stored row-wise, so the
//! forward solve and the product are row dot products and the backward solve
//! is the column-oriented (saxpy) form: once `x[i]` is final, subtract
//! `P[i][k] x[i]` from `x[k]` for `k < i` along row `i`. All run in place.
//! Sampling a GMRF `x ~ N(μ, A⁻¹)` is `x = μ + P⁻ᵀ z` with `z ~ N(0, I)`.
//!
//! Sources: G. H. Golub and C. F. Van Loan, *Matrix Computations*, §4.3
//! (band forward and back substitution); H. Rue (2001), "Fast sampling of
//! Gaussian Markov random fields", JRSS-B 63 (sampling by a back solve).

use super::BandCholesky;
use super::cholesky::dot;

impl BandCholesky {
    fn check_len(&self, len: usize, what: &str) {
        assert_eq!(len, self.n(), "BandCholesky::{what}: wrong vector length");
    }

    /// `x ← P⁻¹ x` (forward substitution, solves `P y = x`).
    ///
    /// # Panics
    /// If `x.len() != n` (programmer error).
    pub fn solve_lower_in_place(&self, x: &mut [f64]) {
        self.check_len(x.len(), "solve_lower_in_place");
        for i in 0..self.n() {
            let lo = self.row_start(i);
            let (off, diag) = self.row(i).split_at(i - lo);
            let s = dot(off, &x[lo..i]);
            x[i] = (x[i] - s) / diag[0];
        }
    }

    /// `x ← P⁻ᵀ x` (back substitution, solves `Pᵀ y = x`).
    ///
    /// # Panics
    /// If `x.len() != n` (programmer error).
    pub fn solve_upper_in_place(&self, x: &mut [f64]) {
        self.check_len(x.len(), "solve_upper_in_place");
        for i in (0..self.n()).rev() {
            let lo = self.row_start(i);
            let (off, diag) = self.row(i).split_at(i - lo);
            let (head, tail) = x.split_at_mut(i);
            tail[0] /= diag[0];
            let xi = tail[0];
            for (xk, &pik) in head[lo..].iter_mut().zip(off) {
                *xk -= pik * xi;
            }
        }
    }

    /// `x ← A⁻¹ x = P⁻ᵀ P⁻¹ x`.
    ///
    /// # Panics
    /// If `x.len() != n` (programmer error).
    pub fn solve_in_place(&self, x: &mut [f64]) {
        self.solve_lower_in_place(x);
        self.solve_upper_in_place(x);
    }

    /// `out = P x`.
    ///
    /// # Panics
    /// If `x.len() != n` or `out.len() != n` (programmer error).
    pub fn mul_lower(&self, x: &[f64], out: &mut [f64]) {
        self.check_len(x.len(), "mul_lower (x)");
        self.check_len(out.len(), "mul_lower (out)");
        for (i, o) in out.iter_mut().enumerate() {
            let lo = self.row_start(i);
            *o = dot(self.row(i), &x[lo..=i]);
        }
    }
}

#[cfg(test)]
mod tests {
    use crate::banded::test_support::{CASES, max_abs, random_spd_band, random_vec, tol};
    use crate::banded::{BandCholesky, SymBand};
    use nalgebra::{DVector, linalg::Cholesky};

    /// Max-norm relative difference of two vectors.
    fn rel(x: &[f64], reference: &DVector<f64>) -> f64 {
        let err = max_abs(x.iter().zip(reference.iter()).map(|(a, b)| a - b));
        err / max_abs(reference.iter().copied()).max(f64::MIN_POSITIVE)
    }

    fn fixture(n: usize, bw: usize, seed: u64) -> (SymBand, BandCholesky, Vec<f64>) {
        let (_, a) = random_spd_band(n, bw, seed);
        let p = BandCholesky::factor(&a).expect("SPD fixture");
        (a, p, random_vec(n, seed + 1000))
    }

    /// Outside reference: nalgebra `solve_lower_triangular` with the dense `P`.
    #[test]
    fn lower_solve_matches_nalgebra() {
        for (k, &(n, bw)) in CASES.iter().enumerate() {
            let (_, p, b) = fixture(n, bw, 50 + k as u64);
            let reference = p
                .to_dense_lower()
                .solve_lower_triangular(&DVector::from_column_slice(&b))
                .expect("nonzero diagonal");
            let mut x = b.clone();
            p.solve_lower_in_place(&mut x);
            let e = rel(&x, &reference);
            assert!(e <= tol(n), "(n={n}, bw={bw}): {e:e}");
        }
    }

    /// Outside reference: nalgebra `tr_solve_lower_triangular` (solves `Pᵀ x = b`).
    #[test]
    fn upper_solve_matches_nalgebra() {
        for (k, &(n, bw)) in CASES.iter().enumerate() {
            let (_, p, b) = fixture(n, bw, 60 + k as u64);
            let reference = p
                .to_dense_lower()
                .tr_solve_lower_triangular(&DVector::from_column_slice(&b))
                .expect("nonzero diagonal");
            let mut x = b.clone();
            p.solve_upper_in_place(&mut x);
            let e = rel(&x, &reference);
            assert!(e <= tol(n), "(n={n}, bw={bw}): {e:e}");
        }
    }

    /// Outside reference: nalgebra dense `Cholesky::solve` of `A x = b`;
    /// identity reference: the residual `A x − b` via [`SymBand::mul_vec`].
    #[test]
    fn full_solve_matches_nalgebra() {
        for (k, &(n, bw)) in CASES.iter().enumerate() {
            let (a, p, b) = fixture(n, bw, 70 + k as u64);
            let bv = DVector::from_column_slice(&b);
            let reference = Cholesky::new(a.to_dense()).expect("SPD").solve(&bv);
            let mut x = b.clone();
            p.solve_in_place(&mut x);
            let e = rel(&x, &reference);
            assert!(e <= tol(n), "(n={n}, bw={bw}): {e:e}");
            let mut ax = vec![0.0; n];
            a.mul_vec(&x, &mut ax);
            let e = rel(&ax, &bv);
            assert!(e <= tol(n), "(n={n}, bw={bw}): residual {e:e}");
        }
    }

    /// Outside reference: nalgebra dense product `P x`; identity reference:
    /// `P⁻¹ (P x) = x`.
    #[test]
    fn mul_lower_matches_dense_and_inverts() {
        for (k, &(n, bw)) in CASES.iter().enumerate() {
            let (_, p, x) = fixture(n, bw, 80 + k as u64);
            let mut px = vec![f64::NAN; n];
            p.mul_lower(&x, &mut px);
            let reference = p.to_dense_lower() * DVector::from_column_slice(&x);
            let e = rel(&px, &reference);
            assert!(e <= tol(n), "(n={n}, bw={bw}): {e:e}");
            p.solve_lower_in_place(&mut px);
            let e = rel(&px, &DVector::from_column_slice(&x));
            assert!(e <= tol(n), "(n={n}, bw={bw}): round trip {e:e}");
        }
    }

    /// Outside reference: nalgebra dense `Cholesky::solve` on the dense
    /// selection of the kept rows and columns.
    #[test]
    fn submatrix_solve_matches_dense() {
        let (a, _, _) = fixture(200, 99, 91);
        let keep: Vec<usize> = (0..200)
            .filter(|i| i % 4 != 0 && !(120..130).contains(i))
            .collect();
        let sub = a.submatrix(&keep);
        assert_eq!(sub.bw(), 74);
        let p = BandCholesky::factor(&sub).expect("principal sub-matrix of SPD is SPD");
        let b = DVector::from_column_slice(&random_vec(keep.len(), 5));
        let dense = a.to_dense().select_rows(&keep).select_columns(&keep);
        let reference = Cholesky::new(dense).expect("SPD").solve(&b);
        let mut x: Vec<f64> = b.iter().copied().collect();
        p.solve_in_place(&mut x);
        let e = rel(&x, &reference);
        assert!(e <= tol(keep.len()), "{e:e}");
    }

    #[test]
    #[should_panic(expected = "wrong vector length")]
    fn wrong_length_panics() {
        let (_, p, _) = fixture(5, 1, 1);
        p.solve_in_place(&mut [0.0; 4]);
    }
}
