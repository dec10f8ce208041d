//! Single-precision kernels on a lower triangle stored column-major: the
//! symmetric product `y = A x`, reading every stored entry once, and the
//! Cholesky solve `(L Lᵀ) z = r`, reading the factor once per triangle.
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

/// Columns `j..j + 4` of the stored lower triangle below their 4 × 4
/// diagonal block (rows `j + 4..n`), each split into whole SIMD vectors and
/// a scalar tail.
#[inline(always)]
#[allow(clippy::type_complexity)]
fn below_block<S: Simd>(lower: &[f32], n: usize, j: usize) -> ([&[S::f32s]; 4], [&[f32]; 4]) {
    let split: [(&[S::f32s], &[f32]); 4] =
        std::array::from_fn(|c| S::as_simd_f32s(&lower[(j + c) * n + j + 4..(j + c + 1) * n]));
    (split.map(|p| p.0), split.map(|p| p.1))
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
        // Four columns at a time: below their 4 × 4 diagonal block every row
        // vector of y is loaded and stored once for four axpys, and every
        // vector of x serves four dot products.
        let mut j = 0;
        while j + 4 <= n {
            let r0 = j + 4;
            let ([c0, c1, c2, c3], [t0, t1, t2, t3]) = below_block::<S>(lower, n, j);
            let (xh, xt) = S::as_simd_f32s(&x[r0..]);
            let (head, tail) = y.split_at_mut(r0);
            let (yh, yt) = S::as_mut_simd_f32s(tail);
            let s: [S::f32s; 4] = std::array::from_fn(|c| simd.splat_f32s(x[j + c]));
            let mut acc = [simd.splat_f32s(0.0); 4];
            for k in 0..yh.len() {
                let xv = xh[k];
                let mut yv = yh[k];
                yv = simd.mul_add_f32s(c0[k], s[0], yv);
                yv = simd.mul_add_f32s(c1[k], s[1], yv);
                yv = simd.mul_add_f32s(c2[k], s[2], yv);
                yv = simd.mul_add_f32s(c3[k], s[3], yv);
                yh[k] = yv;
                acc[0] = simd.mul_add_f32s(c0[k], xv, acc[0]);
                acc[1] = simd.mul_add_f32s(c1[k], xv, acc[1]);
                acc[2] = simd.mul_add_f32s(c2[k], xv, acc[2]);
                acc[3] = simd.mul_add_f32s(c3[k], xv, acc[3]);
            }
            let mut dot: [f32; 4] = std::array::from_fn(|c| simd.reduce_sum_f32s(acc[c]));
            let tails = [t0, t1, t2, t3];
            for (i, (xi, yi)) in xt.iter().zip(yt.iter_mut()).enumerate() {
                for c in 0..4 {
                    *yi += tails[c][i] * x[j + c];
                    dot[c] += tails[c][i] * xi;
                }
            }
            // the 4 × 4 diagonal block (lower triangle, mirrored)
            for c in 0..4 {
                let col = &lower[(j + c) * n..(j + c + 1) * n];
                head[j + c] += col[j + c] * x[j + c] + dot[c];
                for r in (j + c + 1)..r0 {
                    head[r] += col[r] * x[j + c];
                    head[j + c] += col[r] * x[r];
                }
            }
            j += 4;
        }
        // the last columns one by one
        for j in j..n {
            let col = &lower[j * n..(j + 1) * n];
            let mut dot = 0.0;
            for r in (j + 1)..n {
                y[r] += col[r] * x[j];
                dot += col[r] * x[r];
            }
            y[j] += col[j] * x[j] + dot;
        }
    }
}

/// `z ← (L Lᵀ)⁻¹ z` for the lower-triangular `n × n` factor whose lower
/// triangle is in the column-major `lower`: forward substitution `L w = z`
/// (column oriented: an axpy down each column) then back substitution
/// `Lᵀ v = w` (a dot product with each column), four columns at a time.
pub fn cholesky_solve_lower(lower: &[f32], n: usize, z: &mut [f32]) {
    assert!(lower.len() >= n * n && z.len() == n);
    Arch::new().dispatch(CholSolve { lower, n, z });
}

struct CholSolve<'a> {
    lower: &'a [f32],
    n: usize,
    z: &'a mut [f32],
}

