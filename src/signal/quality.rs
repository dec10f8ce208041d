//! Channel quality: measured figures per site and a verdict with reasons.
//!
//! | check | figure | verdict |
//! |---|---|---|
//! | flat / disconnected | RMS of the conditioned signal (absolute, and relative to the median site); share of samples equal to the one before | bad |
//! | clipped | share of samples in runs of ≥ `clip_min_run` at the channel's extreme values | suspect, bad when heavy |
//! | mains | hum fraction of the raw channel; the same after the notch | suspect; bad when the notch leaves it dominant |
//! | low signal-to-noise | 90th percentile of the envelope in the most active DoF's movement blocks over the median in rest blocks | suspect |
//! | motion artefact | share of windows whose low-frequency (1–10 Hz) RMS exceeds both the EMG-band RMS and 3× its median | suspect, bad when frequent |
//!
//! The thresholds are settings (`[signal.quality]`); their defaults are
//! engineering judgement (common practice, no source) unless a comment on
//! the setting names one. A flat channel is judged on that alone: the
//! other figures mean nothing without a signal.

use super::envelope::percentile;
use super::envelope::rms;
use super::filter::{butter_sos, sosfilt_inplace, sosfilt_zi, Band};
use crate::session::Block;
use serde::{Deserialize, Serialize};

/// Overall judgement of a site.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Verdict {
    /// Usable as is.
    Ok,
    /// Kept, but carried into the report's flags for review.
    Suspect,
    /// Excluded from selection.
    Bad,
}

impl Verdict {
    /// `ok`, `suspect` or `bad`.
    pub fn as_str(self) -> &'static str {
        match self {
            Verdict::Ok => "ok",
            Verdict::Suspect => "suspect",
            Verdict::Bad => "bad",
        }
    }
}

/// One finding behind a verdict, with the measured figure and the limit it crossed.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Reason {
    /// Short code: `flat`, `stuck`, `clipped`, `mains`, `mains-residual`, `low-snr`, `motion`.
    pub code: String,
    /// How serious this finding is.
    pub severity: Verdict,
    /// One sentence for the clinician, with the figure.
    pub message: String,
    /// The measured figure.
    pub value: f64,
    /// The limit it crossed.
    pub threshold: f64,
}

/// Everything measured on a site, whether or not it crossed a limit.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct Figures {
    /// RMS of the conditioned (band-passed, notched) signal, mV.
    pub rms_mv: f64,
    /// Share of samples equal to the sample before.
    pub stuck_fraction: f64,
    /// Share of samples in runs at the channel's extreme values.
    pub clipped_fraction: f64,
    /// Share of the raw in-band power that is mains hum.
    pub hum_fraction: Option<f64>,
    /// The same after conditioning.
    pub residual_hum_fraction: Option<f64>,
    /// Envelope in movement blocks over envelope at rest (amplitude ratio).
    pub activity_ratio: Option<f64>,
    /// Share of windows with a low-frequency burst.
    pub motion_fraction: Option<f64>,
}

/// The quality of one site.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SiteQuality {
    /// Site id.
    pub site: String,
    /// The worst severity among the reasons (`ok` without any).
    pub verdict: Verdict,
    /// The findings, in the order of the checks.
    pub reasons: Vec<Reason>,
    /// All measured figures.
    pub figures: Figures,
}

/// Thresholds of the quality checks (`[signal.quality]`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct QualityConfig {
    /// A conditioned RMS below this (mV) is flat.
    pub flat_rms_mv: f64,
    /// A conditioned RMS below this share of the median site's is flat.
    pub flat_relative: f64,
    /// A share of repeated samples above this is a stuck (flat) channel.
    pub stuck_fraction: f64,
    /// Shortest run at an extreme value that counts as clipping, samples.
    pub clip_min_run: usize,
    /// Clipped share that makes a site suspect.
    pub clip_suspect: f64,
    /// Clipped share that makes a site bad.
    pub clip_bad: f64,
    /// Peak-over-flank ratio at a mains harmonic that reveals mains (auto mode).
    pub mains_detect_ratio: f64,
    /// Hum fraction of the raw channel that makes a site suspect.
    pub mains_suspect: f64,
    /// Hum fraction left after the notch that makes a site bad.
    pub mains_bad: f64,
    /// Activity ratio below which a site is suspect (low signal-to-noise).
    pub snr_suspect: f64,
    /// Window for the motion check, s.
    pub motion_window_s: f64,
    /// Low-frequency over EMG-band RMS above which a window holds a burst.
    pub motion_ratio: f64,
    /// Share of burst windows that makes a site suspect.
    pub motion_suspect: f64,
    /// Share of burst windows that makes a site bad.
    pub motion_bad: f64,
    /// Most Welch segments used per channel for spectra.
    pub psd_segments: usize,
}

