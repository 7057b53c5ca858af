//! Matrix products over chunks of paths: dense ones always as blocked matrix multiplication,
//! and the conditions' rows (a few non-zeros each) as sparse rows.
//!
//! nalgebra hands a product to its blocked kernel only when every dimension exceeds five;
//! otherwise it loops over matrix–vector products, which for a `3 × 800` conditions matrix
//! times `800 × 300` paths is many times slower. Padding the small dimensions to six with
//! zeros costs little and keeps the fast kernel.

use nalgebra::DMatrix;

/// Smallest dimension nalgebra multiplies with its blocked kernel.
const BLOCKED: usize = 6;

/// Columns per block of [`gram`].
const GRAM_BLOCK: usize = 16;

/// `A'A` for columns zero below their first `reach[c]` rows: each block of columns times the
/// columns up to it, over the rows the block reaches (the upper triangle), then mirrored.
pub fn gram(a: &DMatrix<f64>, reach: &[usize]) -> DMatrix<f64> {
    let k = a.ncols();
    let at = a.transpose();
    let mut g = DMatrix::zeros(k, k);
    for j0 in (0..k).step_by(GRAM_BLOCK) {
        let j1 = (j0 + GRAM_BLOCK).min(k);
        let rows = reach[j0..j1].iter().copied().max().unwrap_or(0);
        if rows == 0 {
            continue;
        }
        g.view_mut((0, j0), (j1, j1 - j0)).gemm(
            1.0,
            &at.view((0, 0), (j1, rows)),
            &a.view((0, j0), (rows, j1 - j0)),
            0.0,
        );
    }
    for j in 0..k {
        for i in j + 1..k {
            g[(i, j)] = g[(j, i)];
        }
    }
    g
}

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
    let full = a2 * b2;
    if full.shape() == (r, c) {
        full
    } else {
        block(&full, (0, 0), (r, c))
    }
}

/// Columns of an upper-triangular factor per block of [`upper_times`].
const TRIANGLE_BLOCK: usize = 32;

/// `U Y` for an upper-triangular `U` (k × k): each block of `U`'s columns times the matching
/// rows of `Y`, over the rows of `U` the block reaches — about half the dense product, still
/// as blocked matrix products.
pub fn upper_times(u: &DMatrix<f64>, y: &DMatrix<f64>) -> DMatrix<f64> {
    let k = u.ncols();
    let mut out = DMatrix::zeros(u.nrows(), y.ncols());
    for j0 in (0..k).step_by(TRIANGLE_BLOCK) {
        let j1 = (j0 + TRIANGLE_BLOCK).min(k);
        out.rows_mut(0, j1).gemm(
            1.0,
            &u.view((0, j0), (j1, j1 - j0)),
            &y.rows(j0, j1 - j0),
            1.0,
        );
    }
    out
}

/// The `rows × cols` block of `m` at `(r0, c0)`, copied a column at a time (a view's
/// `into_owned` copies element by element, which for a chunk of paths costs as much as the
/// product that made it).
pub fn block(
    m: &DMatrix<f64>,
    (r0, c0): (usize, usize),
    (rows, cols): (usize, usize),
) -> DMatrix<f64> {
    let n = m.nrows();
    let mut out = Vec::with_capacity(rows * cols);
    for col in m.as_slice().chunks_exact(n.max(1)).skip(c0).take(cols) {
        out.extend_from_slice(&col[r0..r0 + rows]);
    }
    DMatrix::from_vec(rows, cols, out)
}

/// Rows with few non-zeros each — conditions read off a path touch a handful of its cells —
/// kept as `(column, value)` lists, so that applying them to a chunk of paths costs their
/// non-zeros rather than the paths' full length.
#[derive(Debug, Clone, PartialEq)]
pub struct SparseRows {
    rows: Vec<Vec<(usize, f64)>>,
}

