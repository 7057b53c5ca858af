//! Band storage of a symmetric matrix.
//!
//! A symmetric `N×N` matrix `A` with half-bandwidth `bw` (`A[i][j] = 0` for
//! `|i − j| > bw`) is stored by its lower band only, diagonal by diagonal, in
//! the LAPACK style (`dpbtrf` with `uplo = 'L'`, transposed so that each
//! diagonal is contiguous):
//!
//! ```text
//! data[(i − j)·N + j] = A[i][j],   0 <= i − j <= bw,   data.len() = (bw + 1)·N
//! ```
//!
//! Diagonal `d` occupies `data[d·N .. d·N + N − d]`; its last `d` slots are
//! padding and stay zero. Products `A x` therefore run over contiguous memory.
//!
//! Sources: H. Rue (2001), "Fast sampling of Gaussian Markov random fields",
//! JRSS-B 63 (band precision matrices of GMRFs); G. H. Golub and C. F. Van
//! Loan, *Matrix Computations*, §1.2 (band storage) and §4.3 (banded systems).

use nalgebra::DMatrix;

/// Symmetric band matrix, LAPACK-style lower band:
/// `data[(i - j) * n + j] = A[i][j]` for `0 <= i - j <= bw`.
///
/// The bandwidth is clamped to `n − 1` (no wider band exists in an `n×n`
/// matrix), so `bw() <= n.saturating_sub(1)`.
#[derive(Debug, Clone, PartialEq)]
pub struct SymBand {
    n: usize,
    bw: usize,
    data: Vec<f64>,
}

impl SymBand {
    /// The `n×n` zero matrix with half-bandwidth `bw` (clamped to `n − 1`).
    pub fn zeros(n: usize, bw: usize) -> SymBand {
        let bw = bw.min(n.saturating_sub(1));
        SymBand {
            n,
            bw,
            data: vec![0.0; (bw + 1) * n],
        }
    }

    /// Order `N` of the matrix.
    pub fn n(&self) -> usize {
        self.n
    }

    /// Half-bandwidth: `A[i][j] = 0` whenever `|i − j| > bw`.
    pub fn bw(&self) -> usize {
        self.bw
    }

    /// Storage slot of `A[i][j]` (either triangle), `None` outside the band.
    ///
    /// # Panics
    /// If `i >= n` or `j >= n` (programmer error: index outside the matrix).
    fn slot(&self, i: usize, j: usize) -> Option<usize> {
        assert!(
            i < self.n && j < self.n,
            "SymBand index ({i}, {j}) out of range for n = {}",
            self.n
        );
        let (hi, lo) = if i >= j { (i, j) } else { (j, i) };
        let d = hi - lo;
        (d <= self.bw).then_some(d * self.n + lo)
    }

    /// Entry `A[i][j]` for any `i, j < n`; `0` outside the band.
    ///
    /// # Panics
    /// If `i >= n` or `j >= n` (programmer error).
    pub fn get(&self, i: usize, j: usize) -> f64 {
        self.slot(i, j).map_or(0.0, |s| self.data[s])
    }

    /// Set `A[i][j] = A[j][i] = v`. Either triangle may be addressed.
    ///
    /// # Panics
    /// If `|i − j| > bw` or an index is `>= n` (programmer error: the entry
    /// cannot be represented in this band).
    pub fn set(&mut self, i: usize, j: usize, v: f64) {
        let s = self.band_slot(i, j);
        self.data[s] = v;
    }

    /// `A[i][j] += v` (and thus `A[j][i]`, the same stored entry).
    ///
    /// # Panics
    /// As [`SymBand::set`].
    pub fn add(&mut self, i: usize, j: usize, v: f64) {
        let s = self.band_slot(i, j);
        self.data[s] += v;
    }

    fn band_slot(&self, i: usize, j: usize) -> usize {
        match self.slot(i, j) {
            Some(s) => s,
            None => panic!(
                "SymBand entry ({i}, {j}) outside the band (bw = {})",
                self.bw
            ),
        }
    }

    /// `out = A x`, cost `(2 bw + 1)·N` multiply-adds, diagonal by diagonal.
    ///
    /// # Panics
    /// If `x.len() != n` or `out.len() != n` (programmer error).
    pub fn mul_vec(&self, x: &[f64], out: &mut [f64]) {
        let n = self.n;
        assert_eq!(x.len(), n, "SymBand::mul_vec: x has wrong length");
        assert_eq!(out.len(), n, "SymBand::mul_vec: out has wrong length");
        for ((o, &a), &xj) in out.iter_mut().zip(&self.data[..n]).zip(x) {
            *o = a * xj;
        }
        for d in 1..=self.bw {
            let diag = &self.data[d * n..d * n + n - d];
            for (j, &a) in diag.iter().enumerate() {
                // A[j+d][j] = A[j][j+d] = a.
                out[j + d] += a * x[j];
                out[j] += a * x[j + d];
            }
        }
    }

    /// Dense `N×N` copy (both triangles filled).
    pub fn to_dense(&self) -> DMatrix<f64> {
        DMatrix::from_fn(self.n, self.n, |i, j| self.get(i, j))
    }

    /// Band matrix from the lower band of a dense square matrix: `A[i][j] =
    /// a[(i, j)]` for `0 <= i − j <= bw`; the upper triangle of `a` and
    /// entries outside the band are ignored.
    ///
    /// # Panics
    /// If `a` is not square (programmer error).
    pub fn from_dense(a: &DMatrix<f64>, bw: usize) -> SymBand {
        assert!(a.is_square(), "SymBand::from_dense: matrix is not square");
        let mut out = SymBand::zeros(a.nrows(), bw);
        let n = out.n;
        for d in 0..=out.bw {
            for j in 0..n - d {
                out.data[d * n + j] = a[(j + d, j)];
            }
        }
        out
    }