impl Default for QualityConfig {
    fn default() -> Self {
        QualityConfig {
            flat_rms_mv: 0.0005,
            flat_relative: 0.01,
            stuck_fraction: 0.5,
            clip_min_run: 3,
            clip_suspect: 0.001,
            clip_bad: 0.1,
            mains_detect_ratio: 4.0,
            mains_suspect: 0.5,
            mains_bad: 0.5,
            snr_suspect: 1.5,
            motion_window_s: 0.5,
            motion_ratio: 1.0,
            motion_suspect: 0.02,
            motion_bad: 0.25,
            psd_segments: 64,
        }
    }
}

/// Share of samples equal to the sample before, among the samples away from
/// the channel's extreme values (repeats at the rails are clipping, counted
/// by [`clipped_fraction`]); 1 for a constant channel, 0 for fewer than 2
/// samples.
pub fn stuck_fraction(x: &[f64]) -> f64 {
    if x.len() < 2 {
        return 0.0;
    }
    let (lo, hi) = extremes(x);
    if hi.is_nan() || lo.is_nan() || hi <= lo {
        return 1.0;
    }
    let tol = 1e-6 * (hi - lo);
    let inner = |v: f64| v < hi - tol && v > lo + tol;
    let (mut same, mut total) = (0usize, 0usize);
    for w in x.windows(2) {
        if inner(w[1]) {
            total += 1;
            same += usize::from(w[0] == w[1]);
        }
    }
    if total == 0 {
        return 0.0;
    }
    same as f64 / total as f64
}

fn extremes(x: &[f64]) -> (f64, f64) {
    x.iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
            (a.min(v), b.max(v))
        })
}

/// Share of samples lying in runs of at least `min_run` consecutive
/// samples within a millionth of the range of the channel's maximum or
/// minimum (the rails of a saturated amplifier or converter).
pub fn clipped_fraction(x: &[f64], min_run: usize) -> f64 {
    if x.is_empty() {
        return 0.0;
    }
    let (lo, hi) = extremes(x);
    let tol = 1e-6 * (hi - lo);
    if hi.is_nan() || lo.is_nan() || hi <= lo {
        return 0.0;
    }
    let min_run = min_run.max(1);
    let mut clipped = 0usize;
    let mut run = 0usize;
    let mut rail = 0i8;
    for &v in x {
        let r = if v >= hi - tol {
            1
        } else if v <= lo + tol {
            -1
        } else {
            0
        };
        if r != 0 && r == rail {
            run += 1;
        } else {
            if rail != 0 && run >= min_run {
                clipped += run;
            }
            rail = r;
            run = usize::from(r != 0);
        }
    }
    if rail != 0 && run >= min_run {
        clipped += run;
    }
    clipped as f64 / x.len() as f64
}

/// Share of `window_s` windows in which the raw channel's 1–10 Hz content
/// is a burst: its RMS exceeds `ratio` × the RMS of the conditioned signal
/// `y` in the same window, and 3× the median low-frequency RMS over the
/// windows. The low band comes from a causal 2nd-order Butterworth
/// band-pass of the raw signal at its own rate (no decimation, so no EMG
/// aliases into the band; phase does not matter for an RMS). `None` when
/// the recording is too short for two windows.
pub fn motion_fraction(raw: &[f64], y: &[f64], fs: f64, window_s: f64, ratio: f64) -> Option<f64> {
    let sos = motion_band(fs).ok()?;
    let mut lf = raw.to_vec();
    // Start from the steady state of the first sample so an offset does not ring.
    let x0 = raw.first().copied().unwrap_or(0.0);
    let mut zi: Vec<[f64; 2]> = sosfilt_zi(&sos)
        .into_iter()
        .map(|z| [z[0] * x0, z[1] * x0])
        .collect();
    sosfilt_inplace(&sos, &mut lf, &mut zi);
    motion_fraction_of_band(&lf, y, fs, window_s, ratio)
}

/// The low band of the motion check: 2nd-order Butterworth band-pass 1–10 Hz.
pub fn motion_band(fs: f64) -> crate::Result<super::filter::Sos> {
    butter_sos(2, Band::Bandpass(1.0, 10.0), fs)
}

