//! Warping one task block: fit composites, DTW, smooth map; repeat; refine
//! the lag continuously; judge.

#![allow(clippy::needless_range_loop)] // index loops mirror the formulas

use super::config::AlignConfig;
use super::dtw::{dtw_rows, Cost, DtwOptions, StepPattern};
use super::features::{lerp_at, mean_sd, moving_average, nnls_intercept, NnlsDesign};
use super::quality::{pearson, quantile, Figures};
use super::refine::{refine, LagParts, RefineChannel, RefineOptions};
use super::warpmap::{limit_slope, raw_lag, whittaker};
use crate::Result;

/// One block's data on the feature grid (EMG clock).
#[derive(Debug, Clone)]
pub struct BlockData {
    /// Grid rate, Hz.
    pub rate_hz: f64,
    /// Window length in samples (the block plus its margins).
    pub n: usize,
    /// The block proper within the window: samples `interior.0 .. interior.1`.
    pub interior: (usize, usize),
    /// Envelopes shifted later by the expected EMD, per site, `n` samples each.
    pub env: Vec<Vec<f64>>,
    /// Intact-side channels on the extended grid: window sample i is index i + `ext`.
    pub channels: Vec<Channel>,
    /// Extension of the intact grid beyond each end of the window, samples.
    pub ext: usize,
    /// Whether the block is free movement (its lag's base may change faster).
    pub free: bool,
}

/// One alignment channel: an intact-side model of one composite EMG activation.
///
/// The channel's intact feature is φ(τ) = Σ_m β_m B_m(τ) with β ≥ 0 fitted
/// together with the composite (alternating non-negative least squares), so
/// that a position-dependent effort (activation per unit speed changing with
/// posture) and holding effort do not pass for a timing difference.
#[derive(Debug, Clone)]
pub struct Channel {
    /// Label for figures (`<dof> <direction>`).
    pub label: String,
    /// Basis series B_m on the extended grid; the first carries the speed.
    pub basis: Vec<Vec<f64>>,
    /// Directional speed on the extended grid (for the coarse lag).
    pub speed: Vec<f64>,
}

/// What warping one block gives.
#[derive(Debug, Clone)]
pub struct BlockOutcome {
    /// Labels of the channels that took part.
    pub labels: Vec<String>,
    /// Lag (intact time − EMG time) at every window sample, in samples.
    pub lag: Vec<f64>,
    /// The block's own estimate of the direction part of the lag and its
    /// information: (η in s, 1/var(η) in s⁻²); absent when not estimated.
    pub direction: Option<(f64, f64)>,
    /// Quality figures over the block proper.
    pub figures: Figures,
    /// Composite activations (standardised like the intact features), per feature, window samples.
    pub composite: Vec<Vec<f64>>,
    /// Standardised intact features on the window before warping.
    pub intact_before: Vec<Vec<f64>>,
    /// Standardised intact features through the final map.
    pub intact_after: Vec<Vec<f64>>,
}

/// Number of leading basis series (speed times effort) shared by the two directions of a DoF.
const SHARED: usize = 4;

/// Smallest correlation between a composite and its intact feature for the feature to take part.
pub(super) const MIN_FEATURE_CORR: f64 = 0.3;

fn scaled(f: &[Vec<f64>], s: &[f64]) -> Vec<Vec<f64>> {
    f.iter()
        .zip(s)
        .map(|(c, s)| c.iter().map(|v| v * s).collect())
        .collect()
}

fn pick_vals(v: &[f64], idx: &[usize]) -> Vec<f64> {
    idx.iter().map(|&i| v[i]).collect()
}

/// Sum of standardised series.
fn standard_sum(f: &[Vec<f64>], len: usize) -> Vec<f64> {
    let mut t = vec![0.0; len];
    for e in f {
        let (m, sd) = mean_sd(e);
        for i in 0..len.min(e.len()) {
            t[i] += (e[i] - m) / sd.max(1e-12);
        }
    }
    t
}

/// b + Σ_m w_m f_m over `len` samples.
fn combine(f: &[Vec<f64>], w: &[f64], b: f64, len: usize) -> Vec<f64> {
    let mut out = vec![b; len];
    for (s, &w) in f.iter().zip(w) {
        if w != 0.0 {
            for i in 0..len {
                out[i] += w * s[i];
            }
        }
    }
    out
}

