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
//! `cond(A) ≤ 10⁶`. When a Cholesky fails (rank deficient or nearly so), or `R_2` is more
//! than ½ from the identity, Householder QR takes over, and its `R` names the deficiency.
//! Neither `Q`, `R_2⁻¹` nor `U⁻¹` is formed: products with `F_J⁺` apply `R_1⁻¹` and solve with
//! `R_2`, and the condition screens bound `‖R_2⁻¹‖₂` by a Neumann series.
//!
//! A condition at period t involves the shocks up to t only, so its column of `F_J'` is zero
//! below some row: the columns are factored with the pins first and the corridor rows after
//! (the order the conditional law needs), each group in order of how far its columns reach,
//! and the three products run by blocks of columns over the rows the block reaches — about a
//! third of the dense products when the conditions spread over the horizon. Everything this
//! module returns is in the conditions' own order.

use nalgebra::{DMatrix, SVD};

use super::product::{add_product, cholesky, gram};

/// Columns per block of the staircase products.
const BLOCK: usize = 16;

/// The factor, with what products with it need. Internally the columns are permuted
/// ([`Places`]); every method speaks the conditions' own order unless it says otherwise.
#[derive(Debug, Clone)]
pub struct Factor {
    /// `Q_1` (|J| × k) and `R_2`: `Q = Q_1 R_2⁻¹` (Householder: `Q` and the identity).
    q1: DMatrix<f64>,
    r2: DMatrix<f64>,
    /// `R` (k × k, upper triangular), of the permuted columns.
    r: DMatrix<f64>,
    /// `U = R S⁻¹ = R_2 R_1` (unit-norm columns) and `R_1⁻¹` (none when `U` is singular;
    /// Householder: `R_1 = U`), so that `U⁻¹ = R_1⁻¹ R_2⁻¹`.
    u: DMatrix<f64>,
    r1_inv: Option<DMatrix<f64>>,
    /// `‖R_2⁻¹‖₂ ≤ 1 / (1 − ‖R_2 − I‖_F)` (a Neumann series; `R_2` is within ½ of `I`).
    r2_inv_norm: f64,
    /// `S`, the column norms of `F_J'` (and of `R`), permuted.
    scale: Vec<f64>,
    places: Places,
}

/// Where each condition sits in the factor: the `pins` pins first, then the corridor rows.
#[derive(Debug, Clone)]
struct Places {
    pins: usize,
    /// `order[p]`: the condition in place `p`; `place[i]`: the place of condition `i`.
    order: Vec<usize>,
    place: Vec<usize>,
}

impl Factor {
    /// Factor `F_J'` (the rows `cells` of `F'`; every row when `None`) whose first `pins`
    /// columns are the pins, padded with zero rows to at least k rows so that too few cells
    /// show up as a rank deficiency.
    pub fn new(ft: &DMatrix<f64>, cells: Option<&[usize]>, pins: usize) -> Factor {
        let k = ft.ncols();
        let rows = cells.map_or(ft.nrows(), <[usize]>::len).max(k);
        let row = |i: usize| match cells {
            None => (i < ft.nrows()).then_some(i),
            Some(cells) => cells.get(i).copied(),
        };
        // How many leading rows each column reaches, and the order: pins, then corridor rows,
        // each by reach (stable).
        let reach: Vec<usize> = (0..k)
            .map(|c| {
                let last = match cells {
                    None => ft.column(c).iter().rposition(|v| *v != 0.0),
                    Some(_) => (0..rows)
                        .rev()
                        .find(|&i| row(i).is_some_and(|j| ft[(j, c)] != 0.0)),
                };
                last.map_or(0, |i| i + 1)
            })
            .collect();
        let mut order: Vec<usize> = (0..k).collect();
        order[..pins].sort_by_key(|&c| reach[c]);
        order[pins..].sort_by_key(|&c| reach[c]);
        let permuted = || {
            let mut fjt = DMatrix::zeros(rows, k);
            for (p, &c) in order.iter().enumerate() {
                let to = &mut fjt.column_mut(p).data.into_slice_mut()[..reach[c]];
                let from = ft.column(c).data.into_slice();
                match cells {
                    None => to.copy_from_slice(&from[..reach[c]]),
                    Some(cells) => {
                        for (v, &j) in to.iter_mut().zip(cells) {
                            *v = from[j];
                        }
                    }
                }
            }
            fjt
        };
        let mut place = vec![0; k];
        for (p, &c) in order.iter().enumerate() {
            place[c] = p;
        }
        let reach_p: Vec<usize> = order.iter().map(|&c| reach[c]).collect();
        let places = Places {
            pins,
            order: order.clone(),
            place,
        };
        // The fast route scales its copy in place; the rare fallback makes the copy again.
        cholesky_qr2(permuted(), &reach_p, &places)
            .unwrap_or_else(|| householder(permuted(), places))
    }

