//! The tensor-product surface basis and its smoothness penalty.
//!
//! A surface `g(s, z) = Σ_l Σ_m b_lm B_l(s) C_m(z)` on `[−δ, 0] × [0, 1]` has
//! its coefficients ordered lag-major: index `l · n_pos + m`. With marginal
//! Gram matrices `G_s`, `G_z` and roughness matrices `Ω_s = ∫B″B″`,
//! `Ω_z = ∫C″C″` (see [`super::basis`]), the exact integrals are Kronecker
//! products (Wood 2006, *Biometrics* 62:1025–1036, for tensor-product
//! penalties):
//!
//! ```text
//! M   = ∫∫ g²            → bᵀ (G_s ⊗ G_z) b
//! P_s = ∫∫ (∂²g/∂s²)²    → bᵀ (Ω_s ⊗ G_z) b
//! P_z = ∫∫ (∂²g/∂z²)²    → bᵀ (G_s ⊗ Ω_z) b
//! ```
//!
//! The group penalty of a site is `√(bᵀ R b)` with `R = M + φ_s P_s + φ_z P_z`,
//! which is positive definite because `M` is. With the lower Cholesky factor
//! `R = L Lᵀ`, the substitution `θ = Lᵀ b` turns it into the plain group-lasso
//! norm `‖θ‖₂` (Yuan & Lin 2006, *JRSS B* 68:49–67).

use faer::Mat;

use super::basis::BSplineBasis;
use crate::{Error, Result};

/// The Kronecker product `A ⊗ B`.
pub fn kron(a: &Mat<f64>, b: &Mat<f64>) -> Mat<f64> {
    let (ra, ca) = (a.nrows(), a.ncols());
    let (rb, cb) = (b.nrows(), b.ncols());
    Mat::from_fn(ra * rb, ca * cb, |i, j| {
        a[(i / rb, j / cb)] * b[(i % rb, j % cb)]
    })
}

/// The tensor-product basis of one site's surface `g(s, z)`.
#[derive(Debug, Clone)]
pub struct SurfaceBasis {
    lag: BSplineBasis,
    pos: BSplineBasis,
}

impl SurfaceBasis {
    /// Lag basis on `[−delta, 0]` with `n_lag` functions, position basis on
    /// `[0, 1]` with `n_pos` functions.
    pub fn new(delta: f64, n_lag: usize, n_pos: usize) -> Result<Self> {
        let lag = BSplineBasis::new(-delta, 0.0, n_lag).ok_or_else(|| {
            Error::Argument(format!(
                "lag basis needs δ > 0 and at least 4 functions (δ = {delta}, n = {n_lag})"
            ))
        })?;
        let pos = BSplineBasis::new(0.0, 1.0, n_pos).ok_or_else(|| {
            Error::Argument(format!(
                "position basis needs at least 4 functions (n = {n_pos})"
            ))
        })?;
        Ok(SurfaceBasis { lag, pos })
    }

    /// The lag basis `B_l(s)` on `[−δ, 0]`.
    pub fn lag(&self) -> &BSplineBasis {
        &self.lag
    }

    /// The position basis `C_m(z)` on `[0, 1]`.
    pub fn pos(&self) -> &BSplineBasis {
        &self.pos
    }

    /// Coefficients per surface, `n_lag · n_pos`.
    pub fn len(&self) -> usize {
        self.lag.len() * self.pos.len()
    }

    /// Always false (a surface has at least 16 coefficients).
    pub fn is_empty(&self) -> bool {
        false
    }

    /// `M = G_s ⊗ G_z`.
    pub fn gram(&self) -> Mat<f64> {
        kron(&self.lag.gram(), &self.pos.gram())
    }

    /// `P_s = Ω_s ⊗ G_z`.
    pub fn penalty_lag(&self) -> Mat<f64> {
        kron(&self.lag.roughness(), &self.pos.gram())
    }

    /// `P_z = G_s ⊗ Ω_z`.
    pub fn penalty_pos(&self) -> Mat<f64> {
        kron(&self.lag.gram(), &self.pos.roughness())
    }

    /// `R = M + φ_s P_s + φ_z P_z`.
    pub fn penalty_matrix(&self, phi_s: f64, phi_z: f64) -> Result<Mat<f64>> {
        if !(phi_s.is_finite() && phi_s >= 0.0 && phi_z.is_finite() && phi_z >= 0.0) {
            return Err(Error::Argument(format!(
                "smoothing weights must be finite and ≥ 0 (φ_s = {phi_s}, φ_z = {phi_z})"
            )));
        }
        let (gs, gz) = (self.lag.gram(), self.pos.gram());
        let (os, oz) = (self.lag.roughness(), self.pos.roughness());
        let m = kron(&gs, &gz);
        let ps = kron(&os, &gz);
        let pz = kron(&gs, &oz);
        Ok(Mat::from_fn(m.nrows(), m.ncols(), |i, j| {
            m[(i, j)] + phi_s * ps[(i, j)] + phi_z * pz[(i, j)]
        }))
    }

