//! Alignment: time-warping intact-side kinematics onto the residual-limb EMG clock.
//!
//! The two sides of a mirrored movement never move in step. For every task
//! block this stage
//!
//! 1. brings both sides to the feature grid on the EMG clock (the intact
//!    recording's own clock plus `intact.offset_s`), with a margin of context
//!    on each side;
//! 2. builds features that mark the same events on both sides
//!    ([`features`]): intact speed and displacement per direction of each
//!    moving DoF, against composite EMG activations fitted to them, the EMG
//!    shifted later by the expected electro-mechanical delay (EMD) so that the
//!    matched intact moment is that of the *intended* posture. Speed away
//!    from the resting posture and speed back toward it are separate basis
//!    series with their own non-negative weights: a return toward rest may be
//!    passive (the relaxation after a hold shows no agonist EMG), and a fit
//!    that forced EMG onto it would bend the warp there. With its weight at
//!    zero the passive return carries no timing, the release (the end of the
//!    holding activity) does, and the map runs straight from the release to
//!    the next active move;
//! 3. warps them with banded, slope-limited DTW ([`dtw`]), turns the path
//!    into a smooth strictly increasing map ([`warpmap`]), refits the
//!    composites through the map and warps again;
//! 4. refines the lag continuously ([`refine`]): the composites are refitted
//!    through the DTW map with the intact speed put on the EMG clock (times
//!    the map's slope), and the lag is fitted to them by robust, penalised
//!    Gauss–Newton, each channel weighted by its signal-to-misfit ratio
//!    ρ²/(1 − ρ²) (ρ the composite's correlation with its intact feature),
//!    so a channel the sites explain poorly does not bend the lag. The lag
//!    is a slow base (cubic P-spline, half-gain period `refine_period_s`,
//!    8 s, in paced and hold-release blocks, where a faster base would trade
//!    with the feature weights or bend across holds; `refine_period_free_s`,
//!    3 s, in free movement, which pins the timing better) plus a direction
//!    part η·D(t): D is the smoothed direction of the
//!    hand's movement on the intact side (+1 flexing, −1 extending, 0 still),
//!    so the lag may differ between the two directions, switch at every
//!    reversal and return to its base through holds, without a roughness
//!    penalty on the switch. The intact features' weights (effort per
//!    position, holding) are refitted jointly with the lag: held at the
//!    values fitted through the DTW map, they keep part of that map's error
//!    (a position-dependent effort skews a speed bump as a timing shift
//!    would). `refine_rounds` (3) rounds refit the composites through the
//!    new map;
//! 5. pools the direction part over the session: each block's own η, weighted
//!    by its information (the inverse of its variance with the base and the
//!    weights profiled out), gives the session's η, and every block is
//!    aligned again with the direction part fixed at it. A block alone can
//!    hardly tell a direction lag from a position-dependent effort when the
//!    movement is a steady oscillation (both make the flexion bump look
//!    later and the extension bump earlier); blocks with varied movement
//!    carry most of the information;
//! 6. judges the block ([`quality`]).
//!
//! Block maps are joined with raised-cosine cross-fades at block edges;
//! between aligned blocks (rests, failed blocks) the lag is interpolated
//! linearly. Every EMG-grid sample then gets the intact time of the intended
//! posture, and the intact angles resampled there give the aligned position
//! and velocity of each DoF ([`Aligned`]). [`output`] writes `aligned.csv`,
//! `alignment.json` and the before/after figures.

mod banded;
mod block;
mod config;
pub mod dtw;
pub mod features;
pub mod kinematics;
/// Writers of `aligned.csv`, `alignment.json` and the before/after figures.
pub mod output;
pub mod quality;
pub mod refine;
pub mod warpmap;

pub use config::{AlignConfig, QualityThresholds};
pub use quality::{Figures, Verdict};

use crate::session::{Block, Session};
use crate::{Error, Result};
use block::{align_block, BlockData};
use features::lerp_at;
use kinematics::Kinematics;
use ndarray::Array2;
use rayon::prelude::*;
use serde::Serialize;