impl SparseRows {
    /// The non-zeros of `m`, row by row.
    pub fn new(m: &DMatrix<f64>) -> SparseRows {
        let rows = (0..m.nrows())
            .map(|i| {
                m.row(i)
                    .iter()
                    .enumerate()
                    .filter(|&(_, &a)| a != 0.0)
                    .map(|(c, &a)| (c, a))
                    .collect()
            })
            .collect();
        SparseRows { rows }
    }

    pub fn nrows(&self) -> usize {
        self.rows.len()
    }

    /// Each row's non-zeros, `(column, value)`.
    pub fn iter(&self) -> impl Iterator<Item = &[(usize, f64)]> {
        self.rows.iter().map(Vec::as_slice)
    }

    /// The rows of `more` below these.
    pub fn extend(&mut self, more: SparseRows) {
        self.rows.extend(more.rows);
    }

    /// The rows as the columns of a dense `n × rows` matrix (`n` the rows' length).
    pub fn transposed(&self, n: usize) -> DMatrix<f64> {
        let mut out = DMatrix::zeros(n, self.rows.len());
        for (i, row) in self.rows.iter().enumerate() {
            for &(c, a) in row {
                out[(c, i)] = a;
            }
        }
        out
    }

    /// `A Y` for paths in the columns of `y`.
    pub fn times(&self, y: &DMatrix<f64>) -> DMatrix<f64> {
        let mut out = DMatrix::zeros(self.rows.len(), y.ncols());
        for (j, path) in y.column_iter().enumerate() {
            for (i, row) in self.rows.iter().enumerate() {
                out[(i, j)] = row.iter().map(|&(c, a)| a * path[c]).sum();
            }
        }
        out
    }

    /// `A y` for one path.
    pub fn apply(&self, y: &[f64]) -> Vec<f64> {
        self.rows
            .iter()
            .map(|row| row.iter().map(|&(c, a)| a * y[c]).sum())
            .collect()
    }
}

#[cfg(test)]
mod tests {

    /// The blocked triangular product equals the dense one (both sizes around the block).
    #[test]
    fn upper_times_is_the_product() {
        for k in [1, 31, 32, 33, 161] {
            let u = DMatrix::from_fn(k, k, |i, j| {
                if i <= j {
                    ((i * 7 + j) as f64).sin()
                } else {
                    0.0
                }
            });
            let y = DMatrix::from_fn(k, 5, |i, j| ((i + 3 * j) as f64).cos());
            assert!(
                (upper_times(&u, &y) - &u * &y).amax() < 1e-12 * k as f64,
                "k = {k}"
            );
        }
    }

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

    /// The sparse product agrees with nalgebra's dense product (to rounding: the sums run in
    /// another order), for a matrix with zero rows and columns and a single path.
    #[test]
    fn sparse_rows_match_the_dense_product() {
        let a = DMatrix::from_fn(5, 40, |i, c| {
            if (i * 7 + c) % 5 == 0 && i != 3 {
                ((i + 2 * c) as f64).sin()
            } else {
                0.0
            }
        });
        let y = DMatrix::from_fn(40, 9, |c, j| ((c * 3 + j) as f64 * 0.37).cos());
        let sparse = SparseRows::new(&a);
        assert!((sparse.times(&y) - &a * &y).amax() < 1e-13);
        let one = sparse.apply(y.column(4).as_slice());
        let dense = &a * y.column(4);
        assert!(
            one.iter()
                .zip(dense.iter())
                .all(|(s, d)| (s - d).abs() < 1e-13)
        );
        assert_eq!(sparse.times(&y).row(3).amax(), 0.0);
    }

    /// A block copied by columns is the view's contents.
    #[test]
    fn block_is_the_view() {
        let m = DMatrix::from_fn(7, 6, |i, j| (i * 10 + j) as f64);
        assert_eq!(
            block(&m, (2, 1), (4, 3)),
            m.view((2, 1), (4, 3)).into_owned()
        );
        assert_eq!(block(&m, (0, 0), (0, 2)).shape(), (0, 2));
    }
}
