//! Matrix products over chunks of paths: dense ones always as blocked matrix multiplication,
//! and the conditions' rows (a few non-zeros each) as sparse rows. Two products with a small
//! dimension skip the blocked kernel's packing, which there costs as much as the arithmetic:
//! the staircase Gram product [`gram`] (dot products of columns in place) and
//! [`add_product`] (the VAR's recursions, period by period); each has an AVX2 and FMA kernel,
//! chosen at run time, and a plain one.
//!
//! nalgebra hands a product to its blocked kernel only when every dimension exceeds five;
//! otherwise it loops over matrix–vector products, which for a `3 × 800` conditions matrix
//! times `800 × 300` paths is many times slower. Padding the small dimensions to six with
//! zeros costs little and keeps the fast kernel.

use nalgebra::{Cholesky, DMatrix, DMatrixView, DMatrixViewMut, Dyn};

/// Smallest dimension nalgebra multiplies with its blocked kernel.
const BLOCKED: usize = 6;

/// Columns per side of a tile of [`gram`]: nine sums, each over four rows at once, stay in
/// registers with the columns they read.
const GRAM_TILE: usize = 3;

/// `A'A` for columns zero below their first `reach[c]` rows: each tile of the upper triangle
/// as dot products of the columns in place (no transposed copy, no packing), over the rows
/// both of its groups of columns reach, then mirrored.
pub fn gram(a: &DMatrix<f64>, reach: &[usize]) -> DMatrix<f64> {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx2") && std::arch::is_x86_feature_detected!("fma") {
        // SAFETY: the processor has AVX2 and FMA, checked just above.
        return unsafe { gram_fma(a, reach) };
    }
    gram_by(a, reach, tile)
}

/// [`gram_by`] with the AVX2 and FMA tile, compiled with them so that the tile is inlined
/// into the loop over tiles.
///
/// # Safety
/// The processor must have AVX2 and FMA.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
unsafe fn gram_fma(a: &DMatrix<f64>, reach: &[usize]) -> DMatrix<f64> {
    // SAFETY: this function runs only where the processor has AVX2 and FMA.
    gram_by(a, reach, |x, y, len| unsafe { tile_fma(x, y, len) })
}

#[inline(always)]
fn gram_by(
    a: &DMatrix<f64>,
    reach: &[usize],
    tile: impl Fn([&[f64]; GRAM_TILE], [&[f64]; GRAM_TILE], usize) -> Tile,
) -> DMatrix<f64> {
    let (rows, k) = a.shape();
    let mut g = DMatrix::zeros(k, k);
    if rows == 0 || k == 0 {
        return g;
    }
    let cols: Vec<&[f64]> = a.as_slice().chunks_exact(rows).collect();
    // The columns `c0 …` of a tile; past the last column the tile reads its first column
    // again (those sums are dropped).
    let group = |c0: usize| {
        let mut out = [cols[c0]; GRAM_TILE];
        for (t, col) in out.iter_mut().enumerate().skip(1) {
            if let Some(c) = cols.get(c0 + t) {
                *col = c;
            }
        }
        out
    };
    let starts: Vec<usize> = (0..k).step_by(GRAM_TILE).collect();
    let far: Vec<usize> = starts
        .iter()
        .map(|&c0| {
            reach[c0..(c0 + GRAM_TILE).min(k)]
                .iter()
                .copied()
                .max()
                .unwrap_or(0)
        })
        .collect();
    for (ti, &i0) in starts.iter().enumerate() {
        for (tj, &j0) in starts.iter().enumerate().skip(ti) {
            let len = far[ti].min(far[tj]).min(rows);
            let sums = tile(group(i0), group(j0), len);
            for (a, row) in sums.iter().enumerate().take(k - i0) {
                for (b, &v) in row.iter().enumerate().take(k - j0) {
                    g[(i0 + a, j0 + b)] = v;
                    g[(j0 + b, i0 + a)] = v;
                }
            }
        }
    }
    g
}

/// A tile's sums: `Σ_r x_a[r] y_b[r]` over the first `len` rows, for every pair of its
/// columns (each at least `len` long).
type Tile = [[f64; GRAM_TILE]; GRAM_TILE];

