//! Matrix products that always run as blocked matrix multiplication.
//!
//! nalgebra hands a product to its blocked kernel only when every dimension exceeds five;
//! otherwise it loops over matrix–vector products, which for a `3 × 800` conditions matrix
//! times `800 × 300` paths is many times slower. Padding the small dimensions to six with
//! zeros costs little and keeps the fast kernel.

use nalgebra::DMatrix;

/// Smallest dimension nalgebra multiplies with its blocked kernel.
const BLOCKED: usize = 6;

/// `A B`, by the blocked kernel whatever the shapes.
pub fn mul(a: &DMatrix<f64>, b: &DMatrix<f64>) -> DMatrix<f64> {
    let (r, k, c) = (a.nrows(), a.ncols(), b.ncols());
    if r >= BLOCKED && k >= BLOCKED && c >= BLOCKED {
        return a * b;
    }
    if r == 0 || c == 0 || k == 0 {
        return DMatrix::zeros(r, c);
    }
    let pad = |m: &DMatrix<f64>, rows: usize, cols: usize| {
        if m.nrows() >= rows && m.ncols() >= cols {
            return None;
        }
        let mut p = DMatrix::zeros(m.nrows().max(rows), m.ncols().max(cols));
        p.view_mut((0, 0), m.shape()).copy_from(m);
        Some(p)
    };
    let pa = pad(a, BLOCKED, BLOCKED);
    let pb = pad(b, pa.as_ref().map_or(k, |p| p.ncols()), BLOCKED);
    let (a2, b2) = (pa.as_ref().unwrap_or(a), pb.as_ref().unwrap_or(b));
    (a2 * b2).view((0, 0), (r, c)).into_owned()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every shape, small or not, gives the plain product.
    #[test]
    fn padded_products_equal_plain_ones() {
        for (r, k, c) in [
            (3, 800, 300),
            (1, 4, 1),
            (7, 2, 9),
            (6, 6, 6),
            (2, 2, 2),
            (0, 3, 4),
        ] {
            let a = DMatrix::from_fn(r, k, |i, j| ((i * 31 + j * 7) as f64 * 0.13).sin());
            let b = DMatrix::from_fn(k, c, |i, j| ((i * 5 + j * 11) as f64 * 0.29).cos());
            let plain = &a * &b;
            let fast = mul(&a, &b);
            assert_eq!(fast.shape(), plain.shape());
            assert!((fast - plain).amax() < 1e-12 * k as f64, "{r}×{k}×{c}");
        }
    }
}
