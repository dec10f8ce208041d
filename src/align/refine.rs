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
//! ℓ(i) = Σ_k θ_k N_k(i)        (uniform cubic B-splines, knot spacing h samples)
//! u(i) = i + ℓ(i),   s(i) = u′(i) = 1 + ℓ′(i)
//! φ_c(i) = S_c(u(i)) · s(i) + H_c(u(i))
//! minimise  Σ_c Σ_i w_ci (a_c(i) − φ_c(i))²  +  μ ‖D₂ θ‖²
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
//! The weights w_ci = g_c · ρ_ci are a channel weight g_c (given by the
//! caller) times robust weights ρ (Tukey's biweight of the residual over a
//! MAD-based scale, iteratively reweighted; Beaton & Tukey 1974,
//! Technometrics 16:147–185), so samples the EMG cannot explain (above all a
//! passive return after a hold: the intact hand moves, no muscle drives it)
//! drop out instead of bending the lag.

#![allow(clippy::needless_range_loop)] // index loops mirror the formulas

use super::banded::Banded;
use super::features::{lerp_at, mean_sd};
use crate::signal::envelope::percentile;

/// One channel as the refinement sees it.
pub struct RefineChannel<'a> {
    /// Composite activation a_c, one value per window sample.
    pub composite: &'a [f64],
    /// Speed part S_c on the extended grid (window sample i at index i + `ext`).
    pub speed: &'a [f64],
    /// Displacement part H_c on the extended grid.
    pub level: &'a [f64],
    /// Channel weight g_c.
    pub weight: f64,
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

/// Value and derivative (per sample) of a series at fractional index x.
fn value_slope(f: &[f64], x: f64) -> (f64, f64) {
    (
        lerp_at(f, x),
        0.5 * (lerp_at(f, x + 1.0) - lerp_at(f, x - 1.0)),
    )
}

/// The model φ_c(i) at lag ℓ_i and slope s_i.
fn model(c: &RefineChannel, ext: usize, i: usize, l: f64, s: f64) -> f64 {
    let x = (i + ext) as f64 + l;
    lerp_at(c.speed, x) * s + lerp_at(c.level, x)
}