/// A tile's sums in plain arithmetic, for processors without AVX2 and FMA.
fn tile(x: [&[f64]; GRAM_TILE], y: [&[f64]; GRAM_TILE], len: usize) -> Tile {
    std::array::from_fn(|a| {
        std::array::from_fn(|b| {
            x[a][..len]
                .iter()
                .zip(&y[b][..len])
                .map(|(u, v)| u * v)
                .sum()
        })
    })
}

/// A tile's sums four rows at a time: nine fused multiply–adds on six loads per four rows,
/// the nine sums held in registers.
///
/// # Safety
/// The processor must have AVX2 and FMA.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
unsafe fn tile_fma(x: [&[f64]; GRAM_TILE], y: [&[f64]; GRAM_TILE], len: usize) -> Tile {
    use std::arch::x86_64::{
        __m256d, _mm256_fmadd_pd, _mm256_loadu_pd, _mm256_setzero_pd, _mm256_storeu_pd,
    };
    // Plain loops, not the standard library's array helpers: those are compiled without the
    // target features, and the closures they call with them.
    for c in x.iter().chain(&y) {
        assert!(c.len() >= len);
    }
    let mut acc: [[__m256d; GRAM_TILE]; GRAM_TILE] = [[_mm256_setzero_pd(); GRAM_TILE]; GRAM_TILE];
    let mut ys = [_mm256_setzero_pd(); GRAM_TILE];
    let mut r = 0;
    while r + 4 <= len {
        for b in 0..GRAM_TILE {
            // SAFETY: r + 4 ≤ len ≤ the column's length (asserted above).
            ys[b] = unsafe { _mm256_loadu_pd(y[b].as_ptr().add(r)) };
        }
        for a in 0..GRAM_TILE {
            // SAFETY: as above.
            let xv = unsafe { _mm256_loadu_pd(x[a].as_ptr().add(r)) };
            for b in 0..GRAM_TILE {
                acc[a][b] = _mm256_fmadd_pd(xv, ys[b], acc[a][b]);
            }
        }
        r += 4;
    }
    let mut out = [[0.0; GRAM_TILE]; GRAM_TILE];
    for a in 0..GRAM_TILE {
        for b in 0..GRAM_TILE {
            let mut lanes = [0.0; 4];
            // SAFETY: `lanes` holds four values.
            unsafe { _mm256_storeu_pd(lanes.as_mut_ptr(), acc[a][b]) };
            let mut sum = (lanes[0] + lanes[1]) + (lanes[2] + lanes[3]);
            for t in r..len {
                sum += x[a][t] * y[b][t];
            }
            out[a][b] = sum;
        }
    }
    out
}

/// `out += A B` (out: r × c, A: r × q, B: q × c) without packing the operands: for the
/// products of a few dozen rows that the VAR's recursions make period by period, where the
/// blocked kernel spends as long packing its operands as multiplying them. Without AVX2 and
/// FMA, the blocked kernel.
pub fn add_product(out: &mut DMatrixViewMut<f64>, a: &DMatrixView<f64>, b: &DMatrixView<f64>) {
    assert_eq!(
        (out.nrows(), out.ncols(), a.ncols()),
        (a.nrows(), b.ncols(), b.nrows()),
        "product shapes"
    );
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx2") && std::arch::is_x86_feature_detected!("fma") {
        // SAFETY: the processor has AVX2 and FMA, checked just above; the shapes agree.
        unsafe { add_product_fma(out, a, b) };
        return;
    }
    out.gemm(1.0, a, b, 1.0);
}

