//! Mains interference: which frequency (50 or 60 Hz) a recording carries, how
//! much of a channel's power it takes, and the notch cascade that removes it.
//!
//! Mains hum is a line spectrum at f₀ and its harmonics (100/150 Hz or
//! 120/180 Hz; FACTS.md, from memory) standing on the smooth EMG spectrum.
//! Its evidence at a frequency f is the *peak ratio*: the largest Welch
//! density within ±1 Hz of f over the median density of the flanks
//! 3–8 Hz away on both sides. Its share of a channel's power is the
//! *hum fraction*: the power above that flank floor within ±2.5 Hz of each
//! harmonic (the Hann main lobe is ±2 bins of ≈1 Hz), over the power in the
//! EMG band.

use super::filter::{iirnotch, Sos};
use super::spectrum::Psd;
use crate::error::Result;

/// The mains frequencies in use in the world, Hz.
pub const CANDIDATES: [f64; 2] = [50.0, 60.0];

fn median(v: &mut [f64]) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    v.sort_by(f64::total_cmp);
    let m = v.len() / 2;
    if v.len() % 2 == 1 {
        v[m]
    } else {
        0.5 * (v[m - 1] + v[m])
    }
}

/// Median density of the flanks 3–8 Hz either side of `f`.
pub fn flank_floor(psd: &Psd, f: f64) -> f64 {
    let mut v: Vec<f64> = psd
        .bins(f - 8.0, f - 3.0)
        .chain(psd.bins(f + 3.0, f + 8.0))
        .filter_map(|k| psd.power.get(k).copied())
        .collect();
    median(&mut v)
}

/// Peak ratio at `f`: max density within ±1 Hz over the flank floor.
/// `None` when `f` is too close to the Nyquist frequency to have flanks.
pub fn peak_ratio(psd: &Psd, f: f64) -> Option<f64> {
    let nyq = psd.freq(psd.power.len() - 1);
    if f + 8.0 > nyq || f < 9.0 {
        return None;
    }
    let peak = psd
        .bins(f - 1.0, f + 1.0)
        .map(|k| psd.power[k])
        .fold(0.0, f64::max);
    let floor = flank_floor(psd, f);
    if floor > 0.0 {
        Some(peak / floor)
    } else if peak > 0.0 {
        Some(f64::INFINITY)
    } else {
        None
    }
}

/// Harmonics `h·f0`, h = 1..=count, below both `limit` Hz and the Nyquist frequency.
pub fn harmonics(f0: f64, count: usize, limit: f64, fs: f64) -> Vec<f64> {
    (1..=count)
        .map(|h| h as f64 * f0)
        .filter(|&f| f < limit && f < fs / 2.0)
        .collect()
}

/// The strongest mains evidence of one channel at `f0`: the largest peak
/// ratio over the first `count` harmonics.
pub fn evidence(psd: &Psd, f0: f64, count: usize) -> f64 {
    let nyq = psd.freq(psd.power.len() - 1);
    harmonics(f0, count.max(1), nyq, 2.0 * nyq)
        .into_iter()
        .filter_map(|f| peak_ratio(psd, f))
        .fold(0.0, f64::max)
}

/// Which mains frequency a set of channel spectra carries: the candidate
/// with the larger evidence over all channels, if that evidence reaches
/// `min_ratio`. Returns the choice and the evidence at 50 and 60 Hz.
pub fn detect(psds: &[Psd], count: usize, min_ratio: f64) -> (Option<f64>, [f64; 2]) {
    let mut ev = [0.0f64; 2];
    for psd in psds {
        for (e, &f0) in ev.iter_mut().zip(&CANDIDATES) {
            *e = e.max(evidence(psd, f0, count));
        }
    }
    let best = if ev[1] > ev[0] { 1 } else { 0 };
    let chosen = (ev[best] >= min_ratio).then_some(CANDIDATES[best]);
    (chosen, ev)
}

/// Hum fraction: power above the flank floor within ±2.5 Hz of each
/// harmonic of `f0` below `band.1`, over the power in `band`. In [0, 1]
/// up to estimation noise; 0 when the band carries no power.
pub fn hum_fraction(psd: &Psd, f0: f64, count: usize, band: (f64, f64)) -> f64 {
    let total = psd.band_power(band.0, band.1);
    if total <= 0.0 {
        return 0.0;
    }
    let nyq = psd.freq(psd.power.len() - 1);
    let hum: f64 = harmonics(f0, count.max(1), band.1.min(nyq - 8.0), 2.0 * nyq)
        .into_iter()
        .map(|f| {
            let floor = flank_floor(psd, f);
            psd.bins(f - 2.5, f + 2.5)
                .map(|k| (psd.power[k] - floor).max(0.0))
                .sum::<f64>()
                * psd.df
        })
        .sum();
    (hum / total).clamp(0.0, 1.0)
}

/// A cascade of notches (quality `q`) at `f0` and its harmonics up to
/// `count` of them, skipping those at or above `limit` Hz or the Nyquist
/// frequency.
pub fn notch_cascade(f0: f64, count: usize, q: f64, limit: f64, fs: f64) -> Result<Sos> {
    let sections = harmonics(f0, count, limit, fs)
        .into_iter()
        .map(|f| iirnotch(f, q, fs))
        .collect::<Result<Vec<_>>>()?;
    Ok(Sos::new(sections))
}

#[cfg(test)]
mod tests {
    use super::super::spectrum::{segment_len, welch};
    use super::*;
    use std::f64::consts::PI;

    fn noise(n: usize, seed: u64) -> Vec<f64> {
        // xorshift; sums of uniforms approximate Gaussian noise.
        let mut s = seed | 1;
        let mut next = || {
            s ^= s << 13;
            s ^= s >> 7;
            s ^= s << 17;
            (s >> 11) as f64 / (1u64 << 53) as f64 - 0.5
        };
        (0..n).map(|_| next() + next() + next() + next()).collect()
    }

    #[test]
    fn detects_sixty_hertz_and_measures_its_share() {
        let fs = 2000.0;
        let mut x = noise(60_000, 7);
        let var_noise: f64 = x.iter().map(|v| v * v).sum::<f64>() / x.len() as f64;
        // Hum of amplitude A has power A²/2; choose it equal to the in-band noise power.
        let in_band = var_noise * (450.0 - 20.0) / 1000.0;
        let a = (2.0 * in_band).sqrt();
        for (i, v) in x.iter_mut().enumerate() {
            *v += a * (2.0 * PI * 60.0 * i as f64 / fs).sin();
        }
        let psd = welch(&x, fs, segment_len(fs, x.len()), 64);
        let (f, ev) = detect(std::slice::from_ref(&psd), 3, 4.0);
        assert_eq!(f, Some(60.0), "{ev:?}");
        let frac = hum_fraction(&psd, 60.0, 3, (20.0, 450.0));
        assert!((frac - 0.5).abs() < 0.05, "{frac}");
    }

    #[test]
    fn clean_noise_has_no_mains() {
        let x = noise(60_000, 3);
        let psd = welch(&x, 2000.0, 2048, 64);
        let (f, ev) = detect(std::slice::from_ref(&psd), 3, 4.0);
        assert_eq!(f, None, "{ev:?}");
        assert!(hum_fraction(&psd, 50.0, 3, (20.0, 450.0)) < 0.02);
    }
}