/// (x − mean(ref)) / sd(ref).
fn standardise(x: &[f64], reference: &[f64]) -> Vec<f64> {
    let (m, sd) = mean_sd(reference);
    x.iter().map(|v| (v - m) / sd.max(1e-12)).collect()
}

fn odd(w: f64) -> usize {
    (w.round().max(1.0) as usize) | 1
}

/// Stacks features row-wise (sample i: all features) for the DTW.
fn rows(f: &[Vec<f64>], n: usize) -> Vec<f64> {
    let mut out = Vec::with_capacity(n * f.len());
    for i in 0..n {
        for c in f {
            out.push(c[i]);
        }
    }
    out
}

fn stacked_corr(a: &[Vec<f64>], b: &[Vec<f64>], r: (usize, usize)) -> f64 {
    let x: Vec<f64> = a.iter().flat_map(|c| c[r.0..r.1].iter().copied()).collect();
    let y: Vec<f64> = b.iter().flat_map(|c| c[r.0..r.1].iter().copied()).collect();
    pearson(&x, &y)
}

/// A series on the extended grid read through `lag` at every window sample:
/// f(i + ext + ℓ_i).
fn through(d: &BlockData, lag: &[f64], f: &[f64]) -> Vec<f64> {
    (0..d.n)
        .map(|i| lerp_at(f, (i + d.ext) as f64 + lag[i]))
        .collect()
}

/// The band radius r (samples) and the DTW options of a block.
fn dtw_setup(d: &BlockData, cfg: &AlignConfig) -> Result<(usize, DtwOptions)> {
    let r = (cfg.band_s * d.rate_hz).round().max(1.0) as usize;
    let opts = DtwOptions {
        band: Some(r.min(d.n.saturating_sub(1)).max(1)),
        pattern: StepPattern::from_max_slope(cfg.max_slope)?,
        path: true,
        side_penalty: cfg.side_penalty,
        open_ends: true,
    };
    Ok((r, opts))
}

/// Median, interquartile range and 10th / 90th percentiles of the lag (s)
/// over the block proper.
fn lag_spread(d: &BlockData, lag: &[f64]) -> (f64, f64, [f64; 2]) {
    let lag_in: Vec<f64> = lag[d.interior.0..d.interior.1]
        .iter()
        .map(|l| l / d.rate_hz)
        .collect();
    (
        quantile(&lag_in, 0.5),
        quantile(&lag_in, 0.75) - quantile(&lag_in, 0.25),
        [quantile(&lag_in, 0.1), quantile(&lag_in, 0.9)],
    )
}

/// Where each channel's basis weights sit in the refinement's weight vector
/// γ: per DoF (channel pair) the shared speed-effort weights, then each
/// direction's own displacement weights, then the two intercepts.
struct WeightLayout {
    /// γ index of every basis series, per channel.
    index: Vec<Vec<usize>>,
    /// Weights per channel pair.
    per_pair: usize,
}

impl WeightLayout {
    fn new(basis: &[Vec<Vec<f64>>]) -> Self {
        let nb = basis_len(basis);
        let per_pair = 2 * nb - SHARED + 2;
        let index = (0..basis.len())
            .map(|c| {
                let (base, side) = ((c / 2) * per_pair, c % 2);
                (0..nb)
                    .map(|m| {
                        if m < SHARED {
                            base + m
                        } else {
                            base + SHARED + side * (nb - SHARED) + (m - SHARED)
                        }
                    })
                    .collect()
            })
            .collect();
        WeightLayout { index, per_pair }
    }

    /// γ index of channel c's intercept.
    fn intercept(&self, c: usize) -> usize {
        (c / 2) * self.per_pair + self.per_pair - 2 + c % 2
    }

    /// Length of γ for `nc` channels.
    fn len(&self, nc: usize) -> usize {
        nc.div_ceil(2) * self.per_pair
    }
}

/// A block after its DTW rounds: the part of the work that does not depend
/// on the direction lag, shared by both passes of [`super::align`].
pub struct Warped {
    /// Smoothed basis series per channel, extended grid.
    basis: Vec<Vec<Vec<f64>>>,
    /// Smoothed, EMD-shifted envelopes per site, window samples.
    env: Vec<Vec<f64>>,
    /// The smoothed DTW lag, samples.
    lag: Vec<f64>,
    /// Standardised composites and intact features, and channel weights.
    composite: Vec<Vec<f64>>,
    intact: Vec<Vec<f64>>,
    scale: Vec<f64>,
}

