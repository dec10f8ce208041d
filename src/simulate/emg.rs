//! Raw residual-limb EMG: activation-modulated band-limited noise picked up
//! through the skin with crosstalk, plus baseline noise, mains hum and the
//! scenario's site fault.
//!
//! Site k records e_k(t) = Σ_m w_km · A · a_m(t) · n_m(t) + σ₀ · b_k(t) + hum_k(t),
//! where n_m is unit-variance noise band-limited to `emg.band_hz` (one stream
//! per muscle, so neighbouring sites that see the same muscle correlate),
//! a_m the muscle's activation and w_km = s_m · exp(−d²/(2σ_m²)) the pickup,
//! d the skin distance between the site and the muscle belly (arc length
//! around the limb and distance along it).

use super::scenario::{FaultKind, Scenario};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use std::f64::consts::PI;

/// A site's place on the limb.
#[derive(Debug, Clone)]
pub struct SitePos {
    /// Site id.
    pub id: String,
    /// Angle around the limb, degrees.
    pub angle_deg: f64,
    /// Distance from the epicondyle, cm.
    pub distance_cm: f64,
}

/// Sites of every ring, in ring order.
pub fn site_positions(sc: &Scenario) -> Vec<SitePos> {
    sc.ring
        .iter()
        .flat_map(|r| {
            (0..r.count).map(move |i| SitePos {
                id: format!("{}{}", r.prefix, i + 1),
                angle_deg: (r.first_angle_deg + 360.0 * i as f64 / r.count as f64)
                    .rem_euclid(360.0),
                distance_cm: r.distance_cm,
            })
        })
        .collect()
}

/// Skin distance between two points on the limb, cm.
pub fn skin_distance(sc: &Scenario, a_deg: f64, a_cm: f64, b_deg: f64, b_cm: f64) -> f64 {
    let mut da = (a_deg - b_deg).rem_euclid(360.0);
    if da > 180.0 {
        da = 360.0 - da;
    }
    let arc = da / 360.0 * sc.circumference_cm;
    (arc * arc + (a_cm - b_cm).powi(2)).sqrt()
}

/// Pickup weight of every muscle at every site: `w[k][m]`.
pub fn pickup(sc: &Scenario, sites: &[SitePos]) -> Vec<Vec<f64>> {
    sites
        .iter()
        .map(|s| {
            sc.muscle
                .iter()
                .map(|m| {
                    let d =
                        skin_distance(sc, s.angle_deg, s.distance_cm, m.angle_deg, m.distance_cm);
                    m.strength * (-d * d / (2.0 * m.spread_cm * m.spread_cm)).exp()
                })
                .collect()
        })
        .collect()
}

/// A Butterworth second-order section (RBJ form with Q = 1/√2), causal.
struct Biquad {
    b: [f64; 3],
    a: [f64; 2],
}

impl Biquad {
    fn new(fc: f64, fs: f64, high: bool) -> Self {
        let w0 = 2.0 * PI * fc / fs;
        let alpha = w0.sin() / (2.0 * std::f64::consts::FRAC_1_SQRT_2);
        let c = w0.cos();
        let a0 = 1.0 + alpha;
        let (b0, b1) = if high {
            ((1.0 + c) / 2.0, -(1.0 + c))
        } else {
            ((1.0 - c) / 2.0, 1.0 - c)
        };
        Biquad {
            b: [b0 / a0, b1 / a0, b0 / a0],
            a: [-2.0 * c / a0, (1.0 - alpha) / a0],
        }
    }

    fn run(&self, x: &mut [f64]) {
        let (mut x1, mut x2, mut y1, mut y2) = (0.0, 0.0, 0.0, 0.0);
        for v in x.iter_mut() {
            let y =
                self.b[0] * *v + self.b[1] * x1 + self.b[2] * x2 - self.a[0] * y1 - self.a[1] * y2;
            x2 = x1;
            x1 = *v;
            y2 = y1;
            y1 = y;
            *v = y;
        }
    }
}

/// Unit-variance Gaussian noise band-limited to `band` (two sections each side).
pub fn band_noise(rng: &mut ChaCha8Rng, n: usize, fs: f64, band: [f64; 2]) -> Vec<f64> {
    let warm = (fs * 0.5) as usize;
    let mut x: Vec<f64> = (0..n + warm).map(|_| StandardNormal.sample(rng)).collect();
    for _ in 0..2 {
        Biquad::new(band[0], fs, true).run(&mut x);
        Biquad::new(band[1], fs, false).run(&mut x);
    }
    let x = x.split_off(warm);
    let rms = (x.iter().map(|v| v * v).sum::<f64>() / n.max(1) as f64).sqrt();
    x.into_iter().map(|v| v / rms.max(1e-300)).collect()
}

/// A random stream derived from the scenario seed and a label.
pub fn stream(seed: u64, label: &str) -> ChaCha8Rng {
    // FNV-1a of the label, mixed with the seed: stable across platforms.
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for b in label.bytes() {
        h ^= b as u64;
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    ChaCha8Rng::seed_from_u64(seed ^ h)
}

/// Raw EMG per site in mV, `out[k][i]` at EMG-clock time i / rate.
pub fn synthesize(sc: &Scenario, sites: &[SitePos], act: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let fs = sc.emg.rate_hz;
    let n = act.first().map_or(0, Vec::len);
    let w = pickup(sc, sites);
    let sources: Vec<Vec<f64>> = sc
        .muscle
        .iter()
        .map(|m| {
            let mut rng = stream(sc.seed, &format!("muscle:{}", m.id));
            let mut x = band_noise(&mut rng, n, fs, sc.emg.band_hz);
            for (v, a) in x
                .iter_mut()
                .zip(&act[sc.muscle.iter().position(|q| q.id == m.id).unwrap()])
            {
                *v *= a * sc.emg.muscle_rms_mv;
            }
            x
        })
        .collect();
    sites
        .iter()
        .enumerate()
        .map(|(k, s)| {
            let mut rng = stream(sc.seed, &format!("site:{}", s.id));
            let base = band_noise(&mut rng, n, fs, [10.0, (fs * 0.45).min(1000.0)]);
            let phase = (k as f64 * 0.7).rem_euclid(2.0 * PI);
            let fault = sc.fault.as_ref().filter(|f| f.site == s.id).map(|f| f.kind);
            let hum_amp = if fault == Some(FaultKind::Hum) {
                0.6
            } else {
                sc.emg.mains_mv
            };
            let f0 = sc.emg.mains_hz;
            let mut e: Vec<f64> = (0..n)
                .map(|i| {
                    let t = i as f64 / fs;
                    let mut v = sc.emg.baseline_rms_mv * base[i];
                    for (m, src) in sources.iter().enumerate() {
                        v += w[k][m] * src[i];
                    }
                    v + hum_amp
                        * ((2.0 * PI * f0 * t + phase).sin()
                            + 0.3 * (2.0 * PI * 3.0 * f0 * t + 2.0 * phase).sin())
                })
                .collect();
            match fault {
                Some(FaultKind::Flat) => {
                    for (i, v) in e.iter_mut().enumerate() {
                        *v = 2e-4 * base[i];
                    }
                }
                Some(FaultKind::Clipped) => {
                    let rail = 0.5;
                    for (i, v) in e.iter_mut().enumerate() {
                        let t = i as f64 / fs;
                        let wander = 0.9 * (2.0 * PI * 0.07 * t + phase).sin();
                        *v = (6.0 * *v + wander).clamp(-rail, rail);
                    }
                }
                _ => {}
            }
            e
        })
        .collect()
}
