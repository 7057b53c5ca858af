//! Band Cholesky factorisation `A = P Pᵀ` of a symmetric positive-definite
//! band matrix.
//!
//! `P` is lower triangular with the bandwidth `bw` of `A` (no fill-in):
//!
//! ```text
//! P[j][j] = sqrt(A[j][j] − Σ_{k=max(0, j−bw)}^{j−1} P[j][k]²)
//! P[i][j] = (A[i][j] − Σ_{k=max(0, i−bw)}^{j−1} P[i][k] P[j][k]) / P[j][j],
//!           j < i <= min(N − 1, j + bw)
//! ```
//!
//! Cost about `N·bw²/2` multiply-adds and `N` square roots. The entries are
//! computed row by row (row `i` needs only rows `i − bw .. i`, all finished),
//! which evaluates every sum above in the same order as the column-by-column
//! statement of the algorithm, hence bit-identical results.
//!
//! Storage of `P` (internal, row-wise so both operands of every dot product
//! are contiguous): row `i` occupies `rows[i·(bw+1) .. (i+1)·(bw+1)]`, with
//!
//! ```text
//! rows[i·(bw+1) + (bw − (i − k))] = P[i][k],   max(0, i − bw) <= k <= i,
//! ```
//!
//! so the diagonal `P[i][i]` is the last slot of its row and the leading
//! `bw − i` slots of the first rows are zero padding. Shape `(bw+1)·N`.
//!
//! Sources: G. H. Golub and C. F. Van Loan, *Matrix Computations*, §4.3
//! (band Cholesky); H. Rue (2001), "Fast sampling of Gaussian Markov random
//! fields", JRSS-B 63 (band Cholesky of the GMRF precision matrix).

use nalgebra::DMatrix;

use super::{BandedError, SymBand};

/// Lower-triangular band factor P with A = P P'.
#[derive(Debug, Clone, PartialEq)]
pub struct BandCholesky {
    n: usize,
    bw: usize,
    /// Row-wise band of `P`, see the module documentation; length `(bw+1)·n`.
    rows: Vec<f64>,
}

impl BandCholesky {
    /// Factor `A = P Pᵀ` with the band Cholesky algorithm.
    ///
    /// # Errors
    /// [`BandedError::NotPositiveDefinite`] with the first row `index` whose
    /// pivot `A[i][i] − Σ_k P[i][k]²` is `<= 0` or not finite (this also
    /// catches NaN or infinite entries of `A`).
    pub fn factor(a: &SymBand) -> Result<BandCholesky, BandedError> {
        let (n, bw) = (a.n(), a.bw());
        let w = bw + 1;
        let mut rows = vec![0.0; w * n];
        for i in 0..n {
            let lo_i = i.saturating_sub(bw);
            let (done, rest) = rows.split_at_mut(i * w);
            // Row i of P restricted to columns lo_i..=i.
            let row_i = &mut rest[w - (i - lo_i) - 1..w];
            for j in lo_i..i {
                let lo_j = j.saturating_sub(bw);
                // Row j of P, columns lo_j..=j; take columns lo_i..j and P[j][j].
                let row_j = &done[j * w + w - (j - lo_j) - 1..(j + 1) * w];
                let (pj, pjj) = (&row_j[lo_i - lo_j..j - lo_j], row_j[j - lo_j]);
                let s = dot(&row_i[..j - lo_i], pj);
                row_i[j - lo_i] = (a.get(i, j) - s) / pjj;
            }
            let (off, diag) = row_i.split_at_mut(i - lo_i);
            let pivot = a.get(i, i) - dot(off, off);
            if !(pivot > 0.0 && pivot.is_finite()) {
                return Err(BandedError::NotPositiveDefinite { index: i, pivot });
            }
            diag[0] = pivot.sqrt();
        }
        Ok(BandCholesky { n, bw, rows })
    }

    /// Order `N` of the factored matrix.
    pub fn n(&self) -> usize {
        self.n
    }

    /// Half-bandwidth of `P` (equal to that of `A`).
    pub fn bw(&self) -> usize {
        self.bw
    }

    /// Row `i` of `P` on columns `max(0, i − bw) ..= i` (diagonal last).
    pub(super) fn row(&self, i: usize) -> &[f64] {
        let w = self.bw + 1;
        let len = i.min(self.bw) + 1;
        &self.rows[(i + 1) * w - len..(i + 1) * w]
    }

    /// First column index `max(0, i − bw)` held by [`BandCholesky::row`].
    pub(super) fn row_start(&self, i: usize) -> usize {
        i.saturating_sub(self.bw)
    }

    /// `ln|A| = 2 Σ_j ln P[j][j]` (0 for `N = 0`).
    pub fn log_det(&self) -> f64 {
        2.0 * (0..self.n)
            .map(|i| self.row(i)[i.min(self.bw)].ln())
            .sum::<f64>()
    }

    /// Dense `N×N` copy of `P` (zeros above the diagonal and outside the band).
    pub fn to_dense_lower(&self) -> DMatrix<f64> {
        let mut p = DMatrix::zeros(self.n, self.n);
        for i in 0..self.n {
            let lo = self.row_start(i);
            for (k, &v) in self.row(i).iter().enumerate() {
                p[(i, lo + k)] = v;
            }
        }
        p
    }
}

