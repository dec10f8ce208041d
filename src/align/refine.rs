//! Continuous refinement of a block's lag after DTW: a smooth lag curve
//! fitted to the features by penalised, robust Gauss–Newton.
//!
//! DTW gives a path on the sample grid whose side steps cost a penalty so
//! that it does not chase envelope noise; that penalty also flattens real,
//! smooth lag changes (a lag that varies by ±60 ms within two seconds is
//! followed only in part). This stage starts from the DTW lag and fits the
//! lag curve ℓ directly, on the whole block at once:
//!
//! ```text
//! ℓ(i) = Σ_k θ_k N_k(i) + Σ_j η_j D_j(i) + κ(i)
//!                  (uniform cubic B-splines, knot spacing h samples; direction regressors D_j; known part κ)
//! u(i) = i + ℓ(i),   s(i) = u′(i) = 1 + ℓ′(i)
//! φ_c(i) = S_c(u(i)) · s(i) + H_c(u(i)),   S_c = Σ_m γ_m B_cm (speeds),  H_c = Σ_m γ_m B_cm + γ_c0
//! minimise  Σ_c Σ_i w_ci (a_c(i) − φ_c(i))²  +  μ ‖D₂ θ‖²   over θ, η and (optionally) γ ≥ 0
//! ```
//!
//! with a_c the composite EMG activation of channel c, S_c its speed part
//! (intact speed times position-dependent effort, on the intact clock), H_c
//! its displacement part (holding), and D₂ the second-difference matrix (a
//! P-spline penalty; Eilers & Marx 1996, "Flexible smoothing with B-splines
//! and penalties", Stat. Sci. 11:89–121). The factor s(i) puts the speed on
//! the EMG clock: a speed seen on the intact clock through a map of slope s
//! is s times the speed the EMG commanded, so without it a lag that grows
//! (s > 1) would show as weaker movement and bend the fit; displacements need
//! no such factor. Each step solves the banded normal equations
//! (JᵀWJ + μD₂ᵀD₂ + νI) δ = JᵀW r − μD₂ᵀD₂θ with
//! ∂φ_c(i)/∂θ_k = (S_c′(u) s + H_c′(u)) N_k(i) + S_c(u) N_k′(i)
//! (Gauss–Newton with Levenberg damping ν; Nocedal & Wright 2006, "Numerical
//! Optimization", ch. 10), accepted only if the objective falls. μ is scaled
//! to the mean timing information per knot at the start,
//! μ = (P / (2π h))⁴ · mean_k Σ_ci w_ci (S_c′ s + H_c′)² N_k(i)², so that the
//! penalty's half-gain period is about P samples whatever the features'
//! contrast (the amplitude term S_c N_k′ is left out of this scale: it
//! measures how well the slope, not the lag, is determined, and would make
//! the penalty stiffer the stronger the speed features are); stretches where
//! the features are flat (holds) carry no information and the lag runs
//! straight across them, from the moves on either side.
//!
//! The direction part η_j D_j carries no roughness penalty: a lag that
//! differs between the two directions of movement switches at every
//! reversal, and only η_j, one number per regressor, says by how much. The
//! feature weights γ (the caller's speed-effort, displacement and intercept
//! weights of each channel, shared where channels share them) may be refitted
//! jointly with the lag; their columns ∂φ_c/∂γ_m = B_cm(u)·s (speeds) or
//! B_cm(u) join η's as a dense border of the banded system, which is solved
//! by its Schur complement ([`Banded::solve_bordered`]). A γ_m that would turn
//! negative is set to 0 (a projected step; the objective check still
//! applies). Refitting γ matters: weights fitted through an imperfect map
//! keep part of its error, since a position-dependent effort skews a speed
//! bump much as a shift of it would. At the end the information about each
//! η_j is 1 / ([S⁻¹]_jj σ²), S the Schur complement of the extra parameters
//! (θ profiled out) at the solution and σ² the weighted mean squared
//! residual; the caller pools the blocks' η by it. Samples are not
//! independent (the envelopes are smooth), so it overstates the information
//! by a factor common to all blocks of a session; a weighted mean does not
//! mind.
//!
//! The weights w_ci = g_c · ρ_ci are a channel weight g_c (given by the
//! caller) times robust weights ρ (Tukey's biweight of the residual over a
//! MAD-based scale, iteratively reweighted; Beaton & Tukey 1974,
//! Technometrics 16:147–185), so samples the EMG cannot explain (above all a
//! passive return after a hold: the intact hand moves, no muscle drives it)
//! drop out instead of bending the lag.

