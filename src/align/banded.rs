//! Symmetric banded matrices with a Cholesky solve: the normal equations of
//! the warp-map smoother ([`super::warpmap::whittaker`], bandwidth 2) and of
//! the lag refinement ([`super::refine`], bandwidth 3). Storage and work are
//! `O(n · bw)` and `O(n · bw²)` (Golub & Van Loan, *Matrix Computations*,
//! 4th ed., §4.3.5, band Cholesky).

#![allow(clippy::needless_range_loop)] // index loops mirror the formulas

use crate::select::cholesky_lower;
use faer::Mat;

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
        Some(self.cholesky()?.solve(b))
    }

    /// The banded Cholesky factor L (A = L Lᵀ); `None` when A is not positive definite.
    pub fn cholesky(&self) -> Option<BandedFactor> {
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
        Some(BandedFactor { n, bw, l })
    }

    /// Solves the bordered system
    ///
    /// ```text
    /// [ A   B ] [x]   [b]
    /// [ Bᵀ  C ] [y] = [c]
    /// ```
    ///
    /// with A this banded matrix, B given by its columns (`border`, each of
    /// length n) and C a small dense m × m block (row-major), by the Schur
    /// complement: S = C − BᵀA⁻¹B, S y = c − BᵀA⁻¹b, x = A⁻¹(b − B y)
    /// (Golub & Van Loan, §3.2.10, block elimination). `None` when A or S is
    /// not positive definite.
    pub fn solve_bordered(
        &self,
        border: &[Vec<f64>],
        corner: &[f64],
        b: &[f64],
        c: &[f64],
    ) -> Option<(Vec<f64>, Vec<f64>)> {
        let (f, a_inv_b, schur) = self.eliminate(border, corner)?;
        let mut x = f.solve(b);
        if border.is_empty() {
            return Some((x, Vec::new()));
        }
        let rhs: Vec<f64> = border
            .iter()
            .zip(c)
            .map(|(col, ci)| ci - dot(col, &x))
            .collect();
        let y = dense_cholesky_solve(&schur, &rhs, border.len())?;
        for (q, col) in a_inv_b.iter().enumerate() {
            for (xi, v) in x.iter_mut().zip(col) {
                *xi -= y[q] * v;
            }
        }
        Some((x, y))
    }

    /// The Schur complement S = C − BᵀA⁻¹B of this matrix A in the bordered
    /// matrix [A B; Bᵀ C] (see [`Banded::solve_bordered`]), row-major m × m.
    pub fn schur(&self, border: &[Vec<f64>], corner: &[f64]) -> Option<Vec<f64>> {
        Some(self.eliminate(border, corner)?.2)
    }

    /// Block elimination of the border: the factor of A, A⁻¹B by columns, and S.
    fn eliminate(
        &self,
        border: &[Vec<f64>],
        corner: &[f64],
    ) -> Option<(BandedFactor, Vec<Vec<f64>>, Vec<f64>)> {
        let m = border.len();
        let f = self.cholesky()?;
        let a_inv_b: Vec<Vec<f64>> = border.iter().map(|col| f.solve(col)).collect();
        let mut schur = corner.to_vec();
        for p in 0..m {
            for q in 0..m {
                schur[p * m + q] -= dot(&border[p], &a_inv_b[q]);
            }
        }
        Some((f, a_inv_b, schur))
    }
}

fn dot(u: &[f64], v: &[f64]) -> f64 {
    u.iter().zip(v).map(|(a, b)| a * b).sum()
}

/// A banded Cholesky factor, reusable for several right-hand sides.
pub struct BandedFactor {
    n: usize,
    bw: usize,
    l: Vec<Vec<f64>>,
}

impl BandedFactor {
    /// Solves L Lᵀ x = b.
    pub fn solve(&self, b: &[f64]) -> Vec<f64> {
        let (n, bw, l) = (self.n, self.bw, &self.l);
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
        y
    }
}

/// Solves the small dense symmetric positive definite system S y = r
/// (row-major m × m): the Cholesky factor of [`crate::select::cholesky_lower`],
/// then forward and back substitution. `None` when S is not positive definite.
pub fn dense_cholesky_solve(s: &[f64], r: &[f64], m: usize) -> Option<Vec<f64>> {
    let l = cholesky_lower(&Mat::from_fn(m, m, |i, j| s[i * m + j]))?;
    let mut y = r.to_vec();
    for i in 0..m {
        for k in 0..i {
            y[i] -= l[(i, k)] * y[k];
        }
        y[i] /= l[(i, i)];
    }
    for i in (0..m).rev() {
        for k in i + 1..m {
            y[i] -= l[(k, i)] * y[k];
        }
        y[i] /= l[(i, i)];
    }
    Some(y)
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

    #[test]
    fn bordered_solve_matches_a_dense_solve() {
        // The full 7 × 7 system [A B; Bᵀ C] with A tridiagonal(−1, 4, −1) (5 × 5),
        // two border columns and C = [[3, 0.5], [0.5, 2]]; x = [1..5], y = [−1, 2].
        let n = 5;
        let mut a = Banded::new(n, 3);
        for i in 0..n {
            a.add(i, i, 4.0);
            if i + 1 < n {
                a.add(i + 1, i, -1.0);
            }
        }
        let border = vec![
            vec![1.0, 0.0, 0.5, 0.0, 0.2],
            vec![0.0, 0.3, 0.0, -0.4, 1.0],
        ];
        let corner = [3.0, 0.5, 0.5, 2.0];
        let x: Vec<f64> = (1..=n).map(|v| v as f64).collect();
        let y = [-1.0, 2.0];
        let mut b = vec![0.0; n];
        for i in 0..n {
            b[i] = 4.0 * x[i];
            if i > 0 {
                b[i] -= x[i - 1];
            }
            if i + 1 < n {
                b[i] -= x[i + 1];
            }
            b[i] += border[0][i] * y[0] + border[1][i] * y[1];
        }
        let c: Vec<f64> = (0..2)
            .map(|p| {
                (0..n).map(|i| border[p][i] * x[i]).sum::<f64>()
                    + corner[p * 2] * y[0]
                    + corner[p * 2 + 1] * y[1]
            })
            .collect();
        let (gx, gy) = a.solve_bordered(&border, &corner, &b, &c).unwrap();
        for (g, w) in gx.iter().zip(&x).chain(gy.iter().zip(&y)) {
            assert!((g - w).abs() < 1e-12, "{gx:?} {gy:?}");
        }
    }
}