/// The DTW rounds of one block: a coarse constant lag, then composites
/// fitted through the map and warped again, `rounds` times.
pub fn warp_block(d: &BlockData, cfg: &AlignConfig) -> Result<Warped> {
    let n = d.n;
    let (r, opts) = dtw_setup(d, cfg)?;
    let ma = odd(cfg.feature_smooth_s * d.rate_hz);
    let len = n + 2 * d.ext;
    let basis: Vec<Vec<Vec<f64>>> = d
        .channels
        .iter()
        .map(|c| c.basis.iter().map(|f| moving_average(f, ma)).collect())
        .collect();
    let env: Vec<Vec<f64>> = d.env.iter().map(|e| moving_average(e, ma)).collect();
    // Coarse constant lag: total activity against total intact speed.
    let total_env = standard_sum(&env, n);
    let speed = standard_sum(
        &d.channels
            .iter()
            .map(|c| moving_average(&c.speed, ma))
            .collect::<Vec<_>>(),
        len,
    );
    let mut best = (f64::NEG_INFINITY, 0.0);
    let reach = r.min(d.ext) as i64;
    for l in -reach..=reach {
        let lag = vec![l as f64; n];
        let c = pearson(&total_env, &through(d, &lag, &speed));
        if c.is_finite() && c > best.0 {
            best = (c, l as f64);
        }
    }
    let mut lag = vec![best.1; n];

    let nc = d.channels.len();
    let mut composite: Vec<Vec<f64>> = vec![Vec::new(); nc];
    let mut intact: Vec<Vec<f64>> = vec![Vec::new(); nc];
    let mut scale = vec![0.0; nc];
    for _round in 0..cfg.rounds {
        let fit = fit_channels(d, &basis, &env, &lag, None);
        fit.adopt(d, &basis, &mut scale, &mut composite, &mut intact);
        if scale.iter().all(|&v| v == 0.0) {
            break;
        }
        lag = warp(
            d,
            &scaled(&composite, &scale),
            &scaled(&intact, &scale),
            &opts,
            cfg,
            r,
        )?;
    }
    Ok(Warped {
        basis,
        env,
        lag,
        composite,
        intact,
        scale,
    })
}

