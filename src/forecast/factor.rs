//! The thin QR factorisation `F_J' = Q R` of the conditions in shock space (columns `J` of
//! `F = 𝒢M`, transposed: |J| × k), the one factorisation behind conditioning a θ
//! ([`super::plan`]).
//!
//! Computed by CholeskyQR2 (Yamamoto, Nakatsukasa, Yanagisawa and Fukaya 2015) on the matrix
//! with unit-norm columns `A = F_J' S⁻¹` (`S` the column norms): `R_1 = chol(A'A)'`,
//! `Q_1 = A R_1⁻¹`, `R_2 = chol(Q_1'Q_1)'`, so that `F_J' = Q R` with `Q = Q_1 R_2⁻¹` and
//! `R = U S`, `U = R_2 R_1`. Matrix products instead of Householder reflections. Forming
//! `A'A` squares the condition of the *scaled* conditions only (the growth of explosive
//! horizons sits in the column norms, taken out by `S`); the second pass restores
//! orthogonality to rounding whenever `cond(A) ≲ 10⁸`, and every accepted plan has
//! `cond(A) ≤ 10⁶`. When a Cholesky fails (rank deficient or nearly so) Householder QR takes
//! over, and its `R` names the deficiency.

use nalgebra::{DMatrix, SVD};

/// The factor, with what products with it need.
#[derive(Debug, Clone)]
pub struct Factor {
    /// `Q_1` (|J| × k) and `R_2⁻¹`: `Q = Q_1 R_2⁻¹` (Householder: `Q` and the identity).
    q1: DMatrix<f64>,
    r2_inv: DMatrix<f64>,
    /// `R` (k × k, upper triangular).
    pub r: DMatrix<f64>,
    /// `U = R S⁻¹` (unit-norm columns) and `U⁻¹` (none when `U` is singular).
    u: DMatrix<f64>,
    u_inv: Option<DMatrix<f64>>,
    /// `R_2⁻¹ U⁻ᵀ` (k × k; none when `U` is singular): `F_J⁺ = Q_1 (R_2⁻¹ U⁻ᵀ) S⁻¹`.
    inner: Option<DMatrix<f64>>,
    /// `S`, the column norms of `F_J'` (and of `R`).
    scale: Vec<f64>,
}

impl Factor {
    /// Factor `F_J'` (the rows `cells` of `F'`; every row when `None`), padded with zero rows
    /// to at least k rows so that too few cells show up as a rank deficiency.
    pub fn new(ft: &DMatrix<f64>, cells: Option<&[usize]>) -> Factor {
        let k = ft.ncols();
        let fjt = match cells {
            None if ft.nrows() >= k => ft.clone(),
            None => ft.clone().resize_vertically(k, 0.0),
            Some(cells) => {
                let rows = cells.len().max(k);
                DMatrix::from_fn(rows, k, |i, c| cells.get(i).map_or(0.0, |&j| ft[(j, c)]))
            }
        };
        cholesky_qr2(&fjt).unwrap_or_else(|| householder(fjt))
    }

    pub fn size(&self) -> usize {
        self.r.nrows()
    }

    /// `Q` (|J| × k).
    pub fn q(&self) -> DMatrix<f64> {
        &self.q1 * &self.r2_inv
    }

    /// `R_RR⁻¹ x` for the leading `m × m` block (x: m × c); NaN when it is singular.
    pub fn rr_solve(&self, m: usize, x: &DMatrix<f64>) -> DMatrix<f64> {
        let rr = self.r.view((0, 0), (m, m));
        rr.solve_upper_triangular(x)
            .unwrap_or_else(|| DMatrix::from_element(m, x.ncols(), f64::NAN))
    }

    /// `R_RR⁻ᵀ x` (x: m × c); NaN when singular.
    pub fn rr_solve_transpose(&self, m: usize, x: &DMatrix<f64>) -> DMatrix<f64> {
        let rrt = self.r.view((0, 0), (m, m)).transpose();
        rrt.solve_lower_triangular(x)
            .unwrap_or_else(|| DMatrix::from_element(m, x.ncols(), f64::NAN))
    }

    /// `C = R_RS' R_RR⁻ᵀ` (q × m): the corridor rows' regression on the pins.
    pub fn corridor_on_pins(&self, m: usize) -> DMatrix<f64> {
        let q = self.size() - m;
        if m == 0 {
            return DMatrix::zeros(q, 0);
        }
        let rrs = self.r.view((0, m), (m, q)).into_owned();
        // (R_RR⁻¹ R_RS)' = R_RS' R_RR⁻ᵀ.
        self.rr_solve(m, &rrs).transpose()
    }

