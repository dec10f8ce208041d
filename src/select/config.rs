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
    /// The λ path stops once the fit on all rows selects more than this many
    /// sites (glmnet's `dfmax`): sparse settings are the ones the rule picks.
    pub max_sites: usize,
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
            tol_gap: 1e-6,
            max_sites: 8,
            seed: 1,
        }
    }
}

impl SelectConfig {
    /// Checks ranges; errors name the key.
    pub fn validate(&self) -> crate::Result<()> {
        self.check()
            .map_err(|(k, m)| crate::Error::Argument(format!("select.{k}: {m}")))
    }

    /// Checks ranges; on failure the key inside `[select]` and the message.
    pub fn check(&self) -> Result<(), (String, String)> {
        let bad = |k: &str, why: &str| Err((k.to_string(), why.to_string()));
        if !(self.lag_window_s > 0.0 && self.lag_window_s <= 2.0) {
            return bad("lag_window_s", "must be in (0, 2] s");
        }
        if self.n_lag < 4 || self.n_pos < 4 {
            return bad(
                "n_lag",
                "cubic B-splines need at least 4 functions (n_lag and n_pos)",
            );
        }
        if self.n_baseline == 2 || self.n_baseline == 3 {
            return bad("n_baseline", "must be 0, 1 or at least 4");
        }
        if self.folds < 2 {
            return bad("folds", "needs at least 2");
        }
        if self.n_lambda < 2 {
            return bad("n_lambda", "needs at least 2");
        }
        if !(self.lambda_ratio > 0.0 && self.lambda_ratio < 1.0) {
            return bad("lambda_ratio", "must lie between 0 and 1");
        }
        for (k, v) in [("phi_s", &self.phi_s), ("phi_z", &self.phi_z)] {
            if v.is_empty() || v.iter().any(|x| !(*x >= 0.0 && x.is_finite())) {
                return bad(k, "needs one or more finite values ≥ 0");
            }
        }
        if self.stages == 0 {
            return bad("stages", "needs at least 1");
        }
        if !(0.0 < self.low_frequency
            && self.low_frequency <= self.high_frequency
            && self.high_frequency <= 1.0)
        {
            return bad(
                "high_frequency",
                "needs 0 < low_frequency ≤ high_frequency ≤ 1",
            );
        }
        if !(self.resample_block_s > 0.0) {
            return bad("resample_block_s", "must be positive");
        }
        if !(0.0..=1.0).contains(&self.alternate_correlation) {
            return bad("alternate_correlation", "must lie between 0 and 1");
        }
        if self.max_sites == 0 {
            return bad("max_sites", "needs at least 1");
        }
        if !(self.tol_gap > 0.0 && self.tol_gap < 1e-2) {
            return bad("tol_gap", "must lie between 0 and 0.01");
        }
        Ok(())
    }
}

impl crate::config::ConfigSection for SelectConfig {
    const NAME: &'static str = "select";
    const ABOUT: &'static str =
        "Per-DoF selection: the functional group-lasso model, its tuning by \
block cross-validation with the one-standard-error rule, staged adaptive refits, stability \
selection and alternates.";
    const KEYS: &'static [(&'static str, &'static str)] = &[
        (
            "lag_window_s",
            "Lag window delta in s over which each site's envelope acts on the velocity: \
electro-mechanical delay (about 30-100 ms; Cavanagh & Komi 1979) plus the build-up of force.",
        ),
        (
            "n_lag",
            "Cubic B-splines along the lag of each effect surface.",
        ),
        (
            "n_pos",
            "Cubic B-splines along the position of each effect surface.",
        ),
        (
            "n_baseline",
            "Cubic B-splines of the unpenalised position baseline a(z) (passive movement); \
0 = none, 1 = intercept only.",
        ),
        (
            "folds",
            "Contiguous cross-validation blocks in time, with a gap of one lag window on each \
side of the held-out block (h-block CV; Burman, Chow & Nolan 1994).",
        ),
        (
            "n_lambda",
            "Values on each log-spaced lambda path from lambda_max.",
        ),
        (
            "lambda_ratio",
            "Smallest lambda as a share of lambda_max (glmnet's convention).",
        ),
        (
            "phi_s",
            "Smoothing along the lag, relative to tr(M)/tr(P_s) so that it does not depend on \
the window length; log-spaced values tried in tuning.",
        ),
        (
            "phi_z",
            "Smoothing along the position, relative to tr(M)/tr(P_z); log-spaced values tried \
in tuning.",
        ),
        (
            "stages",
            "Largest number of stages: stage 1 with equal weights, then adaptive refits on the \
kept sites with weights 1/norm (adaptive lasso, Zou 2006).",
        ),
        (
            "resamples",
            "Moving-block bootstrap refits for the selection frequency (stability \
selection, Meinshausen & Buehlmann 2010).",
        ),
        (
            "resample_block_s",
            "Length in s of the bootstrap blocks (keeps the time dependence inside \
a block; Kuensch 1989).",
        ),
        (
            "high_frequency",
            "Selection frequency at or above which a pick has high confidence \
(Meinshausen & Buehlmann recommend thresholds of 0.6-0.9).",
        ),
        (
            "low_frequency",
            "Selection frequency below which a pick has low confidence; between the \
two it is medium and flagged for review.",
        ),
        (
            "alternate_correlation",
            "Smallest envelope correlation for an unselected site to be \
offered as an alternate (engineering judgement).",
        ),
        (
            "max_alternates",
            "Most alternates reported per selected site.",
        ),
        (
            "tol_gap",
            "Relative duality-gap tolerance of the group-lasso solver (the gap bounds the \
objective's distance to the optimum; 1e-6 is far below the spread of cross-validated errors).",
        ),
        (
            "max_sites",
            "The lambda path stops once the fit on all rows selects more than this many \
sites, like glmnet's dfmax; the minimum of the cross-validated error is then taken over the \
path up to that point.",
        ),
        ("seed", "Seed of the bootstrap resampling."),
    ];
}
