//! From a DTW path to a smooth, strictly increasing map from EMG time to intact time.
//!
//! The path pairs EMG-grid index i with intact-grid index j. Per i the raw
//! lag is ℓ̂_i = mean{j : (i, j) on the path} − i (in samples). The map's lag
//! ℓ is the Whittaker smoother of ℓ̂ with weights w_i (Eilers PHC 2003,
//! "A perfect smoother", Anal. Chem. 75:3631–3636):
//!
//! ```text
//! minimise Σ_i w_i (ℓ_i − ℓ̂_i)² + λ Σ_i (ℓ_{i+1} − 2ℓ_i + ℓ_{i−1})²
//! ```
//!
//! solved exactly as the pentadiagonal system (W + λ DᵀD) ℓ = W ℓ̂ (band
//! Cholesky, [`super::banded`]). With
//! weights of mean 1, λ = (P / 2π)⁴ puts the half-gain period at P samples.
//! Where the features carry no timing (holds, rests) the weights are small
//! and the lag is interpolated smoothly from the moving stretches around.
//! Finally every step of the map i ↦ i + ℓ_i is kept within the slope
//! limits [1/s, s], so the map is strictly increasing.

use super::banded::Banded;
use crate::{Error, Result};

/// Raw lag per EMG-grid index from a DTW path (samples), for `n` query
/// indices. Indices before the start or after the end of an open-ended path
/// take the lag of the nearest covered index.
pub fn raw_lag(path: &[(usize, usize)], n: usize) -> Result<Vec<f64>> {
    let mut sum = vec![0.0; n];
    let mut cnt = vec![0usize; n];
    for &(i, j) in path {
        if i >= n {
            return Err(Error::Argument(format!(
                "path index {i} beyond {n} samples"
            )));
        }
        sum[i] += j as f64 - i as f64;
        cnt[i] += 1;
    }
    let first = cnt.iter().position(|&c| c > 0);
    let last = cnt.iter().rposition(|&c| c > 0);
    let (Some(first), Some(last)) = (first, last) else {
        return Err(Error::Argument("empty warp path".into()));
    };
    if let Some(i) = (first..=last).find(|&i| cnt[i] == 0) {
        return Err(Error::Argument(format!("the path skips query index {i}")));
    }
    let mut out: Vec<f64> = sum
        .iter()
        .zip(&cnt)
        .map(|(s, &c)| if c > 0 { s / c as f64 } else { 0.0 })
        .collect();
    let (a, b) = (out[first], out[last]);
    out[..first].iter_mut().for_each(|v| *v = a);
    out[last + 1..].iter_mut().for_each(|v| *v = b);
    Ok(out)
}

/// Weighted Whittaker smoother with a second-difference penalty.
///
/// `period` is the half-gain period in samples (λ = (period/2π)⁴ with the
/// weights rescaled to mean 1). Needs at least three points and two of
/// positive weight.
pub fn whittaker(y: &[f64], w: &[f64], period: f64) -> Result<Vec<f64>> {
    let n = y.len();
    if w.len() != n {
        return Err(Error::Argument(
            "values and weights differ in length".into(),
        ));
    }
    if n < 3 {
        return Ok(y.to_vec());
    }
    if w.iter().any(|&v| !(v.is_finite() && v >= 0.0)) || y.iter().any(|v| !v.is_finite()) {
        return Err(Error::Argument(
            "smoother input must be finite with weights ≥ 0".into(),
        ));
    }
    let mean_w = w.iter().sum::<f64>() / n as f64;
    if w.iter().filter(|&&v| v > 0.0).count() < 2 || mean_w <= 0.0 {
        return Err(Error::Argument(
            "the smoother needs two points of positive weight".into(),
        ));
    }
    let lambda = (period.max(1.0) / (2.0 * std::f64::consts::PI)).powi(4);
    // A = W + λ DᵀD (pentadiagonal), solved by band Cholesky.
    let mut a = Banded::new(n, 2);
    let mut b = vec![0.0; n];
    for i in 0..n {
        let wi = w[i] / mean_w;
        a.add(i, i, wi);
        b[i] = wi * y[i];
    }
    a.add_second_difference(lambda);
    let z = a
        .solve(&b)
        .ok_or_else(|| Error::Analysis("the warp-map smoother is singular".into()))?;
    Ok(z)
}