/// [`motion_fraction`] from the low band `lf` already filtered (by
/// [`motion_band`], causally from the steady state of the first sample).
pub fn motion_fraction_of_band(
    lf: &[f64],
    y: &[f64],
    fs: f64,
    window_s: f64,
    ratio: f64,
) -> Option<f64> {
    let per = ((window_s * fs).round() as usize).max(1);
    let windows = lf.len().min(y.len()) / per;
    if windows < 2 {
        return None;
    }
    let lrms: Vec<f64> = lf.chunks_exact(per).take(windows).map(rms).collect();
    let erms: Vec<f64> = y.chunks_exact(per).take(windows).map(rms).collect();
    let med = percentile(&lrms, 50.0);
    let bursts = lrms
        .iter()
        .zip(&erms)
        .filter(|(&l, &e)| l > ratio * e && l > 3.0 * med)
        .count();
    Some(bursts as f64 / windows as f64)
}

/// Activity ratio of one envelope on the feature grid: for each DoF label
/// of the movement blocks, the 90th percentile of the envelope inside its
/// blocks; the largest of these over the median envelope inside rest
/// blocks (the 10th percentile of the whole envelope when there is no rest
/// block). `None` without movement blocks or with a zero rest level.
pub fn activity_ratio(time_s: &[f64], env: &[f64], blocks: &[Block]) -> Option<f64> {
    let inside = |b: &Block| -> Vec<f64> {
        time_s
            .iter()
            .zip(env)
            .filter(|(&t, _)| t >= b.start_s && t < b.end_s)
            .map(|(_, &e)| e)
            .collect()
    };
    let rest: Vec<f64> = blocks
        .iter()
        .filter(|b| b.is_rest())
        .flat_map(inside)
        .collect();
    let rest_level = if rest.is_empty() {
        percentile(env, 10.0)
    } else {
        percentile(&rest, 50.0)
    };
    let mut labels: Vec<&str> = blocks
        .iter()
        .filter(|b| !b.is_rest())
        .map(|b| b.dof_label())
        .collect();
    labels.sort_unstable();
    labels.dedup();
    let best = labels
        .iter()
        .filter_map(|&l| {
            let v: Vec<f64> = blocks
                .iter()
                .filter(|b| !b.is_rest() && b.dof_label() == l)
                .flat_map(inside)
                .collect();
            (!v.is_empty()).then(|| percentile(&v, 90.0))
        })
        .fold(f64::NAN, f64::max);
    (best.is_finite() && rest_level > 0.0).then(|| best / rest_level)
}

fn reason(code: &str, severity: Verdict, message: String, value: f64, threshold: f64) -> Reason {
    Reason {
        code: code.to_string(),
        severity,
        message,
        value,
        threshold,
    }
}

