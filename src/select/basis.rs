//! Cubic B-spline bases on an interval, their Gram and roughness matrices.
//!
//! A basis of `n ≥ 4` cubic B-splines on `[a, b]` uses the clamped (open
//! uniform) knot vector: `a` and `b` repeated four times and `n − 4` equally
//! spaced interior knots. Values and derivatives come from the Cox–de Boor
//! recurrence (de Boor 1978, *A Practical Guide to Splines*, Springer):
//!
//! ```text
//! B_{i,0}(x) = 1 on [t_i, t_{i+1}), else 0
//! B_{i,k}(x) = (x − t_i)/(t_{i+k} − t_i) B_{i,k−1}(x)
//!            + (t_{i+k+1} − x)/(t_{i+k+1} − t_{i+1}) B_{i+1,k−1}(x)      (0/0 := 0)
//! B′_{i,k}   = k/(t_{i+k} − t_i) B_{i,k−1} − k/(t_{i+k+1} − t_{i+1}) B_{i+1,k−1}
//! ```
//!
//! The right end `b` belongs to the last span, so the basis is a partition of
//! unity on the closed interval.
//!
//! The Gram matrix `G_ij = ∫ B_i B_j` (degree-6 integrand per knot span) and
//! the roughness matrix `Ω_ij = ∫ B_i″ B_j″` (degree 2 per span) are computed
//! exactly by 4-point Gauss–Legendre quadrature on each knot span, which is
//! exact for polynomials up to degree 7.

use faer::Mat;

/// Cubic degree.
const DEGREE: usize = 3;

/// Gauss–Legendre nodes on [−1, 1] (4 points, exact to degree 7).
pub(crate) const GL4_NODES: [f64; 4] = [
    -0.861_136_311_594_052_6,
    -0.339_981_043_584_856_3,
    0.339_981_043_584_856_3,
    0.861_136_311_594_052_6,
];
/// Gauss–Legendre weights matching [`GL4_NODES`].
pub(crate) const GL4_WEIGHTS: [f64; 4] = [
    0.347_854_845_137_453_9,
    0.652_145_154_862_546_1,
    0.652_145_154_862_546_1,
    0.347_854_845_137_453_9,
];

/// Maps the 4-point Gauss–Legendre rule onto `[lo, hi]`: (nodes, weights).
pub(crate) fn gauss_legendre(lo: f64, hi: f64) -> [(f64, f64); 4] {
    let half = 0.5 * (hi - lo);
    let mid = 0.5 * (hi + lo);
    let mut out = [(0.0, 0.0); 4];
    for (o, (x, w)) in out.iter_mut().zip(GL4_NODES.iter().zip(GL4_WEIGHTS.iter())) {
        *o = (mid + half * x, half * w);
    }
    out
}

/// A clamped cubic B-spline basis of `len()` functions on `[lo, hi]`.
#[derive(Debug, Clone, PartialEq)]
pub struct BSplineBasis {
    knots: Vec<f64>,
    n: usize,
}

/// Values (or derivatives) of the 4 B-splines that may be non-zero at a point.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LocalValues {
    /// Index of the first of the four functions.
    pub first: usize,
    /// The values of functions `first..first + 4`.
    pub values: [f64; 4],
}

impl BSplineBasis {
    /// A basis of `n` clamped cubic B-splines on `[lo, hi]`.
    ///
    /// Returns `None` when `n < 4`, or `lo`, `hi` are not finite with `lo < hi`.
    pub fn new(lo: f64, hi: f64, n: usize) -> Option<Self> {
        if n < DEGREE + 1 || !lo.is_finite() || !hi.is_finite() || lo >= hi {
            return None;
        }
        let spans = n - DEGREE;
        let mut knots = Vec::with_capacity(n + DEGREE + 1);
        knots.extend(std::iter::repeat_n(lo, DEGREE));
        for j in 0..=spans {
            let t = if j == spans {
                hi
            } else {
                lo + (hi - lo) * j as f64 / spans as f64
            };
            knots.push(t);
        }
        knots.extend(std::iter::repeat_n(hi, DEGREE));
        Some(BSplineBasis { knots, n })
    }