#![allow(clippy::needless_range_loop)] // index loops mirror the formulas

use super::banded::{dense_cholesky_solve, Banded};
use super::features::{lerp_at, mean_sd};
use crate::signal::envelope::percentile;

/// One channel as the refinement sees it: its composite and the basis series
/// of its intact feature, φ_c = Σ_m γ_{idx(c,m)} B_cm(u)·(s if m < `speed_terms`) + γ_{c0}.
pub struct RefineChannel<'a> {
    /// Composite activation a_c, one value per window sample.
    pub composite: &'a [f64],
    /// Basis series B_cm on the extended grid (window sample i at index i + `ext`).
    pub basis: &'a [Vec<f64>],
    /// Index into the weight vector γ of each basis series (channels may share weights).
    pub index: &'a [usize],
    /// Number of leading basis series that are speeds (multiplied by the map's slope).
    pub speed_terms: usize,
    /// Index into γ of the channel's intercept.
    pub intercept: usize,
    /// Channel weight g_c.
    pub weight: f64,
}

impl RefineChannel<'_> {
    /// φ_c at fractional extended-grid index x and map slope s.
    fn value(&self, gamma: &[f64], x: f64, s: f64) -> f64 {
        let (mut sp, mut lv) = (0.0, gamma[self.intercept]);
        for (m, (f, &j)) in self.basis.iter().zip(self.index).enumerate() {
            let g = gamma[j];
            if g != 0.0 {
                let v = g * lerp_at(f, x);
                if m < self.speed_terms {
                    sp += v;
                } else {
                    lv += v;
                }
            }
        }
        sp * s + lv
    }

    /// Speed part S_c and displacement part H_c (intercept included) with
    /// their slopes per sample, [S, S′, H, H′], at fractional extended-grid
    /// index x; `vals` receives each basis series' value there.
    fn parts(&self, gamma: &[f64], x: f64, vals: &mut Vec<f64>) -> [f64; 4] {
        let mut out = [0.0, 0.0, gamma[self.intercept], 0.0];
        vals.clear();
        for (m, (f, &j)) in self.basis.iter().zip(self.index).enumerate() {
            let (v, d) = value_slope(f, x);
            vals.push(v);
            let g = gamma[j];
            let o = if m < self.speed_terms { 0 } else { 2 };
            out[o] += g * v;
            out[o + 1] += g * d;
        }
        out
    }
}

/// Settings of one refinement.
#[derive(Debug, Clone)]
pub struct RefineOptions {
    /// Knot spacing h of the lag spline, samples.
    pub knot: f64,
    /// Half-gain period P of the penalty, samples.
    pub period: f64,
    /// Largest |lag|, samples (the band).
    pub max_lag: f64,
    /// Gauss–Newton iterations.
    pub iterations: usize,
    /// Tukey biweight constant in units of the robust residual scale (∞: no reweighting).
    pub tukey_c: f64,
    /// Floor of a channel's robust residual scale, as a share of the
    /// standard deviation of its composite (keeps a near-perfect fit from
    /// turning every sample into an outlier).
    pub scale_floor: f64,
}

/// Values of the four uniform cubic B-splines that are non-zero at fraction u ∈ [0, 1) of a cell.
fn cubic_basis(u: f64) -> [f64; 4] {
    let v = 1.0 - u;
    [
        v * v * v / 6.0,
        (3.0 * u * u * u - 6.0 * u * u + 4.0) / 6.0,
        (-3.0 * u * u * u + 3.0 * u * u + 3.0 * u + 1.0) / 6.0,
        u * u * u / 6.0,
    ]
}