/// [`add_product`] by panels of four columns of `out` (then single columns), each by tiles
/// of eight rows (then four, then one at a time).
///
/// # Safety
/// The processor must have AVX2 and FMA, and the shapes must agree.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
unsafe fn add_product_fma(
    out: &mut DMatrixViewMut<f64>,
    a: &DMatrixView<f64>,
    b: &DMatrixView<f64>,
) {
    let c = b.ncols();
    let operands = Operands {
        rows: a.nrows(),
        inner: a.ncols(),
        a: a.as_ptr(),
        a_col: a.strides().1,
        b: b.as_ptr(),
        b_col: b.strides().1,
        out: out.as_mut_ptr(),
        out_col: out.strides().1,
    };
    let mut j = 0;
    while j + 4 <= c {
        // SAFETY: columns j..j+4 exist in `b` and `out`.
        unsafe { panel::<4>(&operands, j) };
        j += 4;
    }
    while j < c {
        // SAFETY: column j exists in `b` and `out`.
        unsafe { panel::<1>(&operands, j) };
        j += 1;
    }
}

/// Where the operands of [`add_product_fma`] live: every view has unit row stride, and its
/// columns are `*_col` apart.
#[cfg(target_arch = "x86_64")]
struct Operands {
    rows: usize,
    inner: usize,
    a: *const f64,
    a_col: usize,
    b: *const f64,
    b_col: usize,
    out: *mut f64,
    out_col: usize,
}

/// Columns `j..j+C` of `out += A B`.
///
/// # Safety
/// AVX2 and FMA; columns `j..j+C` exist in `B` and `out`.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
unsafe fn panel<const C: usize>(o: &Operands, j: usize) {
    use std::arch::x86_64::{
        _mm256_broadcast_sd, _mm256_fmadd_pd, _mm256_loadu_pd, _mm256_setzero_pd, _mm256_storeu_pd,
    };
    // SAFETY (every access below): row i < rows, inner index k < inner and column j + c with
    // c < C are inside the views, whose elements sit at row + column × stride.
    let at_out = |i: usize, c: usize| unsafe { o.out.add(i + (j + c) * o.out_col) };
    let at_a = |i: usize, k: usize| unsafe { o.a.add(i + k * o.a_col) };
    let at_b = |k: usize, c: usize| unsafe { o.b.add(k + (j + c) * o.b_col) };
    // Tiles of eight rows (two vectors per column), then of four.
    let mut i = 0;
    while i + 8 <= o.rows {
        let mut acc = [[_mm256_setzero_pd(); 2]; C];
        for (c, pair) in acc.iter_mut().enumerate() {
            pair[0] = unsafe { _mm256_loadu_pd(at_out(i, c)) };
            pair[1] = unsafe { _mm256_loadu_pd(at_out(i + 4, c)) };
        }
        for k in 0..o.inner {
            let a0 = unsafe { _mm256_loadu_pd(at_a(i, k)) };
            let a1 = unsafe { _mm256_loadu_pd(at_a(i + 4, k)) };
            for (c, pair) in acc.iter_mut().enumerate() {
                let bk = unsafe { _mm256_broadcast_sd(&*at_b(k, c)) };
                pair[0] = _mm256_fmadd_pd(a0, bk, pair[0]);
                pair[1] = _mm256_fmadd_pd(a1, bk, pair[1]);
            }
        }
        for (c, pair) in acc.iter().enumerate() {
            unsafe { _mm256_storeu_pd(at_out(i, c), pair[0]) };
            unsafe { _mm256_storeu_pd(at_out(i + 4, c), pair[1]) };
        }
        i += 8;
    }
    while i + 4 <= o.rows {
        let mut acc = [_mm256_setzero_pd(); C];
        for (c, v) in acc.iter_mut().enumerate() {
            *v = unsafe { _mm256_loadu_pd(at_out(i, c)) };
        }
        for k in 0..o.inner {
            let a0 = unsafe { _mm256_loadu_pd(at_a(i, k)) };
            for (c, v) in acc.iter_mut().enumerate() {
                let bk = unsafe { _mm256_broadcast_sd(&*at_b(k, c)) };
                *v = _mm256_fmadd_pd(a0, bk, *v);
            }
        }
        for (c, v) in acc.iter().enumerate() {
            unsafe { _mm256_storeu_pd(at_out(i, c), *v) };
        }
        i += 4;
    }
    while i < o.rows {
        for c in 0..C {
            let mut sum = unsafe { *at_out(i, c) };
            for k in 0..o.inner {
                sum += unsafe { *at_a(i, k) * *at_b(k, c) };
            }
            unsafe { *at_out(i, c) = sum };
        }
        i += 1;
    }
}

