//! Amplitude envelopes, resampling onto the feature grid, and normalisation.
//!
//! Two estimators of EMG amplitude (FACTS.md: band-pass → full-wave
//! rectification → low-pass, the "linear envelope", or a moving RMS;
//! Rose, KAAP686 notes; Biomedical Engineering and Design Handbook,
//! Eqs 7.4–7.5):
//!
//! - linear envelope: `e(t) = (h_LP ⋆ |x|)(t)` with a zero-phase
//!   Butterworth low-pass `h_LP`;
//! - moving RMS: `e(t) = sqrt( (1/|W|) Σ_{t_i ∈ W(t)} x(t_i)² )` over a
//!   window `W(t)` of the given length centred on t.

use super::filter::{sosfiltfilt_into, Sos};
use crate::error::Result;

/// The feature grid on the EMG clock: `t_first + j/rate` for every j with
/// the time not after `t_last`.
pub fn feature_grid(t_first: f64, t_last: f64, rate_hz: f64) -> Vec<f64> {
    if t_last.partial_cmp(&t_first).is_none_or(|o| o.is_lt()) || rate_hz.is_nan() || rate_hz <= 0.0
    {
        return Vec::new();
    }
    // A tolerance of a millionth of a frame keeps the last frame when the
    // span is a whole number of frames up to rounding.
    let frames = ((t_last - t_first) * rate_hz + 1e-6).floor() as usize + 1;
    (0..frames).map(|j| t_first + j as f64 / rate_hz).collect()
}

/// Values of the samples `(t, y)` (t increasing) at the times `at`
/// (increasing) by linear interpolation, constant beyond the ends.
pub fn interpolate(t: &[f64], y: &[f64], at: &[f64]) -> Vec<f64> {
    let n = t.len().min(y.len());
    if n == 0 {
        return vec![f64::NAN; at.len()];
    }
    let mut i = 0;
    at.iter()
        .map(|&x| {
            while i + 1 < n && t[i + 1] <= x {
                i += 1;
            }
            if x <= t[0] {
                y[0]
            } else if i + 1 >= n {
                y[n - 1]
            } else {
                let w = (x - t[i]) / (t[i + 1] - t[i]);
                y[i] + w * (y[i + 1] - y[i])
            }
        })
        .collect()
}

/// Linear envelope of a band-passed signal `x`: full-wave rectification
/// then zero-phase low-pass `lowpass`, at the signal's own samples.
/// `scratch` is reused between calls.
pub fn linear_envelope(
    x: &[f64],
    lowpass: &Sos,
    scratch: &mut Vec<f64>,
    out: &mut Vec<f64>,
) -> Result<()> {
    scratch.clear();
    scratch.extend(x.iter().map(|v| v.abs()));
    sosfiltfilt_into(lowpass, scratch, out)?;
    // A low-pass of a non-negative signal can undershoot zero slightly
    // after steep bursts; an amplitude is never negative.
    for v in out.iter_mut() {
        *v = v.max(0.0);
    }
    Ok(())
}

/// Zero-phase moving average over `w` samples (odd; 1 leaves `x` unchanged),
/// by prefix sums; near the ends the window shrinks to the samples present.
pub fn moving_average(x: &[f64], w: usize) -> Vec<f64> {
    let n = x.len();
    let h = w / 2;
    if h == 0 || n == 0 {
        return x.to_vec();
    }
    let mut prefix = vec![0.0; n + 1];
    for i in 0..n {
        prefix[i + 1] = prefix[i] + x[i];
    }
    (0..n)
        .map(|i| {
            let a = i.saturating_sub(h);
            let b = (i + h + 1).min(n);
            (prefix[b] - prefix[a]) / (b - a) as f64
        })
        .collect()
}

/// Root mean square of `x`: `sqrt(Σ x² / n)` (0 for an empty slice).
pub fn rms(x: &[f64]) -> f64 {
    if x.is_empty() {
        return 0.0;
    }
    (x.iter().map(|v| v * v).sum::<f64>() / x.len() as f64).sqrt()
}