/// Their derivatives with respect to u.
fn cubic_basis_deriv(u: f64) -> [f64; 4] {
    let v = 1.0 - u;
    [
        -0.5 * v * v,
        (9.0 * u * u - 12.0 * u) / 6.0,
        (-9.0 * u * u + 6.0 * u + 3.0) / 6.0,
        0.5 * u * u,
    ]
}

/// The spline layout over `n` samples: per sample the first basis index, the
/// four values and their derivatives per sample.
struct Layout {
    k: usize,
    first: Vec<usize>,
    vals: Vec<[f64; 4]>,
    ders: Vec<[f64; 4]>,
}

impl Layout {
    fn new(n: usize, h: f64) -> Self {
        let cells = (((n.max(2) - 1) as f64 / h).ceil() as usize).max(1);
        let mut first = Vec::with_capacity(n);
        let mut vals = Vec::with_capacity(n);
        let mut ders = Vec::with_capacity(n);
        for i in 0..n {
            let x = i as f64 / h;
            let j = (x.floor() as usize).min(cells - 1);
            first.push(j);
            vals.push(cubic_basis(x - j as f64));
            let d = cubic_basis_deriv(x - j as f64);
            ders.push([d[0] / h, d[1] / h, d[2] / h, d[3] / h]);
        }
        Layout {
            k: cells + 3,
            first,
            vals,
            ders,
        }
    }

    fn eval(&self, theta: &[f64]) -> (Vec<f64>, Vec<f64>) {
        let lag = self
            .first
            .iter()
            .zip(&self.vals)
            .map(|(&j, b)| (0..4).map(|m| b[m] * theta[j + m]).sum())
            .collect();
        let der = self
            .first
            .iter()
            .zip(&self.ders)
            .map(|(&j, b)| (0..4).map(|m| b[m] * theta[j + m]).sum())
            .collect();
        (lag, der)
    }

    /// Least-squares coefficients of a curve (with a tiny second-difference ridge for empty cells).
    fn fit(&self, y: &[f64]) -> Option<Vec<f64>> {
        let mut a = Banded::new(self.k, 3);
        let mut rhs = vec![0.0; self.k];
        for (i, (&j, b)) in self.first.iter().zip(&self.vals).enumerate() {
            for p in 0..4 {
                rhs[j + p] += b[p] * y[i];
                for q in p..4 {
                    a.add(j + p, j + q, b[p] * b[q]);
                }
            }
        }
        a.add_second_difference(1e-6);
        a.solve(&rhs)
    }
}

/// D₂ᵀD₂ θ.
fn second_difference_times(theta: &[f64]) -> Vec<f64> {
    let n = theta.len();
    let mut out = vec![0.0; n];
    if n < 3 {
        return out;
    }
    for s in 0..n - 2 {
        let dv = theta[s] - 2.0 * theta[s + 1] + theta[s + 2];
        out[s] += dv;
        out[s + 1] -= 2.0 * dv;
        out[s + 2] += dv;
    }
    out
}

/// Slope per sample of a series by central differences (one-sided at the ends).
fn central_slope(v: &[f64]) -> Vec<f64> {
    let n = v.len();
    (0..n)
        .map(|i| {
            let (a, b) = (i.saturating_sub(1), (i + 1).min(n.saturating_sub(1)));
            (v[b] - v[a]) / (b - a).max(1) as f64
        })
        .collect()
}

/// Value and derivative (per sample) of a series at fractional index x.
fn value_slope(f: &[f64], x: f64) -> (f64, f64) {
    (
        lerp_at(f, x),
        0.5 * (lerp_at(f, x + 1.0) - lerp_at(f, x - 1.0)),
    )
}