/// Conditioned EMG envelopes on a uniform grid of the EMG clock.
#[derive(Debug, Clone)]
pub struct Envelopes {
    /// EMG-clock time of the first sample, s.
    pub t0_s: f64,
    /// Feature rate, Hz.
    pub rate_hz: f64,
    /// Site ids, in row order.
    pub sites: Vec<String>,
    /// Envelope values, shape (sites, samples).
    pub data: Array2<f64>,
}

impl From<&crate::signal::Conditioned> for Envelopes {
    fn from(c: &crate::signal::Conditioned) -> Self {
        Envelopes {
            t0_s: c.time_s.first().copied().unwrap_or(0.0),
            rate_hz: c.rate_hz,
            sites: c.sites.clone(),
            data: c.envelopes.clone(),
        }
    }
}

impl Envelopes {
    /// Number of samples.
    pub fn len(&self) -> usize {
        self.data.ncols()
    }

    /// True without samples.
    pub fn is_empty(&self) -> bool {
        self.data.ncols() == 0
    }
}

/// The alignment of one task block.
#[derive(Debug, Clone, Serialize)]
pub struct BlockAlignment {
    /// The block.
    pub block: Block,
    /// DoFs whose features drove the warp.
    pub dofs_used: Vec<String>,
    /// Figures (absent for rest blocks and blocks that could not be warped).
    pub figures: Option<Figures>,
    /// The verdict.
    pub quality: Verdict,
    /// Why, when not `ok`; for rests, what was done.
    pub reasons: Vec<String>,
    /// The block's own estimate of the direction part of the lag, s (pass 1;
    /// absent when not estimated).
    pub direction_own_s: Option<f64>,
    /// Traces for figures (not serialised).
    #[serde(skip)]
    pub traces: Option<Traces>,
}

/// Feature traces of one block before and after warping, for figures.
#[derive(Debug, Clone)]
pub struct Traces {
    /// EMG-clock time of each sample, s.
    pub time_s: Vec<f64>,
    /// Feature labels (`<dof> <kind>`).
    pub labels: Vec<String>,
    /// Composite EMG activation per feature (standardised).
    pub composite: Vec<Vec<f64>>,
    /// Intact feature before warping.
    pub before: Vec<Vec<f64>>,
    /// Intact feature after warping.
    pub after: Vec<Vec<f64>>,
    /// Lag at each sample, s.
    pub lag_s: Vec<f64>,
}

/// Aligned pairs on the EMG feature grid.
#[derive(Debug, Clone)]
pub struct Aligned {
    /// EMG-clock time of each row, s.
    pub time_s: Vec<f64>,
    /// Intact time (intact.csv's own clock) of the intended posture, s.
    pub intact_time_s: Vec<f64>,
    /// DoF ids.
    pub dofs: Vec<String>,
    /// Aligned angle per DoF (degrees), shape (dofs, rows).
    pub pos: Array2<f64>,
    /// Aligned angular velocity on the EMG clock (deg/s), shape (dofs, rows).
    pub vel: Array2<f64>,
    /// Site ids.
    pub sites: Vec<String>,
    /// Envelopes at `time_s` (not shifted), shape (sites, rows).
    pub env: Array2<f64>,
    /// Index into `blocks` of the block each row lies in, if any.
    pub block_of: Vec<Option<usize>>,
    /// Whether the row may be used for fitting (not in a failed block, intact side recorded).
    pub usable: Vec<bool>,
    /// Per-block alignment.
    pub blocks: Vec<BlockAlignment>,
    /// The session's `intact.offset_s`: intact time on the EMG clock is
    /// `intact_time_s + intact_offset_s`.
    pub intact_offset_s: f64,
    /// The session's direction lag η, s: the lag is its smooth base + η
    /// while the hand flexes and − η while it extends (absent when the
    /// direction part is off or no block could estimate it).
    pub direction_lag_s: Option<f64>,
}