/// Refines `lag0` (samples, one per window sample) as described in the
/// module docs. Returns the refined lag; `lag0` unchanged when there is
/// nothing to fit.
pub fn refine(ch: &[RefineChannel], ext: usize, lag0: &[f64], o: &RefineOptions) -> Vec<f64> {
    let n = lag0.len();
    if n < 8 || ch.is_empty() || ch.iter().all(|c| c.weight <= 0.0) {
        return lag0.to_vec();
    }
    let lay = Layout::new(n, o.knot.max(1.0));
    let Some(mut theta) = lay.fit(lag0) else {
        return lag0.to_vec();
    };
    let mut robust = vec![vec![1.0; n]; ch.len()];
    // per channel: the standard deviation of its composite (for the scale floor)
    let spreads: Vec<f64> = ch.iter().map(|c| mean_sd(c.composite).1).collect();
    let clamp = |v: (Vec<f64>, Vec<f64>)| -> (Vec<f64>, Vec<f64>) {
        let (mut l, d) = v;
        for x in &mut l {
            *x = x.clamp(-o.max_lag, o.max_lag);
        }
        (l, d)
    };
    let objective = |lag: &[f64], der: &[f64], theta: &[f64], rw: &[Vec<f64>], mu: f64| -> f64 {
        let mut f = 0.0;
        for (c, wc) in ch.iter().zip(rw) {
            if c.weight <= 0.0 {
                continue;
            }
            for i in 0..n {
                if wc[i] > 0.0 {
                    let r = c.composite[i] - model(c, ext, i, lag[i], 1.0 + der[i]);
                    f += c.weight * wc[i] * r * r;
                }
            }
        }
        let d2 = second_difference_times(theta);
        f + mu * theta.iter().zip(&d2).map(|(b, d)| b * d).sum::<f64>()
    };
    // Normal matrix JᵀWJ and gradient JᵀW r at a lag curve.
    let normal =
        |lag: &[f64], der: &[f64], rw: &[Vec<f64>], timing_only: bool| -> (Banded, Vec<f64>) {
            let mut a = Banded::new(lay.k, 3);
            let mut g = vec![0.0; lay.k];
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
                    let (sv, sd) = value_slope(c.speed, x);
                    let (hv, hd) = value_slope(c.level, x);
                    let r = c.composite[i] - (sv * s + hv);
                    let dv = sd * s + hd; // ∂φ/∂ℓ_i
                    let j = lay.first[i];
                    let (b, bd) = (&lay.vals[i], &lay.ders[i]);
                    let amp = if timing_only { 0.0 } else { sv };
                    let jac: [f64; 4] = std::array::from_fn(|m| dv * b[m] + amp * bd[m]);
                    for p in 0..4 {
                        g[j + p] += w * jac[p] * r;
                        for q in p..4 {
                            a.add(j + p, j + q, w * jac[p] * jac[q]);
                        }
                    }
                }
            }
            (a, g)
        };
    let (mut lag, mut der) = clamp(lay.eval(&theta));
    let lambda_rel = (o.period.max(1.0) / o.knot.max(1.0) / (2.0 * std::f64::consts::PI)).powi(4);
    let mu = {
        let (a, _) = normal(&lag, &der, &robust, true);
        lambda_rel * a.diag_mean().max(1e-12)
    };
    let mut nu = 1e-3;
    let mut f_now = objective(&lag, &der, &theta, &robust, mu);
    for it in 0..o.iterations {
        if it >= 1 && o.tukey_c.is_finite() {
            for ((c, wc), spread) in ch.iter().zip(robust.iter_mut()).zip(&spreads) {
                let res: Vec<f64> = (0..n)
                    .map(|i| c.composite[i] - model(c, ext, i, lag[i], 1.0 + der[i]))
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
            f_now = objective(&lag, &der, &theta, &robust, mu);
        }
        let (mut a, mut rhs) = normal(&lag, &der, &robust, false);
        let pen = second_difference_times(&theta);
        for k in 0..lay.k {
            rhs[k] -= mu * pen[k];
        }
        a.add_second_difference(mu);
        let base_diag = a.diag_mean().max(1e-12);
        let mut accepted = false;
        for _try in 0..6 {
            let mut damped = a.clone();
            damped.add_to_diagonal(nu * base_diag);
            let Some(delta) = damped.solve(&rhs) else {
                nu *= 10.0;
                continue;
            };
            let cand: Vec<f64> = theta.iter().zip(&delta).map(|(b, d)| b + d).collect();
            let (lag_c, der_c) = clamp(lay.eval(&cand));
            let f_c = objective(&lag_c, &der_c, &cand, &robust, mu);
            if f_c <= f_now {
                let gain = f_now - f_c;
                theta = cand;
                lag = lag_c;
                der = der_c;
                f_now = f_c;
                nu = (nu * 0.3).max(1e-6);
                accepted = true;
                if gain <= 1e-9 * f_now.abs().max(1e-300) && it > 2 {
                    return lag;
                }
                break;
            }
            nu *= 10.0;
        }
        if !accepted && it > 1 {
            break;
        }
    }
    lag
}

#[cfg(test)]
mod tests {
    use super::*;

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
        let ch = [RefineChannel {
            composite: &composite,
            speed: &speed,
            level: &level,
            weight: 1.0,
        }];
        let o = RefineOptions {
            knot: 10.0,
            period: 30.0,
            max_lag: 30.0,
            iterations: 40,
            tukey_c: f64::INFINITY,
            scale_floor: 0.0,
        };
        let lag = refine(&ch, ext, &vec![8.0; n], &o);
        let worst = (20..n - 20)
            .map(|i| (lag[i] - true_lag(i as f64)).abs())
            .fold(0.0, f64::max);
        assert!(worst < 0.5, "largest lag error {worst} samples");
    }
}
