//! Alignment features and the composite EMG activation that matches them.
//!
//! On the intact side, for every DoF that moves in a block, four features
//! mark the events of a mirrored movement: the speed in each direction,
//! s± = max(±θ', 0), and the displacement from the block's resting posture
//! in each direction, p± = max(±(θ − θ_rest), 0) (muscles hold a displaced
//! posture with tonic activity, so holds show in the EMG too).
//!
//! On the EMG side, for each intact feature φ_c, a composite activation
//! a_c(t) = b_c + Σ_k w_ck x_k(t − EMD) with w_ck ≥ 0 is fitted by
//! non-negative least squares (Lawson & Hanson 1974, "Solving Least Squares
//! Problems", ch. 23; solved here by cyclic coordinate descent on the Gram
//! matrix) to the intact feature as currently aligned. The composite picks
//! the sites that mark that event, whichever they are. Both sides are then
//! standardised by the intact feature's mean and standard deviation.

#![allow(clippy::needless_range_loop)] // index loops mirror the formulas

pub use crate::signal::envelope::moving_average;

/// Linear interpolation of `y` (sampled at integer positions) at fractional position `u`, clamped.
pub fn lerp_at(y: &[f64], u: f64) -> f64 {
    let n = y.len();
    if n == 0 {
        return f64::NAN;
    }
    if n == 1 || u <= 0.0 {
        return y[0];
    }
    let last = (n - 1) as f64;
    if u >= last {
        return y[n - 1];
    }
    let k = u.floor() as usize;
    let f = u - k as f64;
    y[k] * (1.0 - f) + y[k + 1] * f
}

/// Mean and standard deviation.
pub fn mean_sd(x: &[f64]) -> (f64, f64) {
    let n = x.len().max(1) as f64;
    let m = x.iter().sum::<f64>() / n;
    let v = x.iter().map(|v| (v - m) * (v - m)).sum::<f64>() / n;
    (m, v.sqrt())
}

/// Non-negative least squares with a free intercept:
/// minimise ‖y − b − X w‖² over b and w ≥ 0, `cols` being the columns of X.
/// Returns (b, w).
pub fn nnls_intercept(cols: &[Vec<f64>], y: &[f64]) -> (f64, Vec<f64>) {
    NnlsDesign::new(cols).solve(y)
}

/// The design X of [`nnls_intercept`] with its centred Gram matrix, for
/// solving against several right-hand sides.
pub struct NnlsDesign<'a> {
    cols: &'a [Vec<f64>],
    means: Vec<f64>,
    /// Centred Gram matrix, row-major k × k.
    gram: Vec<f64>,
}

impl<'a> NnlsDesign<'a> {
    /// Centres the columns and forms their Gram matrix.
    pub fn new(cols: &'a [Vec<f64>]) -> Self {
        let k = cols.len();
        let means: Vec<f64> = cols.iter().map(|c| mean_sd(c).0).collect();
        let mut gram = vec![0.0; k * k];
        for a in 0..k {
            for b in a..k {
                let s: f64 = cols[a]
                    .iter()
                    .zip(&cols[b])
                    .map(|(x, y)| (x - means[a]) * (y - means[b]))
                    .sum();
                gram[a * k + b] = s;
                gram[b * k + a] = s;
            }
        }
        NnlsDesign { cols, means, gram }
    }