    pub fn size(&self) -> usize {
        self.r.nrows()
    }

    /// `Q` (|J| × k), its columns in the factor's places.
    fn q(&self) -> DMatrix<f64> {
        upper_inverse(&self.r2).map_or_else(
            || DMatrix::from_element(self.q1.nrows(), self.q1.ncols(), f64::NAN),
            |r2_inv| &self.q1 * r2_inv,
        )
    }

    /// `R_RR⁻¹ x` for the leading `pins × pins` block (x: pins × c, in places); NaN when
    /// singular.
    fn rr_solve(&self, x: &DMatrix<f64>) -> DMatrix<f64> {
        let m = self.places.pins;
        let rr = self.r.view((0, 0), (m, m));
        rr.solve_upper_triangular(x)
            .unwrap_or_else(|| DMatrix::from_element(m, x.ncols(), f64::NAN))
    }

    /// The condition in place `p` of the factor.
    pub fn original(&self, p: usize) -> usize {
        self.places.order[p]
    }

    /// `R` (k × k, upper triangular), its columns in the factor's places
    /// ([`Factor::original`]).
    pub fn r(&self) -> &DMatrix<f64> {
        &self.r
    }

    /// `Γ_ii`, the variance of condition `i`'s row (`Γ = F_J F_J' = R'R`).
    pub fn variance(&self, i: usize) -> f64 {
        let p = self.places.place[i];
        self.r.view((0, p), (p + 1, 1)).norm_squared()
    }

    /// `ln|Γ_RR| = 2 Σ ln|R_ii|` over the pins.
    pub fn pin_log_det(&self) -> f64 {
        2.0 * (0..self.places.pins)
            .map(|i| self.r[(i, i)].abs().ln())
            .sum::<f64>()
    }

    /// `r̃'Γ_RR⁻¹r̃ = ‖R_RR⁻ᵀ r̃‖²` for departures `r̃` of the pins (NaN when singular).
    pub fn pin_distance(&self, rtilde: &[f64]) -> f64 {
        let m = self.places.pins;
        let x = DMatrix::from_fn(m, 1, |p, _| rtilde[self.places.order[p]]);
        let rrt = self.r.view((0, 0), (m, m)).transpose();
        rrt.solve_lower_triangular(&x)
            .map_or(f64::NAN, |w| w.norm_squared())
    }

    /// `F_RJ⁺ = Q_R R_RR⁻ᵀ` (|J| × pins), the pins' pseudo-inverse; `None` when singular.
    pub fn pins_pinv(&self) -> Option<DMatrix<f64>> {
        let m = self.places.pins;
        let q = self.q().columns(0, m).into_owned();
        let x = self.rr_solve(&q.transpose()).transpose();
        if x.iter().any(|v| !v.is_finite()) {
            return None;
        }
        let mut out = DMatrix::zeros(x.nrows(), m);
        for p in 0..m {
            out.column_mut(self.places.order[p]).copy_from(&x.column(p));
        }
        Some(out)
    }

    /// `C = R_RS' R_RR⁻ᵀ` (q × pins): the corridor rows' regression on the pins.
    pub fn corridor_on_pins(&self) -> DMatrix<f64> {
        let m = self.places.pins;
        let q = self.size() - m;
        if m == 0 {
            return DMatrix::zeros(q, 0);
        }
        let rrs = self.r.view((0, m), (m, q)).into_owned();
        // (R_RR⁻¹ R_RS)' = R_RS' R_RR⁻ᵀ.
        let c = self.rr_solve(&rrs).transpose();
        let place = &self.places.place;
        DMatrix::from_fn(q, m, |a, b| c[(place[m + a] - m, place[b])])
    }