/// `Σ_k a[k] b[k]` in index order (equal lengths by construction).
pub(super) fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::banded::test_support::{CASES, random_spd_band, rel_diff, tol};
    use nalgebra::linalg::Cholesky;

    /// Outside reference: nalgebra's dense `Cholesky` factor `L`; also the
    /// generating factor `G` (unique Cholesky factor of `A = G Gᵀ`).
    #[test]
    fn factor_matches_nalgebra_dense_cholesky() {
        for (k, &(n, bw)) in CASES.iter().enumerate() {
            let (g, a) = random_spd_band(n, bw, 10 + k as u64);
            let p = BandCholesky::factor(&a).expect("SPD fixture");
            assert_eq!((p.n(), p.bw()), (n, bw));
            let dense = Cholesky::new(a.to_dense()).expect("nalgebra: SPD").l();
            let pd = p.to_dense_lower();
            let e = rel_diff(&pd, &dense);
            assert!(e <= tol(n), "(n={n}, bw={bw}): vs nalgebra {e:e}");
            let e = rel_diff(&pd, &g);
            assert!(e <= tol(n), "(n={n}, bw={bw}): vs G {e:e}");
            // Strictly upper part and the part outside the band are zero.
            for i in 0..n {
                for j in 0..n {
                    if j > i || i - j > bw {
                        assert_eq!(pd[(i, j)], 0.0);
                    }
                }
            }
        }
    }

    /// Identity reference: `P Pᵀ = A`.
    #[test]
    fn reconstructs_a() {
        for (k, &(n, bw)) in CASES.iter().enumerate() {
            let (_, a) = random_spd_band(n, bw, 20 + k as u64);
            let pd = BandCholesky::factor(&a)
                .expect("SPD fixture")
                .to_dense_lower();
            let e = rel_diff(&(&pd * pd.transpose()), &a.to_dense());
            assert!(e <= tol(n), "(n={n}, bw={bw}): {e:e}");
        }
    }

    /// Outside reference: nalgebra's `Cholesky::ln_determinant`.
    #[test]
    fn log_det_matches_nalgebra() {
        for (k, &(n, bw)) in CASES.iter().enumerate() {
            let (_, a) = random_spd_band(n, bw, 30 + k as u64);
            let ld = BandCholesky::factor(&a).expect("SPD fixture").log_det();
            let reference = Cholesky::new(a.to_dense()).expect("SPD").ln_determinant();
            let e = (ld - reference).abs() / reference.abs().max(1.0);
            assert!(e <= tol(n), "(n={n}, bw={bw}): {ld} vs {reference}");
        }
        assert_eq!(
            BandCholesky::factor(&SymBand::zeros(0, 0)).map(|p| p.log_det()),
            Ok(0.0)
        );
    }

    /// Reference: identity with `A[3][3] = −1` fails exactly at pivot 3.
    #[test]
    fn indefinite_diagonal_reports_index() {
        let mut a = SymBand::zeros(6, 2);
        for i in 0..6 {
            a.set(i, i, 1.0);
        }
        a.set(3, 3, -1.0);
        let err = BandCholesky::factor(&a).expect_err("indefinite");
        assert_eq!(
            err,
            BandedError::NotPositiveDefinite {
                index: 3,
                pivot: -1.0
            }
        );
        assert!(err.to_string().contains("row 3"), "{err}");
    }

    /// Reference: `[[1, 2], [2, 1]]` has pivots 1 and 1 − 2² = −3, so the
    /// failure comes from the elimination, not from a negative diagonal.
    #[test]
    fn indefinite_by_elimination_reports_index() {
        let mut a = SymBand::zeros(4, 1);
        for i in 0..4 {
            a.set(i, i, 1.0);
        }
        a.set(2, 1, 2.0);
        let err = BandCholesky::factor(&a).expect_err("indefinite");
        assert_eq!(
            err,
            BandedError::NotPositiveDefinite {
                index: 2,
                pivot: -3.0
            }
        );
    }

    /// Reference: a zero or NaN pivot is rejected (not positive, not finite).
    #[test]
    fn zero_and_nan_pivots_are_rejected() {
        let mut a = SymBand::zeros(3, 0);
        a.set(0, 0, 1.0);
        a.set(2, 2, 1.0);
        let err = BandCholesky::factor(&a).expect_err("singular");
        assert_eq!(
            err,
            BandedError::NotPositiveDefinite {
                index: 1,
                pivot: 0.0
            }
        );
        a.set(1, 1, f64::NAN);
        match BandCholesky::factor(&a) {
            Err(BandedError::NotPositiveDefinite { index: 1, pivot }) => assert!(pivot.is_nan()),
            other => panic!("expected NaN pivot at 1, got {other:?}"),
        }
    }

    /// Outside reference: nalgebra dense Cholesky of the dense selection;
    /// the factor of the band sub-matrix must agree with it.
    #[test]
    fn submatrix_factor_matches_dense() {
        let (_, a) = random_spd_band(96, 39, 41);
        let keep: Vec<usize> = (0..96).filter(|i| i % 3 != 1 && *i != 50).collect();
        let sub = a.submatrix(&keep);
        // Any 40 consecutive indices (difference <= 39) hold at most 27 kept
        // rows (two in three survive), so the tight bandwidth is 26.
        assert_eq!(sub.bw(), 26);
        let dense = a.to_dense().select_rows(&keep).select_columns(&keep);
        let p = BandCholesky::factor(&sub).expect("principal sub-matrix of SPD is SPD");
        let l = Cholesky::new(dense).expect("SPD").l();
        let e = rel_diff(&p.to_dense_lower(), &l);
        assert!(e <= tol(keep.len()), "{e:e}");
    }
}
