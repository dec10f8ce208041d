//! Settings of the per-DoF selection (the `[select]` section of the analysis
//! configuration file). Every key has a default.

use serde::{Deserialize, Serialize};

/// Settings of the per-DoF selection.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct SelectConfig {
    /// Lag window δ, s: electro-mechanical delay plus the build-up of force
    /// (FACTS §2: EMD about 30–100 ms; the window also covers force build-up).
    pub lag_window_s: f64,
    /// Lag B-splines per surface.
    pub n_lag: usize,
    /// Position B-splines per surface.
    pub n_pos: usize,
    /// Baseline B-splines a(z) (unpenalised).
    pub n_baseline: usize,
    /// Contiguous cross-validation blocks.
    pub folds: usize,
    /// λ values per path.
    pub n_lambda: usize,
    /// Smallest λ as a share of λ_max.
    pub lambda_ratio: f64,
    /// Smoothing along the lag, relative to tr(M)/tr(P_s) (log-spaced).
    pub phi_s: Vec<f64>,
    /// Smoothing along the position, relative to tr(M)/tr(P_z) (log-spaced).
    pub phi_z: Vec<f64>,
    /// Largest number of stages (stage 1 plus adaptive refits).
    pub stages: usize,
    /// Resampled refits for the selection frequency.
    pub resamples: usize,
    /// Length of the blocks of the moving-block bootstrap, s.
    pub resample_block_s: f64,
    /// Selection frequency at or above which a pick has `high` confidence.
    pub high_frequency: f64,
    /// Selection frequency below which a pick has `low` confidence.
    pub low_frequency: f64,
    /// Smallest |correlation| of envelopes for a site to count as an alternate.
    pub alternate_correlation: f64,
    /// Most alternates reported per selected site.
    pub max_alternates: usize,
    /// Relative duality-gap tolerance of the solver.
    pub tol_gap: f64,
    /// Seed of the resampling.
    pub seed: u64,
}

impl Default for SelectConfig {
    fn default() -> Self {
        SelectConfig {
            lag_window_s: 0.3,
            n_lag: 7,
            n_pos: 7,
            n_baseline: 8,
            folds: 5,
            n_lambda: 50,
            lambda_ratio: 1e-3,
            phi_s: vec![0.01, 0.1, 1.0],
            phi_z: vec![0.01, 0.1, 1.0],
            stages: 5,
            resamples: 20,
            resample_block_s: 5.0,
            high_frequency: 0.8,
            low_frequency: 0.5,
            alternate_correlation: 0.6,
            max_alternates: 3,
            tol_gap: 1e-8,
            seed: 1,
        }
    }
}

impl SelectConfig {
    /// Checks ranges; errors name the key.
    pub fn validate(&self) -> crate::Result<()> {
        let bad = |k: &str, why: &str| Err(crate::Error::Argument(format!("select.{k}: {why}")));
        if !(self.lag_window_s > 0.0 && self.lag_window_s <= 2.0) {
            return bad("lag_window_s", "must be in (0, 2] s");
        }
        if self.n_lag < 4 || self.n_pos < 4 {
            return bad("n_lag", "cubic B-splines need at least 4 functions");
        }
        if self.n_baseline == 2 || self.n_baseline == 3 {
            return bad("n_baseline", "must be 0, 1 or at least 4");
        }
        if self.folds < 2 {
            return bad("folds", "needs at least 2");
        }
        if self.n_lambda < 2 || !(self.lambda_ratio > 0.0 && self.lambda_ratio < 1.0) {
            return bad("lambda_ratio", "needs n_lambda ≥ 2 and 0 < ratio < 1");
        }
        if self.phi_s.is_empty() || self.phi_z.is_empty() {
            return bad("phi_s", "needs at least one value each for phi_s and phi_z");
        }
        if self.phi_s.iter().chain(&self.phi_z).any(|v| !(*v >= 0.0 && v.is_finite())) {
            return bad("phi_s", "smoothing values must be finite and ≥ 0");
        }
        if self.stages == 0 {
            return bad("stages", "needs at least 1");
        }
        if !(0.0 < self.low_frequency && self.low_frequency <= self.high_frequency && self.high_frequency <= 1.0) {
            return bad("high_frequency", "needs 0 < low_frequency ≤ high_frequency ≤ 1");
        }
        if !(self.resample_block_s > 0.0) {
            return bad("resample_block_s", "must be positive");
        }
        Ok(())
    }
}