/// Moving RMS of samples `(t, x)` over windows of `window_s` seconds
/// centred on each time in `at` (increasing). Windows are cut at the ends
/// of the recording; a window holding no sample takes the nearest sample.
pub fn moving_rms(t: &[f64], x: &[f64], at: &[f64], window_s: f64) -> Vec<f64> {
    let n = t.len().min(x.len());
    if n == 0 {
        return vec![f64::NAN; at.len()];
    }
    let mut prefix = Vec::with_capacity(n + 1);
    prefix.push(0.0);
    let mut acc = 0.0;
    for v in &x[..n] {
        acc += v * v;
        prefix.push(acc);
    }
    let half = window_s / 2.0;
    let (mut lo, mut hi) = (0usize, 0usize);
    at.iter()
        .map(|&c| {
            while lo < n && t[lo] < c - half {
                lo += 1;
            }
            if hi < lo {
                hi = lo;
            }
            while hi < n && t[hi] <= c + half {
                hi += 1;
            }
            if hi > lo {
                (((prefix[hi] - prefix[lo]) / (hi - lo) as f64).max(0.0)).sqrt()
            } else {
                x[lo.min(n - 1)].abs()
            }
        })
        .collect()
}

/// The `p`-th percentile (0–100) of `v` with linear interpolation between
/// order statistics (numpy's default `percentile` method); NaN for an
/// empty input. Non-finite values are ignored.
pub fn percentile(v: &[f64], p: f64) -> f64 {
    let mut s: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
    if s.is_empty() {
        return f64::NAN;
    }
    s.sort_by(f64::total_cmp);
    let h = (s.len() - 1) as f64 * (p / 100.0).clamp(0.0, 1.0);
    let i = h.floor() as usize;
    let j = (i + 1).min(s.len() - 1);
    s[i] + (h - i as f64) * (s[j] - s[i])
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::f64::consts::PI;

    #[test]
    fn rms_of_a_sine_is_amplitude_over_root_two() {
        // Textbook: RMS of A·sin over whole periods is A/√2.
        let fs = 2000.0;
        let a = 2.5;
        let t: Vec<f64> = (0..20_000).map(|i| i as f64 / fs).collect();
        let x: Vec<f64> = t.iter().map(|&t| a * (2.0 * PI * 80.0 * t).sin()).collect();
        let expected = a / 2f64.sqrt();
        assert!((rms(&x) - expected).abs() < 1e-9);
        // A 150 ms window holds 12 whole periods of 80 Hz (301 samples: the
        // extra sample adds at most a²/301 to the mean square).
        let at: Vec<f64> = (1..90).map(|j| 0.1 * j as f64).collect();
        for v in moving_rms(&t, &x, &at, 0.15) {
            assert!((v - expected).abs() < 0.01 * expected, "{v}");
        }
    }

    #[test]
    fn percentile_matches_numpy_linear() {
        // numpy.percentile([1, 2, 3, 4], 95) = 3.85
        assert!((percentile(&[4.0, 1.0, 3.0, 2.0], 95.0) - 3.85).abs() < 1e-12);
        assert_eq!(percentile(&[5.0], 50.0), 5.0);
        assert!(percentile(&[], 50.0).is_nan());
    }

    #[test]
    fn grid_and_interpolation() {
        let g = feature_grid(1.0, 2.0, 100.0);
        assert_eq!(g.len(), 101);
        assert!((g[100] - 2.0).abs() < 1e-12);
        let t = [0.0, 1.0, 2.0];
        let y = [0.0, 10.0, 30.0];
        let v = interpolate(&t, &y, &[-1.0, 0.5, 1.5, 3.0]);
        assert_eq!(v, vec![0.0, 5.0, 20.0, 30.0]);
    }
}
