//! Settings of the alignment stage (the `align` section of the analysis configuration).

use serde::{Deserialize, Serialize};

/// Alignment settings. Every key has a default, so an empty section is valid.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct AlignConfig {
    /// Largest plausible mirroring lag, s: the Sakoe–Chiba band is ±this on the feature grid.
    pub band_s: f64,
    /// Largest local slope of the warp (and 1/this the smallest): how much
    /// faster or slower one side may move than the other over a short stretch.
    /// 2.0 gives Sakoe–Chiba's symmetric P = 1 pattern, 1.5 gives P = 2.
    pub max_slope: f64,
    /// Expected electro-mechanical delay, s: EMG activity is shifted later by
    /// this before it is matched with intact-side movement, so that the
    /// aligned intact time is that of the intended posture. FACTS.md §2:
    /// literature values about 30–100 ms, design centre 50–80 ms.
    pub emd_s: f64,
    /// Context added on both sides of each block before warping, s, so the
    /// path can settle before the block starts (defaults to the band width
    /// divided by (max_slope − 1) when absent).
    pub margin_s: Option<f64>,
    /// Smoothing period of the warp map, s (Whittaker smoother cut-off period).
    pub smooth_s: f64,
    /// Moving-average width applied to the alignment features, s.
    pub feature_smooth_s: f64,
    /// Width (Gaussian σ) of the local linear smoother of the intact angles, s.
    pub kinematics_smooth_s: f64,
    /// Intact-side speed below which a DoF is taken as still in a block, deg/s (RMS over the block).
    pub min_speed_dps: f64,
    /// Cost added to each compression or expansion step of the warp path, in
    /// units of the standardised squared feature difference: the path leaves
    /// the diagonal only where the features pay for it, not to chase envelope noise.
    pub side_penalty: f64,
    /// Number of fit–warp rounds (composite activation refitted on the warped intact side).
    pub rounds: usize,
    /// Quality thresholds.
    pub quality: QualityThresholds,
}

impl Default for AlignConfig {
    fn default() -> Self {
        AlignConfig {
            band_s: 0.5,
            max_slope: 2.0,
            emd_s: 0.06,
            margin_s: None,
            smooth_s: 0.3,
            feature_smooth_s: 0.05,
            kinematics_smooth_s: 0.03,
            min_speed_dps: 5.0,
            side_penalty: 1.0,
            rounds: 3,
            quality: QualityThresholds::default(),
        }
    }
}

impl AlignConfig {
    /// Context on each side of a block, s.
    pub fn margin(&self) -> f64 {
        self.margin_s
            .unwrap_or_else(|| self.band_s / (self.max_slope - 1.0).max(0.25))
            .max(0.0)
    }

    /// Checks ranges; returns what is wrong, if anything.
    pub fn check(&self) -> Result<(), String> {
        let pos = |v: f64, name: &str| {
            if v.is_finite() && v > 0.0 {
                Ok(())
            } else {
                Err(format!("align.{name} must be a positive number, got {v}"))
            }
        };
        pos(self.band_s, "band_s")?;
        pos(self.smooth_s, "smooth_s")?;
        pos(self.feature_smooth_s, "feature_smooth_s")?;
        pos(self.kinematics_smooth_s, "kinematics_smooth_s")?;
        if !(self.max_slope.is_finite() && self.max_slope > 1.0) {
            return Err(format!(
                "align.max_slope must be above 1, got {}",
                self.max_slope
            ));
        }
        if !(self.emd_s.is_finite() && (0.0..=0.3).contains(&self.emd_s)) {
            return Err(format!(
                "align.emd_s must lie in 0..0.3 s, got {}",
                self.emd_s
            ));
        }
        if self.rounds == 0 {
            return Err("align.rounds must be at least 1".into());
        }
        self.quality.check()
    }
}

/// Thresholds of the per-block verdict (see [`crate::align::quality`]).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct QualityThresholds {
    /// Feature correlation after warping below which a block fails.
    pub fail_corr: f64,
    /// Feature correlation after warping below which a block is doubtful.
    pub ok_corr: f64,
    /// A block fails unless warping to its own intact side beats warping to
    /// time-shifted (unrelated) stretches of it by at least this much correlation.
    pub min_excess_over_null: f64,
    /// Gain in correlation below which warping is said to gain nothing (doubtful).
    pub min_gain: f64,
    /// Correlation before warping at or above which a small gain is no concern.
    pub already_aligned_corr: f64,
    /// Share of the block at the slope limits above which it is doubtful.
    pub max_share_at_limit: f64,
    /// Median lag closer to the band edge than this share of the band: doubtful.
    pub band_edge_share: f64,
}

impl Default for QualityThresholds {
    fn default() -> Self {
        QualityThresholds {
            fail_corr: 0.5,
            ok_corr: 0.75,
            min_excess_over_null: 0.3,
            min_gain: 0.02,
            already_aligned_corr: 0.9,
            max_share_at_limit: 0.25,
            band_edge_share: 0.9,
        }
    }
}

impl QualityThresholds {
    fn check(&self) -> Result<(), String> {
        let unit = |v: f64, name: &str| {
            if v.is_finite() && (0.0..=1.0).contains(&v) {
                Ok(())
            } else {
                Err(format!("align.quality.{name} must lie in 0..1, got {v}"))
            }
        };
        unit(self.fail_corr, "fail_corr")?;
        unit(self.ok_corr, "ok_corr")?;
        unit(self.min_excess_over_null, "min_excess_over_null")?;
        unit(self.min_gain.abs(), "min_gain")?;
        unit(self.already_aligned_corr, "already_aligned_corr")?;
        unit(self.max_share_at_limit, "max_share_at_limit")?;
        unit(self.band_edge_share, "band_edge_share")?;
        if self.fail_corr > self.ok_corr {
            return Err("align.quality.fail_corr must not exceed ok_corr".into());
        }
        Ok(())
    }
}
