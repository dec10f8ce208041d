//! The mirroring map between the two sides and the intact-side glove signal.
//!
//! The intact hand shows the posture that the missing hand was commanded to at
//! EMG-clock time t at EMG-clock time u(t) = t + lag(t), with
//! lag(t) = mean + drift·(t/T − ½) + wobble·sin(2πt/P) + direction·s(t) + jitter(t),
//! the jitter drawn per block and interpolated between block centres by raised
//! cosines, and s(t) the smoothed direction of the intended movement
//! ([`direction`]).
//! The glove samples its own clock τ, with EMG-clock time τ + offset, so the
//! true intact-clock time of EMG time t is u(t) − offset.

use super::movement::{ease, free_curve, Movement};
use super::scenario::Scenario;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use std::f64::consts::PI;

/// The lag (s) at every EMG sample.
pub fn lag(sc: &Scenario, mv: &Movement, rng: &mut ChaCha8Rng) -> Vec<f64> {
    let fs = mv.rate_hz;
    let n = mv.q.first().map_or(0, Vec::len);
    let total = (n.max(2) - 1) as f64 / fs;
    let l = &sc.lag;
    let knots: Vec<(f64, f64)> = mv
        .blocks
        .iter()
        .map(|b| {
            let j: f64 = StandardNormal.sample(rng);
            (0.5 * (b.start_s + b.end_s), l.block_jitter_s * j)
        })
        .collect();
    let dir = if l.direction_s != 0.0 {
        direction(sc, mv)
    } else {
        vec![0.0; n]
    };
    (0..n)
        .map(|i| {
            let t = i as f64 / fs;
            let jitter = match knots.iter().position(|k| k.0 > t) {
                None => knots.last().map_or(0.0, |k| k.1),
                Some(0) => knots[0].1,
                Some(p) => {
                    let (a, b) = (knots[p - 1], knots[p]);
                    a.1 + (b.1 - a.1) * ease((t - a.0) / (b.0 - a.0))
                }
            };
            l.mean_s
                + l.drift_s * (t / total - 0.5)
                + l.wobble_s * (2.0 * PI * t / l.wobble_period_s).sin()
                + l.direction_s * dir[i]
                + jitter
        })
        .collect()
}

/// Width of the moving average that smooths the movement direction, s.
pub const DIRECTION_SMOOTH_S: f64 = 0.4;

/// Speed, in ranges per second, at which the direction reaches tanh(1).
const DIRECTION_SPEED: f64 = 0.1;

/// The smoothed direction of the intended movement at every EMG sample:
/// `s_raw = clamp(Σ_d tanh(q̇_d / (range_d · 0.1/s)), −1, 1)` over the DoFs,
/// then a centred moving average over [`DIRECTION_SMOOTH_S`]. A moving
/// average of a signal bounded by 1 changes by at most `2/width` per second,
/// which is the bound the scenario check uses.
pub fn direction(sc: &Scenario, mv: &Movement) -> Vec<f64> {
    let fs = mv.rate_hz;
    let n = mv.q.first().map_or(0, Vec::len);
    let mut raw = vec![0.0; n];
    for (d, q) in sc.dof.iter().zip(&mv.q) {
        let range = (d.range_deg[1] - d.range_deg[0]).abs().max(1e-9);
        for (i, r) in raw.iter_mut().enumerate() {
            let (a, b) = (i.saturating_sub(1), (i + 1).min(n - 1));
            if b > a {
                let v = (q[b] - q[a]) * fs / (b - a) as f64;
                *r += (v / (range * DIRECTION_SPEED)).tanh();
            }
        }
    }
    raw.iter_mut().for_each(|v| *v = v.clamp(-1.0, 1.0));
    let half = ((0.5 * DIRECTION_SMOOTH_S * fs).round() as usize).max(1);
    let mut prefix = vec![0.0; n + 1];
    for (i, v) in raw.iter().enumerate() {
        prefix[i + 1] = prefix[i] + v;
    }
    (0..n)
        .map(|i| {
            let (a, b) = (i.saturating_sub(half), (i + half + 1).min(n));
            (prefix[b] - prefix[a]) / (2 * half + 1) as f64
        })
        .collect()
}

