//! Per-block alignment quality: figures and a verdict with reasons.
//!
//! The verdict rules (thresholds in [`QualityThresholds`]):
//! - `failed` when the feature correlation after warping is below
//!   `fail_corr`, or when warping onto the block's own intact side does not
//!   beat warping onto unrelated, time-shifted stretches of it (the null) by
//!   `min_excess_over_null`: DTW can make any two signals look alike, so a
//!   block that was not mirrored is recognised by matching no better than
//!   chance. Failed blocks are left out of fitting.
//! - `doubtful` when the correlation after warping is below `ok_corr`; when
//!   warping gains less than `min_gain` although the sides were not already
//!   aligned (correlation before below `already_aligned_corr`); when more
//!   than `max_share_at_limit` of the block runs at the slope limits; or when
//!   the median lag sits at the band edge (the true lag may lie beyond it).
//! - `ok` otherwise.

use super::config::QualityThresholds;
use serde::{Deserialize, Serialize};

/// The verdict on one block.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Verdict {
    /// Trusted.
    Ok,
    /// Used, but flagged for review.
    Doubtful,
    /// Not trusted: left out of fitting.
    Failed,
}

impl Verdict {
    /// `ok`, `doubtful` or `failed`.
    pub fn as_str(self) -> &'static str {
        match self {
            Verdict::Ok => "ok",
            Verdict::Doubtful => "doubtful",
            Verdict::Failed => "failed",
        }
    }
}

/// Figures of one block's alignment.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Figures {
    /// Median lag (intact time − EMG time, both on the EMG clock), s.
    pub lag_median_s: f64,
    /// Interquartile range of the lag, s.
    pub lag_iqr_s: f64,
    /// 10th and 90th percentiles of the lag, s.
    pub lag_p10_p90_s: [f64; 2],
    /// Feature correlation before warping (identity map, EMG shifted by the expected EMD).
    pub corr_before: f64,
    /// Feature correlation after warping.
    pub corr_after: f64,
    /// Best correlation after warping onto unrelated (time-shifted) intact stretches; NaN if not computed.
    pub corr_null: f64,
    /// Share of the block's warp path at the slope limits.
    pub share_at_limit: f64,
}

/// Applies the rules of the module docs; `band_s` is the band half-width.
pub fn judge(f: &Figures, th: &QualityThresholds, band_s: f64) -> (Verdict, Vec<String>) {
    let mut failed = Vec::new();
    let mut doubt = Vec::new();
    if f.corr_after.is_nan() {
        failed.push(format!(
            "no intact feature matches the EMG: every composite activation correlates with its feature below {}",
            super::block::MIN_FEATURE_CORR
        ));
    } else if !f.corr_after.is_finite() || f.corr_after < th.fail_corr {
        failed.push(format!(
            "feature correlation after warping {:.2} is below {:.2}: the sides do not match",
            f.corr_after, th.fail_corr
        ));
    }
    if f.corr_null.is_finite() && f.corr_after - f.corr_null < th.min_excess_over_null {
        failed.push(format!(
            "warping matches the block's own intact side ({:.2}) hardly better than unrelated stretches of it ({:.2}): not mirrored",
            f.corr_after, f.corr_null
        ));
    }
    if failed.is_empty() {
        if f.corr_after < th.ok_corr {
            doubt.push(format!(
                "feature correlation after warping {:.2} is below {:.2}",
                f.corr_after, th.ok_corr
            ));
        }
        let gain = f.corr_after - f.corr_before;
        if gain < th.min_gain && f.corr_before < th.already_aligned_corr {
            doubt.push(format!(
                "warping gains nothing (correlation {:.2} before, {:.2} after)",
                f.corr_before, f.corr_after
            ));
        }
        if f.share_at_limit > th.max_share_at_limit {
            doubt.push(format!(
                "{:.0}% of the block runs at the slope limits",
                100.0 * f.share_at_limit
            ));
        }
        if f.lag_median_s.abs() > th.band_edge_share * band_s {
            doubt.push(format!(
                "median lag {:.3} s is at the band edge (±{band_s} s); the true lag may lie beyond it",
                f.lag_median_s
            ));
        }
    }
    if !failed.is_empty() {
        (Verdict::Failed, failed)
    } else if !doubt.is_empty() {
        (Verdict::Doubtful, doubt)
    } else {
        (Verdict::Ok, Vec::new())
    }
}