    /// `R_SS` (q × q).
    pub fn corridor_block(&self, m: usize) -> DMatrix<f64> {
        let q = self.size() - m;
        self.r.view((m, m), (q, q)).into_owned()
    }

    /// Whether `F_J⁺` exists (`U` is invertible).
    pub fn invertible(&self) -> bool {
        self.inner.is_some()
    }

    /// `F_J⁺ D = Q R⁻ᵀ D = Q_1 (R_2⁻¹ U⁻ᵀ) S⁻¹ D` (|J| × c) for `D` (k × c): products of size
    /// |J| × k × c and k × k × c, so that a few columns never pay for `F_J⁺` itself. NaN when
    /// `U` is singular (see [`Factor::invertible`]).
    pub fn pinv_times(&self, d: &DMatrix<f64>) -> DMatrix<f64> {
        let Some(inner) = &self.inner else {
            return DMatrix::from_element(self.q1.nrows(), d.ncols(), f64::NAN);
        };
        let mut scaled = d.clone();
        for (mut row, s) in scaled.row_iter_mut().zip(&self.scale) {
            row /= *s;
        }
        &self.q1 * (inner * scaled)
    }

    /// `‖U‖_F ‖U⁻¹‖_F ≥ cond₂(U)` (at most `k` times too large): a screen that spares the
    /// singular value decomposition when `U` is clearly well conditioned.
    pub fn condition_bound(&self) -> f64 {
        self.u_inv
            .as_ref()
            .map(|inv| self.u.norm() * inv.norm())
            .filter(|b| b.is_finite())
            .unwrap_or(f64::INFINITY)
    }

    /// `‖R‖_F ‖R⁻¹‖_F ≥ cond₂(R)`, the same screen for `R` itself (`R⁻¹ = S⁻¹U⁻¹`).
    pub fn raw_condition_bound(&self) -> f64 {
        self.u_inv
            .as_ref()
            .map(|inv| {
                let rows: f64 = inv
                    .row_iter()
                    .zip(&self.scale)
                    .map(|(row, s)| row.norm_squared() / (s * s))
                    .sum();
                self.r.norm() * rows.sqrt()
            })
            .filter(|b| b.is_finite())
            .unwrap_or(f64::INFINITY)
    }

    /// Condition number of `Γ = R'R` scaled to a unit diagonal (`cond(U)²`), and the
    /// conditions in the direction it nearly loses (the right singular vector of `U` of the
    /// smallest singular value).
    pub fn scaled_condition(&self) -> (f64, Vec<usize>) {
        let k = self.size();
        if k < 2 {
            return (1.0, Vec::new());
        }
        let svd = SVD::new(self.u.clone(), false, true);
        let (lo_at, lo) = svd.singular_values.argmin();
        let hi = svd.singular_values.max();
        let cond = if lo > 0.0 {
            (hi / lo).powi(2)
        } else {
            f64::INFINITY
        };
        let involved = svd.v_t.map_or_else(Vec::new, |vt| {
            let v = vt.row(lo_at);
            let top = v.amax();
            (0..k).filter(|&i| v[i].abs() > 1e-3 * top).collect()
        });
        (cond, involved)
    }
}

fn cholesky_qr2(fjt: &DMatrix<f64>) -> Option<Factor> {
    let k = fjt.ncols();
    let scale: Vec<f64> = (0..k).map(|c| fjt.column(c).norm()).collect();
    if scale.iter().any(|&s| !(s > 0.0 && s.is_finite())) {
        return None;
    }
    let mut a = fjt.clone();
    for (mut col, s) in a.column_iter_mut().zip(&scale) {
        col.scale_mut(1.0 / s);
    }
    let r1 = (a.transpose() * &a).cholesky()?.l().transpose();
    let r1_inv = upper_inverse(&r1)?;
    let q1 = a * &r1_inv;
    let r2 = (q1.transpose() * &q1).cholesky()?.l().transpose();
    let r2_inv = upper_inverse(&r2)?;
    let u = &r2 * r1;
    let u_inv = r1_inv * &r2_inv;
    let inner = Some(&r2_inv * u_inv.transpose());
    Some(Factor {
        r: with_scale(&u, &scale),
        q1,
        r2_inv,
        u,
        u_inv: Some(u_inv),
        inner,
        scale,
    })
}

