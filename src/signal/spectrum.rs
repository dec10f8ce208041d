//! Power spectral density by Welch's method (Welch 1967, "The use of fast
//! Fourier transform for the estimation of power spectra", IEEE Trans. Audio
//! Electroacoust. 15:70–73), with a small radix-2 FFT.
//!
//! `P(f_k) = c_k · mean_s |Σ_n w_n (x_{s,n} − x̄_s) e^{−2πikn/L}|² / (f_s Σ w_n²)`
//! over Hann-windowed segments s of length L (a power of two), c_k = 2 for
//! 0 < k < L/2 and 1 at 0 and L/2, so that `Σ_k P(f_k)·Δf` is the variance.
//! For speed on long recordings at most `max_segments` segments are used,
//! spread evenly over the recording (all of them, half-overlapping, when
//! fewer fit).

use super::complex::C64;
use std::f64::consts::PI;

/// A one-sided power spectral density.
#[derive(Debug, Clone, PartialEq)]
pub struct Psd {
    /// Bin spacing, Hz.
    pub df: f64,
    /// Density at `k·df`, k = 0..=L/2, in (units)²/Hz.
    pub power: Vec<f64>,
}

impl Psd {
    /// Frequency of bin `k`, Hz.
    pub fn freq(&self, k: usize) -> f64 {
        k as f64 * self.df
    }

    /// Bins whose frequency lies in `[lo, hi]`.
    pub fn bins(&self, lo: f64, hi: f64) -> std::ops::RangeInclusive<usize> {
        let a = (lo / self.df).ceil().max(0.0) as usize;
        let b = ((hi / self.df).floor().max(0.0) as usize).min(self.power.len() - 1);
        a..=b
    }

    /// Power (density × Δf) in `[lo, hi]` Hz.
    pub fn band_power(&self, lo: f64, hi: f64) -> f64 {
        self.bins(lo, hi).map(|k| self.power[k]).sum::<f64>() * self.df
    }
}

/// In-place iterative radix-2 decimation-in-time FFT, `X_k = Σ x_n e^{−2πikn/N}`.
/// `x.len()` must be a power of two.
pub fn fft(x: &mut [C64]) {
    let n = x.len();
    assert!(n.is_power_of_two(), "FFT length must be a power of two");
    let mut j = 0;
    for i in 1..n {
        let mut bit = n >> 1;
        while j & bit != 0 {
            j ^= bit;
            bit >>= 1;
        }
        j |= bit;
        if i < j {
            x.swap(i, j);
        }
    }
    let mut len = 2;
    while len <= n {
        let w = C64::cis(-2.0 * PI / len as f64);
        for start in (0..n).step_by(len) {
            let mut wk = C64::real(1.0);
            for k in 0..len / 2 {
                let a = x[start + k];
                let b = x[start + k + len / 2] * wk;
                x[start + k] = a + b;
                x[start + k + len / 2] = a - b;
                wk = wk * w;
            }
        }
        len <<= 1;
    }
}

/// Segment length for a rate: the power of two at or above one second of
/// samples (about 1 Hz resolution), capped by the data length.
pub fn segment_len(fs: f64, n: usize) -> usize {
    let want = (fs.max(2.0).ceil() as usize).next_power_of_two();
    let mut l = want;
    while l > n && l > 1 {
        l /= 2;
    }
    l
}

/// Welch PSD of `x` at rate `fs` with segments of `seg` samples (a power of
/// two, at most `x.len()`), at most `max_segments` of them.
pub fn welch(x: &[f64], fs: f64, seg: usize, max_segments: usize) -> Psd {
    assert!(seg.is_power_of_two() && seg <= x.len() && seg >= 2);
    let n = x.len();
    let hop = seg / 2;
    let all = (n - seg) / hop + 1;
    let starts: Vec<usize> = if all <= max_segments.max(1) {
        (0..all).map(|s| s * hop).collect()
    } else {
        let m = max_segments.max(2);
        (0..m)
            .map(|i| ((i as f64) * (n - seg) as f64 / (m - 1) as f64).round() as usize)
            .collect()
    };
    // Periodic Hann window.
    let w: Vec<f64> = (0..seg)
        .map(|i| 0.5 - 0.5 * (2.0 * PI * i as f64 / seg as f64).cos())
        .collect();
    let wss: f64 = w.iter().map(|v| v * v).sum();
    let mut acc = vec![0.0; seg / 2 + 1];
    let mut buf = vec![C64::default(); seg];
    for &s in &starts {
        let part = &x[s..s + seg];
        let mean = part.iter().sum::<f64>() / seg as f64;
        for ((b, &v), &wi) in buf.iter_mut().zip(part).zip(&w) {
            *b = C64::real((v - mean) * wi);
        }
        fft(&mut buf);
        for (a, b) in acc.iter_mut().zip(&buf) {
            *a += b.norm_sqr();
        }
    }
    let norm = 1.0 / (starts.len() as f64 * fs * wss);
    let last = seg / 2;
    let power = acc
        .iter()
        .enumerate()
        .map(|(k, &a)| {
            let c = if k == 0 || k == last { 1.0 } else { 2.0 };
            a * c * norm
        })
        .collect();
    Psd {
        df: fs / seg as f64,
        power,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fft_matches_direct_dft() {
        let x: Vec<C64> = (0..16)
            .map(|i| C64::new((i as f64 * 0.7).sin(), (i as f64 * 0.3).cos()))
            .collect();
        let mut y = x.clone();
        fft(&mut y);
        for (k, yk) in y.iter().enumerate() {
            let mut s = C64::default();
            for (n, xn) in x.iter().enumerate() {
                s = s + *xn * C64::cis(-2.0 * PI * (k * n) as f64 / 16.0);
            }
            assert!((s - *yk).abs() < 1e-12);
        }
    }

    #[test]
    fn welch_total_power_is_variance_of_a_sine() {
        // Parseval: a sine of amplitude A has variance A²/2 (textbook).
        let fs = 1000.0;
        let x: Vec<f64> = (0..20_000)
            .map(|i| 3.0 * (2.0 * PI * 62.5 * i as f64 / fs).sin())
            .collect();
        let psd = welch(&x, fs, segment_len(fs, x.len()), 64);
        let total = psd.band_power(0.0, fs / 2.0);
        assert!((total - 4.5).abs() < 1e-6 * 4.5, "{total}");
        let near = psd.band_power(60.0, 65.0);
        assert!(near > 0.999 * total);
    }
}