/// The Cholesky factor `L` (`A = L L'`, lower triangular) of a symmetric matrix given by its
/// lower triangle, in nalgebra's form (the strict upper triangle is left as it was); `None`
/// when a pivot is not positive (not positive definite, or NaN). Column by column from the
/// columns before it (left-looking): with AVX2 and FMA, sixteen rows at a time with their
/// sums in registers, about 2.4 times nalgebra's rate at the 60 × 60 systems of the
/// saddle point and the factor; without them, nalgebra's.
pub fn cholesky(m: DMatrix<f64>) -> Option<Cholesky<f64, Dyn>> {
    assert!(m.is_square(), "Cholesky of a square matrix");
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx2") && std::arch::is_x86_feature_detected!("fma") {
        // SAFETY: the processor has AVX2 and FMA, checked just above.
        return unsafe { cholesky_fma(m) };
    }
    m.cholesky()
}

/// [`cholesky`] with AVX2 and FMA.
///
/// # Safety
/// The processor must have AVX2 and FMA; `m` is square.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
unsafe fn cholesky_fma(mut m: DMatrix<f64>) -> Option<Cholesky<f64, Dyn>> {
    use std::arch::x86_64::{__m256d, _mm256_storeu_pd};
    /// Rows `i..i+4R` of column `k` from their sums (compiled with AVX2 too, so that it is
    /// inlined).
    #[target_feature(enable = "avx2,fma")]
    fn store<const R: usize>(a: &mut [f64], n: usize, k: usize, i: usize, sums: &[__m256d; R]) {
        for (q, v) in sums.iter().enumerate() {
            let at = i + 4 * q + k * n;
            // SAFETY: the four rows lie inside column k (a slice of four checked by indexing).
            unsafe { _mm256_storeu_pd(a[at..at + 4].as_mut_ptr(), *v) };
        }
    }
    let n = m.nrows();
    let a = m.as_mut_slice();
    for k in 0..n {
        // Rows k.. of column k less Σ_{j<k} L_ij L_kj: sixteen rows at a time, then the
        // remaining groups of four together, then the last one to three rows as the matrix's
        // last four (keeping the rows wanted).
        let mut i = k;
        // SAFETY (each call): rows i..i+4R and columns up to k lie inside the n × n matrix.
        while i + 16 <= n {
            let sums = unsafe { cholesky_sums::<4, 2>(a, n, k, i) };
            store(a, n, k, i, &sums);
            i += 16;
        }
        match (n - i) / 4 {
            3 => store(a, n, k, i, &unsafe { cholesky_sums::<3, 2>(a, n, k, i) }),
            2 => store(a, n, k, i, &unsafe { cholesky_sums::<2, 4>(a, n, k, i) }),
            1 => store(a, n, k, i, &unsafe { cholesky_sums::<1, 4>(a, n, k, i) }),
            _ => {}
        }
        i += (n - i) / 4 * 4;
        if i < n && n >= 4 {
            let [sums] = unsafe { cholesky_sums::<1, 4>(a, n, k, n - 4) };
            let mut lanes = [0.0; 4];
            unsafe { _mm256_storeu_pd(lanes.as_mut_ptr(), sums) };
            for r in i..n {
                a[r + k * n] = lanes[r + 4 - n];
            }
        } else {
            for r in i..n {
                let mut sum = a[r + k * n];
                for j in 0..k {
                    sum = (-a[r + j * n]).mul_add(a[k + j * n], sum);
                }
                a[r + k * n] = sum;
            }
        }
        let pivot = a[k + k * n];
        if pivot.is_nan() || pivot <= 0.0 {
            return None;
        }
        let root = pivot.sqrt();
        a[k + k * n] = root;
        for v in &mut a[k + 1 + k * n..(k + 1) * n] {
            *v /= root;
        }
    }
    Some(Cholesky::pack_dirty(m))
}