fn householder(fjt: DMatrix<f64>) -> Factor {
    let k = fjt.ncols();
    let qr = fjt.qr();
    let r = qr.r();
    let scale: Vec<f64> = r
        .column_iter()
        .map(|c| c.norm().max(f64::MIN_POSITIVE))
        .collect();
    let mut u = r.clone();
    for (mut col, s) in u.column_iter_mut().zip(&scale) {
        col.scale_mut(1.0 / s);
    }
    let u_inv = upper_inverse(&u);
    Factor {
        q1: qr.q(),
        r2_inv: DMatrix::identity(k, k),
        inner: u_inv.as_ref().map(|inv| inv.transpose()),
        u_inv,
        u,
        r,
        scale,
    }
}

fn with_scale(u: &DMatrix<f64>, scale: &[f64]) -> DMatrix<f64> {
    let mut r = u.clone();
    for (mut col, s) in r.column_iter_mut().zip(scale) {
        col.scale_mut(*s);
    }
    r
}

/// `U⁻¹` for an upper-triangular `U` by back substitution, column by column (`k³/6`
/// multiply–adds); `None` when a diagonal entry is zero or the result overflows.
pub fn upper_inverse(u: &DMatrix<f64>) -> Option<DMatrix<f64>> {
    let k = u.nrows();
    let mut x = DMatrix::zeros(k, k);
    for j in 0..k {
        // Column j solves U x = e_j; each step subtracts a contiguous column of U.
        let col = x.column_mut(j);
        let col = col.data.into_slice_mut();
        col[j] = 1.0;
        for l in (0..=j).rev() {
            col[l] /= u[(l, l)];
            let xl = col[l];
            let ucol = &u.column(l).data.into_slice()[..l];
            for (c, ul) in col[..l].iter_mut().zip(ucol) {
                *c -= ul * xl;
            }
        }
    }
    x.iter().all(|v| v.is_finite()).then_some(x)
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;
    use rand_distr::{Distribution, StandardNormal};

    /// `F_J' = Q R` with `Q'Q = I` and `R` upper triangular, by the fast route and by the
    /// Householder fallback (a rank-deficient input), on matrices whose columns differ in
    /// scale by 10¹² (as explosive horizons make them); `F_J⁺` is a right inverse of `F_J`.
    #[test]
    fn factor_identities() {
        for (rows, k, deficient) in [
            (30, 5, false),
            (12, 12, false),
            (40, 6, true),
            (3, 5, false),
        ] {
            let mut rng = ChaCha8Rng::seed_from_u64((rows * k) as u64);
            let mut ft = DMatrix::from_fn(rows, k, |_, c| {
                let z: f64 = StandardNormal.sample(&mut rng);
                z * 10f64.powi(2 * c as i32)
            });
            if deficient {
                let c0 = ft.column(0).into_owned();
                ft.set_column(k - 1, &(c0 * 3.0));
            }
            let f = Factor::new(&ft, None);
            let padded = ft.clone().resize_vertically(rows.max(k), 0.0);
            let q = f.q();
            let back = &q * &f.r;
            let scale = padded.amax();
            assert!(
                (&back - &padded).amax() < 1e-12 * scale,
                "QR = F' ({rows}×{k})"
            );
            if !deficient && rows >= k {
                let eye = DMatrix::<f64>::identity(k, k);
                assert!((q.transpose() * &q - eye).amax() < 1e-12, "Q'Q = I");
                assert!(f.invertible());
                let pinv = f.pinv_times(&DMatrix::identity(k, k));
                let fj = padded.transpose();
                // Entry (i, j) is a sum of products of size s_i / s_j: relative to that.
                let id = &fj * pinv - DMatrix::identity(k, k);
                for i in 0..k {
                    for j in 0..k {
                        let size = (10f64.powi(2 * i as i32 - 2 * j as i32)).max(1.0);
                        assert!(
                            id[(i, j)].abs() < 1e-12 * size,
                            "F F⁺ = I at ({i}, {j}): {:e} ({rows}×{k})",
                            id[(i, j)]
                        );
                    }
                }
            }
            for i in 0..k {
                for j in 0..i {
                    assert_eq!(f.r[(i, j)], 0.0);
                }
            }
            let (cond, _) = f.scaled_condition();
            assert_eq!(cond.is_infinite() || cond > 1e20, deficient || rows < k);
        }
    }

    #[test]
    fn upper_inverse_is_an_inverse() {
        let k = 9;
        let u = DMatrix::from_fn(k, k, |i, j| {
            if j >= i {
                1.0 + ((i + 2 * j) as f64).cos()
            } else {
                0.0
            }
        });
        let x = upper_inverse(&u).unwrap();
        assert!((&u * &x - DMatrix::identity(k, k)).amax() < 1e-12);
        let mut singular = u.clone();
        singular[(3, 3)] = 0.0;
        assert!(upper_inverse(&singular).is_none());
    }
}