/// The parts of the lag besides its smooth spline (see [`refine`]).
#[derive(Debug, Clone, Copy, Default)]
pub struct LagParts<'a> {
    /// Direction regressors D_j, one value per window sample each; their
    /// coefficients η_j are fitted.
    pub regressors: &'a [Vec<f64>],
    /// A known part κ, one value per window sample (or empty).
    pub known: &'a [f64],
}

/// A refined lag.
#[derive(Debug, Clone)]
pub struct Refined {
    /// Lag at every window sample, samples.
    pub lag: Vec<f64>,
    /// Coefficient η_j of each direction regressor, samples.
    pub direction: Vec<f64>,
    /// Feature weights γ.
    pub weights: Vec<f64>,
    /// Information about each η_j (the inverse of its variance, samples⁻²,
    /// with the spline and the weights γ profiled out); 0 when unknown.
    pub direction_info: Vec<f64>,
}

/// Refines `lag0` (samples, one per window sample) as described in the
/// module docs. The lag is ℓ = Σ_k θ_k N_k + Σ_j η_j D_j + κ, the D_j being
/// direction regressors (`regs`, one value per window sample each; none for
/// a lag without a direction part) and κ a known part (`known`, one value
/// per window sample, or empty). The feature weights γ start at `gamma0`
/// and are refitted jointly with the lag when `fit_weights` holds (kept ≥ 0,
/// except intercepts). Returns `lag0` unchanged, η = 0, when there is
/// nothing to fit.
pub fn refine(
    ch: &[RefineChannel],
    ext: usize,
    lag0: &[f64],
    parts: &LagParts,
    gamma0: &[f64],
    fit_weights: bool,
    o: &RefineOptions,
) -> Refined {
    let (regs, known) = (parts.regressors, parts.known);
    let n = lag0.len();
    let m = regs.len();
    let unchanged = || Refined {
        lag: lag0.to_vec(),
        direction: vec![0.0; m],
        weights: gamma0.to_vec(),
        direction_info: vec![0.0; m],
    };
    if n < 8 || ch.is_empty() || ch.iter().all(|c| c.weight <= 0.0) {
        return unchanged();
    }
    let known: Vec<f64> = if known.len() == n {
        known.to_vec()
    } else {
        vec![0.0; n]
    };
    let known_der = central_slope(&known);
    let lay = Layout::new(n, o.knot.max(1.0));
    let free: Vec<f64> = lag0.iter().zip(&known).map(|(l, k)| l - k).collect();
    let Some(theta0) = lay.fit(&free) else {
        return unchanged();
    };
    let k = lay.k;
    // Extra parameters after θ: η (m), then γ (p) when refitted.
    let p = if fit_weights { gamma0.len() } else { 0 };
    let e_n = m + p;
    let intercepts: Vec<usize> = ch.iter().map(|c| c.intercept).collect();
    let reg_der: Vec<Vec<f64>> = regs.iter().map(|r| central_slope(r)).collect();
    let mut par: Vec<f64> = theta0.into_iter().chain(vec![0.0; m]).collect();
    let mut gamma = gamma0.to_vec();
    let eval = |par: &[f64]| -> (Vec<f64>, Vec<f64>) {
        let (mut lag, mut der) = lay.eval(&par[..k]);
        for i in 0..n {
            lag[i] += known[i];
            der[i] += known_der[i];
        }
        for (j, (r, rd)) in regs.iter().zip(&reg_der).enumerate() {
            for i in 0..n {
                lag[i] += par[k + j] * r[i];
                der[i] += par[k + j] * rd[i];
            }
        }
        for l in &mut lag {
            *l = l.clamp(-o.max_lag, o.max_lag);
        }
        (lag, der)
    };
    let residual = |c: &RefineChannel, g: &[f64], i: usize, l: f64, d: f64| -> f64 {
        c.composite[i] - c.value(g, (i + ext) as f64 + l, 1.0 + d)
    };
    let mut robust = vec![vec![1.0; n]; ch.len()];
    // per channel: the standard deviation of its composite (for the scale floor)
    let spreads: Vec<f64> = ch.iter().map(|c| mean_sd(c.composite).1).collect();
    let objective =
        |lag: &[f64], der: &[f64], par: &[f64], g: &[f64], rw: &[Vec<f64>], mu: f64| -> f64 {
            let mut f = 0.0;
            for (c, wc) in ch.iter().zip(rw) {
                if c.weight <= 0.0 {
                    continue;
                }
                for i in 0..n {
                    if wc[i] > 0.0 {
                        let r = residual(c, g, i, lag[i], der[i]);
                        f += c.weight * wc[i] * r * r;
                    }
                }
            }
            let theta = &par[..k];
            let d2 = second_difference_times(theta);
            f + mu * theta.iter().zip(&d2).map(|(b, d)| b * d).sum::<f64>()
        };
    // Normal matrix JᵀWJ and gradient JᵀW r: the banded θ block, the border
    // (one column per extra parameter), the extras' dense block, the gradient.
    let normal = |lag: &[f64], der: &[f64], g: &[f64], rw: &[Vec<f64>], timing_only: bool| {
        let mut a = Banded::new(k, 3);
        let mut grad = vec![0.0; k + e_n];
        let mut border = vec![vec![0.0; k]; e_n];
        let mut corner = vec![0.0; e_n * e_n];
        let mut je: Vec<(usize, f64)> = Vec::with_capacity(e_n);
        let mut vals = Vec::new();
        for (c, wc) in ch.iter().zip(rw) {
            if c.weight <= 0.0 {
                continue;
            }
            for i in 0..n {
                let w = c.weight * wc[i];
                if w <= 0.0 {
                    continue;
                }
                let x = (i + ext) as f64 + lag[i];
                let s = 1.0 + der[i];
                let [sv, sd, hv, hd] = c.parts(g, x, &mut vals);
                let r = c.composite[i] - (sv * s + hv);
                let dv = sd * s + hd; // ∂φ/∂ℓ_i
                let j = lay.first[i];
                let (b, bd) = (&lay.vals[i], &lay.ders[i]);
                let amp = if timing_only { 0.0 } else { sv };
                let jac: [f64; 4] = std::array::from_fn(|q| dv * b[q] + amp * bd[q]);
                for p in 0..4 {
                    grad[j + p] += w * jac[p] * r;
                    for q in p..4 {
                        a.add(j + p, j + q, w * jac[p] * jac[q]);
                    }
                }
                // The penalty's scale needs the θ block alone.
                if e_n == 0 || timing_only {
                    continue;
                }
                // The extra parameters this sample touches: every η, and the
                // channel's own weights (a sparse row of the Jacobian).
                je.clear();
                for e in 0..m {
                    je.push((e, dv * regs[e][i] + amp * reg_der[e][i]));
                }
                if p > 0 {
                    for (mm, (&v, &idx)) in vals.iter().zip(c.index).enumerate() {
                        je.push((m + idx, if mm < c.speed_terms { v * s } else { v }));
                    }
                    je.push((m + c.intercept, 1.0));
                }
                for &(e, ve) in &je {
                    if ve == 0.0 {
                        continue;
                    }
                    grad[k + e] += w * ve * r;
                    for p in 0..4 {
                        border[e][j + p] += w * ve * jac[p];
                    }
                    for &(f, vf) in &je {
                        corner[e * e_n + f] += w * ve * vf;
                    }
                }
            }
        }
        Normal {
            a,
            border,
            corner,
            g: grad,
        }
    };
    let (mut lag, mut der) = eval(&par);
    let lambda_rel = (o.period.max(1.0) / o.knot.max(1.0) / (2.0 * std::f64::consts::PI)).powi(4);
    let mu = {
        let nm = normal(&lag, &der, &gamma, &robust, true);
        lambda_rel * nm.a.diag_mean().max(1e-12)
    };
    let mut nu = 1e-3;
    let mut f_now = objective(&lag, &der, &par, &gamma, &robust, mu);
    // The marginal information of each η at the end: the inverse of its
    // entry in the inverse Schur complement of the extras, over σ², the
    // weighted mean squared residual.
    let done = |lag: Vec<f64>, der: Vec<f64>, par: &[f64], gamma: Vec<f64>, rw: &[Vec<f64>]| {
        let mut info = vec![0.0; m];
        if m > 0 {
            let nm = normal(&lag, &der, &gamma, rw, false);
            let mut a = nm.a;
            a.add_second_difference(mu);
            let (mut rss, mut cnt) = (0.0f64, 0.0f64);
            for (c, wc) in ch.iter().zip(rw) {
                for i in 0..n {
                    let w = c.weight * wc[i];
                    if w > 0.0 {
                        rss += w * residual(c, &gamma, i, lag[i], der[i]).powi(2);
                        cnt += 1.0;
                    }
                }
            }
            let sigma2 = rss / cnt.max(1.0);
            if let Some(mut sc) = a.schur(&nm.border, &nm.corner) {
                for e in 0..e_n {
                    sc[e * e_n + e] += 1e-9 * sc[e * e_n + e].abs().max(1e-300);
                }
                for (j, v) in info.iter_mut().enumerate() {
                    let mut unit = vec![0.0; e_n];
                    unit[j] = 1.0;
                    if let Some(x) = dense_cholesky_solve(&sc, &unit, e_n) {
                        if x[j] > 0.0 && sigma2 > 0.0 {
                            *v = 1.0 / (x[j] * sigma2);
                        }
                    }
                }
            }
        }
        Refined {
            lag,
            direction: par[k..].to_vec(),
            weights: gamma,
            direction_info: info,
        }
    };
    for it in 0..o.iterations {
        if it >= 1 && o.tukey_c.is_finite() {
            for ((c, wc), spread) in ch.iter().zip(robust.iter_mut()).zip(&spreads) {
                let res: Vec<f64> = (0..n)
                    .map(|i| residual(c, &gamma, i, lag[i], der[i]))
                    .collect();
                let abs: Vec<f64> = res.iter().map(|v| v.abs()).collect();
                let scale = (1.4826 * percentile(&abs, 50.0)).max(o.scale_floor * spread);
                for i in 0..n {
                    let u = res[i] / (o.tukey_c * scale);
                    wc[i] = if u.abs() >= 1.0 {
                        0.0
                    } else {
                        (1.0 - u * u).powi(2)
                    };
                }
            }
            f_now = objective(&lag, &der, &par, &gamma, &robust, mu);
        }
        let Normal {
            mut a,
            border,
            mut corner,
            g: mut rhs,
        } = normal(&lag, &der, &gamma, &robust, false);
        let pen = second_difference_times(&par[..k]);
        for q in 0..k {
            rhs[q] -= mu * pen[q];
        }
        a.add_second_difference(mu);
        let base_diag = a.diag_mean().max(1e-12);
        // A tiny ridge keeps each extra parameter determined where its column is flat.
        for e in 0..e_n {
            let d = corner[e * e_n + e];
            corner[e * e_n + e] += 1e-9 * base_diag + 1e-6 * d;
        }
        let mut accepted = false;
        for _try in 0..6 {
            let mut damped = a.clone();
            damped.add_to_diagonal(nu * base_diag);
            let mut dc = corner.clone();
            for e in 0..e_n {
                let d = corner[e * e_n + e];
                dc[e * e_n + e] += nu * d.max(1e-12 * base_diag);
            }
            let Some((dt, de)) = damped.solve_bordered(&border, &dc, &rhs[..k], &rhs[k..]) else {
                nu *= 10.0;
                continue;
            };
            let mut cand = par.clone();
            for (v, d) in cand.iter_mut().zip(dt.iter().chain(&de[..m])) {
                *v += d;
            }
            let mut g_c = gamma.clone();
            if p > 0 {
                for (q, v) in g_c.iter_mut().enumerate() {
                    *v += de[m + q];
                    if !intercepts.contains(&q) {
                        *v = v.max(0.0);
                    }
                }
            }
            let (lag_c, der_c) = eval(&cand);
            let f_c = objective(&lag_c, &der_c, &cand, &g_c, &robust, mu);
            if f_c <= f_now {
                let gain = f_now - f_c;
                par = cand;
                gamma = g_c;
                lag = lag_c;
                der = der_c;
                f_now = f_c;
                nu = (nu * 0.3).max(1e-6);
                accepted = true;
                if gain <= 1e-9 * f_now.abs().max(1e-300) && it > 2 {
                    return done(lag, der, &par, gamma, &robust);
                }
                break;
            }
            nu *= 10.0;
        }
        if !accepted && it > 1 {
            break;
        }
    }
    done(lag, der, &par, gamma, &robust)
}