impl Aligned {
    /// Lag of row i (intact time on the EMG clock − EMG time), s.
    pub fn lag_at(&self, i: usize) -> f64 {
        self.intact_time_s[i] + self.intact_offset_s - self.time_s[i]
    }

    /// Number of rows.
    pub fn len(&self) -> usize {
        self.time_s.len()
    }

    /// True without rows.
    pub fn is_empty(&self) -> bool {
        self.time_s.is_empty()
    }
}

/// Aligns a session's intact side onto its EMG envelopes, block by block.
pub fn align(s: &Session, env: &Envelopes, blocks: &[Block], cfg: &AlignConfig) -> Result<Aligned> {
    cfg.check()
        .map_err(|(k, m)| Error::Argument(format!("align.{k} {m}")))?;
    let n = env.len();
    let rate = env.rate_hz;
    if n < 2 || !(rate.is_finite() && rate > 0.0) {
        return Err(Error::Analysis(
            "the envelopes have fewer than two samples".into(),
        ));
    }
    let offset = s.manifest.intact_offset_s;
    let dofs: Vec<String> = s.dofs().iter().map(|d| d.id.clone()).collect();
    let kin = Kinematics::new(&s.intact, cfg.kinematics_smooth_s);
    let t_of = |i: usize| env.t0_s + i as f64 / rate;
    let idx_of = |t: f64| ((t - env.t0_s) * rate).round().clamp(0.0, (n - 1) as f64) as usize;
    let (ia, ib) = s.intact.span();
    let intact_span = (ia + offset, ib + offset);

    let r = (cfg.band_s * rate).round() as usize;
    let margin = (cfg.margin() * rate).round() as usize;
    let emd = cfg.emd_s * rate;
    // Sum of lag·weight and weight per row from the aligned blocks.
    let mut lag_sum = vec![0.0; n];
    let mut lag_w = vec![0.0; n];
    let taper = ((0.25 * rate).round() as usize).max(1);
    let mut block_of = vec![None; n];
    let mut out_blocks = Vec::with_capacity(blocks.len());
    let mut pending: Vec<Pending> = Vec::new();

    for (bi, b) in blocks.iter().enumerate() {
        let (a, e) = (
            idx_of(b.start_s),
            idx_of(b.end_s).max(idx_of(b.start_s) + 1).min(n),
        );
        for slot in block_of.iter_mut().take(e).skip(a) {
            *slot = Some(bi);
        }
        let speed_rms = |d: usize| -> f64 {
            let m = (a..e)
                .map(|i| kin.at(d, t_of(i) - offset).1.powi(2))
                .sum::<f64>();
            (m / (e - a).max(1) as f64).sqrt()
        };
        if b.is_rest() {
            let moving: Vec<&str> = (0..dofs.len())
                .filter(|&d| speed_rms(d) > 2.0 * cfg.min_speed_dps)
                .map(|d| dofs[d].as_str())
                .collect();
            let (q, reasons) = if moving.is_empty() {
                (
                    Verdict::Ok,
                    vec![
                        "rest: nothing to warp; lag interpolated from the neighbouring blocks"
                            .into(),
                    ],
                )
            } else {
                (
                    Verdict::Doubtful,
                    vec![format!(
                        "rest block, but the intact side moves ({})",
                        moving.join(", ")
                    )],
                )
            };
            out_blocks.push(BlockAlignment {
                block: b.clone(),
                dofs_used: Vec::new(),
                figures: None,
                quality: q,
                reasons,
                traces: None,
                direction_own_s: None,
            });
            continue;
        }
        let candidates: Vec<usize> = match &b.dof {
            Some(id) => dofs.iter().position(|d| d == id).into_iter().collect(),
            None => (0..dofs.len()).collect(),
        };
        let used: Vec<usize> = candidates
            .into_iter()
            .filter(|&d| speed_rms(d) >= cfg.min_speed_dps)
            .collect();
        if used.is_empty() {
            out_blocks.push(BlockAlignment {
                block: b.clone(),
                dofs_used: Vec::new(),
                figures: None,
                quality: Verdict::Failed,
                reasons: vec![format!(
                    "the intact side does not move in this block (RMS speed below {} deg/s)",
                    cfg.min_speed_dps
                )],
                traces: None,
                direction_own_s: None,
            });
            continue;
        }
        let w0 = a.saturating_sub(margin);
        let w1 = (e + margin).min(n);
        let wn = w1 - w0;
        if wn < 4 * r.max(2) {
            out_blocks.push(BlockAlignment {
                block: b.clone(),
                dofs_used: used.iter().map(|&d| dofs[d].clone()).collect(),
                figures: None,
                quality: Verdict::Failed,
                reasons: vec![format!("block too short to warp ({:.2} s)", b.duration_s())],
                traces: None,
                direction_own_s: None,
            });
            continue;
        }
        let ext = r + 2;
        let site_rows: Vec<Vec<f64>> = (0..env.sites.len())
            .map(|k| {
                let row = env.data.row(k);
                let row = row
                    .as_slice()
                    .map(|s| s.to_vec())
                    .unwrap_or_else(|| row.to_vec());
                (w0..w1).map(|i| lerp_at(&row, i as f64 - emd)).collect()
            })
            .collect();
        let mut channels = Vec::new();
        for &d in &used {
            // Resting posture: median angle over the margins (or the block's first and last 0.5 s).
            let edge: Vec<usize> = (w0..a).chain(e..w1).collect();
            let edge = if edge.len() >= 4 {
                edge
            } else {
                let h = ((0.5 * rate) as usize).min((e - a) / 4).max(1);
                (a..a + h).chain(e - h..e).collect()
            };
            let rest: Vec<f64> = edge
                .iter()
                .map(|&i| kin.at(d, t_of(i) - offset).0)
                .collect();
            let rest = quality::quantile(&rest, 0.5);
            let [lo, hi] = s.dofs()[d].range_deg;
            let samples: Vec<(f64, f64)> = (0..wn + 2 * ext)
                .map(|k| {
                    let t = t_of(w0) + (k as f64 - ext as f64) / rate;
                    kin.at(d, t - offset)
                })
                .collect();
            let series = |f: &dyn Fn(f64, f64) -> f64| -> Vec<f64> {
                samples.iter().map(|&(p, v)| f(p, v)).collect()
            };
            let z = |p: f64| ((p - lo) / (hi - lo)).clamp(0.0, 1.0);
            let ret = cfg.min_speed_dps;
            for (sign, word) in [(1.0, "positive"), (-1.0, "negative")] {
                let speed = series(&|_, v| (sign * v).max(0.0));
                // Speed away from and toward the resting posture, each with a
                // position-dependent effort: a return toward rest may be partly or
                // wholly passive (relaxation after a hold), so it gets its own weights.
                let away = |p: f64, v: f64| {
                    if (p - rest) * v >= 0.0 {
                        (sign * v).max(0.0)
                    } else {
                        0.0
                    }
                };
                let toward = |p: f64, v: f64| {
                    if (p - rest) * v < 0.0 {
                        (sign * v).max(0.0)
                    } else {
                        0.0
                    }
                };
                let basis = vec![
                    series(&|p, v| away(p, v) * (1.0 - z(p))),
                    series(&|p, v| away(p, v) * z(p)),
                    series(&|p, v| toward(p, v) * (1.0 - z(p))),
                    series(&|p, v| toward(p, v) * z(p)),
                    series(&|p, _| (p - rest).max(0.0)),
                    series(&|p, _| (rest - p).max(0.0)),
                    // Held displacement: gone as soon as the posture returns toward rest
                    // (a passive release shows no holding activity).
                    series(&|p, v| if v < -ret { 0.0 } else { (p - rest).max(0.0) }),
                    series(&|p, v| if v > ret { 0.0 } else { (rest - p).max(0.0) }),
                ];
                channels.push(block::Channel {
                    label: format!("{} {word}", dofs[d]),
                    basis,
                    speed,
                });
            }
        }
        let data = BlockData {
            rate_hz: rate,
            n: wn,
            interior: (a - w0, e - w0),
            env: site_rows,
            channels,
            ext,
            free: b.is_free(),
        };
        out_blocks.push(BlockAlignment {
            block: b.clone(),
            dofs_used: used.iter().map(|&d| dofs[d].clone()).collect(),
            figures: None,
            quality: Verdict::Failed,
            reasons: Vec::new(),
            traces: None,
            direction_own_s: None,
        });
        pending.push(Pending {
            slot: out_blocks.len() - 1,
            data,
            w0,
        });
    }

    // Pass 1: every block on its own. With a direction part, the session's
    // direction lag is pooled from the blocks' own estimates, each weighted
    // by its information (the inverse of its variance with the smooth lag
    // and the feature weights profiled out), and pass 2 aligns every block
    // again with the direction part fixed at the pooled value.
    // Blocks are independent within a pass: they run in parallel, and the
    // results are collected in block order (the same for any thread count).
    let warped = pending
        .par_iter()
        .map(|p| block::warp_block(&p.data, cfg))
        .collect::<Result<Vec<_>>>()?;
    let pass = |direction: Option<f64>| {
        pending
            .par_iter()
            .zip(warped.par_iter())
            .map(|(p, w)| align_block(&p.data, cfg, w, direction))
            .collect::<Result<Vec<_>>>()
    };
    let mut outcomes = pass(None)?;
    let pooled = if cfg.direction_lag {
        pool_direction(&outcomes, cfg)
    } else {
        None
    };
    for (p, o) in pending.iter().zip(&outcomes) {
        out_blocks[p.slot].direction_own_s = o.direction.map(|(eta, _)| eta);
    }
    if let Some(eta) = pooled {
        outcomes = pass(Some(eta))?;
    }
    for (p, o) in pending.iter().zip(outcomes) {
        let (w0, wn) = (p.w0, p.data.n);
        let (a, e) = (w0 + p.data.interior.0, w0 + p.data.interior.1);
        let (quality, reasons) = quality::judge(&o.figures, &cfg.quality, cfg.band_s);
        if quality != Verdict::Failed {
            for k in 0..wn {
                let i = w0 + k;
                // 1 inside the block, a raised-cosine fade over `taper` samples outside it.
                let dist = if i < a {
                    a - i
                } else if i >= e {
                    i + 1 - e
                } else {
                    0
                };
                if dist > taper {
                    continue;
                }
                let w = 0.5 + 0.5 * (std::f64::consts::PI * dist as f64 / (taper + 1) as f64).cos();
                lag_sum[i] += w * o.lag[k] / rate;
                lag_w[i] += w;
            }
        }
        let (ta, tb) = p.data.interior;
        let slot = &mut out_blocks[p.slot];
        slot.figures = Some(o.figures);
        slot.quality = quality;
        slot.reasons = reasons;
        slot.traces = Some(Traces {
            time_s: (ta..tb).map(|k| t_of(w0 + k)).collect(),
            labels: o.labels.clone(),
            composite: o.composite.iter().map(|c| c[ta..tb].to_vec()).collect(),
            before: o.intact_before.iter().map(|c| c[ta..tb].to_vec()).collect(),
            after: o.intact_after.iter().map(|c| c[ta..tb].to_vec()).collect(),
            lag_s: o.lag[ta..tb].iter().map(|l| l / rate).collect(),
        });
    }

    // Join: weighted lags where blocks speak, linear interpolation elsewhere.
    let known: Vec<Option<f64>> = (0..n)
        .map(|i| (lag_w[i] > 1e-9).then(|| lag_sum[i] / lag_w[i]))
        .collect();
    let mut lag = interpolate_gaps(&known);
    // Keep the joined map strictly increasing within the slope limits.
    limit_steps(&mut lag, rate, cfg.max_slope);

    let mut time_s = Vec::with_capacity(n);
    let mut intact_time_s = Vec::with_capacity(n);
    let mut pos = Array2::zeros((dofs.len(), n));
    let mut vel = Array2::zeros((dofs.len(), n));
    let mut usable = vec![false; n];
    for i in 0..n {
        let t = t_of(i);
        let tau = t + lag[i];
        time_s.push(t);
        intact_time_s.push(tau - offset);
        let slope = {
            let (p, q) = (i.saturating_sub(1), (i + 1).min(n - 1));
            (lag[q] - lag[p]) * rate / (q - p) as f64 + 1.0
        };
        for d in 0..dofs.len() {
            let (p, v) = kin.at(d, tau - offset);
            pos[[d, i]] = p;
            vel[[d, i]] = v * slope;
        }
        let failed = block_of[i].is_some_and(|b: usize| out_blocks[b].quality == Verdict::Failed);
        usable[i] = !failed && tau >= intact_span.0 && tau <= intact_span.1;
    }
    Ok(Aligned {
        time_s,
        intact_time_s,
        dofs,
        pos,
        vel,
        sites: env.sites.clone(),
        env: env.data.clone(),
        block_of,
        usable,
        blocks: out_blocks,
        intact_offset_s: offset,
        direction_lag_s: pooled,
    })
}

