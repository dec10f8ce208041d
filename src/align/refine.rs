//! Continuous refinement of a block's lag after DTW.
//!
//! DTW gives a path on the sample grid whose side steps cost a penalty, so
//! that it does not chase envelope noise; that penalty also flattens real,
//! smooth lag changes. This stage takes the DTW lag as a starting point and
//! fits a smooth lag curve directly to the features by penalised, robust
//! Gauss–Newton:
//!
//! ```text
//! ℓ(i) = Σ_k β_k B_k(i)          (uniform cubic B-splines, knot spacing h samples)
//! minimise  Σ_c Σ_i w_ci s_c² (a_c(i) − φ_c(i + ℓ(i)))²  +  μ ‖D₂ β‖²
//! ```
//!
//! with a_c the composite EMG activation of channel c, φ_c its intact-side
//! feature, s_c the channel's weight and D₂ the second-difference matrix (a
//! P-spline penalty; Eilers & Marx 1996, "Flexible smoothing with B-splines
//! and penalties", Stat. Sci. 11:89–121). Each step solves the banded normal
//! equations (JᵀWJ + μD₂ᵀD₂ + νI) δ = −JᵀW r − μD₂ᵀD₂β with
//! J_ik = −φ_c′(i + ℓ(i)) B_k(i) (Gauss–Newton with Levenberg damping ν;
//! Nocedal & Wright 2006, "Numerical Optimization", ch. 10), accepted only if
//! the objective falls. μ is scaled to the mean information per knot so that
//! the penalty's half-gain period is `period` samples whatever the features'
//! contrast: stretches where the features are flat (holds) carry no
//! information and the lag runs straight across them, from the moves on
//! either side.
//!
//! The weights w_ci are robust (Tukey's biweight of the residual over a
//! MAD-based scale, iteratively reweighted; Beaton & Tukey 1974,
//! Technometrics 16:147–185), so samples that the EMG cannot explain, above
//! all a passive return after a hold (the intact hand moves, no muscle
//! drives it), drop out of the fit instead of bending the lag.

#![allow(clippy::needless_range_loop)] // index loops mirror the formulas

use super::features::lerp_at;

/// One channel as the refinement sees it.
pub struct RefineChannel<'a> {
    /// Composite activation, `n` window samples.
    pub composite: &'a [f64],
    /// Intact feature on the extended grid (window sample i at index i + `ext`).
    pub intact: &'a [f64],
    /// Channel weight s_c.
    pub scale: f64,
}

/// Settings of one refinement.
pub struct RefineOptions {
    /// Knot spacing of the lag spline, samples.
    pub knot: f64,
    /// Half-gain period of the penalty, samples.
    pub period: f64,
    /// Largest |lag|, samples (the band).
    pub max_lag: f64,
    /// Gauss–Newton iterations.
    pub iterations: usize,
    /// Tukey biweight tuning constant in units of the robust residual scale (∞: no reweighting).
    pub tukey_c: f64,
    /// Samples `weight_range.0 .. weight_range.1` carry data; the rest only the penalty.
    pub weight_range: (usize, usize),
}

/// Result of a refinement.
pub struct Refined {
    /// Lag at every window sample, samples.
    pub lag: Vec<f64>,
    /// Final robust weight per channel and sample (1 = fully trusted).
    pub weights: Vec<Vec<f64>>,
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

/// The spline layout over `n` samples: per sample the first basis index and its four values.
struct Layout {
    k: usize,
    first: Vec<usize>,
    vals: Vec<[f64; 4]>,
}

impl Layout {
    fn new(n: usize, h: f64) -> Self {
        let cells = (((n.max(2) - 1) as f64 / h).ceil() as usize).max(1);
        let mut first = Vec::with_capacity(n);
        let mut vals = Vec::with_capacity(n);
        for i in 0..n {
            let x = i as f64 / h;
            let j = (x.floor() as usize).min(cells - 1);
            first.push(j);
            vals.push(cubic_basis(x - j as f64));
        }
        Layout {
            k: cells + 3,
            first,
            vals,
        }
    }

