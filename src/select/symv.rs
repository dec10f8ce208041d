//! `y = A x` for a symmetric single-precision matrix stored by its lower
//! triangle (column-major), reading every stored entry once.
//!
//! Column `j` contributes `a_jj x_j` and `a_ij x_j` to `y_i` (i > j, an
//! axpy down the column) and `Σ_{i>j} a_ij x_i` to `y_j` (a dot product with
//! the same column), so one pass over the lower triangle gives the whole
//! product: half the memory traffic of a general matrix–vector product,
//! which is what bounds it at the sizes of the selection engine. SIMD width
//! is chosen at run time (pulp).

use pulp::{Arch, Simd, WithSimd};

/// `y ← A x`, `A` the `n × n` symmetric matrix whose lower triangle is in
/// the column-major `lower` (entries above the diagonal are not read).
pub fn symv_lower(lower: &[f32], n: usize, x: &[f32], y: &mut [f32]) {
    assert!(lower.len() >= n * n && x.len() == n && y.len() == n);
    Arch::new().dispatch(Symv { lower, n, x, y });
}

struct Symv<'a> {
    lower: &'a [f32],
    n: usize,
    x: &'a [f32],
    y: &'a mut [f32],
}

impl WithSimd for Symv<'_> {
    type Output = ();

    #[inline(always)]
    fn with_simd<S: Simd>(self, simd: S) {
        let Symv { lower, n, x, y } = self;
        y.fill(0.0);
        for j in 0..n {
            let col = &lower[j * n + j + 1..(j + 1) * n];
            let xj = x[j];
            let (head, tail) = y.split_at_mut(j + 1);
            let (ch, ct) = S::as_simd_f32s(col);
            let (xh, xt) = S::as_simd_f32s(&x[j + 1..]);
            let (yh, yt) = S::as_mut_simd_f32s(tail);
            let sx = simd.splat_f32s(xj);
            // two accumulators for the dot product, to hide FMA latency
            let (mut acc0, mut acc1) = (simd.splat_f32s(0.0), simd.splat_f32s(0.0));
            let pairs = ch.len() / 2;
            for k in 0..pairs {
                let (a0, a1) = (ch[2 * k], ch[2 * k + 1]);
                yh[2 * k] = simd.mul_add_f32s(a0, sx, yh[2 * k]);
                yh[2 * k + 1] = simd.mul_add_f32s(a1, sx, yh[2 * k + 1]);
                acc0 = simd.mul_add_f32s(a0, xh[2 * k], acc0);
                acc1 = simd.mul_add_f32s(a1, xh[2 * k + 1], acc1);
            }
            if ch.len() % 2 == 1 {
                let k = ch.len() - 1;
                yh[k] = simd.mul_add_f32s(ch[k], sx, yh[k]);
                acc0 = simd.mul_add_f32s(ch[k], xh[k], acc0);
            }
            let mut dot = simd.reduce_sum_f32s(simd.add_f32s(acc0, acc1));
            for ((a, xi), yi) in ct.iter().zip(xt).zip(yt.iter_mut()) {
                *yi += a * xj;
                dot += a * xi;
            }
            head[j] += lower[j * n + j] * xj + dot;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn matches_the_full_product() {
        // a symmetric matrix with a garbage upper triangle that must not be read
        for n in [1usize, 2, 7, 8, 9, 31, 64, 100] {
            let mut a = vec![f32::NAN; n * n];
            let mut full = vec![0.0f64; n * n];
            for j in 0..n {
                for i in j..n {
                    let v = ((i * 7 + j * 3) % 11) as f32 / 11.0 - 0.4;
                    a[j * n + i] = v;
                    full[j * n + i] = v as f64;
                    full[i * n + j] = v as f64;
                }
            }
            let x: Vec<f32> = (0..n).map(|i| ((i * 5) % 13) as f32 / 13.0 - 0.5).collect();
            let mut y = vec![0.0f32; n];
            symv_lower(&a, n, &x, &mut y);
            for i in 0..n {
                let want: f64 = (0..n).map(|j| full[j * n + i] * x[j] as f64).sum();
                // single precision: n terms of size < 1, rounding ~ n · 6e-8
                assert!(
                    (y[i] as f64 - want).abs() < 1e-6 * n as f64,
                    "n {n} row {i}"
                );
            }
        }
    }
}