impl WithSimd for CholSolve<'_> {
    type Output = ();

    #[inline(always)]
    fn with_simd<S: Simd>(self, simd: S) {
        let CholSolve { lower, n, z } = self;
        let nb = n / 4 * 4;
        // forward: L w = z
        let mut j = 0;
        while j < nb {
            let r0 = j + 4;
            for c in 0..4 {
                let col = &lower[(j + c) * n..(j + c + 1) * n];
                z[j + c] /= col[j + c];
                let v = z[j + c];
                for r in (j + c + 1)..r0 {
                    z[r] -= col[r] * v;
                }
            }
            let ([c0, c1, c2, c3], [t0, t1, t2, t3]) = below_block::<S>(lower, n, j);
            let w: [f32; 4] = std::array::from_fn(|c| z[j + c]);
            let s: [S::f32s; 4] = std::array::from_fn(|c| simd.splat_f32s(-w[c]));
            let (zh, zt) = S::as_mut_simd_f32s(&mut z[r0..]);
            for (k, zv) in zh.iter_mut().enumerate() {
                let mut v = *zv;
                v = simd.mul_add_f32s(c0[k], s[0], v);
                v = simd.mul_add_f32s(c1[k], s[1], v);
                v = simd.mul_add_f32s(c2[k], s[2], v);
                v = simd.mul_add_f32s(c3[k], s[3], v);
                *zv = v;
            }
            for (i, zi) in zt.iter_mut().enumerate() {
                *zi -= t0[i] * w[0] + t1[i] * w[1] + t2[i] * w[2] + t3[i] * w[3];
            }
            j += 4;
        }
        for j in nb..n {
            let col = &lower[j * n..(j + 1) * n];
            z[j] /= col[j];
            let v = z[j];
            for r in (j + 1)..n {
                z[r] -= col[r] * v;
            }
        }
        // backward: Lᵀ v = w
        for j in (nb..n).rev() {
            let col = &lower[j * n..(j + 1) * n];
            let dot: f32 = ((j + 1)..n).map(|r| col[r] * z[r]).sum();
            z[j] = (z[j] - dot) / col[j];
        }
        let mut j = nb;
        while j >= 4 {
            j -= 4;
            let r0 = j + 4;
            let ([c0, c1, c2, c3], [t0, t1, t2, t3]) = below_block::<S>(lower, n, j);
            let (zh, zt) = S::as_simd_f32s(&z[r0..]);
            let mut acc = [simd.splat_f32s(0.0); 4];
            for (k, zv) in zh.iter().enumerate() {
                acc[0] = simd.mul_add_f32s(c0[k], *zv, acc[0]);
                acc[1] = simd.mul_add_f32s(c1[k], *zv, acc[1]);
                acc[2] = simd.mul_add_f32s(c2[k], *zv, acc[2]);
                acc[3] = simd.mul_add_f32s(c3[k], *zv, acc[3]);
            }
            let mut dot: [f32; 4] = std::array::from_fn(|c| simd.reduce_sum_f32s(acc[c]));
            for (i, zi) in zt.iter().enumerate() {
                dot[0] += t0[i] * zi;
                dot[1] += t1[i] * zi;
                dot[2] += t2[i] * zi;
                dot[3] += t3[i] * zi;
            }
            // the 4 × 4 diagonal block, last column first
            for c in (0..4).rev() {
                let col = &lower[(j + c) * n..(j + c + 1) * n];
                let inner: f32 = ((j + c + 1)..r0).map(|r| col[r] * z[r]).sum();
                z[j + c] = (z[j + c] - dot[c] - inner) / col[j + c];
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cholesky_solve_inverts_l_lt() {
        for n in [1usize, 3, 4, 5, 8, 13, 50] {
            // L with a dominant diagonal and a garbage upper triangle
            let mut l = vec![f32::NAN; n * n];
            for j in 0..n {
                for i in j..n {
                    l[j * n + i] = if i == j {
                        2.0 + (i % 3) as f32
                    } else {
                        ((i * 5 + j * 7) % 9) as f32 / 9.0 - 0.45
                    };
                }
            }
            let want: Vec<f64> = (0..n).map(|i| ((i * 3) % 7) as f64 / 7.0 - 0.3).collect();
            // r = L Lᵀ want, in double precision
            let lt_w: Vec<f64> = (0..n)
                .map(|j| (j..n).map(|i| l[j * n + i] as f64 * want[i]).sum())
                .collect();
            let r: Vec<f64> = (0..n)
                .map(|i| (0..=i).map(|j| l[j * n + i] as f64 * lt_w[j]).sum())
                .collect();
            let mut z: Vec<f32> = r.iter().map(|&v| v as f32).collect();
            cholesky_solve_lower(&l, n, &mut z);
            for i in 0..n {
                // single precision with a well-conditioned factor
                assert!(
                    (z[i] as f64 - want[i]).abs() < 1e-5,
                    "n {n} row {i}: {} vs {}",
                    z[i],
                    want[i]
                );
            }
        }
    }

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