/// A block waiting to be warped: where its result goes and its data.
struct Pending {
    /// Index into the output blocks.
    slot: usize,
    data: BlockData,
    /// First sample of the window on the feature grid (the block proper is
    /// `w0 + data.interior.0 .. w0 + data.interior.1`).
    w0: usize,
}

/// The session's direction lag (s): the information-weighted mean of the
/// blocks' own estimates, over the blocks that pass 1 did not fail. `None`
/// without any estimate.
fn pool_direction(outcomes: &[block::BlockOutcome], cfg: &AlignConfig) -> Option<f64> {
    let (mut num, mut den) = (0.0, 0.0);
    for o in outcomes {
        let (q, _) = quality::judge(&o.figures, &cfg.quality, cfg.band_s);
        if q == Verdict::Failed {
            continue;
        }
        if let Some((eta, info)) = o.direction {
            if eta.is_finite() && info.is_finite() && info > 0.0 {
                num += info * eta;
                den += info;
            }
        }
    }
    (den > 0.0).then(|| num / den)
}

/// Fills `None` stretches linearly between known neighbours (constant beyond the ends; 0 if none known).
fn interpolate_gaps(v: &[Option<f64>]) -> Vec<f64> {
    let n = v.len();
    let mut out = vec![0.0; n];
    let known: Vec<usize> = (0..n).filter(|&i| v[i].is_some()).collect();
    if known.is_empty() {
        return out;
    }
    for i in 0..n {
        out[i] = match v[i] {
            Some(x) => x,
            None => {
                let p = known.partition_point(|&k| k < i);
                match (p.checked_sub(1).map(|q| known[q]), known.get(p)) {
                    (Some(a), Some(&b)) => {
                        let (ya, yb) = (v[a].unwrap_or(0.0), v[b].unwrap_or(0.0));
                        ya + (yb - ya) * (i - a) as f64 / (b - a) as f64
                    }
                    (Some(a), None) => v[a].unwrap_or(0.0),
                    (None, Some(&b)) => v[b].unwrap_or(0.0),
                    (None, None) => 0.0,
                }
            }
        };
    }
    out
}

/// Clamps each step of t ↦ t + lag(t) (lag in s) to [1/s, s] times the grid step, forward in time.
fn limit_steps(lag: &mut [f64], rate: f64, max_slope: f64) {
    let (lo, hi) = ((1.0 / max_slope - 1.0) / rate, (max_slope - 1.0) / rate);
    for i in 1..lag.len() {
        let d = lag[i] - lag[i - 1];
        lag[i] = lag[i - 1] + d.clamp(lo, hi);
    }
}