/// The normal equations of one Gauss–Newton step (see [`refine`]).
struct Normal {
    /// JᵀWJ over the spline coefficients (banded).
    a: Banded,
    /// Its border: one column of length k per extra parameter (η, then γ).
    border: Vec<Vec<f64>>,
    /// The extra parameters' own block, row-major.
    corner: Vec<f64>,
    /// JᵀW r over all parameters.
    g: Vec<f64>,
}

#[cfg(test)]
mod tests {
    use super::*;

    /// One channel: basis 0 is its speed (weight γ₀), basis 1 its displacement (γ₁), γ₂ its intercept.
    fn one_channel<'a>(composite: &'a [f64], basis: &'a [Vec<f64>]) -> RefineChannel<'a> {
        RefineChannel {
            composite,
            basis,
            index: &[0, 1],
            speed_terms: 1,
            intercept: 2,
            weight: 1.0,
        }
    }

    /// Knots every 10 samples, the given penalty period, no robust weights.
    fn options(period: f64) -> RefineOptions {
        RefineOptions {
            knot: 10.0,
            period,
            max_lag: 30.0,
            iterations: 40,
            tukey_c: f64::INFINITY,
            scale_floor: 0.0,
        }
    }

    #[test]
    fn cubic_basis_is_a_partition_of_unity_with_matching_derivatives() {
        // Uniform cubic B-spline values at the knot: 1/6, 2/3, 1/6 (de Boor 1978, ch. IX).
        let b = cubic_basis(0.0);
        assert!((b[0] - 1.0 / 6.0).abs() < 1e-15 && (b[1] - 2.0 / 3.0).abs() < 1e-15);
        for u in [0.0, 0.3, 0.77] {
            assert!((cubic_basis(u).iter().sum::<f64>() - 1.0).abs() < 1e-14);
            assert!(cubic_basis_deriv(u).iter().sum::<f64>().abs() < 1e-14);
            // Derivatives against central differences.
            let (p, m) = (cubic_basis(u + 1e-6), cubic_basis(u - 1e-6));
            for k in 0..4 {
                let fd = (p[k] - m[k]) / 2e-6;
                assert!((fd - cubic_basis_deriv(u)[k]).abs() < 1e-8);
            }
        }
    }

