//! Cross-validated comparisons on the same folds: a fixed site set refitted,
//! alternates swapped in, and the two baselines (a concurrent linear model of
//! the envelopes, and the position main effect alone).

use faer::Mat;

use super::context::Context;
use super::cv::cross_validate;
use super::data::DofData;
use super::folds::FoldGrams;
use super::solver::{lambda_grid, Fit, GroupLasso};
use crate::report::CvFigures;
use crate::Result;

/// Cross-validated figures of the model restricted to `groups` (weights 1,
/// smoothing `phi`), at the λ with the smallest mean held-out error. With no
/// groups it is the position-only model.
pub fn cv_for_set(ctx: &Context, groups: &[usize], phi: (f64, f64)) -> Result<CvFigures> {
    Ok(relaxed_fit(ctx, groups, phi)?.0)
}

/// The relaxed refit of a site set (Meinshausen 2007): the group lasso on
/// `groups` alone with weights 1 and smoothing `phi`, at the λ of smallest
/// mean held-out error. Returns its cross-validated figures and the fit on
/// all rows at that λ (none for an empty set).
pub fn relaxed_fit(
    ctx: &Context,
    groups: &[usize],
    phi: (f64, f64),
) -> Result<(CvFigures, Option<Fit>)> {
    if groups.is_empty() {
        return Ok((ctx.figures(baseline_only_mse(ctx)?), None));
    }
    let l = ctx.factor(phi.0, phi.1)?;
    let factors = vec![l; groups.len()];
    let sub = ctx.subset_folds(groups);
    let prof = sub.total.profile(ctx.q)?;
    let problem = GroupLasso::new(&prof, &factors)?;
    let w = vec![1.0; groups.len()];
    let lmax = problem.lambda_max(&w)?;
    if lmax <= 0.0 {
        return Ok((ctx.figures(baseline_only_mse(ctx)?), None));
    }
    let grid = lambda_grid(lmax, ctx.cfg.lambda_ratio, ctx.cfg.n_lambda);
    let cv = cross_validate(&sub, ctx.q, &factors, &w, &grid, &ctx.opts)?;
    let (t, best) = cv
        .mean_mse
        .iter()
        .enumerate()
        .fold(
            (0, f64::INFINITY),
            |acc, (i, m)| if *m < acc.1 { (i, *m) } else { acc },
        );
    let fit = problem.fit_path(&w, &grid[..=t], &ctx.opts, None)?.pop();
    Ok((ctx.figures(best), fit))
}

/// Mean held-out squared error of the baseline a(z) alone (the first `q` columns).
fn baseline_only_mse(ctx: &Context) -> Result<f64> {
    let sub = ctx.subset_folds(&[]);
    let mut total = 0.0;
    for (train, held) in sub.train.iter().zip(&sub.held) {
        let c = train.profile(ctx.q)?.full_coef(&[]);
        total += held.residual_sum_of_squares(&c)? / held.n.max(1) as f64;
    }
    Ok(total / sub.train.len() as f64)
}

/// The position main effect only: y = a(z) + e, on the same folds.
pub fn position_baseline(ctx: &Context) -> Result<CvFigures> {
    Ok(ctx.figures(baseline_only_mse(ctx)?))
}

/// The concurrent linear model y = β₀ + Σ_k β_k x_k(t) + e over the candidate
/// sites (least squares with a ridge of 1e-9 × the mean diagonal, only to
/// keep exactly collinear envelopes solvable), on the same folds.
pub fn linear_baseline(ctx: &Context, data: &DofData, candidates: &[usize]) -> Result<CvFigures> {
    let rows = ctx.design.rows();
    let k = candidates.len();
    let aug = Mat::from_fn(rows.len(), k + 2, |i, j| {
        let r = rows[i];
        match j {
            0 => 1.0,
            j if j <= k => data.envelopes[candidates[j - 1]][r],
            _ => data.y[r],
        }
    });
    let grams = FoldGrams::new(aug.as_ref(), &ctx.grams.folds)?;
    let mut total = 0.0;
    for (train, held) in grams.train.iter().zip(&grams.held) {
        let prof = train.profile(1)?;
        let b = ridge_solve(&prof.xx, &prof.xy);
        let c = prof.full_coef(&b);
        total += held.residual_sum_of_squares(&c)? / held.n.max(1) as f64;
    }
    Ok(ctx.figures(total / grams.train.len() as f64))
}

/// Solves (A + εI) x = b for a small symmetric positive semi-definite A.
fn ridge_solve(a: &Mat<f64>, b: &[f64]) -> Vec<f64> {
    let p = a.nrows();
    if p == 0 {
        return Vec::new();
    }
    let mean_diag = (0..p).map(|i| a[(i, i)]).sum::<f64>() / p as f64;
    let eps = 1e-9 * mean_diag.max(f64::MIN_POSITIVE);
    let m = Mat::from_fn(p, p, |i, j| a[(i, j)] + if i == j { eps } else { 0.0 });
    match super::penalty::cholesky_lower(&m) {
        Some(l) => {
            // forward then backward substitution
            let mut y = b.to_vec();
            for i in 0..p {
                let s: f64 = (0..i).map(|j| l[(i, j)] * y[j]).sum();
                y[i] = (y[i] - s) / l[(i, i)];
            }
            for i in (0..p).rev() {
                let s: f64 = (i + 1..p).map(|j| l[(j, i)] * y[j]).sum();
                y[i] = (y[i] - s) / l[(i, i)];
            }
            y
        }
        None => vec![0.0; p],
    }
}

/// Pearson correlation of two sites' envelopes over the usable rows.
pub fn envelope_correlation(data: &DofData, rows: &[usize], a: usize, b: usize) -> f64 {
    let n = rows.len() as f64;
    let (xa, xb) = (&data.envelopes[a], &data.envelopes[b]);
    let ma = rows.iter().map(|&r| xa[r]).sum::<f64>() / n;
    let mb = rows.iter().map(|&r| xb[r]).sum::<f64>() / n;
    let (mut sab, mut saa, mut sbb) = (0.0, 0.0, 0.0);
    for &r in rows {
        let (u, v) = (xa[r] - ma, xb[r] - mb);
        sab += u * v;
        saa += u * u;
        sbb += v * v;
    }
    if saa > 0.0 && sbb > 0.0 {
        sab / (saa * sbb).sqrt()
    } else {
        0.0
    }
}
