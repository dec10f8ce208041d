//! The intended movement of each DoF and the muscle activation that drives it.
//!
//! Everything is sampled on the EMG clock at the EMG rate. The intended
//! posture q_d(t) is built block by block; a movement is *active* (driven by
//! muscles) or *passive* (the relaxation after a hold, and rests). The demand
//! on the agonist of direction ± of DoF d is
//!
//! ```text
//! D±(t) = [ max(±v(t+e), 0) / v_ref · h(z(t+e)) + k_hold · max(±(q(t+e) − rest), 0) / span± ] · active(t+e)
//! ```
//!
//! with e the electro-mechanical delay (activation leads movement), v = dq/dt,
//! v_ref one range per second, z the position scaled to [0, 1] over the range
//! and h(z) = 1 / (1 − c·z) the position dependence of effort (velocity per
//! unit activation falls by the factor 1 − c at the top of the range).

use super::scenario::{BlockSpec, Direction, Pattern, Scenario};
use rand::Rng;
use rand_chacha::ChaCha8Rng;
use std::f64::consts::PI;

/// Holding effort at full displacement, as a share of full activation.
const HOLD_GAIN: f64 = 0.15;
/// Width of the zero-phase moving average that softens activation onsets, s.
const SMOOTH_S: f64 = 0.025;

/// A block as performed, on the EMG clock.
#[derive(Debug, Clone)]
pub struct PlacedBlock {
    /// Start, s.
    pub start_s: f64,
    /// End, s.
    pub end_s: f64,
    /// The block's specification.
    pub spec: BlockSpec,
}

/// Intended movement of every DoF.
#[derive(Debug, Clone)]
pub struct Movement {
    /// Sampling rate (the EMG rate), Hz.
    pub rate_hz: f64,
    /// Intended posture per DoF (scenario order), degrees.
    pub q: Vec<Vec<f64>>,
    /// Whether each sample of each DoF is muscle-driven.
    pub active: Vec<Vec<bool>>,
    /// Blocks on the EMG clock.
    pub blocks: Vec<PlacedBlock>,
}

/// Places the blocks in time.
pub fn place_blocks(sc: &Scenario) -> Vec<PlacedBlock> {
    let mut t = sc.lead_in_s;
    sc.block
        .iter()
        .map(|b| {
            let d = b.duration();
            let p = PlacedBlock {
                start_s: t,
                end_s: t + d,
                spec: b.clone(),
            };
            t += d;
            p
        })
        .collect()
}

/// Smooth step from 0 to 1 over u ∈ [0, 1] (raised cosine).
pub fn ease(u: f64) -> f64 {
    0.5 - 0.5 * (PI * u.clamp(0.0, 1.0)).cos()
}

/// A random smooth excursion around `rest` within `[lo, hi]`, tapered to zero at both ends.
pub fn free_curve(
    rng: &mut ChaCha8Rng,
    n: usize,
    fs: f64,
    rest: f64,
    lo: f64,
    hi: f64,
) -> Vec<f64> {
    let comps: Vec<(f64, f64, f64)> = (0..3)
        .map(|_| {
            (
                rng.random_range(0.15..0.6),
                rng.random_range(0.5..1.0),
                rng.random_range(0.0..2.0 * PI),
            )
        })
        .collect();
    let total: f64 = comps.iter().map(|c| c.1).sum();
    let up = (hi - rest) * 0.8;
    let down = (rest - lo) * 0.8;
    let taper = 1.5 * fs;
    (0..n)
        .map(|i| {
            let t = i as f64 / fs;
            let s: f64 = comps
                .iter()
                .map(|(f, a, p)| a * (2.0 * PI * f * t + p).sin())
                .sum::<f64>()
                / total;
            let w = ease((i as f64 / taper).min((n - 1 - i) as f64 / taper));
            let x = s * w;
            rest + if x >= 0.0 { x * up } else { x * down }
        })
        .collect()
}