    #[test]
    fn recovers_a_smooth_lag_with_its_slope_from_a_flat_start() {
        // Intact speed S and displacement H: smooth bumps. The composite is what the
        // EMG would show through a slowly varying lag: S(u)·u′ + H(u).
        let n = 600;
        let ext = 40;
        let sf = |x: f64| 1.0 + (x / 23.0).sin() + 0.5 * (x / 9.0 + 1.0).sin();
        let hf = |x: f64| 0.3 * (x / 31.0).cos();
        let true_lag = |i: f64| 8.0 + 5.0 * (i / 90.0).sin();
        let true_der = |i: f64| 5.0 / 90.0 * (i / 90.0).cos();
        let speed: Vec<f64> = (0..n + 2 * ext)
            .map(|k| sf(k as f64 - ext as f64))
            .collect();
        let level: Vec<f64> = (0..n + 2 * ext)
            .map(|k| hf(k as f64 - ext as f64))
            .collect();
        let composite: Vec<f64> = (0..n)
            .map(|i| {
                let u = i as f64 + true_lag(i as f64);
                sf(u) * (1.0 + true_der(i as f64)) + hf(u)
            })
            .collect();
        let basis = [speed, level];
        let ch = [one_channel(&composite, &basis)];
        let o = options(30.0);
        let lag = refine(
            &ch,
            ext,
            &vec![8.0; n],
            &LagParts::default(),
            &[1.0, 1.0, 0.0],
            false,
            &o,
        )
        .lag;
        let worst = (20..n - 20)
            .map(|i| (lag[i] - true_lag(i as f64)).abs())
            .fold(0.0, f64::max);
        assert!(worst < 0.5, "largest lag error {worst} samples");
    }

