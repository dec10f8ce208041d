//! Smoothed intact-side angles and angular velocities at any time.
//!
//! At every glove sample τ_j the angle and its rate are estimated by a
//! Gaussian-weighted local linear fit (kernel regression of degree 1; Fan &
//! Gijbels 1996, "Local Polynomial Modelling and Its Applications"):
//!
//! ```text
//! minimise Σ_k K((τ_k − τ_j)/σ) (θ_k − a − b (τ_k − τ_j))²,  θ̂(τ_j) = a, θ̂'(τ_j) = b
//! ```
//!
//! with K the standard normal density truncated at ±3σ. Between samples the
//! pair (θ̂, θ̂') is interpolated by cubic Hermite polynomials, so the angle is
//! continuously differentiable in time. Glove noise is thereby damped in the
//! velocity, which central differences would amplify.

use crate::session::Recording;

/// Smoothed angles and rates of every channel of a recording.
#[derive(Debug, Clone)]
pub struct Kinematics {
    time_s: Vec<f64>,
    pos: Vec<Vec<f64>>,
    vel: Vec<Vec<f64>>,
}

impl Kinematics {
    /// Smooths every channel with a Gaussian kernel of width `sigma_s` seconds.
    pub fn new(rec: &Recording, sigma_s: f64) -> Self {
        let t = &rec.time_s;
        let n = t.len();
        let sigma = sigma_s.max(1e-6);
        let mut pos = Vec::with_capacity(rec.channels.len());
        let mut vel = Vec::with_capacity(rec.channels.len());
        // Kernel weights depend only on times: find each sample's window once.
        let mut lo = 0usize;
        let mut hi = 0usize;
        let mut windows = Vec::with_capacity(n);
        for j in 0..n {
            while t[lo] < t[j] - 3.0 * sigma {
                lo += 1;
            }
            while hi + 1 < n && t[hi + 1] <= t[j] + 3.0 * sigma {
                hi += 1;
            }
            windows.push((lo, hi.max(j)));
        }
        for c in 0..rec.channels.len() {
            let y = rec.data.row(c);
            let mut p = vec![0.0; n];
            let mut v = vec![0.0; n];
            for j in 0..n {
                let (a, b) = windows[j];
                let (mut s0, mut s1, mut s2, mut sy, mut sty) = (0.0, 0.0, 0.0, 0.0, 0.0);
                for k in a..=b {
                    let d = t[k] - t[j];
                    let w = (-0.5 * (d / sigma).powi(2)).exp();
                    s0 += w;
                    s1 += w * d;
                    s2 += w * d * d;
                    sy += w * y[k];
                    sty += w * d * y[k];
                }
                let det = s0 * s2 - s1 * s1;
                if det > 1e-12 * s0 * s2.max(1e-300) && det > 0.0 {
                    p[j] = (s2 * sy - s1 * sty) / det;
                    v[j] = (s0 * sty - s1 * sy) / det;
                } else {
                    p[j] = y[j];
                    v[j] = 0.0;
                }
            }
            pos.push(p);
            vel.push(v);
        }
        Kinematics {
            time_s: t.clone(),
            pos,
            vel,
        }
    }

    /// Number of channels.
    pub fn channels(&self) -> usize {
        self.pos.len()
    }

    /// Angle and rate of channel `c` at time `tau` on the recording's own
    /// clock (held constant beyond the ends, with zero rate).
    pub fn at(&self, c: usize, tau: f64) -> (f64, f64) {
        let t = &self.time_s;
        let (p, v) = (&self.pos[c], &self.vel[c]);
        let n = t.len();
        if n == 0 {
            return (0.0, 0.0);
        }
        if tau <= t[0] {
            return (p[0], 0.0);
        }
        if tau >= t[n - 1] {
            return (p[n - 1], 0.0);
        }
        let k = t
            .partition_point(|&x| x <= tau)
            .saturating_sub(1)
            .min(n - 2);
        let h = t[k + 1] - t[k];
        let s = (tau - t[k]) / h;
        // Cubic Hermite basis and derivatives.
        let (s2, s3) = (s * s, s * s * s);
        let h00 = 2.0 * s3 - 3.0 * s2 + 1.0;
        let h10 = s3 - 2.0 * s2 + s;
        let h01 = -2.0 * s3 + 3.0 * s2;
        let h11 = s3 - s2;
        let pos = h00 * p[k] + h10 * h * v[k] + h01 * p[k + 1] + h11 * h * v[k + 1];
        let d00 = (6.0 * s2 - 6.0 * s) / h;
        let d10 = 3.0 * s2 - 4.0 * s + 1.0;
        let d01 = (-6.0 * s2 + 6.0 * s) / h;
        let d11 = 3.0 * s2 - 2.0 * s;
        let vel = d00 * p[k] + d10 * v[k] + d01 * p[k + 1] + d11 * v[k + 1];
        (pos, vel)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;

    #[test]
    fn recovers_a_line_and_a_sine() {
        let n = 400;
        let t: Vec<f64> = (0..n).map(|i| i as f64 / 100.0).collect();
        let mut data = Array2::zeros((2, n));
        for (i, &ti) in t.iter().enumerate() {
            data[[0, i]] = 3.0 * ti - 1.0;
            data[[1, i]] = 40.0 * (2.0 * std::f64::consts::PI * 0.5 * ti).sin();
        }
        let rec = Recording {
            file: "intact.csv".into(),
            time_s: t,
            rate_hz: 100.0,
            channels: vec!["a".into(), "b".into()],
            data,
        };
        let k = Kinematics::new(&rec, 0.03);
        // A local linear fit reproduces a line exactly, even at the ends.
        let (p, v) = k.at(0, 1.234);
        assert!((p - (3.0 * 1.234 - 1.0)).abs() < 1e-9 && (v - 3.0).abs() < 1e-9);
        // A 0.5 Hz sine: the kernel's bias on the slope is about (σω)²/2 ≈ 0.02 %; allow 0.5 %.
        let w = std::f64::consts::PI;
        let (p, v) = k.at(1, 2.005);
        assert!((p - 40.0 * (w * 2.005).sin()).abs() < 0.05, "{p}");
        assert!(
            (v - 40.0 * w * (w * 2.005).cos()).abs() < 0.005 * 40.0 * w,
            "{v}"
        );
    }
}