/// Verdict and reasons from the figures; `median_rms_mv` is the median
/// conditioned RMS over all sites of the session.
pub fn judge(site: &str, figures: Figures, median_rms_mv: f64, cfg: &QualityConfig) -> SiteQuality {
    use Verdict::*;
    let f = &figures;
    let mut reasons = Vec::new();
    let rel_limit = cfg.flat_relative * median_rms_mv;
    if f.rms_mv < cfg.flat_rms_mv {
        reasons.push(reason(
            "flat",
            Bad,
            format!(
                "signal RMS {:.2} µV is below {:.2} µV: no signal (disconnected or dead electrode)",
                f.rms_mv * 1e3,
                cfg.flat_rms_mv * 1e3
            ),
            f.rms_mv,
            cfg.flat_rms_mv,
        ));
    } else if f.rms_mv < rel_limit {
        reasons.push(reason(
            "flat",
            Bad,
            format!(
                "signal RMS {:.2} µV is below {:.0}% of the median site ({:.2} µV): nearly flat",
                f.rms_mv * 1e3,
                cfg.flat_relative * 100.0,
                median_rms_mv * 1e3
            ),
            f.rms_mv,
            rel_limit,
        ));
    }
    if f.stuck_fraction > cfg.stuck_fraction {
        reasons.push(reason(
            "stuck",
            Bad,
            format!(
                "{:.1}% of samples repeat the previous value: the channel is stuck",
                f.stuck_fraction * 100.0
            ),
            f.stuck_fraction,
            cfg.stuck_fraction,
        ));
    }
    if !reasons.is_empty() {
        return SiteQuality {
            site: site.to_string(),
            verdict: Bad,
            reasons,
            figures,
        };
    }
    if f.clipped_fraction >= cfg.clip_suspect {
        let (sev, thr) = if f.clipped_fraction >= cfg.clip_bad {
            (Bad, cfg.clip_bad)
        } else {
            (Suspect, cfg.clip_suspect)
        };
        reasons.push(reason(
            "clipped",
            sev,
            format!(
                "{:.2}% of samples sit at the rails (limit {:.2}%): the amplifier saturates",
                f.clipped_fraction * 100.0,
                thr * 100.0
            ),
            f.clipped_fraction,
            thr,
        ));
    }
    if let Some(h) = f.hum_fraction.filter(|&h| h >= cfg.mains_suspect) {
        reasons.push(reason(
            "mains",
            Suspect,
            format!(
                "mains hum is {:.0}% of the raw in-band power (limit {:.0}%): check the electrode contact and reference",
                h * 100.0,
                cfg.mains_suspect * 100.0
            ),
            h,
            cfg.mains_suspect,
        ));
    }
    if let Some(h) = f.residual_hum_fraction.filter(|&h| h >= cfg.mains_bad) {
        reasons.push(reason(
            "mains-residual",
            Bad,
            format!(
                "after the notch, mains hum is still {:.0}% of the power (limit {:.0}%)",
                h * 100.0,
                cfg.mains_bad * 100.0
            ),
            h,
            cfg.mains_bad,
        ));
    }
    if let Some(r) = f.activity_ratio.filter(|&r| r < cfg.snr_suspect) {
        reasons.push(reason(
            "low-snr",
            Suspect,
            format!(
                "activity during movement is only {r:.2}× the rest level (limit {:.2}×)",
                cfg.snr_suspect
            ),
            r,
            cfg.snr_suspect,
        ));
    }
    if let Some(m) = f.motion_fraction.filter(|&m| m >= cfg.motion_suspect) {
        let (sev, thr) = if m >= cfg.motion_bad {
            (Bad, cfg.motion_bad)
        } else {
            (Suspect, cfg.motion_suspect)
        };
        reasons.push(reason(
            "motion",
            sev,
            format!(
                "low-frequency bursts in {:.1}% of {} s windows (limit {:.1}%): motion artefact or loose electrode",
                m * 100.0,
                cfg.motion_window_s,
                thr * 100.0
            ),
            m,
            thr,
        ));
    }
    let verdict = reasons.iter().map(|r| r.severity).max().unwrap_or(Ok);
    SiteQuality {
        site: site.to_string(),
        verdict,
        reasons,
        figures,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clipping_counts_runs_at_rails_only() {
        let mut x: Vec<f64> = (0..1000).map(|i| (i as f64 * 0.37).sin()).collect();
        assert!(clipped_fraction(&x, 3) < 0.01);
        for v in x.iter_mut() {
            *v = v.clamp(-0.5, 0.5);
        }
        let c = clipped_fraction(&x, 3);
        assert!(c > 0.5, "{c}");
    }

    #[test]
    fn stuck_channel() {
        assert_eq!(stuck_fraction(&[1.0; 10]), 1.0);
        assert_eq!(stuck_fraction(&[1.0, 2.0, 3.0]), 0.0);
        // Repeats at the rails are clipping, not a stuck channel.
        assert_eq!(
            stuck_fraction(&[0.0, 1.0, 1.0, 1.0, 0.5, 0.0, 0.0, 0.2]),
            0.0
        );
        assert!((stuck_fraction(&[0.0, 0.5, 0.5, 0.5, 1.0]) - 2.0 / 3.0).abs() < 1e-12);
    }

    #[test]
    fn verdict_is_worst_reason() {
        let cfg = QualityConfig::default();
        let f = Figures {
            rms_mv: 0.1,
            clipped_fraction: 0.01,
            activity_ratio: Some(1.2),
            ..Default::default()
        };
        let q = judge("a", f, 0.1, &cfg);
        assert_eq!(q.verdict, Verdict::Suspect);
        let codes: Vec<&str> = q.reasons.iter().map(|r| r.code.as_str()).collect();
        assert_eq!(codes, ["clipped", "low-snr"]);
        let flat = judge("b", Figures::default(), 0.1, &cfg);
        assert_eq!(flat.verdict, Verdict::Bad);
        assert_eq!(flat.reasons[0].code, "flat");
    }
}