    fn eval(&self, beta: &[f64]) -> Vec<f64> {
        self.first
            .iter()
            .zip(&self.vals)
            .map(|(&j, b)| (0..4).map(|m| b[m] * beta[j + m]).sum())
            .collect()
    }

    /// Least-squares coefficients of a curve (with a tiny ridge for empty cells).
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

/// A symmetric banded matrix (lower half stored by diagonals) with a Cholesky solve.
struct Banded {
    n: usize,
    bw: usize,
    /// `d[o][i]` = A(i + o, i).
    d: Vec<Vec<f64>>,
}

impl Banded {
    fn new(n: usize, bw: usize) -> Self {
        Banded {
            n,
            bw,
            d: vec![vec![0.0; n]; bw + 1],
        }
    }

    /// Adds v to A(r, c) (and its mirror); |r − c| ≤ bw.
    fn add(&mut self, r: usize, c: usize, v: f64) {
        let (hi, lo) = if r >= c { (r, c) } else { (c, r) };
        self.d[hi - lo][lo] += v;
    }

    /// Adds μ D₂ᵀD₂.
    fn add_second_difference(&mut self, mu: f64) {
        if self.n < 3 {
            return;
        }
        let c = [1.0, -2.0, 1.0];
        for s in 0..self.n - 2 {
            for p in 0..3 {
                for q in p..3 {
                    self.add(s + p, s + q, mu * c[p] * c[q]);
                }
            }
        }
    }

    /// D₂ᵀD₂ β.
    fn second_difference_times(beta: &[f64]) -> Vec<f64> {
        let n = beta.len();
        let mut out = vec![0.0; n];
        if n < 3 {
            return out;
        }
        for s in 0..n - 2 {
            let dv = beta[s] - 2.0 * beta[s + 1] + beta[s + 2];
            out[s] += dv;
            out[s + 1] -= 2.0 * dv;
            out[s + 2] += dv;
        }
        out
    }

    fn diag_mean(&self) -> f64 {
        self.d[0].iter().sum::<f64>() / self.n.max(1) as f64
    }

