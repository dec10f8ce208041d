//! Everything the selection of one DoF computes once: the functional design's
//! Gram statistics per cross-validation fold, the surface basis and scales.

use faer::Mat;

use super::config::SelectConfig;
use super::data::DofData;
use super::design::{DesignSpec, FunctionalDesign};
use super::folds::{block_folds, FoldGrams};
use super::gram::Gram;
use super::penalty::SurfaceBasis;
use super::solver::SolverOptions;
use crate::report::CvFigures;
use crate::{Error, Result};

/// Precomputed statistics of one DoF's functional design.
pub struct Context {
    /// The settings.
    pub cfg: SelectConfig,
    /// The design (kept for resampling and envelopes' lag integrals).
    pub design: FunctionalDesign,
    /// Fold Grams over every site's columns.
    pub grams: FoldGrams,
    /// Baseline columns `q`.
    pub q: usize,
    /// Columns per site `p_k = n_lag · n_pos`.
    pub pk: usize,
    /// Number of sites (groups).
    pub n_sites: usize,
    /// `tr(M) / tr(P_s)` and `tr(M) / tr(P_z)`: the scales of φ_s and φ_z.
    pub phi_scale: (f64, f64),
    /// Variance of y over the usable rows (for R²).
    pub y_var: f64,
    /// Solver options.
    pub opts: SolverOptions,
}

fn trace(m: &Mat<f64>) -> f64 {
    (0..m.nrows()).map(|i| m[(i, i)]).sum()
}

impl Context {
    /// Builds the design and its fold Grams.
    pub fn new(data: &DofData, cfg: &SelectConfig) -> Result<Context> {
        cfg.validate()?;
        data.check()?;
        let mut spec = DesignSpec::new(data.feature_rate);
        spec.lag_window = cfg.lag_window_s;
        spec.n_lag = cfg.n_lag;
        spec.n_pos = cfg.n_pos;
        spec.n_baseline = cfg.n_baseline;
        let j = spec.lag_samples();
        let rows = data.rows(j);
        let min_rows = 20 * cfg.folds;
        if rows.len() < min_rows {
            return Err(Error::Analysis(format!(
                "DoF `{}` has {} usable frames; at least {min_rows} are needed for {} folds",
                data.dof,
                rows.len(),
                cfg.folds
            )));
        }
        let env: Vec<&[f64]> = data.envelopes.iter().map(Vec::as_slice).collect();
        let design = FunctionalDesign::new(&env, &data.z, &data.y, &rows, spec)?;
        let folds = block_folds(&rows, cfg.folds, j)?;
        let grams = FoldGrams::new(design.augmented(), &folds)?;
        let surface: &SurfaceBasis = design.surface();
        let tm = trace(&surface.gram());
        let phi_scale = (
            tm / trace(&surface.penalty_lag()),
            tm / trace(&surface.penalty_pos()),
        );
        let n = rows.len() as f64;
        let mean = rows.iter().map(|&r| data.y[r]).sum::<f64>() / n;
        let y_var = rows
            .iter()
            .map(|&r| (data.y[r] - mean).powi(2))
            .sum::<f64>()
            / n;
        if !(y_var > 1e-12) {
            return Err(Error::Analysis(format!(
                "DoF `{}` does not move in the usable frames (velocity variance {y_var:.2e}); nothing to fit",
                data.dof
            )));
        }
        let opts = SolverOptions {
            tol_gap: cfg.tol_gap,
            ..SolverOptions::default()
        };
        Ok(Context {
            cfg: cfg.clone(),
            q: design.n_baseline(),
            pk: design.group_size(),
            n_sites: design.n_sites(),
            design,
            grams,
            phi_scale,
            y_var,
            opts,
        })
    }

    /// Column indices of the baseline and of `groups`, in that order.
    pub fn columns(&self, groups: &[usize]) -> Vec<usize> {
        let mut cols: Vec<usize> = (0..self.q).collect();
        for &g in groups {
            let a = self.q + g * self.pk;
            cols.extend(a..a + self.pk);
        }
        cols
    }

    /// The Gram restricted to the baseline and `groups`.
    pub fn subset(&self, g: &Gram, groups: &[usize]) -> Gram {
        subset_gram(g, &self.columns(groups))
    }

    /// Fold Grams restricted to the baseline and `groups`.
    pub fn subset_folds(&self, groups: &[usize]) -> FoldGrams {
        let cols = self.columns(groups);
        FoldGrams {
            total: subset_gram(&self.grams.total, &cols),
            folds: self.grams.folds.clone(),
            train: self
                .grams
                .train
                .iter()
                .map(|g| subset_gram(g, &cols))
                .collect(),
            held: self
                .grams
                .held
                .iter()
                .map(|g| subset_gram(g, &cols))
                .collect(),
        }
    }

    /// The Cholesky factor `L` of `M + φ_s P_s + φ_z P_z` for relative smoothing values.
    pub fn factor(&self, phi_s_rel: f64, phi_z_rel: f64) -> Result<Mat<f64>> {
        self.design
            .surface()
            .penalty_factor(phi_s_rel * self.phi_scale.0, phi_z_rel * self.phi_scale.1)
    }

    /// Cross-validated figures from a mean held-out squared error.
    pub fn figures(&self, mse: f64) -> CvFigures {
        CvFigures {
            r2: 1.0 - mse / self.y_var,
            rmse: mse.max(0.0).sqrt(),
        }
    }
}

/// The Gram of the columns `cols` (in that order).
pub fn subset_gram(g: &Gram, cols: &[usize]) -> Gram {
    let d = cols.len();
    Gram {
        zz: Mat::from_fn(d, d, |i, j| g.zz[(cols[i], cols[j])]),
        zy: cols.iter().map(|&c| g.zy[c]).collect(),
        yy: g.yy,
        n: g.n,
    }
}