    /// Number of basis functions.
    pub fn len(&self) -> usize {
        self.n
    }

    /// Always false: a basis has at least four functions.
    pub fn is_empty(&self) -> bool {
        false
    }

    /// The full knot vector (length `len() + 4`).
    pub fn knots(&self) -> &[f64] {
        &self.knots
    }

    /// Lower end of the interval.
    pub fn lo(&self) -> f64 {
        self.knots[0]
    }

    /// Upper end of the interval.
    pub fn hi(&self) -> f64 {
        self.knots[self.knots.len() - 1]
    }

    /// The distinct knots `lo = u_0 < … < u_{n−3} = hi` (span ends).
    pub fn breakpoints(&self) -> &[f64] {
        &self.knots[DEGREE..self.knots.len() - DEGREE]
    }

    /// Index `μ` of the knot span `[t_μ, t_{μ+1})` holding `x` (clamped to the interval).
    fn span(&self, x: f64) -> usize {
        let last = self.n - 1; // span index of the final interval
        if x >= self.knots[last + 1] {
            return last;
        }
        if x <= self.knots[DEGREE] {
            return DEGREE;
        }
        // binary search among t_3..t_n
        let (mut lo, mut hi) = (DEGREE, last + 1);
        while hi - lo > 1 {
            let mid = (lo + hi) / 2;
            if x < self.knots[mid] {
                hi = mid;
            } else {
                lo = mid;
            }
        }
        lo
    }

    /// The derivative of order `deriv` (0, 1 or 2; 3 is piecewise constant) of
    /// the four functions that may be non-zero at `x`. Points outside the
    /// interval are evaluated by the polynomial piece of the nearest end span.
    pub fn local(&self, x: f64, deriv: usize) -> LocalValues {
        let t = &self.knots;
        let mu = self.span(x);
        // Triangular table of lower-degree values: n[k][j] = B_{mu-k+j, k}(x).
        let mut table = [[0.0f64; 4]; 4];
        table[0][0] = 1.0;
        for k in 1..=DEGREE {
            for j in 0..=k {
                // function index i = mu - k + j, degree k
                let i = mu + j - k;
                let mut v = 0.0;
                if j >= 1 {
                    let den = t[i + k] - t[i];
                    if den > 0.0 {
                        v += (x - t[i]) / den * table[k - 1][j - 1];
                    }
                }
                if j < k {
                    let den = t[i + k + 1] - t[i + 1];
                    if den > 0.0 {
                        v += (t[i + k + 1] - x) / den * table[k - 1][j];
                    }
                }
                table[k][j] = v;
            }
        }
        let first = mu - DEGREE;
        if deriv == 0 {
            return LocalValues {
                first,
                values: table[DEGREE],
            };
        }
        // Derivatives: apply the derivative recurrence `deriv` times starting
        // from the degree (3 − deriv) values, using coefficient differences.
        let d = deriv.min(DEGREE + 1);
        if d > DEGREE {
            return LocalValues {
                first,
                values: [0.0; 4],
            };
        }
        let base = DEGREE - d;
        // coefficients a[j] of B_{mu-base+j, base}, j = 0..=base
        let mut coef: Vec<f64> = table[base][..=base].to_vec();
        // Raise degree step by step: derivative of B_{i,k} in terms of B_{·,k−1}.
        for k in (base + 1)..=DEGREE {
            // new functions i = mu - k + j, j = 0..=k
            let mut next = vec![0.0; k + 1];
            for (j, nv) in next.iter_mut().enumerate() {
                let i = mu + j - k;
                let mut v = 0.0;
                if j >= 1 {
                    let den = t[i + k] - t[i];
                    if den > 0.0 {
                        v += k as f64 / den * coef[j - 1];
                    }
                }
                if j < k {
                    let den = t[i + k + 1] - t[i + 1];
                    if den > 0.0 {
                        v -= k as f64 / den * coef[j];
                    }
                }
                *nv = v;
            }
            coef = next;
        }
        let mut values = [0.0; 4];
        values.copy_from_slice(&coef);
        LocalValues { first, values }
    }

