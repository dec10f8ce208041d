//! The functional design of one DoF.
//!
//! Model (DESIGN.md section 5): for usable rows `i`,
//!
//! ```text
//! y_i = a(z_i) + Σ_k ∫_{−δ}^{0} x_k(t_i + s) g_k(s, z_i) ds + e_i,
//! g_k(s, z) = Σ_l Σ_m b_klm B_l(s) C_m(z).
//! ```
//!
//! Column `(k, l, m)` of the design is `C_m(z_i) · F_kl(i)` with the lag
//! integral `F_kl(i) = ∫_{−δ}^{0} x_k(t_i + s) B_l(s) ds` computed as a short
//! FIR filter of the envelope:
//!
//! ```text
//! F_kl(i) = Σ_{j=0}^{J} h_l[j] · x_k[i − j],      J = ⌈δ f⌉,
//! h_l[j]  = ∫_{−δ}^{0} Λ_j(s) B_l(s) ds,
//! ```
//!
//! where `f` is the feature rate and `Λ_j` is the hat function centred on the
//! sample lag `s_j = −j/f` (1 at `s_j`, 0 at `s_{j±1}`, linear between). That is,
//! the envelope is taken as linear between its samples and the integral is
//! then exact; each tap is integrated by 4-point Gauss–Legendre on every
//! piece between consecutive sample lags and B-spline knots, which is exact
//! (the integrand is a quartic per piece). When `δ f` is not an integer the
//! last interval is cut at `−δ`.
//!
//! The baseline `a(z) = Σ_m α_m A_m(z)` is a clamped cubic B-spline in `z`; the
//! B-splines sum to one, so the intercept is inside its span. Its columns come
//! first and are not penalised: [`super::gram::Gram::profile`] partials them out.
//!
//! Column order: `n_baseline` baseline columns, then for each site `k` its
//! `n_lag · n_pos` columns in lag-major order (index `l · n_pos + m`), so site
//! `k` owns columns `q + k·p_k .. q + (k+1)·p_k`.

use faer::{Mat, MatRef};

use super::basis::{gauss_legendre, BSplineBasis};
use super::gram::Gram;
use super::penalty::SurfaceBasis;
use crate::{Error, Result};

/// Sizes and scales of the functional design.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DesignSpec {
    /// Lag window δ in seconds (default 0.3 s).
    pub lag_window: f64,
    /// Feature rate in Hz: the common sampling rate of envelopes, z and y.
    pub feature_rate: f64,
    /// Number of lag B-splines `B_l(s)` on `[−δ, 0]` (default 7).
    pub n_lag: usize,
    /// Number of position B-splines `C_m(z)` on `[0, 1]` (default 7).
    pub n_pos: usize,
    /// Baseline functions in `z`: 0 (none), 1 (intercept only) or ≥ 4
    /// B-splines (default 8).
    pub n_baseline: usize,
}

impl DesignSpec {
    /// Defaults (δ = 0.3 s, 7 × 7 surface, 8 baseline functions) at a feature rate.
    pub fn new(feature_rate: f64) -> Self {
        DesignSpec {
            lag_window: 0.3,
            feature_rate,
            n_lag: 7,
            n_pos: 7,
            n_baseline: 8,
        }
    }

    /// `J = ⌈δ f⌉`: the number of past samples a lag window reaches back.
    pub fn lag_samples(&self) -> usize {
        (self.lag_window * self.feature_rate - 1e-9).ceil().max(1.0) as usize
    }
}

/// FIR taps `h_l[j]`, `j = 0..=J`, of the lag integrals (see the module docs).
pub fn lag_taps(lag: &BSplineBasis, feature_rate: f64, n_taps: usize) -> Vec<Vec<f64>> {
    let h = 1.0 / feature_rate;
    let delta = -lag.lo();
    let mut taps = vec![vec![0.0; n_taps]; lag.len()];
    for j in 0..n_taps - 1 {
        let s_hi = -(j as f64) * h; // s_j
        let s_lo = -((j + 1) as f64) * h; // s_{j+1}
        let lo = s_lo.max(-delta);
        if lo >= s_hi {
            break;
        }
        // split [lo, s_hi] at the B-spline breakpoints inside it
        let mut cuts = vec![lo];
        cuts.extend(
            lag.breakpoints()
                .iter()
                .copied()
                .filter(|&t| t > lo && t < s_hi),
        );
        cuts.push(s_hi);
        for w in cuts.windows(2) {
            for (s, wt) in gauss_legendre(w[0], w[1]) {
                let lv = lag.local(s, 0);
                let up = (s - s_lo) / h; // Λ_j(s)
                let down = (s_hi - s) / h; // Λ_{j+1}(s)
                for (a, v) in lv.values.iter().enumerate() {
                    taps[lv.first + a][j] += wt * v * up;
                    taps[lv.first + a][j + 1] += wt * v * down;
                }
            }
        }
    }
    taps
}