/// Linear interpolation of `y` sampled at `i / fs` at time `t` (clamped at the ends).
fn interp(y: &[f64], fs: f64, t: f64) -> f64 {
    let x = (t * fs).clamp(0.0, (y.len() - 1) as f64);
    let i = (x.floor() as usize).min(y.len().saturating_sub(2));
    let f = x - i as f64;
    y[i] * (1.0 - f) + y[(i + 1).min(y.len() - 1)] * f
}

/// The intact-side glove recording: sample times on its own clock and one
/// angle series per DoF.
pub struct Glove {
    /// Sample times on the glove clock, s.
    pub time_s: Vec<f64>,
    /// Angles per DoF, degrees.
    pub angles: Vec<Vec<f64>>,
}

/// Samples the intact hand through the mirroring map.
pub fn glove(sc: &Scenario, mv: &Movement, lag: &[f64], rng: &mut ChaCha8Rng) -> Glove {
    let fs = mv.rate_hz;
    let n = lag.len();
    let emg_end = (n - 1) as f64 / fs;
    // u(t) = t + lag(t), strictly increasing (checked by the scenario's slope bound).
    let u: Vec<f64> = lag
        .iter()
        .enumerate()
        .map(|(i, l)| i as f64 / fs + l)
        .collect();
    // Postures the intact hand shows: the intended ones, except in blocks
    // that were deliberately not mirrored.
    let mut shown = mv.q.clone();
    for b in mv.blocks.iter().filter(|b| b.spec.unmirrored) {
        let (i0, i1) = (
            (b.start_s * fs) as usize,
            ((b.end_s * fs) as usize).min(n - 1),
        );
        for dof_id in &b.spec.dofs {
            let di = sc.dof.iter().position(|d| d.id == *dof_id).unwrap();
            let d = &sc.dof[di];
            let c = free_curve(
                rng,
                i1 - i0 + 1,
                fs,
                d.rest_deg,
                d.range_deg[0],
                d.range_deg[1],
            );
            shown[di][i0..=i1].copy_from_slice(&c);
        }
    }
    let gr = sc.intact.rate_hz;
    let off = sc.intact.offset_s;
    // The glove clock starts at 0 and runs until half a second past the EMG end.
    let end = emg_end + 0.5 - off;
    let m = (end * gr).floor() as usize + 1;
    let time_s: Vec<f64> = (0..m).map(|j| j as f64 / gr).collect();
    let angles = shown
        .iter()
        .map(|q| {
            let mut k = 0usize;
            time_s
                .iter()
                .map(|tau| {
                    let big_t = tau + off;
                    // invert u by a forward scan (times increase monotonically)
                    while k + 1 < n && u[k + 1] < big_t {
                        k += 1;
                    }
                    let t = if big_t <= u[0] {
                        0.0
                    } else if k + 1 >= n {
                        emg_end
                    } else {
                        let f = (big_t - u[k]) / (u[k + 1] - u[k]);
                        (k as f64 + f.clamp(0.0, 1.0)) / fs
                    };
                    let noise: f64 = StandardNormal.sample(rng);
                    interp(q, fs, t) + sc.intact.noise_deg * noise
                })
                .collect()
        })
        .collect();
    Glove { time_s, angles }
}

/// The true intact-clock time for EMG times `t0 + i / rate` (the truth map).
pub fn truth_map(sc: &Scenario, lag: &[f64], emg_fs: f64, rate: f64) -> Vec<f64> {
    let end = (lag.len() - 1) as f64 / emg_fs;
    let m = (end * rate).floor() as usize + 1;
    (0..m)
        .map(|i| {
            let t = i as f64 / rate;
            t + interp(lag, emg_fs, t) - sc.intact.offset_s
        })
        .collect()
}