    /// All `len()` values (or derivatives of order `deriv`) at `x`.
    pub fn eval(&self, x: f64, deriv: usize) -> Vec<f64> {
        let mut out = vec![0.0; self.n];
        let lv = self.local(x, deriv);
        out[lv.first..lv.first + 4].copy_from_slice(&lv.values);
        out
    }

    /// `∫ B_i^{(d)} B_j^{(d)}` over the interval, exact per knot span.
    fn integrated_products(&self, deriv: usize) -> Mat<f64> {
        let mut m = Mat::<f64>::zeros(self.n, self.n);
        let bp = self.breakpoints();
        for w in bp.windows(2) {
            for (x, wt) in gauss_legendre(w[0], w[1]) {
                let lv = self.local(x, deriv);
                for a in 0..4 {
                    for b in 0..4 {
                        m[(lv.first + a, lv.first + b)] += wt * lv.values[a] * lv.values[b];
                    }
                }
            }
        }
        m
    }

    /// The Gram matrix `G_ij = ∫ B_i(x) B_j(x) dx`.
    pub fn gram(&self) -> Mat<f64> {
        self.integrated_products(0)
    }

    /// The roughness matrix `Ω_ij = ∫ B_i″(x) B_j″(x) dx`.
    pub fn roughness(&self) -> Mat<f64> {
        self.integrated_products(2)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Values computed with scipy.interpolate.BSpline (FACTS.md section 7).
    #[test]
    fn clamped_five_function_values() {
        let b = BSplineBasis::new(0.0, 1.0, 5).unwrap();
        let expect = [
            (0.0, [1.0, 0.0, 0.0, 0.0, 0.0]),
            (0.25, [0.125, 19.0 / 32.0, 0.25, 1.0 / 32.0, 0.0]),
            (0.5, [0.0, 0.25, 0.5, 0.25, 0.0]),
            (0.75, [0.0, 1.0 / 32.0, 0.25, 19.0 / 32.0, 0.125]),
            (1.0, [0.0, 0.0, 0.0, 0.0, 1.0]),
        ];
        for (x, e) in expect {
            let v = b.eval(x, 0);
            for (a, b) in v.iter().zip(e.iter()) {
                assert!((a - b).abs() < 1e-14, "x={x}: {v:?}");
            }
        }
        assert!((b.eval(0.25, 1)[2] - 1.5).abs() < 1e-13);
        assert!(b.eval(0.25, 2)[2].abs() < 1e-12);
    }

    // Roughness matrix from FACTS.md section 7 (exact integration, computed).
    #[test]
    fn clamped_five_function_roughness() {
        let b = BSplineBasis::new(0.0, 1.0, 5).unwrap();
        let s = b.roughness();
        let e = [
            [96.0, -132.0, 24.0, 12.0, 0.0],
            [-132.0, 192.0, -48.0, -24.0, 12.0],
            [24.0, -48.0, 48.0, -48.0, 24.0],
            [12.0, -24.0, -48.0, 192.0, -132.0],
            [0.0, 12.0, 24.0, -132.0, 96.0],
        ];
        for i in 0..5 {
            for j in 0..5 {
                assert!((s[(i, j)] - e[i][j]).abs() < 1e-10, "{i},{j}");
            }
        }
        // Gram rows sum to ∫B_i (partition of unity): total = interval length.
        let g = b.gram();
        let total: f64 = (0..5)
            .flat_map(|i| (0..5).map(move |j| (i, j)))
            .map(|(i, j)| g[(i, j)])
            .sum();
        assert!((total - 1.0).abs() < 1e-14);
    }
}
