//! Shared helpers of the alignment tests: simulate a scenario, read it back,
//! compute stand-in envelopes, and score an alignment against the truth.

#![allow(dead_code)]

use mirrorsite::align::{Aligned, Envelopes};
use mirrorsite::session::{self, Session};
use mirrorsite::simulate::{write_session, Scenario, Truth};
use ndarray::Array2;
use std::path::Path;

/// Simulates the scenario file into `dir` and reads the session and truth back.
pub fn simulate(scenario: &Path, dir: &Path) -> (Session, Truth) {
    simulate_seeded(scenario, dir, None)
}

/// As [`simulate`], with the scenario's seed replaced when `seed` is given.
pub fn simulate_seeded(scenario: &Path, dir: &Path, seed: Option<u64>) -> (Session, Truth) {
    let mut sc = Scenario::from_file(scenario).unwrap();
    if let Some(s) = seed {
        sc.seed = s;
    }
    let out = dir.join(sc.name.clone());
    let truth_path = dir.join(format!("{}.truth.json", sc.name));
    write_session(&sc, &out, Some(&truth_path), false).unwrap();
    let s = session::read(&out).unwrap();
    let t = Truth::from_file(&truth_path).unwrap();
    (s, t)
}

/// The conditioning stage's envelopes with default settings (the shipped pipeline).
pub fn signal_envelopes(s: &Session) -> Envelopes {
    let blocks = s.events.clone().unwrap_or_default();
    let cond =
        mirrorsite::signal::condition(&s.emg, s.sites(), &blocks, &Default::default()).unwrap();
    Envelopes::from(&cond)
}

/// A plain moving-RMS envelope (±50 ms, mean removed) at `rate_hz`: the
/// stand-in for the conditioning stage's envelopes in these tests.
pub fn rms_envelopes(s: &Session, rate_hz: f64) -> Envelopes {
    let emg = &s.emg;
    let (t0, t1) = emg.span();
    let n = ((t1 - t0) * rate_hz).floor() as usize + 1;
    let fs = emg.rate_hz;
    let half = (0.05 * fs).round() as usize;
    let mut data = Array2::zeros((emg.channels.len(), n));
    for k in 0..emg.channels.len() {
        let x = emg.data.row(k);
        let m = x.sum() / x.len() as f64;
        let mut prefix = vec![0.0; x.len() + 1];
        for (i, v) in x.iter().enumerate() {
            prefix[i + 1] = prefix[i] + (v - m) * (v - m);
        }
        for i in 0..n {
            let c = ((i as f64 / rate_hz) * fs).round() as usize;
            let a = c.saturating_sub(half);
            let b = (c + half + 1).min(x.len());
            data[[k, i]] = ((prefix[b] - prefix[a]) / (b - a) as f64).sqrt();
        }
    }
    Envelopes {
        t0_s: t0,
        rate_hz,
        sites: emg.channels.clone(),
        data,
    }
}

/// |intact_time_s − true intact time| over all usable rows in non-rest,
/// mirrored blocks (holds included), in seconds.
pub fn errors(al: &Aligned, truth: &Truth) -> Vec<f64> {
    errors_in(al, truth, |_| true)
}

/// As [`errors`], over the blocks whose task passes `keep`.
pub fn errors_in(al: &Aligned, truth: &Truth, keep: impl Fn(&str) -> bool) -> Vec<f64> {
    let mut e = Vec::new();
    for i in 0..al.len() {
        let Some(b) = al.block_of[i] else { continue };
        let blk = &al.blocks[b].block;
        if blk.is_rest() || !al.usable[i] || !keep(&blk.task) {
            continue;
        }
        let mid = 0.5 * (blk.start_s + blk.end_s);
        let mirrored = truth
            .blocks
            .iter()
            .find(|tb| tb.start_s <= mid && mid <= tb.end_s)
            .is_none_or(|tb| tb.mirrored);
        if !mirrored {
            continue;
        }
        e.push((al.intact_time_s[i] - truth.map.at(al.time_s[i])).abs());
    }
    e
}

/// The q-quantile of `v`.
pub fn quantile(v: &[f64], q: f64) -> f64 {
    let mut s = v.to_vec();
    s.sort_by(f64::total_cmp);
    let pos = q * (s.len() - 1) as f64;
    let k = pos.floor() as usize;
    let f = pos - k as f64;
    if k + 1 < s.len() {
        s[k] * (1.0 - f) + s[k + 1] * f
    } else {
        s[k]
    }
}