    /// A composite seen through lag ℓ(i) = 8 + η·D(i) with η = 4 samples and D
    /// a smoothed square wave (the direction of movement), and a speed weight of
    /// 1.3 and displacement weight of 0.7 where the fit starts from 1 and 1:
    /// the refinement must find η, the weights, and a flat base jointly.
    #[test]
    fn recovers_a_direction_lag_and_the_feature_weights_jointly() {
        let n = 900;
        let ext = 40;
        let sf = |x: f64| 1.2 + (x / 17.0).sin() + 0.6 * (x / 7.0 + 2.0).sin();
        let hf = |x: f64| 0.5 * (x / 29.0).cos() + 0.2 * (x / 11.0).sin();
        let dir = |i: f64| (3.0 * (i / 45.0).sin()).tanh();
        let ddir = |i: f64| (dir(i + 1e-4) - dir(i - 1e-4)) / 2e-4;
        let (eta, g_s, g_h) = (4.0, 1.3, 0.7);
        let grid = |f: &dyn Fn(f64) -> f64| -> Vec<f64> {
            (0..n + 2 * ext).map(|k| f(k as f64 - ext as f64)).collect()
        };
        let basis = [grid(&sf), grid(&hf)];
        let composite: Vec<f64> = (0..n)
            .map(|i| {
                let x = i as f64;
                let u = x + 8.0 + eta * dir(x);
                g_s * sf(u) * (1.0 + eta * ddir(x)) + g_h * hf(u)
            })
            .collect();
        let regs = vec![(0..n).map(|i| dir(i as f64)).collect::<Vec<_>>()];
        let ch = [one_channel(&composite, &basis)];
        let o = options(200.0);
        let parts = LagParts {
            regressors: &regs,
            known: &[],
        };
        let r = refine(&ch, ext, &vec![8.0; n], &parts, &[1.0, 1.0, 0.0], true, &o);
        assert!((r.direction[0] - eta).abs() < 0.05, "η {:?}", r.direction);
        assert!((r.weights[0] - g_s).abs() < 0.01, "γ {:?}", r.weights);
        assert!((r.weights[1] - g_h).abs() < 0.01, "γ {:?}", r.weights);
        assert!(r.weights[2].abs() < 0.01, "intercept {:?}", r.weights);
        assert!(r.direction_info[0] > 0.0);
        let worst = (20..n - 20)
            .map(|i| (r.lag[i] - 8.0 - eta * dir(i as f64)).abs())
            .fold(0.0, f64::max);
        assert!(worst < 0.2, "largest lag error {worst} samples");
        // Given as a known part instead, the direction lag is kept as it is.
        let known: Vec<f64> = (0..n).map(|i| eta * dir(i as f64)).collect();
        let parts = LagParts {
            regressors: &[],
            known: &known,
        };
        let r = refine(&ch, ext, &vec![8.0; n], &parts, &[g_s, g_h, 0.0], false, &o);
        let worst = (20..n - 20)
            .map(|i| (r.lag[i] - 8.0 - known[i]).abs())
            .fold(0.0, f64::max);
        assert!(
            worst < 0.1,
            "largest lag error {worst} samples with the known part"
        );
    }
}