/// Refines and judges one block after its DTW rounds (`w`). With `direction`
/// (s), the lag's direction part is fixed at that size (the session's pooled
/// estimate); without it, and with `direction_lag` on, it is estimated in
/// this block.
pub fn align_block(
    d: &BlockData,
    cfg: &AlignConfig,
    w: &Warped,
    direction: Option<f64>,
) -> Result<BlockOutcome> {
    let n = d.n;
    let (r, opts) = dtw_setup(d, cfg)?;
    let len = n + 2 * d.ext;
    let nc = d.channels.len();
    let (basis, env) = (&w.basis, &w.env);
    let mut lag = w.lag.clone();
    let (mut composite, mut intact, mut scale) =
        (w.composite.clone(), w.intact.clone(), w.scale.clone());
    // Continuous refinement: composites refitted through the map with the
    // speed on the EMG clock, then a smooth lag fitted to them (see [`refine`]).
    let mut estimate = None;
    if cfg.refine_rounds > 0 && scale.iter().any(|&v| v > 0.0) {
        let ropts = refine_options(d, cfg, r);
        let layout = WeightLayout::new(basis);
        for _round in 0..cfg.refine_rounds {
            let slope = map_slope(&lag);
            let fit = fit_channels(d, basis, env, &lag, Some(&slope));
            let mut gamma0 = vec![0.0; layout.len(nc)];
            let mut weight = vec![0.0; nc];
            for c in 0..nc {
                for (m, &j) in layout.index[c].iter().enumerate() {
                    gamma0[j] = fit.beta[c][m];
                }
                let (sp, lv) = split_parts(&basis[c], &fit.beta[c], len);
                let model: Vec<f64> = (0..n)
                    .map(|i| {
                        let x = (i + d.ext) as f64 + lag[i];
                        lerp_at(&sp, x) * slope[i] + lerp_at(&lv, x)
                    })
                    .collect();
                let (mm, sd) = mean_sd(&model);
                let (ma, _) = mean_sd(&fit.composite[c]);
                gamma0[layout.intercept(c)] = ma - mm;
                // Signal-to-misfit weight ρ²/(1 − ρ²) per unit of feature variance.
                let rho2 = fit.scale[c].powi(2).min(0.999);
                weight[c] = if sd > 1e-12 {
                    rho2 / (1.0 - rho2) / (sd * sd)
                } else {
                    0.0
                };
            }
            let chans: Vec<RefineChannel> = (0..nc)
                .map(|c| RefineChannel {
                    composite: &fit.composite[c],
                    basis: &basis[c],
                    index: &layout.index[c],
                    speed_terms: SHARED,
                    intercept: layout.intercept(c),
                    weight: weight[c],
                })
                .collect();
            if chans.iter().all(|c| c.weight <= 0.0) {
                break;
            }
            let (regs, known) = match (cfg.direction_lag, direction) {
                (false, _) => (Vec::new(), Vec::new()),
                (true, None) => (vec![direction_regressor(d, cfg, &lag)], Vec::new()),
                (true, Some(eta)) => {
                    let dr = direction_regressor(d, cfg, &lag);
                    (Vec::new(), dr.iter().map(|v| v * eta * d.rate_hz).collect())
                }
            };
            let parts = LagParts {
                regressors: &regs,
                known: &known,
            };
            let refined = refine(
                &chans,
                d.ext,
                &lag,
                &parts,
                &gamma0,
                cfg.refine_weights,
                &ropts,
            );
            if let (Some(&e), Some(&i)) =
                (refined.direction.first(), refined.direction_info.first())
            {
                estimate = Some((e / d.rate_hz, i * d.rate_hz * d.rate_hz));
            }
            lag = finish_lag(refined.lag, cfg, r);
            fit.adopt(d, basis, &mut scale, &mut composite, &mut intact);
        }
    }
    let used: Vec<usize> = (0..nc).filter(|&c| scale[c] > 0.0).collect();
    if used.is_empty() {
        // No intact feature matches any non-negative mix of the sites: there
        // is nothing to warp, and the NaN correlations fail the block.
        let (median, iqr, p10_p90) = lag_spread(d, &lag);
        return Ok(BlockOutcome {
            labels: Vec::new(),
            lag,
            direction: None,
            figures: Figures {
                lag_median_s: median,
                lag_iqr_s: iqr,
                lag_p10_p90_s: p10_p90,
                corr_before: f64::NAN,
                corr_after: f64::NAN,
                corr_null: f64::NAN,
                share_at_limit: 0.0,
            },
            composite: Vec::new(),
            intact_before: Vec::new(),
            intact_after: Vec::new(),
        });
    }
    let pick = |f: &[Vec<f64>]| used.iter().map(|&c| f[c].clone()).collect::<Vec<_>>();
    let sc = pick_vals(&scale, &used);
    let (composite, intact) = (scaled(&pick(&composite), &sc), scaled(&pick(&intact), &sc));
    let labels = used.iter().map(|&c| d.channels[c].label.clone()).collect();
    let zero = vec![0.0; n];
    let intact_before: Vec<Vec<f64>> = intact.iter().map(|f| through(d, &zero, f)).collect();
    let intact_after: Vec<Vec<f64>> = intact.iter().map(|f| through(d, &lag, f)).collect();
    let corr_before = stacked_corr(&composite, &intact_before, d.interior);
    let corr_after = stacked_corr(&composite, &intact_after, d.interior);

    // Null: the same composites warped onto an unrelated stretch of the intact side.
    let corr_null = null_corr(d, &composite, &intact, &opts, cfg, r)?;

    let (median, iqr, p10_p90) = lag_spread(d, &lag);
    let limit_share = {
        let w = dtw_rows(
            &rows(&composite, n),
            &rows(&intact_before, n),
            composite.len(),
            Cost::Squared,
            &opts,
        )?;
        let inside: Vec<bool> = w
            .path
            .iter()
            .skip(1)
            .zip(&w.at_limit)
            .filter(|((i, _), _)| (d.interior.0..d.interior.1).contains(i))
            .map(|(_, &l)| l)
            .collect();
        inside.iter().filter(|&&l| l).count() as f64 / inside.len().max(1) as f64
    };
    let figures = Figures {
        lag_median_s: median,
        lag_iqr_s: iqr,
        lag_p10_p90_s: p10_p90,
        corr_before,
        corr_after,
        corr_null,
        share_at_limit: limit_share,
    };
    Ok(BlockOutcome {
        labels,
        lag,
        direction: estimate,
        figures,
        composite,
        intact_before,
        intact_after,
    })
}