    /// `R_SS'R_SS` (q × q): the corridor rows' covariance given the pins.
    pub fn corridor_covariance(&self) -> DMatrix<f64> {
        let m = self.places.pins;
        let q = self.size() - m;
        // Column c of the upper-triangular R_SS reaches its first c + 1 rows.
        let r_ss = self.r.view((m, m), (q, q)).into_owned();
        let reach: Vec<usize> = (1..=q).collect();
        let cov = gram(&r_ss, &reach);
        let place = &self.places.place;
        DMatrix::from_fn(q, q, |a, b| cov[(place[m + a] - m, place[m + b] - m)])
    }

    /// Whether `F_J⁺` exists (`U` is invertible).
    pub fn invertible(&self) -> bool {
        self.r1_inv.is_some()
    }

    /// `F_J⁺ D = Q R⁻ᵀ D = Q_1 R_2⁻¹ R_2⁻ᵀ R_1⁻ᵀ S⁻¹ D` (|J| × c) for `D` (k × c): products of
    /// size |J| × k × c and k × k × c and two triangular solves, so that a few columns never
    /// pay for `F_J⁺` itself. NaN when `U` is singular (see [`Factor::invertible`]).
    pub fn pinv_times(&self, d: &DMatrix<f64>) -> DMatrix<f64> {
        let nan = || DMatrix::from_element(self.q1.nrows(), d.ncols(), f64::NAN);
        let Some(r1_inv) = &self.r1_inv else {
            return nan();
        };
        let mut scaled = DMatrix::zeros(d.nrows(), d.ncols());
        for (p, (&c, s)) in self.places.order.iter().zip(&self.scale).enumerate() {
            scaled.row_mut(p).copy_from(&(d.row(c) / *s));
        }
        let y = r1_inv.tr_mul(&scaled);
        let Some(z) = self
            .r2
            .tr_solve_upper_triangular(&y)
            .and_then(|w| self.r2.solve_upper_triangular(&w))
        else {
            return nan();
        };
        let mut out = DMatrix::zeros(self.q1.nrows(), z.ncols());
        add_product(&mut out.as_view_mut(), &self.q1.as_view(), &z.as_view());
        out
    }

    /// `‖U‖_F ‖U⁻¹‖_F ≥ cond₂(U)` (at most `k` times too large), with `‖U⁻¹‖_F ≤
    /// ‖R_1⁻¹‖_F ‖R_2⁻¹‖₂`: a screen that spares the singular value decomposition when `U` is
    /// clearly well conditioned.
    pub fn condition_bound(&self) -> f64 {
        self.r1_inv
            .as_ref()
            .map(|inv| self.u.norm() * inv.norm() * self.r2_inv_norm)
            .filter(|b| b.is_finite())
            .unwrap_or(f64::INFINITY)
    }

    /// `‖R‖_F ‖R⁻¹‖_F ≥ cond₂(R)`, the same screen for `R` itself (`R⁻¹ = S⁻¹U⁻¹`, bounded
    /// as `‖S⁻¹R_1⁻¹‖_F ‖R_2⁻¹‖₂`).
    pub fn raw_condition_bound(&self) -> f64 {
        self.r1_inv
            .as_ref()
            .map(|inv| {
                let rows: f64 = inv
                    .row_iter()
                    .zip(&self.scale)
                    .map(|(row, s)| row.norm_squared() / (s * s))
                    .sum();
                self.r.norm() * rows.sqrt() * self.r2_inv_norm
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
            (0..k)
                .filter(|&i| v[i].abs() > 1e-3 * top)
                .map(|i| self.places.order[i])
                .collect()
        });
        (cond, involved)
    }
}

/// CholeskyQR2 of the permuted columns (each zero below its `reach`), or `None` when a
/// Cholesky fails.
fn cholesky_qr2(mut a: DMatrix<f64>, reach: &[usize], places: &Places) -> Option<Factor> {
    let k = a.ncols();
    let scale: Vec<f64> = (0..k).map(|c| a.column(c).norm()).collect();
    if scale.iter().any(|&s| !(s > 0.0 && s.is_finite())) {
        return None;
    }
    for (mut col, s) in a.column_iter_mut().zip(&scale) {
        col.scale_mut(1.0 / s);
    }
    let r1 = cholesky(gram(&a, reach))?.l().transpose();
    let r1_inv = upper_inverse(&r1)?;
    // Column j of Q_1 = A R_1⁻¹ combines the columns up to j: it reaches as far as they do.
    let reach_q: Vec<usize> = reach
        .iter()
        .scan(0, |far, &r| {
            *far = (*far).max(r);
            Some(*far)
        })
        .collect();
    let q1 = times_upper(&a, &r1_inv, &reach_q);
    let r2 = cholesky(gram(&q1, &reach_q))?.l().transpose();
    // A second pass far from the identity means the first lost too much orthogonality for
    // the second to restore it surely (cond(A) near 10⁸): Householder takes over.
    let off = (&r2 - DMatrix::identity(k, k)).norm();
    if off.is_nan() || off >= 0.5 {
        return None;
    }
    let u = upper_times_upper(&r2, &r1);
    Some(Factor {
        r: with_scale(&u, &scale),
        q1,
        r2,
        u,
        r1_inv: Some(r1_inv),
        r2_inv_norm: 1.0 / (1.0 - off),
        scale,
        places: places.clone(),
    })
}

