//! Sufficient statistics of a least-squares problem and baseline profiling.
//!
//! Everything downstream works on `ZᵀZ`, `Zᵀy`, `yᵀy` and `n` of the design
//! `Z = [A | X]`: a training fold's statistics are those of all rows minus
//! those of the held-out and gap rows, so cross-validation never re-reads the
//! data. The unpenalised baseline columns `A` are profiled out by a Schur
//! complement (exact least-squares partialling on the rows the Gram covers):
//!
//! ```text
//! X̃ᵀX̃ = XᵀX − XᵀA (AᵀA)⁺ AᵀX,   X̃ᵀỹ = Xᵀy − XᵀA (AᵀA)⁺ Aᵀy,
//! ỹᵀỹ = yᵀy − yᵀA (AᵀA)⁺ Aᵀy,    α̂(b) = (AᵀA)⁺ (Aᵀy − AᵀX b),
//! ```
//!
//! with `(AᵀA)⁺` the pseudo-inverse (eigenvalues below `1e-12 ·` the largest
//! are dropped, so a baseline function with no support in a fold is harmless).

use faer::linalg::matmul::triangular::{self, BlockStructure};
use faer::{Accum, Mat, MatRef, Par, Side};

use crate::{Error, Result};

/// `ZᵀZ`, `Zᵀy`, `yᵀy` and the row count of a design `Z` (sums, not means).
#[derive(Debug, Clone)]
pub struct Gram {
    /// `ZᵀZ` (full symmetric).
    pub zz: Mat<f64>,
    /// `Zᵀy`.
    pub zy: Vec<f64>,
    /// `yᵀy`.
    pub yy: f64,
    /// Number of rows.
    pub n: usize,
}

impl Gram {
    /// An all-zero Gram of dimension `dim`.
    pub fn zeros(dim: usize) -> Self {
        Gram {
            zz: Mat::zeros(dim, dim),
            zy: vec![0.0; dim],
            yy: 0.0,
            n: 0,
        }
    }

    /// Dimension (number of design columns).
    pub fn dim(&self) -> usize {
        self.zy.len()
    }

    /// The Gram of `[Z | y]` given as one matrix whose last column is `y`.
    /// Only the lower triangle is multiplied (faer's triangular matmul), then
    /// mirrored.
    pub fn from_augmented(zy: MatRef<'_, f64>, par: Par) -> Self {
        let d = zy.ncols();
        let mut g = Mat::<f64>::zeros(d, d);
        triangular::matmul(
            g.as_mut(),
            BlockStructure::TriangularLower,
            Accum::Replace,
            zy.transpose(),
            BlockStructure::Rectangular,
            zy,
            BlockStructure::Rectangular,
            1.0,
            par,
        );
        let dim = d - 1;
        let zz = Mat::from_fn(dim, dim, |i, j| if i >= j { g[(i, j)] } else { g[(j, i)] });
        let zyv = (0..dim).map(|j| g[(dim, j)]).collect();
        Gram {
            zz,
            zy: zyv,
            yy: g[(dim, dim)],
            n: zy.nrows(),
        }
    }

    /// The Gram of a design `z` (rows × columns) and response `y`.
    pub fn from_design(z: MatRef<'_, f64>, y: &[f64], par: Par) -> Result<Self> {
        if y.len() != z.nrows() {
            return Err(Error::Argument(format!(
                "design has {} rows but response has {}",
                z.nrows(),
                y.len()
            )));
        }
        let aug = Mat::from_fn(z.nrows(), z.ncols() + 1, |i, j| {
            if j < z.ncols() {
                z[(i, j)]
            } else {
                y[i]
            }
        });
        Ok(Self::from_augmented(aug.as_ref(), par))
    }

    /// `self + other` (rows of both).
    pub fn add(&self, other: &Gram) -> Gram {
        self.combine(other, 1.0)
    }

    /// `self − other` (the rows of `self` that are not in `other`; `other`
    /// must cover a subset of the rows of `self`).
    pub fn sub(&self, other: &Gram) -> Gram {
        self.combine(other, -1.0)
    }