    /// (b, w) of [`nnls_intercept`] for the target `y`.
    pub fn solve(&self, y: &[f64]) -> (f64, Vec<f64>) {
        let k = self.cols.len();
        let (my, _) = mean_sd(y);
        let (g, means) = (&self.gram, &self.means);
        let c: Vec<f64> = self
            .cols
            .iter()
            .zip(means)
            .map(|(col, m)| col.iter().zip(y).map(|(x, v)| (x - m) * (v - my)).sum())
            .collect();
        let trace: f64 = (0..k).map(|a| g[a * k + a]).sum::<f64>().max(1e-300);
        let ridge = 1e-8 * trace / k.max(1) as f64;
        let mut w = vec![0.0; k];
        let mut gw = vec![0.0; k];
        for _sweep in 0..1000 {
            let mut change = 0.0f64;
            for a in 0..k {
                let d = g[a * k + a] + ridge;
                if d <= 0.0 {
                    continue;
                }
                let new = (w[a] + (c[a] - gw[a] - ridge * w[a]) / d).max(0.0);
                let delta = new - w[a];
                if delta != 0.0 {
                    for b in 0..k {
                        gw[b] += g[b * k + a] * delta;
                    }
                    w[a] = new;
                    change = change.max(delta.abs() * d.sqrt());
                }
            }
            if change <= 1e-10 * trace.sqrt() {
                break;
            }
        }
        let b = my - w.iter().zip(means).map(|(w, m)| w * m).sum::<f64>();
        (b, w)
    }
}

/// What an alignment feature measures.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FeatureKind {
    /// Speed toward positive angles.
    SpeedPositive,
    /// Speed toward negative angles.
    SpeedNegative,
    /// Displacement above the resting posture.
    DisplacementPositive,
    /// Displacement below the resting posture.
    DisplacementNegative,
}

impl FeatureKind {
    /// All four, in order.
    pub const ALL: [FeatureKind; 4] = [
        FeatureKind::SpeedPositive,
        FeatureKind::SpeedNegative,
        FeatureKind::DisplacementPositive,
        FeatureKind::DisplacementNegative,
    ];

    /// Weight of the feature in the DTW cost: speeds carry the timing of
    /// events most sharply, displacements keep holds informative.
    pub fn weight(self) -> f64 {
        match self {
            FeatureKind::SpeedPositive | FeatureKind::SpeedNegative => 1.0,
            _ => 0.6,
        }
    }

    /// The feature's value from angle (relative to rest) and rate.
    pub fn eval(self, disp: f64, rate: f64) -> f64 {
        match self {
            FeatureKind::SpeedPositive => rate.max(0.0),
            FeatureKind::SpeedNegative => (-rate).max(0.0),
            FeatureKind::DisplacementPositive => disp.max(0.0),
            FeatureKind::DisplacementNegative => (-disp).max(0.0),
        }
    }

    /// Short label for figures.
    pub fn label(self) -> &'static str {
        match self {
            FeatureKind::SpeedPositive => "speed +",
            FeatureKind::SpeedNegative => "speed −",
            FeatureKind::DisplacementPositive => "displacement +",
            FeatureKind::DisplacementNegative => "displacement −",
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nnls_recovers_nonnegative_weights_and_clips_negative_ones() {
        // y = 2 + 1.5 a + 0 b − (clipped) c: with c entering negatively, its weight is 0.
        let n = 200;
        let a: Vec<f64> = (0..n).map(|i| ((i * 7) % 13) as f64).collect();
        let b: Vec<f64> = (0..n).map(|i| ((i * 5) % 11) as f64).collect();
        let c: Vec<f64> = (0..n).map(|i| ((i * 3) % 17) as f64).collect();
        let y: Vec<f64> = (0..n).map(|i| 2.0 + 1.5 * a[i] + 0.5 * b[i]).collect();
        let (b0, w) = nnls_intercept(&[a.clone(), b.clone()], &y);
        assert!((b0 - 2.0).abs() < 1e-6 && (w[0] - 1.5).abs() < 1e-6 && (w[1] - 0.5).abs() < 1e-6);
        let y2: Vec<f64> = (0..n).map(|i| a[i] - 0.8 * c[i]).collect();
        let (_, w2) = nnls_intercept(&[a, c], &y2);
        assert_eq!(w2[1], 0.0);
        assert!(w2[0] > 0.0);
    }

    #[test]
    fn helpers() {
        assert_eq!(
            moving_average(&[0.0, 3.0, 0.0, 3.0], 3),
            vec![1.5, 1.0, 2.0, 1.5]
        );
        assert_eq!(lerp_at(&[0.0, 10.0, 20.0], 1.25), 12.5);
        assert_eq!(lerp_at(&[0.0, 10.0], 5.0), 10.0);
    }
}