/// Number of basis series per channel (all channels have the same layout).
fn basis_len(basis: &[Vec<Vec<f64>>]) -> usize {
    basis.first().map_or(0, Vec::len)
}

/// Composite activations fitted to the intact side through a lag.
struct Fit {
    /// Composite activation per channel (the intact feature's units), window samples.
    composite: Vec<Vec<f64>>,
    /// Basis weights β per channel.
    beta: Vec<Vec<f64>>,
    /// Channel weight: the correlation of composite and intact feature inside the block (0 if below the floor).
    scale: Vec<f64>,
}

impl Fit {
    /// Takes this fit as the block's current one: channel weights, standardised
    /// composites, and each channel's intact feature (β applied to its basis on
    /// the extended grid, standardised over the window).
    fn adopt(
        &self,
        d: &BlockData,
        basis: &[Vec<Vec<f64>>],
        scale: &mut [f64],
        composite: &mut [Vec<f64>],
        intact: &mut [Vec<f64>],
    ) {
        for c in 0..basis.len() {
            scale[c] = self.scale[c];
            composite[c] = standardise(&self.composite[c], &self.composite[c]);
            let full = combine(&basis[c], &self.beta[c], 0.0, d.n + 2 * d.ext);
            intact[c] = standardise(&full, &full[d.ext..d.ext + d.n]);
        }
    }
}

/// Fits β and the composites of every channel through `lag` (samples). With
/// `slope`, the speed-type basis series are multiplied by the map's slope (speed
/// on the EMG clock).
fn fit_channels(
    d: &BlockData,
    basis: &[Vec<Vec<f64>>],
    env: &[Vec<f64>],
    lag: &[f64],
    slope: Option<&[f64]>,
) -> Fit {
    let n = d.n;
    let nc = basis.len();
    let inner = |v: &[f64]| v[d.interior.0..d.interior.1].to_vec();
    let at = |m: usize, f: &[f64]| -> Vec<f64> {
        (0..n)
            .map(|i| {
                let v = lerp_at(f, (i + d.ext) as f64 + lag[i]);
                match slope {
                    Some(s) if m < SHARED => v * s[i],
                    _ => v,
                }
            })
            .collect()
    };
    // The sites' Gram matrix is the same for every target.
    let sites = NnlsDesign::new(env);
    let mut out = Fit {
        composite: vec![Vec::new(); nc],
        beta: vec![Vec::new(); nc],
        scale: vec![0.0; nc],
    };
    // Channels come in pairs (the two directions of one DoF) that share
    // the position-dependent effort: a skew that one direction could
    // mistake for a timing change shows with the opposite sign in the other.
    for first in (0..nc).step_by(2) {
        let pair: Vec<usize> = (first..(first + 2).min(nc)).collect();
        let warped: Vec<Vec<Vec<f64>>> = pair
            .iter()
            .map(|&c| basis[c].iter().enumerate().map(|(m, f)| at(m, f)).collect())
            .collect();
        let nb = warped[0].len();
        let mut beta: Vec<Vec<f64>> = pair
            .iter()
            .map(|_| {
                (0..nb)
                    .map(|m| if m < SHARED { 1.0 } else { 0.0 })
                    .collect()
            })
            .collect();
        let mut comps = vec![Vec::new(); pair.len()];
        for _als in 0..4 {
            for (p, _) in pair.iter().enumerate() {
                let target = combine(&warped[p], &beta[p], 0.0, n);
                let (b0, w) = sites.solve(&target);
                comps[p] = combine(env, &w, b0, n);
            }
            // Joint fit: shared speed-effort columns, own displacement columns.
            let np = pair.len();
            let ncol = SHARED + np * (nb - SHARED);
            let mut cols = vec![vec![0.0; np * n]; ncol];
            let mut y = vec![0.0; np * n];
            for p in 0..np {
                let (my, _) = mean_sd(&comps[p]);
                for i in 0..n {
                    y[p * n + i] = comps[p][i] - my;
                }
                for m in 0..nb {
                    let col = if m < SHARED {
                        m
                    } else {
                        SHARED + p * (nb - SHARED) + (m - SHARED)
                    };
                    let (mm, _) = mean_sd(&warped[p][m]);
                    for i in 0..n {
                        cols[col][p * n + i] = warped[p][m][i] - mm;
                    }
                }
            }
            let (_, coef) = nnls_intercept(&cols, &y);
            if coef.iter().all(|&v| v == 0.0) {
                break;
            }
            for p in 0..np {
                for m in 0..nb {
                    let col = if m < SHARED {
                        m
                    } else {
                        SHARED + p * (nb - SHARED) + (m - SHARED)
                    };
                    beta[p][m] = coef[col];
                }
            }
        }
        for (p, &c) in pair.iter().enumerate() {
            let target = combine(&warped[p], &beta[p], 0.0, n);
            let rho = pearson(&inner(&comps[p]), &inner(&target));
            out.scale[c] = if rho.is_finite() && rho >= MIN_FEATURE_CORR {
                rho
            } else {
                0.0
            };
            out.composite[c] = std::mem::take(&mut comps[p]);
            out.beta[c] = std::mem::take(&mut beta[p]);
        }
    }
    out
}