    /// Adds `sign · other` in place.
    pub fn accumulate(&mut self, other: &Gram, sign: f64) {
        // faer's element-wise kernels (SIMD)
        if sign == 1.0 {
            self.zz += &other.zz;
        } else if sign == -1.0 {
            self.zz -= &other.zz;
        } else {
            self.zz += faer::Scale(sign) * &other.zz;
        }
        for (x, y) in self.zy.iter_mut().zip(&other.zy) {
            *x += sign * y;
        }
        self.yy += sign * other.yy;
        if sign > 0.0 {
            self.n += other.n;
        } else {
            self.n = self.n.saturating_sub(other.n);
        }
    }

    fn combine(&self, other: &Gram, sign: f64) -> Gram {
        let d = self.dim();
        Gram {
            zz: Mat::from_fn(d, d, |i, j| self.zz[(i, j)] + sign * other.zz[(i, j)]),
            zy: self
                .zy
                .iter()
                .zip(&other.zy)
                .map(|(a, b)| a + sign * b)
                .collect(),
            yy: self.yy + sign * other.yy,
            n: if sign > 0.0 {
                self.n + other.n
            } else {
                self.n.saturating_sub(other.n)
            },
        }
    }

    /// Profiles out the first `q` (unpenalised) columns; see the module docs.
    pub fn profile(&self, q: usize) -> Result<ProfiledGram> {
        let d = self.dim();
        if q > d {
            return Err(Error::Argument(format!(
                "cannot profile {q} columns out of {d}"
            )));
        }
        if self.n == 0 {
            return Err(Error::Analysis("no rows in this Gram".into()));
        }
        let p = d - q;
        let aa_pinv = pseudo_inverse(self.zz.as_ref().submatrix(0, 0, q, q))?;
        let xa = self.zz.as_ref().submatrix(q, 0, p, q); // XᵀA (p × q)
        let ay: Vec<f64> = self.zy[..q].to_vec();
        // H = XᵀA (AᵀA)⁺   (p × q)
        let h = xa * aa_pinv.as_ref();
        let mut xx = self.zz.as_ref().submatrix(q, q, p, p).to_owned();
        if q > 0 {
            faer::linalg::matmul::matmul(
                xx.as_mut(),
                Accum::Add,
                h.as_ref(),
                xa.transpose(),
                -1.0,
                Par::Seq,
            );
        }
        // symmetrise (the update is symmetric up to rounding)
        for j in 0..p {
            for i in (j + 1)..p {
                let v = 0.5 * (xx[(i, j)] + xx[(j, i)]);
                xx[(i, j)] = v;
                xx[(j, i)] = v;
            }
        }
        let xy: Vec<f64> = (0..p)
            .map(|i| self.zy[q + i] - (0..q).map(|a| h[(i, a)] * ay[a]).sum::<f64>())
            .collect();
        let pay: Vec<f64> = (0..q)
            .map(|a| (0..q).map(|b| aa_pinv[(a, b)] * ay[b]).sum())
            .collect();
        let yy = self.yy - ay.iter().zip(&pay).map(|(a, b)| a * b).sum::<f64>();
        Ok(ProfiledGram {
            xx,
            xy,
            yy,
            n: self.n,
            q,
            aa_pinv,
            ax: self.zz.as_ref().submatrix(0, q, q, p).to_owned(),
            ay,
        })
    }

    /// Residual sums of squares of several full coefficient vectors at once,
    /// the columns of `coefs` (`dim × T`): as [`Self::residual_sum_of_squares`],
    /// with `ZᵀZ C` formed by one matrix product (sequential, so the result
    /// does not depend on the thread count).
    pub fn residual_sums_of_squares(&self, coefs: MatRef<'_, f64>) -> Result<Vec<f64>> {
        let d = self.dim();
        if coefs.nrows() != d {
            return Err(Error::Argument(format!(
                "{} coefficients for a Gram of dimension {d}",
                coefs.nrows()
            )));
        }
        let t = coefs.ncols();
        let mut zzc = Mat::<f64>::zeros(d, t);
        faer::linalg::matmul::matmul(
            zzc.as_mut(),
            Accum::Replace,
            self.zz.as_ref(),
            coefs,
            1.0,
            Par::Seq,
        );
        Ok((0..t)
            .map(|k| {
                let (mut lin, mut quad) = (0.0, 0.0);
                for i in 0..d {
                    let c = coefs[(i, k)];
                    lin += self.zy[i] * c;
                    quad += zzc[(i, k)] * c;
                }
                (self.yy - 2.0 * lin + quad).max(0.0)
            })
            .collect())
    }