/// `A U` for an upper-triangular `U` whose product's column j is zero below row `reach[j]`
/// (non-decreasing): each block of columns from the columns of `A` up to it, over its rows.
fn times_upper(a: &DMatrix<f64>, u: &DMatrix<f64>, reach: &[usize]) -> DMatrix<f64> {
    let (rows_a, k) = a.shape();
    let mut out = DMatrix::zeros(rows_a, k);
    for j0 in (0..k).step_by(BLOCK) {
        let j1 = (j0 + BLOCK).min(k);
        let rows = reach[j1 - 1];
        if rows == 0 {
            continue;
        }
        add_product(
            &mut out.view_mut((0, j0), (rows, j1 - j0)),
            &a.view((0, 0), (rows, j1)),
            &u.view((0, j0), (j1, j1 - j0)),
        );
    }
    out
}

fn householder(fjt: DMatrix<f64>, places: Places) -> Factor {
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
    let r1_inv = upper_inverse(&u);
    Factor {
        q1: qr.q(),
        r2: DMatrix::identity(k, k),
        r1_inv,
        r2_inv_norm: 1.0,
        u,
        r,
        scale,
        places,
    }
}

fn with_scale(u: &DMatrix<f64>, scale: &[f64]) -> DMatrix<f64> {
    let mut r = u.clone();
    for (mut col, s) in r.column_iter_mut().zip(scale) {
        col.scale_mut(*s);
    }
    r
}

/// `A B` for upper-triangular `A` and `B` (k × k), upper triangular: by blocks of
/// [`BLOCK`] columns, each from the leading rows and columns of `A` it involves (about
/// `k³/4` multiply–adds with blocks of 16 at k = 65, in the unpacked product).
fn upper_times_upper(a: &DMatrix<f64>, b: &DMatrix<f64>) -> DMatrix<f64> {
    let k = a.nrows();
    let mut out = DMatrix::zeros(k, k);
    // Columns j0..j1 of the product involve the leading j1 rows and columns of `a` only.
    for j0 in (0..k).step_by(BLOCK) {
        let j1 = (j0 + BLOCK).min(k);
        add_product(
            &mut out.view_mut((0, j0), (j1, j1 - j0)),
            &a.view((0, 0), (j1, j1)),
            &b.view((0, j0), (j1, j1 - j0)),
        );
    }
    out
}

/// Below this size a triangular inverse is made by back substitution.
const INVERSE_BLOCK: usize = 16;

