//! Settings of the alignment stage (the `align` section of the analysis configuration).

use crate::config::ConfigSection;
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
    /// Rounds of the continuous refinement after DTW (0: the smoothed DTW map only).
    pub refine_rounds: usize,
    /// Gauss–Newton iterations per refinement round.
    pub refine_iterations: usize,
    /// Knot spacing of the refined lag spline, s.
    pub refine_knot_s: f64,
    /// Half-gain period of the roughness penalty of the refined lag's base, s.
    pub refine_period_s: f64,
    /// The same in blocks of free movement (task `free`), s.
    pub refine_period_free_s: f64,
    /// Tukey biweight constant of the refinement's robust weights, in robust residual scales.
    pub robust_c: f64,
    /// Whether the refinement refits the intact features' weights (effort
    /// and holding) jointly with the lag, instead of keeping those fitted
    /// through the DTW map.
    pub refine_weights: bool,
    /// Whether the refined lag has a direction part per moving DoF (a lag
    /// that differs between the two directions of movement and returns to
    /// its base while the DoF is still).
    pub direction_lag: bool,
    /// Width of the moving average that smooths a DoF's direction of movement, s.
    pub direction_smooth_s: f64,
    /// Intact-side speed at which a DoF's direction counts in full, deg/s.
    pub direction_speed_dps: f64,
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
            refine_rounds: 3,
            refine_iterations: 12,
            refine_knot_s: 0.1,
            refine_period_s: 8.0,
            refine_period_free_s: 3.0,
            robust_c: 4.685,
            refine_weights: true,
            direction_lag: true,
            direction_smooth_s: 0.3,
            direction_speed_dps: 10.0,
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

    /// Checks ranges; on failure the key (inside the section) and what is wrong.
    pub fn check(&self) -> Result<(), (String, String)> {
        let pos = |v: f64, name: &str| {
            if v.is_finite() && v > 0.0 {
                Ok(())
            } else {
                Err((
                    name.to_string(),
                    format!("must be a positive number, got {v}"),
                ))
            }
        };
        pos(self.band_s, "band_s")?;
        pos(self.smooth_s, "smooth_s")?;
        pos(self.feature_smooth_s, "feature_smooth_s")?;
        pos(self.kinematics_smooth_s, "kinematics_smooth_s")?;
        if !(self.max_slope.is_finite() && self.max_slope > 1.0) {
            return Err((
                "max_slope".into(),
                format!("must be above 1, got {}", self.max_slope),
            ));
        }
        if !(self.emd_s.is_finite() && (0.0..=0.3).contains(&self.emd_s)) {
            return Err((
                "emd_s".into(),
                format!("must lie in 0..0.3 s, got {}", self.emd_s),
            ));
        }
        if !(self.side_penalty.is_finite() && self.side_penalty >= 0.0) {
            return Err(("side_penalty".into(), "must be a number ≥ 0".into()));
        }
        if let Some(m) = self.margin_s {
            if !(m.is_finite() && m >= 0.0) {
                return Err(("margin_s".into(), "must be a number ≥ 0".into()));
            }
        }
        if self.rounds == 0 {
            return Err(("rounds".into(), "must be at least 1".into()));
        }
        pos(self.refine_knot_s, "refine_knot_s")?;
        pos(self.refine_period_s, "refine_period_s")?;
        pos(self.refine_period_free_s, "refine_period_free_s")?;
        pos(self.robust_c, "robust_c")?;
        pos(self.direction_smooth_s, "direction_smooth_s")?;
        pos(self.direction_speed_dps, "direction_speed_dps")?;
        if self.refine_rounds > 0 && self.refine_iterations == 0 {
            return Err((
                "refine_iterations".into(),
                "must be at least 1 when refine_rounds is above 0".into(),
            ));
        }
        self.quality
            .check()
            .map_err(|(k, m)| (format!("quality.{k}"), m))
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
    fn check(&self) -> Result<(), (String, String)> {
        let unit = |v: f64, name: &str| {
            if v.is_finite() && (0.0..=1.0).contains(&v) {
                Ok(())
            } else {
                Err((name.to_string(), format!("must lie in 0..1, got {v}")))
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
            return Err(("fail_corr".into(), "must not exceed ok_corr".into()));
        }
        Ok(())
    }
}

impl ConfigSection for AlignConfig {
    const NAME: &'static str = "align";
    const ABOUT: &'static str = "Time-warping the intact-side kinematics onto the EMG clock: \
band, slope limit, expected electro-mechanical delay, map smoothing and the block verdict.";
    const KEYS: &'static [(&'static str, &'static str)] = &[
        ("band_s", "Largest plausible mirroring lag in s: the Sakoe-Chiba band of the DTW is +- this. No published mirrored-training lag found (FACTS.md section 4); 0.5 s covers delayed-feedback studies (Imaizumi et al. 2014)."),
        ("max_slope", "Largest local slope of the warp (its inverse the smallest): 2.0 is Sakoe & Chiba's symmetric P = 1 pattern (1978), 1.5 is P = 2."),
        ("emd_s", "Expected electro-mechanical delay in s: the EMG is shifted later by this before matching, so the aligned intact time is that of the intended posture. Literature 30-100 ms (Cavanagh & Komi 1979; FACTS.md section 2)."),
        ("margin_s", "Context on each side of a block in s (default band_s / (max_slope - 1)): room for the path to settle."),
        ("smooth_s", "Half-gain period in s of the Whittaker smoother that turns the DTW path into the map (Eilers 2003). Common practice, no source."),
        ("feature_smooth_s", "Moving-average width in s applied to both sides' alignment features. Common practice, no source."),
        ("kinematics_smooth_s", "Gaussian sigma in s of the local linear smoother of the intact angles (damps glove noise in the velocity). Common practice, no source."),
        ("min_speed_dps", "RMS intact speed in deg/s below which a DoF counts as still in a block. Common practice, no source."),
        ("side_penalty", "Cost added to each compression or expansion step of the DTW (in standardised squared feature units), so the path leaves the diagonal only where the features pay for it; as dtaidistance's penalty squared. Tuned on simulated sessions."),
        ("rounds", "Fit-warp rounds: composites refitted through the map and warped again."),
        ("refine_rounds", "Rounds of the continuous lag refinement after DTW (composites refitted through the current map with the speed on the EMG clock, then the lag and the intact features' weights fitted to them by penalised Gauss-Newton); 0 keeps the smoothed DTW map. 3 measured best on the simulated accuracy scenarios (median over the drift, offset and direction scenarios 7.8-14.1 ms with 1 round, 8.1-13.6 ms with 3; 90th percentile on the direction scenario 35.4 and 29.8 ms)."),
        ("refine_iterations", "Gauss-Newton iterations per refinement round (Levenberg-damped; Nocedal & Wright 2006, ch. 10)."),
        ("refine_knot_s", "Knot spacing in s of the cubic B-spline lag curve of the refinement."),
        ("refine_period_s", "Half-gain period in s of the second-difference penalty on the base of the refined lag (P-splines, Eilers & Marx 1996) in paced and hold-release blocks: base changes faster than this are damped, holds are bridged from the moves on either side; changes with the direction of movement go to the direction part. In a steady oscillation a faster base would trade with the feature weights (a constant timing error hides in the mix of speed and displacement), and across holds it would bend with nothing to hold it. Chosen on the simulated accuracy scenarios (8 s; 3-5 s lose the direction scenario's 90th percentile, 1.5 s everywhere loses the hold-release blocks)."),
        ("refine_period_free_s", "The same in blocks of free movement (task free): varied, continuous movement pins the timing well, so the base may follow faster changes there. Chosen on the simulated scenarios over seeds 1-8 and the demo: 3 s met the target in 18 of 24 scenario sessions and on the demo (14.8 / 32.1 ms); 8 s in 19 of 24 but not on the demo (19.7 / 35.5 ms); 1.5 s in 16 of 24 (demo 11.6 / 33.1 ms)."),
        ("refine_weights", "Refit the intact features' weights (effort per position, holding, intercept) jointly with the lag in the refinement; false keeps those fitted through the DTW map, which keep part of that map's error."),
        ("direction_lag", "Give the lag a part that follows the direction of the hand's movement (lag = base + eta while flexing, base - eta while extending, base while still), with eta pooled over the session's blocks by their information; alignment.json reports it as direction_lag_s."),
        ("direction_smooth_s", "Moving-average width in s that smooths the direction of movement (+1 flexing, -1 extending): how gradually the direction part switches at a reversal. 0.3 and 0.5 s measured alike on the simulated scenarios."),
        ("direction_speed_dps", "Intact speed in deg/s from which a DoF's direction counts in full; slower movement counts in proportion. Common practice, no source."),
        ("robust_c", "Tukey biweight constant (in robust residual scales) of the refinement's weights: samples the EMG cannot explain, such as a passive return after a hold, drop out. 4.685 is the usual 95%-efficiency value (Beaton & Tukey 1974)."),
        ("quality", "Thresholds of the per-block verdict ok / doubtful / failed."),
        ("quality.fail_corr", "Feature correlation after warping below which a block fails."),
        ("quality.ok_corr", "Feature correlation after warping below which a block is doubtful."),
        ("quality.min_excess_over_null", "A block fails unless warping onto its own intact side beats warping onto an unrelated, time-shifted stretch of it by this much correlation (a block that was not mirrored matches no better than chance)."),
        ("quality.min_gain", "Correlation gain below which warping is said to gain nothing (doubtful)."),
        ("quality.already_aligned_corr", "Correlation before warping at or above which a small gain is no concern."),
        ("quality.max_share_at_limit", "Share of the block at the slope limits above which it is doubtful."),
        ("quality.band_edge_share", "Median lag beyond this share of the band: doubtful (the true lag may lie outside)."),
    ];
}