/// The speed part (leading [`SHARED`] series) and displacement part of a channel's intact feature.
fn split_parts(basis: &[Vec<f64>], beta: &[f64], len: usize) -> (Vec<f64>, Vec<f64>) {
    let k = SHARED.min(basis.len());
    (
        combine(&basis[..k], &beta[..k], 0.0, len),
        combine(&basis[k..], &beta[k..], 0.0, len),
    )
}

/// Slope 1 + ℓ′ of the map i ↦ i + ℓ_i (central differences).
fn map_slope(lag: &[f64]) -> Vec<f64> {
    let n = lag.len();
    (0..n)
        .map(|i| {
            let (a, b) = (i.saturating_sub(1), (i + 1).min(n - 1));
            if b > a {
                1.0 + (lag[b] - lag[a]) / (b - a) as f64
            } else {
                1.0
            }
        })
        .collect()
}

fn refine_options(d: &BlockData, cfg: &AlignConfig, r: usize) -> RefineOptions {
    let period = if d.free {
        cfg.refine_period_free_s
    } else {
        cfg.refine_period_s
    };
    RefineOptions {
        knot: (cfg.refine_knot_s * d.rate_hz).max(1.0),
        period: period * d.rate_hz,
        max_lag: r as f64,
        iterations: cfg.refine_iterations,
        tukey_c: cfg.robust_c,
        scale_floor: 0.02,
    }
}

/// The direction of movement of the hand on the window through `lag`: per
/// DoF (channel pair) the intact rate v = s₊ − s₋ scaled to
/// clamp(v / v₀, −1, 1) with v₀ = `direction_speed_dps`, summed over the
/// DoFs and clamped to [−1, 1] again (+1: flexing, −1: extending, 0: still
/// or moving both ways at once), smoothed by a centred moving average over
/// `direction_smooth_s` on the intact clock and read at i + ℓ(i).
fn direction_regressor(d: &BlockData, cfg: &AlignConfig, lag: &[f64]) -> Vec<f64> {
    let w = odd(cfg.direction_smooth_s * d.rate_hz);
    let len = d.n + 2 * d.ext;
    let mut raw = vec![0.0; len];
    for p in d.channels.chunks(2).filter(|p| p.len() == 2) {
        for (r, (a, b)) in raw.iter_mut().zip(p[0].speed.iter().zip(&p[1].speed)) {
            *r += ((a - b) / cfg.direction_speed_dps).clamp(-1.0, 1.0);
        }
    }
    raw.iter_mut().for_each(|v| *v = v.clamp(-1.0, 1.0));
    through(d, lag, &moving_average(&raw, w))
}

/// Slope limits and the band on a refined lag.
fn finish_lag(mut lag: Vec<f64>, cfg: &AlignConfig, r: usize) -> Vec<f64> {
    let ones = vec![1.0; lag.len()];
    limit_slope(&mut lag, &ones, cfg.max_slope);
    for l in &mut lag {
        *l = l.clamp(-(r as f64), r as f64);
    }
    lag
}