    /// Lower Cholesky factor `L` of `R = M + φ_s P_s + φ_z P_z` (so `R = L Lᵀ`).
    pub fn penalty_factor(&self, phi_s: f64, phi_z: f64) -> Result<Mat<f64>> {
        let r = self.penalty_matrix(phi_s, phi_z)?;
        cholesky_lower(&r)
            .ok_or_else(|| Error::Analysis("penalty matrix is not positive definite".to_string()))
    }

    /// Evaluates `g(s, z) = Σ b_lm B_l(s) C_m(z)` on the grid `s_grid × z_grid`;
    /// the result is row-major in `s` (`out[i · z_grid.len() + j] = g(s_i, z_j)`).
    pub fn evaluate(&self, coef: &[f64], s_grid: &[f64], z_grid: &[f64]) -> Result<Vec<f64>> {
        if coef.len() != self.len() {
            return Err(Error::Argument(format!(
                "surface needs {} coefficients, got {}",
                self.len(),
                coef.len()
            )));
        }
        let nz = self.pos.len();
        let zs: Vec<_> = z_grid.iter().map(|&z| self.pos.local(z, 0)).collect();
        let mut out = Vec::with_capacity(s_grid.len() * z_grid.len());
        for &s in s_grid {
            let ls = self.lag.local(s, 0);
            for lz in &zs {
                let mut v = 0.0;
                for (a, bs) in ls.values.iter().enumerate() {
                    for (c, bz) in lz.values.iter().enumerate() {
                        v += coef[(ls.first + a) * nz + lz.first + c] * bs * bz;
                    }
                }
                out.push(v);
            }
        }
        Ok(out)
    }
}

/// Lower Cholesky factor of a symmetric positive definite matrix, or `None`
/// when a pivot is not positive.
pub fn cholesky_lower(a: &Mat<f64>) -> Option<Mat<f64>> {
    let n = a.nrows();
    let mut l = Mat::<f64>::zeros(n, n);
    for j in 0..n {
        let mut d = a[(j, j)];
        for k in 0..j {
            d -= l[(j, k)] * l[(j, k)];
        }
        if d.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
            return None;
        }
        let d = d.sqrt();
        l[(j, j)] = d;
        for i in (j + 1)..n {
            let mut v = a[(i, j)];
            for k in 0..j {
                v -= l[(i, k)] * l[(j, k)];
            }
            l[(i, j)] = v / d;
        }
    }
    Some(l)
}

/// `L⁻ᵀ` for a lower-triangular `L` (an upper-triangular matrix).
pub fn inverse_transpose_lower(l: &Mat<f64>) -> Mat<f64> {
    let n = l.nrows();
    // Solve Lᵀ X = I column by column (back substitution).
    let mut x = Mat::<f64>::zeros(n, n);
    for c in 0..n {
        for i in (0..n).rev() {
            let mut v = if i == c { 1.0 } else { 0.0 };
            for k in (i + 1)..n {
                v -= l[(k, i)] * x[(k, c)];
            }
            x[(i, c)] = v / l[(i, i)];
        }
    }
    x
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn factor_reproduces_penalty() {
        let sb = SurfaceBasis::new(0.3, 5, 6).unwrap();
        let r = sb.penalty_matrix(1e-3, 1e-2).unwrap();
        let l = sb.penalty_factor(1e-3, 1e-2).unwrap();
        let n = r.nrows();
        for i in 0..n {
            for j in 0..n {
                let v: f64 = (0..n).map(|k| l[(i, k)] * l[(j, k)]).sum();
                assert!((v - r[(i, j)]).abs() < 1e-12 * r[(i, i)].abs().max(1.0));
            }
        }
        let lit = inverse_transpose_lower(&l);
        for i in 0..n {
            for j in 0..n {
                // Lᵀ · L⁻ᵀ = I
                let v: f64 = (0..n).map(|k| l[(k, i)] * lit[(k, j)]).sum();
                let e = if i == j { 1.0 } else { 0.0 };
                assert!((v - e).abs() < 1e-10);
            }
        }
    }

    #[test]
    fn surface_evaluation_of_constant() {
        // Partition of unity: all coefficients 1 gives g ≡ 1.
        let sb = SurfaceBasis::new(0.3, 7, 7).unwrap();
        let v = sb
            .evaluate(&vec![1.0; 49], &[-0.3, -0.1, 0.0], &[0.0, 0.4, 1.0])
            .unwrap();
        for x in v {
            assert!((x - 1.0).abs() < 1e-14);
        }
    }
}
