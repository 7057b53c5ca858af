//! Regression form of the VAR: `Y = X B + U` (Y: T×n, X: T×k with rows
//! `x_t = (1, y_{t-1}', …, y_{t-p}')`), from columns in model units. The first `p`
//! rows of the window are the presample, conditioned on and never modelled.

use nalgebra::{DMatrix, DVector};

/// `Y`, `X` and the mean of the presample rows `ȳ0`.
#[derive(Debug, Clone)]
pub struct Regression {
    pub y: DMatrix<f64>,
    pub x: DMatrix<f64>,
    pub p: usize,
    pub presample_mean: DVector<f64>,
}

impl Regression {
    /// `columns[series][row]` in model units; uses rows `first..=last` of them
    /// (presample included). The caller checks there are more than `p` rows.
    pub fn new(columns: &[Vec<f64>], first: usize, last: usize, p: usize) -> Regression {
        let n = columns.len();
        let t = last + 1 - first - p;
        let k = 1 + n * p;
        let y = DMatrix::from_fn(t, n, |r, i| columns[i][first + p + r]);
        let x = DMatrix::from_fn(t, k, |r, c| {
            if c == 0 {
                1.0
            } else {
                let (l, j) = ((c - 1) / n + 1, (c - 1) % n);
                columns[j][first + p + r - l]
            }
        });
        let presample_mean = DVector::from_fn(n, |i, _| {
            columns[i][first..first + p].iter().sum::<f64>() / p as f64
        });
        Regression {
            y,
            x,
            p,
            presample_mean,
        }
    }

    pub fn n(&self) -> usize {
        self.y.ncols()
    }

    pub fn t(&self) -> usize {
        self.y.nrows()
    }

    pub fn k(&self) -> usize {
        self.x.ncols()
    }
}