/// One DTW of composites against intact features (window part), turned into a smooth lag.
fn warp(
    d: &BlockData,
    composite: &[Vec<f64>],
    intact: &[Vec<f64>],
    opts: &DtwOptions,
    cfg: &AlignConfig,
    r: usize,
) -> Result<Vec<f64>> {
    let n = d.n;
    let c = composite.len();
    let reference: Vec<Vec<f64>> = intact
        .iter()
        .map(|f| f[d.ext..d.ext + n].to_vec())
        .collect();
    let w = dtw_rows(
        &rows(composite, n),
        &rows(&reference, n),
        c,
        Cost::Squared,
        opts,
    )?;
    let raw = raw_lag(&w.path, n)?;
    let weights = informativeness(d, composite, intact, &raw);
    let mut lag = whittaker(&raw, &weights, cfg.smooth_s * d.rate_hz)?;
    limit_slope(&mut lag, &weights, cfg.max_slope);
    for l in &mut lag {
        *l = l.clamp(-(r as f64), r as f64);
    }
    Ok(lag)
}

/// Weight of each window sample in the map smoother: where both sides
/// change (geometric mean of the squared feature slopes), zero in the margins.
fn informativeness(
    d: &BlockData,
    composite: &[Vec<f64>],
    intact: &[Vec<f64>],
    raw: &[f64],
) -> Vec<f64> {
    let n = d.n;
    let slope2 = |f: &dyn Fn(f64) -> f64, i: usize| -> f64 {
        let u = i as f64;
        (f(u + 1.0) - f(u - 1.0)).powi(2)
    };
    let mut ge = vec![0.0; n];
    let mut gi = vec![0.0; n];
    for i in 0..n {
        for c in composite {
            ge[i] += slope2(&|u: f64| lerp_at(c, u), i);
        }
        let j = (i + d.ext) as f64 + raw[i];
        for f in intact {
            gi[i] += (lerp_at(f, j + 1.0) - lerp_at(f, j - 1.0)).powi(2);
        }
    }
    let w = odd(0.1 * d.rate_hz);
    let ge = moving_average(&ge, w);
    let gi = moving_average(&gi, w);
    let mut out: Vec<f64> = ge.iter().zip(&gi).map(|(a, b)| (a * b).sqrt()).collect();
    let inner = &out[d.interior.0..d.interior.1];
    let mean = inner.iter().sum::<f64>() / inner.len().max(1) as f64;
    for (i, v) in out.iter_mut().enumerate() {
        *v = if (d.interior.0..d.interior.1).contains(&i) {
            *v + 0.02 * mean.max(1e-12)
        } else {
            0.0
        };
    }
    out
}

/// Correlation after warping the composites onto a time-shifted copy of the
/// intact features (the shift that makes them least like themselves); NaN
/// for blocks too short for an unrelated stretch. The null is warped by the
/// DTW map alone, without the continuous refinement: the DTW path, free to
/// chase noise, matches unrelated features better than the penalised
/// refinement does (on the simulated unmirrored block the null correlation
/// is 0.50 after DTW, 0.27 after refinement), so it is the stricter
/// reference for recognising a block that was not mirrored.
fn null_corr(
    d: &BlockData,
    composite: &[Vec<f64>],
    intact: &[Vec<f64>],
    opts: &DtwOptions,
    cfg: &AlignConfig,
    r: usize,
) -> Result<f64> {
    let n = d.n;
    let lo = (3 * r).max(n / 5);
    if n < 2 * lo + 2 {
        return Ok(f64::NAN);
    }
    let win: Vec<&[f64]> = intact.iter().map(|f| &f[d.ext..d.ext + n]).collect();
    let stride = (n / 400).max(1);
    let mut best = (f64::INFINITY, lo);
    let mut s = lo;
    while s <= n - lo {
        let a: Vec<f64> = win.iter().flat_map(|f| f.iter().copied()).collect();
        let b: Vec<f64> = win
            .iter()
            .flat_map(|f| (0..n).map(move |i| f[(i + s) % n]))
            .collect();
        let c = pearson(&a, &b);
        if c.is_finite() && c < best.0 {
            best = (c, s);
        }
        s += stride;
    }
    let shift = best.1;
    let shifted: Vec<Vec<f64>> = win
        .iter()
        .map(|f| {
            let mut e = vec![0.0; n + 2 * d.ext];
            for (k, v) in e.iter_mut().enumerate() {
                let i = (k as i64 - d.ext as i64).rem_euclid(n as i64) as usize;
                *v = f[(i + shift) % n];
            }
            e
        })
        .collect();
    let lag = warp(d, composite, &shifted, opts, cfg, r)?;
    let after: Vec<Vec<f64>> = shifted.iter().map(|f| through(d, &lag, f)).collect();
    Ok(stacked_corr(composite, &after, d.interior))
}
