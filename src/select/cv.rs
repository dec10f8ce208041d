//! Cross-validated λ paths from fold Grams.
//!
//! For each fold the training Gram is profiled (baseline partialled out on the
//! training rows only), the path is solved on the common λ grid, and the
//! held-out error of each fit is computed from the held-out Gram alone:
//! with full coefficients `c = [α̂(b); b]`,
//! `‖y_h − Z_h c‖² = y_hᵀy_h − 2cᵀZ_hᵀy_h + cᵀZ_hᵀZ_h c`.
//! Folds run in parallel; each fold is computed sequentially, so the result
//! does not depend on the number of threads.

use faer::Mat;
use rayon::prelude::*;

use super::folds::FoldGrams;
use super::solver::{Fit, GroupLasso, SolverOptions};
use crate::{Error, Result};

/// Cross-validation of one λ path.
#[derive(Debug, Clone)]
pub struct CvPath {
    /// The λ grid (shared by all folds).
    pub lambdas: Vec<f64>,
    /// Held-out mean squared error, `fold_mse[f][t]` for fold `f` at `lambdas[t]`.
    pub fold_mse: Vec<Vec<f64>>,
    /// Mean over folds of the held-out mean squared error, per λ.
    pub mean_mse: Vec<f64>,
    /// Standard error of that mean (sample SD over folds / √F), per λ.
    pub se_mse: Vec<f64>,
    /// The fits of every fold (for objectives, active sets, warm starts).
    pub fold_fits: Vec<Vec<Fit>>,
}

/// Solves the path on every fold's training Gram and scores it on the
/// held-out block. `q` baseline columns are profiled out; `factors` are the
/// per-group Cholesky factors `L_k`.
pub fn cross_validate(
    grams: &FoldGrams,
    q: usize,
    factors: &[Mat<f64>],
    weights: &[f64],
    lambdas: &[f64],
    opts: &SolverOptions,
) -> Result<CvPath> {
    if grams.train.is_empty() {
        return Err(Error::Argument("no folds".into()));
    }
    let per_fold: Vec<Result<(Vec<f64>, Vec<Fit>)>> = grams
        .train
        .par_iter()
        .zip(grams.held.par_iter())
        .map(|(train, held)| {
            let prof = train.profile(q)?;
            let problem = GroupLasso::new(&prof, factors)?;
            let fits = problem.fit_path(weights, lambdas, opts, None)?;
            let full: Vec<Vec<f64>> = fits.iter().map(|f| prof.full_coef(&f.coef)).collect();
            let d = full.first().map_or(0, Vec::len);
            let coefs = Mat::from_fn(d, full.len(), |i, t| full[t][i]);
            let nh = held.n.max(1) as f64;
            let mse = held
                .residual_sums_of_squares(coefs.as_ref())?
                .into_iter()
                .map(|r| r / nh)
                .collect();
            Ok((mse, fits))
        })
        .collect();
    let mut fold_mse = Vec::new();
    let mut fold_fits = Vec::new();
    for r in per_fold {
        let (m, f) = r?;
        fold_mse.push(m);
        fold_fits.push(f);
    }
    let nf = fold_mse.len() as f64;
    let nl = lambdas.len();
    let mean_mse: Vec<f64> = (0..nl)
        .map(|t| fold_mse.iter().map(|m| m[t]).sum::<f64>() / nf)
        .collect();
    let se_mse: Vec<f64> = (0..nl)
        .map(|t| {
            if nf < 2.0 {
                return 0.0;
            }
            let v = fold_mse
                .iter()
                .map(|m| (m[t] - mean_mse[t]).powi(2))
                .sum::<f64>()
                / (nf - 1.0);
            (v / nf).sqrt()
        })
        .collect();
    Ok(CvPath {
        lambdas: lambdas.to_vec(),
        fold_mse,
        mean_mse,
        se_mse,
        fold_fits,
    })
}