/// The design matrix `[A | X | y]` of one DoF over its usable rows.
#[derive(Debug, Clone)]
pub struct FunctionalDesign {
    spec: DesignSpec,
    surface: SurfaceBasis,
    baseline: Option<BSplineBasis>,
    taps: Vec<Vec<f64>>,
    rows: Vec<usize>,
    n_sites: usize,
    /// Column-major `n_rows × (q + K·p_k + 1)`; the last column is `y`.
    data: Mat<f64>,
}

impl FunctionalDesign {
    /// Builds the design from envelopes `x_k` (one slice per site, all on the
    /// same feature-rate grid), position `z ∈ [0, 1]` and velocity `y` on that
    /// grid, and the usable rows: strictly increasing sample indices whose
    /// whole lag window lies inside the data (`row ≥ J`).
    pub fn new(
        envelopes: &[&[f64]],
        z: &[f64],
        y: &[f64],
        rows: &[usize],
        spec: DesignSpec,
    ) -> Result<Self> {
        if !(spec.feature_rate.is_finite() && spec.feature_rate > 0.0) {
            return Err(Error::Argument(format!(
                "feature rate must be positive, got {}",
                spec.feature_rate
            )));
        }
        if !(spec.lag_window.is_finite() && spec.lag_window > 0.0) {
            return Err(Error::Argument(format!(
                "lag window must be positive, got {}",
                spec.lag_window
            )));
        }
        let surface = SurfaceBasis::new(spec.lag_window, spec.n_lag, spec.n_pos)?;
        let baseline = match spec.n_baseline {
            0 | 1 => None,
            n => Some(BSplineBasis::new(0.0, 1.0, n).ok_or_else(|| {
                Error::Argument(format!(
                    "baseline needs 0, 1 or at least 4 functions, got {n}"
                ))
            })?),
        };
        let q = spec.n_baseline;
        let n_sites = envelopes.len();
        if n_sites == 0 {
            return Err(Error::Argument("no envelopes given".into()));
        }
        let len = z.len();
        if y.len() != len {
            return Err(Error::Argument(format!(
                "position has {len} samples but velocity has {}",
                y.len()
            )));
        }
        for (k, e) in envelopes.iter().enumerate() {
            if e.len() != len {
                return Err(Error::Argument(format!(
                    "envelope of site {k} has {} samples, position has {len}",
                    e.len()
                )));
            }
        }
        let jmax = spec.lag_samples();
        if rows.is_empty() {
            return Err(Error::Analysis("no usable rows".into()));
        }
        for (w, &r) in rows.iter().enumerate() {
            if r < jmax || r >= len {
                return Err(Error::Argument(format!(
                    "usable row {r} lies outside [{jmax}, {len}): its lag window leaves the data"
                )));
            }
            if w > 0 && rows[w - 1] >= r {
                return Err(Error::Argument(
                    "usable rows must be strictly increasing".into(),
                ));
            }
            if !(z[r].is_finite() && (0.0..=1.0).contains(&z[r])) {
                return Err(Error::Argument(format!(
                    "position at sample {r} is {} (must be scaled to [0, 1])",
                    z[r]
                )));
            }
            if !y[r].is_finite() {
                return Err(Error::Argument(format!(
                    "velocity at sample {r} is not finite"
                )));
            }
            for (k, e) in envelopes.iter().enumerate() {
                if let Some(j) = (r - jmax..=r).find(|&j| !e[j].is_finite()) {
                    return Err(Error::Argument(format!(
                        "envelope of site {k} is not finite at sample {j}"
                    )));
                }
            }
        }
        let taps = lag_taps(surface.lag(), spec.feature_rate, jmax + 1);
        let (nl, nm) = (spec.n_lag, spec.n_pos);
        let pk = nl * nm;
        let ncols = q + n_sites * pk + 1;
        let n = rows.len();
        let mut data = Mat::<f64>::zeros(n, ncols);
        for (i, &r) in rows.iter().enumerate() {
            let zi = z[r];
            match &baseline {
                Some(bb) => {
                    let lv = bb.local(zi, 0);
                    for (a, v) in lv.values.iter().enumerate() {
                        data[(i, lv.first + a)] = *v;
                    }
                }
                None if q == 1 => data[(i, 0)] = 1.0,
                None => {}
            }
            let lz = surface.pos().local(zi, 0);
            for (k, e) in envelopes.iter().enumerate() {
                for (l, tap) in taps.iter().enumerate() {
                    let f: f64 = tap.iter().enumerate().map(|(j, h)| h * e[r - j]).sum();
                    let base = q + k * pk + l * nm + lz.first;
                    for (c, v) in lz.values.iter().enumerate() {
                        data[(i, base + c)] = f * v;
                    }
                }
            }
            data[(i, ncols - 1)] = y[r];
        }
        Ok(FunctionalDesign {
            spec,
            surface,
            baseline,
            taps,
            rows: rows.to_vec(),
            n_sites,
            data,
        })
    }