/// Pearson correlation of two equal-length series (NaN when either is constant).
pub fn pearson(a: &[f64], b: &[f64]) -> f64 {
    let n = a.len().min(b.len());
    if n < 2 {
        return f64::NAN;
    }
    let ma = a[..n].iter().sum::<f64>() / n as f64;
    let mb = b[..n].iter().sum::<f64>() / n as f64;
    let (mut sab, mut saa, mut sbb) = (0.0, 0.0, 0.0);
    for (x, y) in a[..n].iter().zip(&b[..n]) {
        sab += (x - ma) * (y - mb);
        saa += (x - ma) * (x - ma);
        sbb += (y - mb) * (y - mb);
    }
    if saa <= 0.0 || sbb <= 0.0 {
        return f64::NAN;
    }
    sab / (saa * sbb).sqrt()
}

/// The q-quantile (0 ≤ q ≤ 1) of `v` by linear interpolation between order statistics.
pub fn quantile(v: &[f64], q: f64) -> f64 {
    let mut s: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
    if s.is_empty() {
        return f64::NAN;
    }
    s.sort_by(f64::total_cmp);
    let pos = q.clamp(0.0, 1.0) * (s.len() - 1) as f64;
    let k = pos.floor() as usize;
    let f = pos - k as f64;
    if k + 1 < s.len() {
        s[k] * (1.0 - f) + s[k + 1] * f
    } else {
        s[k]
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn figs() -> Figures {
        Figures {
            lag_median_s: 0.12,
            lag_iqr_s: 0.05,
            lag_p10_p90_s: [0.05, 0.2],
            corr_before: 0.55,
            corr_after: 0.92,
            corr_null: 0.45,
            share_at_limit: 0.02,
        }
    }

    #[test]
    fn verdicts_follow_the_rules() {
        let th = QualityThresholds::default();
        assert_eq!(judge(&figs(), &th, 0.5).0, Verdict::Ok);
        let f = Figures {
            corr_after: 0.4,
            ..figs()
        };
        assert_eq!(judge(&f, &th, 0.5).0, Verdict::Failed);
        // Not better than the null: failed even with a high correlation.
        let f = Figures {
            corr_after: 0.8,
            corr_null: 0.75,
            ..figs()
        };
        let (v, why) = judge(&f, &th, 0.5);
        assert_eq!(v, Verdict::Failed);
        assert!(why[0].contains("not mirrored"));
        // Warping gains nothing.
        let f = Figures {
            corr_before: 0.8,
            corr_after: 0.81,
            ..figs()
        };
        assert_eq!(judge(&f, &th, 0.5).0, Verdict::Doubtful);
        // ... unless the sides were already aligned.
        let f = Figures {
            corr_before: 0.95,
            corr_after: 0.955,
            ..figs()
        };
        assert_eq!(judge(&f, &th, 0.5).0, Verdict::Ok);
        let f = Figures {
            share_at_limit: 0.4,
            ..figs()
        };
        assert_eq!(judge(&f, &th, 0.5).0, Verdict::Doubtful);
        let f = Figures {
            lag_median_s: -0.48,
            ..figs()
        };
        assert_eq!(judge(&f, &th, 0.5).0, Verdict::Doubtful);
    }

    #[test]
    fn statistics() {
        assert!(
            (pearson(&[1.0, 2.0, 3.0], &[2.0, 4.0, 6.5]) - 0.997_948_715_788_673).abs() < 1e-12
        ); // numpy.corrcoef
        assert!(pearson(&[1.0, 1.0], &[1.0, 2.0]).is_nan());
        assert_eq!(quantile(&[3.0, 1.0, 2.0, 4.0], 0.5), 2.5);
        assert_eq!(quantile(&[3.0, 1.0, 2.0, 4.0], 1.0), 4.0);
    }
}