/// Builds the intended movement of every DoF.
pub fn build(sc: &Scenario, rng: &mut ChaCha8Rng) -> Movement {
    let fs = sc.emg.rate_hz;
    let n = (sc.total_duration() * fs).round() as usize + 1;
    let blocks = place_blocks(sc);
    let mut q: Vec<Vec<f64>> = sc.dof.iter().map(|d| vec![d.rest_deg; n]).collect();
    let mut active: Vec<Vec<bool>> = sc.dof.iter().map(|_| vec![false; n]).collect();
    let idx = |t: f64| ((t * fs).round() as usize).min(n - 1);
    for b in &blocks {
        let (i0, i1) = (idx(b.start_s), idx(b.end_s));
        for dof_id in &b.spec.dofs {
            let di = sc
                .dof
                .iter()
                .position(|d| d.id == *dof_id)
                .expect("checked");
            let d = &sc.dof[di];
            let (lo, hi) = (d.range_deg[0], d.range_deg[1]);
            let w = hi - lo;
            match b.spec.pattern {
                Pattern::Paced => {
                    let [a, c] = b.spec.targets_deg.unwrap_or([lo + 0.15 * w, hi - 0.15 * w]);
                    let half = b.spec.period_s / 2.0;
                    let moves = ((b.end_s - b.start_s) / half).floor().max(2.0) as usize;
                    let step = (b.end_s - b.start_s) / moves as f64;
                    let mut seq = vec![d.rest_deg];
                    for m in 0..moves - 1 {
                        seq.push(if m % 2 == 0 { c } else { a });
                    }
                    seq.push(d.rest_deg);
                    for i in i0..=i1 {
                        let u = (i as f64 / fs - b.start_s) / step;
                        let m = (u.floor() as usize).min(moves - 1);
                        q[di][i] = seq[m] + (seq[m + 1] - seq[m]) * ease(u - m as f64);
                        active[di][i] = true;
                    }
                }
                Pattern::HoldRelease => {
                    let mut t = b.start_s;
                    let s = &b.spec;
                    for &p in &s.positions_deg {
                        let r = d.rest_deg;
                        let (m0, m1) = (idx(t), idx(t + s.move_s));
                        for i in m0..=m1 {
                            let u = (i as f64 / fs - t) / s.move_s;
                            q[di][i] = r + (p - r) * ease(u);
                            active[di][i] = true;
                        }
                        let h1 = idx(t + s.move_s + s.hold_s);
                        for i in m1..=h1 {
                            q[di][i] = p;
                            active[di][i] = true;
                        }
                        let tau = s.relax_s / 5.0;
                        let tail = (-s.relax_s / tau).exp();
                        let t_rel = t + s.move_s + s.hold_s;
                        let r1 = idx(t_rel + s.relax_s);
                        for i in h1 + 1..=r1 {
                            let u = i as f64 / fs - t_rel;
                            let e = ((-u / tau).exp() - tail) / (1.0 - tail);
                            q[di][i] = r + (p - r) * e.max(0.0);
                            active[di][i] = false;
                        }
                        t += s.move_s + s.hold_s + s.relax_s;
                    }
                }
                Pattern::Free => {
                    let curve = free_curve(rng, i1 - i0 + 1, fs, d.rest_deg, lo, hi);
                    for (k, i) in (i0..=i1).enumerate() {
                        q[di][i] = curve[k];
                        active[di][i] = true;
                    }
                }
                Pattern::Rest => {}
            }
        }
    }
    Movement {
        rate_hz: fs,
        q,
        active,
        blocks,
    }
}

/// Central-difference derivative per second.
pub fn derivative(x: &[f64], fs: f64) -> Vec<f64> {
    let n = x.len();
    (0..n)
        .map(|i| {
            let (a, b) = (i.saturating_sub(1), (i + 1).min(n - 1));
            if b > a {
                (x[b] - x[a]) * fs / (b - a) as f64
            } else {
                0.0
            }
        })
        .collect()
}

/// Demand on the agonist of `dir` for DoF `di`, before muscle mixing.
pub fn demand(sc: &Scenario, mv: &Movement, di: usize, dir: Direction) -> Vec<f64> {
    let d = &sc.dof[di];
    let fs = mv.rate_hz;
    let (lo, hi) = (d.range_deg[0], d.range_deg[1]);
    let w = hi - lo;
    let q = &mv.q[di];
    let v = derivative(q, fs);
    let n = q.len();
    let e = (sc.emg.emd_s * fs).round() as usize;
    let sign = match dir {
        Direction::Positive => 1.0,
        Direction::Negative => -1.0,
    };
    let span = match dir {
        Direction::Positive => hi - d.rest_deg,
        Direction::Negative => d.rest_deg - lo,
    };
    let raw: Vec<f64> = (0..n)
        .map(|i| {
            let j = (i + e).min(n - 1);
            if !mv.active[di][j] {
                return 0.0;
            }
            let z = ((q[j] - lo) / w).clamp(0.0, 1.0);
            let h = 1.0 / (1.0 - d.position_effect.clamp(0.0, 0.9) * z);
            let speed = (sign * v[j]).max(0.0) / w;
            let hold = HOLD_GAIN * (sign * (q[j] - d.rest_deg)).max(0.0) / span.max(1e-9);
            speed * h + hold
        })
        .collect();
    let width = ((SMOOTH_S * fs).round() as usize) | 1;
    crate::signal::envelope::moving_average(&raw, width)
}

/// Activation of every muscle (scenario order), in [0, 1.5].
pub fn activations(sc: &Scenario, mv: &Movement) -> Vec<Vec<f64>> {
    let n = mv.q.first().map_or(0, Vec::len);
    let mut demands = std::collections::HashMap::new();
    for (di, d) in sc.dof.iter().enumerate() {
        for dir in [Direction::Positive, Direction::Negative] {
            demands.insert((d.id.clone(), dir), demand(sc, mv, di, dir));
        }
    }
    sc.muscle
        .iter()
        .map(|m| {
            let mut a = vec![0.02; n];
            if m.drives.is_empty() {
                // a muscle serving no DoF: slow random activity of its own
                let mut rng = super::emg::stream(sc.seed, &format!("idle:{}", m.id));
                let idle = free_curve(&mut rng, n, mv.rate_hz, 0.0, -1.0, 1.0);
                for (x, s) in a.iter_mut().zip(idle) {
                    *x += 0.5 * s.max(0.0);
                }
            }
            for dr in &m.drives {
                let dm = &demands[&(dr.dof.clone(), dr.direction)];
                for i in 0..n {
                    a[i] += dr.gain * dm[i];
                }
            }
            a.iter_mut().for_each(|x| *x = x.min(1.5));
            a
        })
        .collect()
}