/// `U⁻¹` for an upper-triangular `U`; `None` when a diagonal entry is zero or the result
/// overflows. With `U = [[A, B], [0, C]]`, `U⁻¹ = [[A⁻¹, −A⁻¹ B C⁻¹], [0, C⁻¹]]`: the halves
/// recursively, the corner by two unpacked matrix products; blocks of at most
/// [`INVERSE_BLOCK`] by back substitution, column by column.
pub fn upper_inverse(u: &DMatrix<f64>) -> Option<DMatrix<f64>> {
    let k = u.nrows();
    if k > INVERSE_BLOCK {
        let h = k / 2;
        let a_inv = upper_inverse(&u.view((0, 0), (h, h)).into_owned())?;
        let c_inv = upper_inverse(&u.view((h, h), (k - h, k - h)).into_owned())?;
        let mut b_c = DMatrix::zeros(h, k - h);
        add_product(
            &mut b_c.as_view_mut(),
            &u.view((0, h), (h, k - h)),
            &c_inv.as_view(),
        );
        let mut x = DMatrix::zeros(k, k);
        x.view_mut((0, 0), (h, h)).copy_from(&a_inv);
        x.view_mut((h, h), (k - h, k - h)).copy_from(&c_inv);
        add_product(
            &mut x.view_mut((0, h), (h, k - h)),
            &a_inv.as_view(),
            &b_c.as_view(),
        );
        x.view_mut((0, h), (h, k - h)).neg_mut();
        return x.iter().all(|v| v.is_finite()).then_some(x);
    }
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
            let f = Factor::new(&ft, None, 0);
            let padded = ft.clone().resize_vertically(rows.max(k), 0.0);
            let q = f.q();
            let back = &q * f.r();
            let scale = padded.amax();
            for p in 0..k {
                let want = padded.column(f.original(p));
                assert!(
                    (back.column(p) - want).amax() < 1e-12 * scale,
                    "QR = F'P ({rows}×{k})"
                );
            }
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
                    assert_eq!(f.r()[(i, j)], 0.0);
                }
            }
            let (cond, _) = f.scaled_condition();
            assert_eq!(cond.is_infinite() || cond > 1e20, deficient || rows < k);
        }
    }

    /// The condition screens are upper bounds: `‖U‖_F ‖U⁻¹‖_F` (with `‖U⁻¹‖_F` bounded through
    /// `R_1⁻¹` and a Neumann series for `R_2⁻¹`) is at least `cond₂(U)` and `‖R‖_F ‖R⁻¹‖_F` at
    /// least `cond₂(R)`, both from nalgebra's singular values (a general-purpose library), and
    /// neither is more than `2k` times too large; on conditions from well to badly conditioned
    /// (two columns nearly equal, up to `cond(A)` ≈ 10⁷, and equal), by CholeskyQR2 and by
    /// Householder.
    #[test]
    fn condition_screens_bound_the_condition_numbers() {
        let (rows, k) = (50, 12);
        let mut rng = ChaCha8Rng::seed_from_u64(5);
        let base = DMatrix::from_fn(rows, k, |_, c| {
            let z: f64 = StandardNormal.sample(&mut rng);
            z * 10f64.powi(c as i32 % 4)
        });
        let mut routes = (false, false);
        for gap in [1.0, 1e-3, 1e-6, 1e-7, 0.0] {
            let mut ft = base.clone();
            let near = ft.column(0) + ft.column(1) * gap;
            ft.set_column(1, &near);
            let f = Factor::new(&ft, None, 3);
            // Householder's R_2 is the identity.
            if f.r2 == DMatrix::identity(k, k) {
                routes.1 = true;
            } else {
                routes.0 = true;
            }
            let cond = |m: &DMatrix<f64>| {
                let sv = m.singular_values();
                sv.max() / sv.min()
            };
            let (cu, cr) = (cond(&f.u), cond(&f.r));
            let (bu, br) = (f.condition_bound(), f.raw_condition_bound());
            if gap == 0.0 {
                // Exactly dependent: the screen must pass the plan to the full decomposition.
                assert!(bu.powi(2) > 1e12, "gap 0: {bu:e}");
                continue;
            }
            assert!(bu >= cu * (1.0 - 1e-9), "gap {gap}: {bu:e} < {cu:e}");
            assert!(br >= cr * (1.0 - 1e-9), "gap {gap}: {br:e} < {cr:e}");
            if cu.is_finite() && cu < 1e12 {
                assert!(
                    bu <= 2.0 * k as f64 * cu,
                    "gap {gap}: {bu:e} against {cu:e}"
                );
            }
        }
        assert_eq!(routes, (true, true), "both routes");
    }

    /// Columns zero below different rows (conditions at different periods), in no order, with
    /// pins first, every shock free and with drivers: what the factor returns, in the
    /// conditions' order, equals the dense formulas on `Γ = F_J F_J'` (pins R, corridor rows S):
    /// `Γ_ii`; the corridor rows' law given the pins `Γ_SS − Γ_SR Γ_RR⁻¹ Γ_RS` and regression
    /// `Γ_SR Γ_RR⁻¹`; `r'Γ_RR⁻¹r` and `ln|Γ_RR|`; `F_R⁺ = F_R'Γ_RR⁻¹`; `F_J⁺D = F_J'Γ⁻¹D`.
    #[test]
    fn staircase_columns_come_back_in_the_conditions_order() {
        let (rows, k, pins) = (60, 23, 4);
        let mut rng = ChaCha8Rng::seed_from_u64(17);
        let reach: Vec<usize> = (0..k).map(|c| 5 + (c * 37) % 55).collect();
        let ft = DMatrix::from_fn(rows, k, |i, c| {
            let z: f64 = StandardNormal.sample(&mut rng);
            if i < reach[c] {
                z * (1.0 + c as f64)
            } else {
                0.0
            }
        });
        let cells: Vec<usize> = (0..rows).filter(|i| i % 3 != 1).collect();
        for cells in [None, Some(cells.as_slice())] {
            let fj = match cells {
                None => ft.transpose(),
                Some(cells) => DMatrix::from_fn(k, cells.len(), |c, i| ft[(cells[i], c)]),
            };
            let f = Factor::new(&ft, cells, pins);
            assert!(
                (0..k).any(|p| f.original(p) != p),
                "the columns were reordered"
            );
            // By the staircase products, not the Householder fallback (whose R_2⁻¹ is I).
            assert!(f.r2 != DMatrix::identity(k, k), "CholeskyQR2");
            let gamma = &fj * fj.transpose();
            let close = |a: &DMatrix<f64>, b: &DMatrix<f64>, what: &str| {
                let err = (a - b).amax();
                assert!(err < 1e-10 * (1.0 + b.amax()), "{what}: {err:e}");
            };
            let q = k - pins;
            let g_rr = gamma.view((0, 0), (pins, pins)).into_owned();
            let g_sr = gamma.view((pins, 0), (q, pins)).into_owned();
            let g_rr_inv = g_rr.clone().try_inverse().unwrap();
            let variances = DMatrix::from_fn(k, 1, |i, _| f.variance(i));
            close(
                &variances,
                &DMatrix::from_fn(k, 1, |i, _| gamma[(i, i)]),
                "Γ_ii",
            );
            let schur = gamma.view((pins, pins), (q, q)) - &g_sr * &g_rr_inv * g_sr.transpose();
            close(&f.corridor_covariance(), &schur, "corridor covariance");
            close(
                &f.corridor_on_pins(),
                &(&g_sr * &g_rr_inv),
                "regression on the pins",
            );
            let r: Vec<f64> = (0..pins).map(|i| 0.3 * i as f64 - 0.5).collect();
            let rv = DMatrix::from_column_slice(pins, 1, &r);
            let want = (rv.transpose() * &g_rr_inv * &rv)[(0, 0)];
            assert!(
                (f.pin_distance(&r) - want).abs() < 1e-10 * want,
                "r'Γ_RR⁻¹r"
            );
            let logdet = g_rr.determinant().ln();
            assert!(
                (f.pin_log_det() - logdet).abs() < 1e-10 * logdet.abs(),
                "ln|Γ_RR|"
            );
            let f_r = fj.rows(0, pins).into_owned();
            close(
                &f.pins_pinv().unwrap(),
                &(f_r.transpose() * &g_rr_inv),
                "F_R⁺",
            );
            let d = DMatrix::from_fn(k, 3, |i, j| ((i * 3 + j) as f64).sin());
            let want = fj.transpose() * gamma.try_inverse().unwrap() * &d;
            close(&f.pinv_times(&d), &want, "F_J⁺ D");
        }
    }

    #[test]
    fn upper_inverse_is_an_inverse() {
        // Below the block size, and over it (two levels of halves, odd sizes).
        for k in [9, 37, 70] {
            inverse_of_size(k);
        }
    }

    fn inverse_of_size(k: usize) {
        // A well-conditioned triangle (diagonal 1.5 to 2.5, small entries above it).
        let u = DMatrix::from_fn(k, k, |i, j| match j.cmp(&i) {
            std::cmp::Ordering::Equal => 2.0 + 0.5 * ((3 * i) as f64).cos(),
            std::cmp::Ordering::Greater => ((i + 2 * j) as f64).cos() / k as f64,
            std::cmp::Ordering::Less => 0.0,
        });
        let x = upper_inverse(&u).unwrap();
        assert!((&u * &x - DMatrix::identity(k, k)).amax() < 1e-12, "{k}");
        assert!((upper_times_upper(&u, &x) - &u * &x).amax() < 1e-12);
        assert!((upper_times_upper(&x, &u) - &x * &u).amax() < 1e-12);
        for zero in [3, k - 2] {
            let mut singular = u.clone();
            singular[(zero, zero)] = 0.0;
            assert!(upper_inverse(&singular).is_none(), "{k}, zero at {zero}");
        }
    }
}