    /// Residual sum of squares `‖y − Z c‖²` of full coefficients `c` (baseline
    /// first) on the rows of this Gram: `yᵀy − 2cᵀZᵀy + cᵀZᵀZc`.
    pub fn residual_sum_of_squares(&self, coef: &[f64]) -> Result<f64> {
        if coef.len() != self.dim() {
            return Err(Error::Argument(format!(
                "{} coefficients for a Gram of dimension {}",
                coef.len(),
                self.dim()
            )));
        }
        // cᵀ Z ᵀZ c over the non-zero coefficients only
        let nz: Vec<usize> = (0..self.dim()).filter(|&j| coef[j] != 0.0).collect();
        let mut quad = 0.0;
        for &j in &nz {
            let col = self.zz.col_as_slice(j);
            let s: f64 = nz.iter().map(|&i| col[i] * coef[i]).sum();
            quad += coef[j] * s;
        }
        let lin: f64 = self.zy.iter().zip(coef).map(|(a, b)| a * b).sum();
        Ok((self.yy - 2.0 * lin + quad).max(0.0))
    }
}

/// Moore–Penrose pseudo-inverse of a small symmetric positive semi-definite matrix.
fn pseudo_inverse(a: MatRef<'_, f64>) -> Result<Mat<f64>> {
    let q = a.nrows();
    if q == 0 {
        return Ok(Mat::zeros(0, 0));
    }
    let evd = a
        .to_owned()
        .self_adjoint_eigen(Side::Lower)
        .map_err(|_| Error::Analysis("baseline Gram eigendecomposition failed".into()))?;
    let u = evd.U();
    let s = evd.S().column_vector();
    let smax = (0..q).map(|i| s[i]).fold(0.0f64, f64::max);
    let inv: Vec<f64> = (0..q)
        .map(|i| {
            if s[i] > 1e-12 * smax && s[i] > 0.0 {
                1.0 / s[i]
            } else {
                0.0
            }
        })
        .collect();
    Ok(Mat::from_fn(q, q, |i, j| {
        (0..q).map(|k| u[(i, k)] * inv[k] * u[(j, k)]).sum()
    }))
}

/// The statistics of the penalised columns after the baseline is profiled out.
#[derive(Debug, Clone)]
pub struct ProfiledGram {
    /// `X̃ᵀX̃` (p × p).
    pub xx: Mat<f64>,
    /// `X̃ᵀỹ`.
    pub xy: Vec<f64>,
    /// `ỹᵀỹ`.
    pub yy: f64,
    /// Number of rows.
    pub n: usize,
    q: usize,
    aa_pinv: Mat<f64>,
    ax: Mat<f64>,
    ay: Vec<f64>,
}

impl ProfiledGram {
    /// Number of penalised columns `p`.
    pub fn dim(&self) -> usize {
        self.xy.len()
    }

    /// Number of profiled baseline columns `q`.
    pub fn n_baseline(&self) -> usize {
        self.q
    }

    /// The baseline coefficients `α̂(b) = (AᵀA)⁺ (Aᵀy − AᵀX b)` that go with
    /// penalised coefficients `b`.
    pub fn baseline_coef(&self, b: &[f64]) -> Vec<f64> {
        let q = self.q;
        let t: Vec<f64> = (0..q)
            .map(|a| {
                let row: f64 = (0..b.len())
                    .filter(|&j| b[j] != 0.0)
                    .map(|j| self.ax[(a, j)] * b[j])
                    .sum();
                self.ay[a] - row
            })
            .collect();
        (0..q)
            .map(|a| (0..q).map(|c| self.aa_pinv[(a, c)] * t[c]).sum())
            .collect()
    }

    /// Full coefficients `[α̂(b); b]` for prediction with the unprofiled design.
    pub fn full_coef(&self, b: &[f64]) -> Vec<f64> {
        let mut c = self.baseline_coef(b);
        c.extend_from_slice(b);
        c
    }
}
