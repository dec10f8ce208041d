//! Symmetric banded matrices with a Cholesky solve: the normal equations of
//! the warp-map smoother ([`super::warpmap::whittaker`], bandwidth 2) and of
//! the lag refinement ([`super::refine`], bandwidth 3). Storage and work are
//! `O(n · bw)` and `O(n · bw²)` (Golub & Van Loan, *Matrix Computations*,
//! 4th ed., §4.3.5, band Cholesky).

#![allow(clippy::needless_range_loop)] // index loops mirror the formulas

/// A symmetric banded matrix (lower half stored by diagonals) with a Cholesky solve.
#[derive(Clone)]
pub struct Banded {
    n: usize,
    bw: usize,
    /// `d[o][i]` = A(i + o, i).
    d: Vec<Vec<f64>>,
}

impl Banded {
    pub fn new(n: usize, bw: usize) -> Self {
        Banded {
            n,
            bw,
            d: vec![vec![0.0; n]; bw + 1],
        }
    }

    /// Adds v to A(r, c) (and its mirror); |r − c| ≤ bw.
    pub fn add(&mut self, r: usize, c: usize, v: f64) {
        let (hi, lo) = if r >= c { (r, c) } else { (c, r) };
        self.d[hi - lo][lo] += v;
    }

    /// Adds μ D₂ᵀD₂.
    pub fn add_second_difference(&mut self, mu: f64) {
        if self.n < 3 {
            return;
        }
        let c = [1.0, -2.0, 1.0];
        for s in 0..self.n - 2 {
            for p in 0..3 {
                for q in p..3 {
                    self.add(s + p, s + q, mu * c[p] * c[q]);
                }
            }
        }
    }

    /// Adds v to every diagonal entry.
    pub fn add_to_diagonal(&mut self, v: f64) {
        self.d[0].iter_mut().for_each(|x| *x += v);
    }

    /// Mean of the diagonal.
    pub fn diag_mean(&self) -> f64 {
        self.d[0].iter().sum::<f64>() / self.n.max(1) as f64
    }

    /// Solves A x = b by banded Cholesky; `None` when A is not positive definite.
    pub fn solve(&self, b: &[f64]) -> Option<Vec<f64>> {
        let (n, bw) = (self.n, self.bw);
        // l[o][i] = L(i + o, i)
        let mut l = vec![vec![0.0; n]; bw + 1];
        for j in 0..n {
            let mut s = self.d[0][j];
            for k in j.saturating_sub(bw)..j {
                let v = l[j - k][k];
                s -= v * v;
            }
            if !(s > 0.0 && s.is_finite()) {
                return None;
            }
            let djj = s.sqrt();
            l[0][j] = djj;
            for o in 1..=bw.min(n - 1 - j) {
                let i = j + o;
                let mut s = self.d[o][j];
                for k in i.saturating_sub(bw)..j {
                    s -= l[i - k][k] * l[j - k][k];
                }
                l[o][j] = s / djj;
            }
        }
        let mut y = b.to_vec();
        for i in 0..n {
            for k in i.saturating_sub(bw)..i {
                y[i] -= l[i - k][k] * y[k];
            }
            y[i] /= l[0][i];
        }
        for i in (0..n).rev() {
            for k in i + 1..=(i + bw).min(n - 1) {
                y[i] -= l[k - i][i] * y[k];
            }
            y[i] /= l[0][i];
        }
        Some(y)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn banded_cholesky_matches_a_dense_solve() {
        // A = tridiagonal(−1, 4, −1) + a (0, 3) band entry of 0.5; x = [1..6].
        let n = 6;
        let mut a = Banded::new(n, 3);
        for i in 0..n {
            a.add(i, i, 4.0);
            if i + 1 < n {
                a.add(i + 1, i, -1.0);
            }
        }
        a.add(3, 0, 0.5);
        let x: Vec<f64> = (1..=n).map(|v| v as f64).collect();
        let mut b = vec![0.0; n];
        for i in 0..n {
            for j in 0..n {
                let v = if i == j {
                    4.0
                } else if i.abs_diff(j) == 1 {
                    -1.0
                } else if (i, j) == (3, 0) || (i, j) == (0, 3) {
                    0.5
                } else {
                    0.0
                };
                b[i] += v * x[j];
            }
        }
        let got = a.solve(&b).unwrap();
        for (g, w) in got.iter().zip(&x) {
            assert!((g - w).abs() < 1e-12, "{got:?}");
        }
    }
}