/// The sums `a_ik − Σ_{j<k} a_ij a_kj` for rows `i..i+4R` of column `k` of
/// [`cholesky_fma`], from `U` sets of `R` sums (`j` modulo `U`) so that `U R` chains of
/// fused multiply–adds run side by side.
///
/// # Safety
/// AVX2 and FMA; `a` is an `n × n` column-major matrix, `k < n` and `i + 4R ≤ n`.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
unsafe fn cholesky_sums<const R: usize, const U: usize>(
    a: &[f64],
    n: usize,
    k: usize,
    i: usize,
) -> [std::arch::x86_64::__m256d; R] {
    use std::arch::x86_64::{
        _mm256_add_pd, _mm256_broadcast_sd, _mm256_fnmadd_pd, _mm256_loadu_pd, _mm256_setzero_pd,
    };
    let p = a.as_ptr();
    // SAFETY (every access below): row r < i + 4R ≤ n and column c ≤ k < n, at r + c n.
    let at = |r: usize, c: usize| unsafe { p.add(r + c * n) };
    let mut sums = [[_mm256_setzero_pd(); R]; U];
    for (q, v) in sums[0].iter_mut().enumerate() {
        *v = unsafe { _mm256_loadu_pd(at(i + 4 * q, k)) };
    }
    let mut j = 0;
    while j + U <= k {
        for (u, set) in sums.iter_mut().enumerate() {
            let b = unsafe { _mm256_broadcast_sd(&*at(k, j + u)) };
            for (q, v) in set.iter_mut().enumerate() {
                let x = unsafe { _mm256_loadu_pd(at(i + 4 * q, j + u)) };
                *v = _mm256_fnmadd_pd(x, b, *v);
            }
        }
        j += U;
    }
    for j in j..k {
        let b = unsafe { _mm256_broadcast_sd(&*at(k, j)) };
        for (q, v) in sums[0].iter_mut().enumerate() {
            let x = unsafe { _mm256_loadu_pd(at(i + 4 * q, j)) };
            *v = _mm256_fnmadd_pd(x, b, *v);
        }
    }
    let mut out = sums[0];
    for set in &sums[1..] {
        for (o, v) in out.iter_mut().zip(set) {
            *o = _mm256_add_pd(*o, *v);
        }
    }
    out
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
/// rows of `Y`, over the rows of `U` the block reaches — about half the dense product, by
/// [`add_product`].
pub fn upper_times(u: &DMatrix<f64>, y: &DMatrix<f64>) -> DMatrix<f64> {
    let k = u.ncols();
    let mut out = DMatrix::zeros(u.nrows(), y.ncols());
    for j0 in (0..k).step_by(TRIANGLE_BLOCK) {
        let j1 = (j0 + TRIANGLE_BLOCK).min(k);
        add_product(
            &mut out.rows_mut(0, j1),
            &u.view((0, j0), (j1, j1 - j0)),
            &y.rows(j0, j1 - j0),
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

    /// A matrix whose column `c` is zero below row `reach[c]`, entries from a fixed formula.
    fn staircase(rows: usize, reach: &[usize]) -> DMatrix<f64> {
        DMatrix::from_fn(rows, reach.len(), |i, c| {
            if i < reach[c] {
                ((3 * i + 7 * c) as f64 * 0.37).sin()
            } else {
                0.0
            }
        })
    }

    /// The tiled Gram product, by the AVX2 kernel where the processor has it and by the plain
    /// tile everywhere, equals nalgebra's dense `A'A` (a general-purpose library's product):
    /// column counts around the tile, row counts around the four-row step, reaches in any
    /// order, zero rows and zero reach.
    #[test]
    fn gram_is_the_dense_product() {
        for (rows, k) in [(0, 3), (5, 1), (7, 2), (13, 3), (40, 4), (401, 65), (9, 10)] {
            let reach: Vec<usize> = (0..k).map(|c| (c * 37 + 11) % (rows + 1)).collect();
            let a = staircase(rows, &reach);
            let dense = a.transpose() * &a;
            let g = gram(&a, &reach);
            let tol = 1e-13 * (1.0 + dense.amax());
            assert!((&g - &dense).amax() < tol, "rows {rows}, k {k}");
            assert_eq!(g, g.transpose(), "symmetric");
            // The plain tile on its own, on the first columns.
            if rows > 0 && k >= GRAM_TILE {
                let cols: [&[f64]; GRAM_TILE] =
                    std::array::from_fn(|t| &a.as_slice()[t * rows..(t + 1) * rows]);
                let sums = tile(cols, cols, rows);
                for (x, row) in sums.iter().enumerate() {
                    for (y, v) in row.iter().enumerate() {
                        assert!((v - dense[(x, y)]).abs() < tol);
                    }
                }
            }
        }
    }

    /// The Cholesky factor equals nalgebra's (a general-purpose library's) to rounding and
    /// rebuilds the matrix, for sizes around the kernel's sixteen- and four-row steps; the
    /// strict upper triangle is left as it was; an indefinite matrix and a NaN are refused.
    #[test]
    fn cholesky_is_nalgebras() {
        for n in [1, 2, 3, 4, 5, 15, 16, 17, 20, 31, 33, 59, 60, 65, 70] {
            let b = DMatrix::from_fn(n + 3, n, |i, j| ((7 * i + 3 * j) as f64 * 0.41).sin());
            let mut a = b.transpose() * &b;
            for i in 0..n {
                a[(i, i)] += 0.1;
                for j in i + 1..n {
                    a[(i, j)] = 99.0; // never read
                }
            }
            let mut sym = a.clone();
            sym.fill_upper_triangle_with_lower_triangle();
            let reference = sym.clone().cholesky().expect("positive definite").l();
            let ours = cholesky(a.clone()).expect("positive definite");
            let l = ours.l();
            let tol = 1e-12 * reference.amax();
            assert!((&l - &reference).amax() < tol, "n = {n}");
            assert!(
                (&l * l.transpose() - &sym).amax() < 1e-12 * sym.amax(),
                "n = {n}"
            );
            let dirty = ours.unpack_dirty();
            for i in 0..n {
                for j in i + 1..n {
                    assert_eq!(dirty[(i, j)], 99.0);
                }
            }
            // Not positive definite: the last pivot made negative; a NaN.
            let mut bad = a.clone();
            bad[(n - 1, n - 1)] -= reference[(n - 1, n - 1)].powi(2) * 2.0;
            assert!(cholesky(bad).is_none(), "n = {n}");
            let mut nan = a.clone();
            nan[(n / 2, 0)] = f64::NAN;
            assert!(cholesky(nan).is_none(), "n = {n}");
        }
    }

    /// `out += A B` on views with column strides (blocks of larger matrices), every shape
    /// around the kernel's eight- and four-row tiles and four-column panels, equals nalgebra's
    /// dense product added to `out`.
    #[test]
    fn add_product_is_the_dense_product() {
        for (r, q, c) in [
            (1, 1, 1),
            (3, 5, 2),
            (4, 7, 4),
            (8, 3, 5),
            (13, 80, 9),
            (20, 80, 20),
        ] {
            let big_a = DMatrix::from_fn(r + 3, q + 2, |i, j| ((i * 5 + j * 3) as f64).cos());
            let big_b = DMatrix::from_fn(q + 4, c + 1, |i, j| ((i * 2 + j * 7) as f64).sin());
            let mut big_out = DMatrix::from_fn(r + 2, c + 3, |i, j| (i + j) as f64 * 0.1);
            let (a, b) = (big_a.view((2, 1), (r, q)), big_b.view((3, 1), (q, c)));
            let expected = big_out.view((1, 2), (r, c)) + a * b;
            add_product(&mut big_out.view_mut((1, 2), (r, c)), &a, &b);
            let got = big_out.view((1, 2), (r, c));
            assert!((got - &expected).amax() < 1e-12 * q as f64, "{r}×{q}×{c}");
            // Outside the block nothing changed.
            assert_eq!(big_out[(0, 0)], 0.0);
            assert_eq!(big_out[(r + 1, c + 2)], (r + 1 + c + 2) as f64 * 0.1);
        }
    }

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