    /// The specification used.
    pub fn spec(&self) -> &DesignSpec {
        &self.spec
    }

    /// The surface basis (for penalties and for evaluating fitted surfaces).
    pub fn surface(&self) -> &SurfaceBasis {
        &self.surface
    }

    /// The baseline basis, when it is a B-spline (`n_baseline ≥ 4`).
    pub fn baseline(&self) -> Option<&BSplineBasis> {
        self.baseline.as_ref()
    }

    /// FIR taps `h_l[j]` (outer index `l`, inner `j = 0..=J`).
    pub fn taps(&self) -> &[Vec<f64>] {
        &self.taps
    }

    /// The usable rows (sample indices), in order.
    pub fn rows(&self) -> &[usize] {
        &self.rows
    }

    /// Number of rows `n`.
    pub fn n_rows(&self) -> usize {
        self.rows.len()
    }

    /// Number of sites `K`.
    pub fn n_sites(&self) -> usize {
        self.n_sites
    }

    /// Number of baseline columns `q`.
    pub fn n_baseline(&self) -> usize {
        self.spec.n_baseline
    }

    /// Coefficients per site, `n_lag · n_pos`.
    pub fn group_size(&self) -> usize {
        self.surface.len()
    }

    /// Number of design columns `q + K · n_lag · n_pos` (without `y`).
    pub fn n_columns(&self) -> usize {
        self.data.ncols() - 1
    }

    /// The design `[A | X]` (rows × columns, column-major).
    pub fn matrix(&self) -> MatRef<'_, f64> {
        self.data.as_ref().subcols(0, self.n_columns())
    }

    /// The response `y` over the usable rows.
    pub fn response(&self) -> &[f64] {
        self.data.col_as_slice(self.n_columns())
    }

    /// The augmented matrix `[A | X | y]`.
    pub fn augmented(&self) -> MatRef<'_, f64> {
        self.data.as_ref()
    }

    /// The Gram of all rows, formed once (see [`Gram::from_augmented`]).
    pub fn gram(&self) -> Gram {
        Gram::from_augmented(self.augmented(), faer::Par::rayon(0))
    }

    /// The Gram of the rows at positions `range` of [`Self::rows`].
    pub fn gram_of(&self, range: std::ops::Range<usize>, par: faer::Par) -> Gram {
        Gram::from_augmented(
            self.augmented()
                .subrows(range.start, range.end - range.start),
            par,
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn taps_integrate_linear_envelopes_exactly() {
        // For x(t) = 1 + 2t (linear), Σ_j h_l[j] x(t_i − j/f) must equal ∫ x(t_i+s) B_l(s) ds.
        let lag = BSplineBasis::new(-0.3, 0.0, 7).unwrap();
        for &rate in &[100.0, 73.0] {
            let j = (0.3f64 * rate - 1e-9).ceil() as usize;
            let taps = lag_taps(&lag, rate, j + 1);
            for (l, tap) in taps.iter().enumerate() {
                let fir: f64 = tap
                    .iter()
                    .enumerate()
                    .map(|(jj, h)| h * (1.0 + 2.0 * (0.5 - jj as f64 / rate)))
                    .sum();
                // exact ∫_{−δ}^{0} (1 + 2(0.5 + s)) B_l(s) ds by Gauss–Legendre per span
                let mut exact = 0.0;
                for w in lag.breakpoints().windows(2) {
                    for (s, wt) in gauss_legendre(w[0], w[1]) {
                        exact += wt * (1.0 + 2.0 * (0.5 + s)) * lag.eval(s, 0)[l];
                    }
                }
                assert!(
                    (fir - exact).abs() < 1e-13,
                    "rate {rate} l {l}: {fir} vs {exact}"
                );
            }
        }
    }
}