    /// Solves A x = b by banded Cholesky; `None` when A is not positive definite.
    fn solve(&self, b: &[f64]) -> Option<Vec<f64>> {
        let (n, bw) = (self.n, self.bw);
        // l[o][i] = L(i + o, i)
        let mut l = vec![vec![0.0; n]; bw + 1];
        for j in 0..n {
            let mut s = self.d[0][j];
            for k in j.saturating_sub(bw)..j {
                let v = l[j - k][k];
                s -= v * v;
            }
            if !(s > 0.0 && s.is_finite()) {
                return None;
            }
            let djj = s.sqrt();
            l[0][j] = djj;
            for o in 1..=bw.min(n - 1 - j) {
                let i = j + o;
                let mut s = self.d[o][j];
                for k in i.saturating_sub(bw)..j {
                    s -= l[i - k][k] * l[j - k][k];
                }
                l[o][j] = s / djj;
            }
        }
        let mut y = b.to_vec();
        for i in 0..n {
            for k in i.saturating_sub(bw)..i {
                y[i] -= l[i - k][k] * y[k];
            }
            y[i] /= l[0][i];
        }
        for i in (0..n).rev() {
            for k in i + 1..=(i + bw).min(n - 1) {
                y[i] -= l[k - i][i] * y[k];
            }
            y[i] /= l[0][i];
        }
        Some(y)
    }
}

/// Median of a slice (NaN when empty).
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

/// Refines `lag0` (samples, one per window sample) as described in the module docs.
pub fn refine(ch: &[RefineChannel], ext: usize, lag0: &[f64], o: &RefineOptions) -> Refined {
    let n = lag0.len();
    let nc = ch.len();
    let mut weights = vec![vec![1.0; n]; nc];
    if n < 8 || nc == 0 || ch.iter().all(|c| c.scale <= 0.0) {
        return Refined {
            lag: lag0.to_vec(),
            weights,
        };
    }
    let lay = Layout::new(n, o.knot.max(1.0));
    let Some(mut beta) = lay.fit(lag0) else {
        return Refined {
            lag: lag0.to_vec(),
            weights,
        };
    };
    let (wa, wb) = (o.weight_range.0.min(n), o.weight_range.1.min(n));
    let in_range = |i: usize| (wa..wb).contains(&i);
    let feat = |c: &RefineChannel, i: usize, l: f64| -> (f64, f64) {
        let x = (i + ext) as f64 + l;
        let v = lerp_at(c.intact, x);
        let dv = 0.5 * (lerp_at(c.intact, x + 1.0) - lerp_at(c.intact, x - 1.0));
        (v, dv)
    };
    // Objective at a lag curve.
    let objective = |lag: &[f64], beta: &[f64], w: &[Vec<f64>], mu: f64| -> f64 {
        let mut f = 0.0;
        for (c, wc) in ch.iter().zip(w) {
            let s2 = c.scale * c.scale;
            if s2 == 0.0 {
                continue;
            }
            for i in (wa..wb).filter(|&i| wc[i] > 0.0) {
                let r = c.composite[i] - feat(c, i, lag[i]).0;
                f += wc[i] * s2 * r * r;
            }
        }
        let d2 = Banded::second_difference_times(beta);
        f + mu * beta.iter().zip(&d2).map(|(b, d)| b * d).sum::<f64>()
    };
    // μ from the information per knot at the start (fixed thereafter).
    let info_at = |lag: &[f64], w: &[Vec<f64>]| -> Banded {
        let mut a = Banded::new(lay.k, 3);
        for (c, wc) in ch.iter().zip(w) {
            let s2 = c.scale * c.scale;
            if s2 == 0.0 {
                continue;
            }
            for i in (0..n).filter(|&i| in_range(i) && wc[i] > 0.0) {
                let (_, dv) = feat(c, i, lag[i]);
                let g = wc[i] * s2 * dv * dv;
                if g == 0.0 {
                    continue;
                }
                let (j, b) = (lay.first[i], &lay.vals[i]);
                for p in 0..4 {
                    for q in p..4 {
                        a.add(j + p, j + q, g * b[p] * b[q]);
                    }
                }
            }
        }
        a
    };
    let lambda_rel = (o.period.max(1.0) / o.knot.max(1.0) / (2.0 * std::f64::consts::PI)).powi(4);
    let mut lag = lay.eval(&beta);
    let mu = {
        let a = info_at(&lag, &weights);
        lambda_rel * a.diag_mean().max(1e-12)
    };
    let mut nu = 1e-3;
    let mut f_now = objective(&lag, &beta, &weights, mu);
    for it in 0..o.iterations {
        // Robust reweighting from the second iteration on.
        if it >= 1 && o.tukey_c.is_finite() {
            for (c, wc) in ch.iter().zip(weights.iter_mut()) {
                let res: Vec<f64> = (0..n)
                    .map(|i| c.composite[i] - feat(c, i, lag[i]).0)
                    .collect();
                let mut abs: Vec<f64> = (wa..wb).map(|i| res[i].abs()).collect();
                // Standardised features: a floor of 0.1 sd keeps quiet stretches from
                // making every move an outlier.
                let scale = (1.4826 * median(&mut abs)).max(0.1);
                for i in 0..n {
                    let u = res[i] / (o.tukey_c * scale);
                    wc[i] = if u.abs() >= 1.0 {
                        0.0
                    } else {
                        (1.0 - u * u).powi(2)
                    };
                }
            }
            f_now = objective(&lag, &beta, &weights, mu);
        }
        // Normal equations.
        let mut a = info_at(&lag, &weights);
        let mut rhs = vec![0.0; lay.k];
        for (c, wc) in ch.iter().zip(&weights) {
            let s2 = c.scale * c.scale;
            if s2 == 0.0 {
                continue;
            }
            for i in (wa..wb).filter(|&i| wc[i] > 0.0) {
                let (v, dv) = feat(c, i, lag[i]);
                let g = wc[i] * s2 * dv * (c.composite[i] - v);
                let (j, b) = (lay.first[i], &lay.vals[i]);
                for p in 0..4 {
                    rhs[j + p] += g * b[p];
                }
            }
        }
        let pen = Banded::second_difference_times(&beta);
        for k in 0..lay.k {
            rhs[k] -= mu * pen[k];
        }
        a.add_second_difference(mu);
        let base_diag = a.diag_mean().max(1e-12);
        let mut accepted = false;
        for _try in 0..6 {
            let mut damped = Banded {
                n: a.n,
                bw: a.bw,
                d: a.d.clone(),
            };
            for v in damped.d[0].iter_mut() {
                *v += nu * base_diag;
            }
            let Some(delta) = damped.solve(&rhs) else {
                nu *= 10.0;
                continue;
            };
            let cand: Vec<f64> = beta.iter().zip(&delta).map(|(b, d)| b + d).collect();
            let mut lag_c = lay.eval(&cand);
            for l in &mut lag_c {
                *l = l.clamp(-o.max_lag, o.max_lag);
            }
            let f_c = objective(&lag_c, &cand, &weights, mu);
            if f_c <= f_now {
                beta = cand;
                lag = lag_c;
                f_now = f_c;
                nu = (nu * 0.3).max(1e-6);
                accepted = true;
                break;
            }
            nu *= 10.0;
        }
        if !accepted && it > 1 {
            break;
        }
    }
    Refined { lag, weights }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn banded_cholesky_matches_a_dense_solve() {
        // A = tridiagonal(−1, 4, −1) + a (0, 3) band entry of 0.5; x = [1..6].
        let n = 6;
        let mut a = Banded::new(n, 3);
        for i in 0..n {
            a.add(i, i, 4.0);
            if i + 1 < n {
                a.add(i + 1, i, -1.0);
            }
        }
        a.add(3, 0, 0.5);
        let x: Vec<f64> = (1..=n).map(|v| v as f64).collect();
        let mut b = vec![0.0; n];
        for i in 0..n {
            for j in 0..n {
                let v = if i == j {
                    4.0
                } else if i.abs_diff(j) == 1 {
                    -1.0
                } else if (i, j) == (3, 0) || (i, j) == (0, 3) {
                    0.5
                } else {
                    0.0
                };
                b[i] += v * x[j];
            }
        }
        let got = a.solve(&b).unwrap();
        for (g, w) in got.iter().zip(&x) {
            assert!((g - w).abs() < 1e-12, "{got:?}");
        }
    }

    #[test]
    fn cubic_basis_is_a_partition_of_unity() {
        // Uniform cubic B-spline values at the knot: 1/6, 2/3, 1/6 (FACTS.md §7, scipy BSpline).
        let b = cubic_basis(0.0);
        assert!((b[0] - 1.0 / 6.0).abs() < 1e-15 && (b[1] - 2.0 / 3.0).abs() < 1e-15);
        for u in [0.0, 0.3, 0.77] {
            assert!((cubic_basis(u).iter().sum::<f64>() - 1.0).abs() < 1e-14);
        }
    }

    #[test]
    fn recovers_a_smooth_lag_from_a_flat_start() {
        // Intact feature: a sum of bumps; composite = intact shifted by a slowly varying lag.
        let n = 600;
        let ext = 40;
        let f = |x: f64| (x / 23.0).sin() + 0.5 * (x / 9.0 + 1.0).sin();
        let true_lag = |i: f64| 8.0 + 5.0 * (i / 90.0).sin();
        let intact: Vec<f64> = (0..n + 2 * ext).map(|k| f(k as f64 - ext as f64)).collect();
        let composite: Vec<f64> = (0..n).map(|i| f(i as f64 + true_lag(i as f64))).collect();
        let ch = [RefineChannel {
            composite: &composite,
            intact: &intact,
            scale: 1.0,
        }];
        let o = RefineOptions {
            knot: 10.0,
            period: 30.0,
            max_lag: 30.0,
            iterations: 30,
            tukey_c: f64::INFINITY,
            weight_range: (0, n),
        };
        let r = refine(&ch, ext, &vec![8.0; n], &o);
        let worst = (20..n - 20)
            .map(|i| (r.lag[i] - true_lag(i as f64)).abs())
            .fold(0.0, f64::max);
        assert!(worst < 0.5, "largest lag error {worst} samples");
    }
}