/// Keeps each step 1 + ℓ_{i+1} − ℓ_i of the map within [1/s, s] and restores
/// the weighted mean lag. Returns the share of steps that had to be clipped.
pub fn limit_slope(lag: &mut [f64], w: &[f64], max_slope: f64) -> f64 {
    let n = lag.len();
    if n < 2 || !max_slope.is_finite() {
        return 0.0;
    }
    let (lo, hi) = (1.0 / max_slope, max_slope);
    let wsum: f64 = w.iter().sum::<f64>().max(f64::MIN_POSITIVE);
    let before: f64 = lag.iter().zip(w).map(|(l, w)| l * w).sum::<f64>() / wsum;
    let mut clipped = 0usize;
    let mut acc = lag[0];
    let mut prev = lag[0];
    for l in lag.iter_mut().skip(1) {
        let step = 1.0 + *l - prev;
        let c = step.clamp(lo, hi);
        if c != step {
            clipped += 1;
        }
        prev = *l;
        acc += c - 1.0;
        *l = acc;
    }
    let after: f64 = lag.iter().zip(w).map(|(l, w)| l * w).sum::<f64>() / wsum;
    for l in lag.iter_mut() {
        *l += before - after;
    }
    clipped as f64 / (n - 1) as f64
}

/// A strictly increasing map from EMG time to intact time (both on the EMG clock),
/// tabulated on the uniform EMG grid `t0 + i / rate_hz`.
#[derive(Debug, Clone, PartialEq)]
pub struct WarpMap {
    /// EMG time of the first grid point, s.
    pub t0: f64,
    /// Grid rate, Hz.
    pub rate_hz: f64,
    /// Intact time on the EMG clock at each grid point, s.
    pub intact_s: Vec<f64>,
}

impl WarpMap {
    /// The map from a smoothed lag in samples.
    pub fn from_lag(t0: f64, rate_hz: f64, lag: &[f64]) -> Self {
        let intact_s = lag
            .iter()
            .enumerate()
            .map(|(i, l)| t0 + (i as f64 + l) / rate_hz)
            .collect();
        WarpMap {
            t0,
            rate_hz,
            intact_s,
        }
    }

    /// Intact time at EMG time `t` (linear between grid points, constant lag beyond the ends).
    pub fn eval(&self, t: f64) -> f64 {
        let n = self.intact_s.len();
        if n == 0 {
            return t;
        }
        let u = (t - self.t0) * self.rate_hz;
        if u <= 0.0 {
            return self.intact_s[0] + (t - self.t0);
        }
        let last = (n - 1) as f64;
        if u >= last {
            return self.intact_s[n - 1] + (t - self.t0 - last / self.rate_hz);
        }
        let k = u.floor() as usize;
        let f = u - k as f64;
        self.intact_s[k] * (1.0 - f) + self.intact_s[(k + 1).min(n - 1)] * f
    }

    /// Lag (intact time − EMG time) at each grid point, s.
    pub fn lag_s(&self) -> Vec<f64> {
        self.intact_s
            .iter()
            .enumerate()
            .map(|(i, v)| v - (self.t0 + i as f64 / self.rate_hz))
            .collect()
    }

    /// Local slope d(intact time)/d(EMG time) between grid points.
    pub fn slopes(&self) -> Vec<f64> {
        self.intact_s
            .windows(2)
            .map(|p| (p[1] - p[0]) * self.rate_hz)
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn smoother_keeps_lines_and_interpolates_gaps() {
        // A straight line is in the penalty's null space: returned unchanged.
        let y: Vec<f64> = (0..50).map(|i| 0.3 * i as f64 - 2.0).collect();
        let w = vec![1.0; 50];
        let z = whittaker(&y, &w, 20.0).unwrap();
        for (a, b) in y.iter().zip(&z) {
            assert!((a - b).abs() < 1e-9);
        }
        // With zero weight in the middle, the gap is bridged by a line between the two sides.
        let mut w2 = vec![1.0; 60];
        let y2: Vec<f64> = (0..60)
            .map(|i| {
                if i < 20 {
                    1.0
                } else if i >= 40 {
                    3.0
                } else {
                    50.0
                }
            })
            .collect();
        for v in w2.iter_mut().take(40).skip(20) {
            *v = 0.0;
        }
        let z2 = whittaker(&y2, &w2, 4.0).unwrap();
        assert!(z2[30] > 1.5 && z2[30] < 2.5, "{}", z2[30]);
    }

    #[test]
    fn slope_limit_keeps_map_increasing() {
        let mut lag: Vec<f64> = (0..40).map(|i| if i < 20 { 0.0 } else { -10.0 }).collect();
        let w = vec![1.0; 40];
        let share = limit_slope(&mut lag, &w, 2.0);
        assert!(share > 0.0);
        for s in lag.windows(2) {
            let step = 1.0 + s[1] - s[0];
            assert!((0.5 - 1e-12..=2.0 + 1e-12).contains(&step));
        }
    }

    #[test]
    fn raw_lag_averages_runs() {
        let path = [(0, 0), (0, 1), (0, 2), (1, 3), (2, 3), (3, 4)];
        assert_eq!(raw_lag(&path, 4).unwrap(), vec![1.0, 2.0, 1.0, 1.0]);
        assert_eq!(
            raw_lag(&path, 6).unwrap(),
            vec![1.0, 2.0, 1.0, 1.0, 1.0, 1.0]
        );
        assert!(raw_lag(&[(0, 0), (2, 2)], 3).is_err());
    }
}