    /// Principal sub-matrix on the sorted index set `keep` (natural order kept).
    /// Its bandwidth is at most bw.
    ///
    /// The returned bandwidth is the tight structural one: the largest `p − q`
    /// with `keep[p] − keep[q] <= bw`, which never exceeds `bw` because the
    /// indices are distinct.
    ///
    /// # Panics
    /// If `keep` is not strictly increasing or holds an index `>= n`
    /// (programmer error).
    pub fn submatrix(&self, keep: &[usize]) -> SymBand {
        assert!(
            keep.windows(2).all(|w| w[0] < w[1]),
            "SymBand::submatrix: keep must be strictly increasing"
        );
        if let Some(&last) = keep.last() {
            assert!(last < self.n, "SymBand::submatrix: index {last} >= n");
        }
        // Tight bandwidth: for each p, the first q with keep[p] − keep[q] <= bw.
        let mut sub_bw = 0;
        let mut q = 0;
        for (p, &kp) in keep.iter().enumerate() {
            while kp - keep[q] > self.bw {
                q += 1;
            }
            sub_bw = sub_bw.max(p - q);
        }
        let mut out = SymBand::zeros(keep.len(), sub_bw);
        let m = out.n;
        for d in 0..=out.bw {
            for q in 0..m - d {
                out.data[d * m + q] = self.get(keep[q + d], keep[q]);
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::banded::test_support::{CASES, max_abs, random_spd_band, tol};
    use nalgebra::DVector;

    /// Reference: the definition of band storage (entry-by-entry).
    #[test]
    fn set_get_add_are_symmetric_and_zero_outside_band() {
        let mut a = SymBand::zeros(6, 2);
        a.set(3, 1, 2.5);
        a.set(1, 2, -1.0); // upper triangle addresses the same entry as (2, 1)
        a.add(1, 3, 0.5);
        a.add(4, 4, 3.0);
        assert_eq!(a.get(3, 1), 3.0);
        assert_eq!(a.get(1, 3), 3.0);
        assert_eq!(a.get(2, 1), -1.0);
        assert_eq!(a.get(4, 4), 3.0);
        assert_eq!(a.get(5, 0), 0.0);
        assert_eq!(a.get(0, 5), 0.0);
        assert_eq!(a.data[2 * 6 + 1], 3.0, "layout data[(i-j)*n + j]");
    }

    #[test]
    #[should_panic(expected = "outside the band")]
    fn set_outside_band_panics() {
        SymBand::zeros(6, 2).set(4, 1, 1.0);
    }

    #[test]
    #[should_panic(expected = "out of range")]
    fn get_outside_matrix_panics() {
        SymBand::zeros(3, 1).get(3, 0);
    }

    /// Reference: bandwidth larger than `n − 1` is clamped.
    #[test]
    fn bandwidth_is_clamped() {
        let a = SymBand::zeros(3, 10);
        assert_eq!(a.bw(), 2);
        assert_eq!(a.data.len(), 9);
        assert_eq!(SymBand::zeros(0, 4).bw(), 0);
    }

    /// Reference: dense round trip; entries outside the band are dropped.
    #[test]
    fn dense_round_trip() {
        let (_, a) = random_spd_band(12, 3, 7);
        let dense = a.to_dense();
        assert_eq!(dense, dense.transpose());
        assert_eq!(SymBand::from_dense(&dense, 3), a);
        let narrow = SymBand::from_dense(&dense, 1);
        assert_eq!(narrow.get(5, 3), 0.0);
        assert_eq!(narrow.get(5, 4), dense[(5, 4)]);
        assert_ne!(dense[(5, 3)], 0.0);
    }

    /// Reference: nalgebra dense matrix-vector product.
    #[test]
    fn mul_vec_matches_dense() {
        for (k, &(n, bw)) in CASES.iter().enumerate() {
            let (_, a) = random_spd_band(n, bw, 100 + k as u64);
            let x: Vec<f64> = (0..n).map(|i| (i as f64 * 0.7).sin() + 0.3).collect();
            let mut out = vec![f64::NAN; n];
            a.mul_vec(&x, &mut out);
            let reference = a.to_dense() * DVector::from_column_slice(&x);
            let err = max_abs(out.iter().zip(reference.iter()).map(|(p, q)| p - q));
            let scale = max_abs(reference.iter().copied());
            assert!(err <= tol(n) * scale, "(n={n}, bw={bw}): err {err:e}");
        }
    }

    /// Reference: dense selection of rows and columns `keep`.
    #[test]
    fn submatrix_matches_dense_selection() {
        let (_, a) = random_spd_band(30, 5, 11);
        let dense = a.to_dense();
        let keep = [0, 1, 4, 5, 6, 12, 13, 20, 29];
        let sub = a.submatrix(&keep);
        assert!(sub.bw() <= a.bw());
        // keep[4] − keep[0] = 6 > 5 but keep[4] − keep[1] = 5: p − q = 3.
        assert_eq!(sub.bw(), 3);
        let expected = dense.select_rows(&keep).select_columns(&keep);
        assert_eq!(sub.to_dense(), expected);
        assert_eq!(a.submatrix(&[]).n(), 0);
    }

    #[test]
    #[should_panic(expected = "strictly increasing")]
    fn submatrix_rejects_unsorted() {
        SymBand::zeros(5, 1).submatrix(&[2, 1]);
    }
}
