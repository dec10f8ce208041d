//! Tuning by contiguous block cross-validation over λ × φ_s × φ_z, and the
//! one-standard-error rule in several dimensions.
//!
//! For every smoothing pair (φ_s, φ_z) the λ path runs from λ_max (where no
//! site enters) down to `lambda_ratio · λ_max`; every fold solves the path on
//! its training Gram and is scored on its held-out block (see
//! [`super::cv::cross_validate`]). Each setting (λ, φ_s, φ_z) then has a mean
//! held-out error m and a standard error s over the folds.
//!
//! **One-standard-error rule.** Let m* be the smallest mean error and s* its
//! standard error. Among all settings with m ≤ m* + s*, choose the one with
//! the fewest selected sites (in the fit on all rows), then the largest λ
//! (measured as λ/λ_max, since λ_max depends on φ), then the largest φ_s, then
//! the largest φ_z. This is the rule of Breiman, Friedman, Olshen & Stone
//! (1984, *Classification and Regression Trees*, p. 80) and Hastie,
//! Tibshirani & Friedman (2009, *The Elements of Statistical Learning*,
//! §7.10), extended from one to several tuning dimensions by ordering them by
//! simplicity: sparsity first, then shrinkage, then smoothness.

use rayon::prelude::*;

use super::context::Context;
use super::cv::held_out_mse;
use super::folds::FoldGrams;
use super::gram::{Gram, ProfiledGram};
use super::solver::{lambda_grid, Fit, GroupLasso, PathRun, SolverOptions};
use crate::Result;

/// λ values solved at a time before the early-stopping check.
const CHUNK: usize = 5;
/// The path stops once the mean error exceeds the running minimum by this many
/// of its standard errors ...
const STOP_SE: f64 = 3.0;
/// ... at least this many λ values after the minimum.
const STOP_AFTER: usize = 8;

/// One tuning setting with its cross-validated error.
#[derive(Debug, Clone, PartialEq)]
pub struct Setting {
    /// Relative smoothing along the lag.
    pub phi_s: f64,
    /// Relative smoothing along the position.
    pub phi_z: f64,
    /// Index on the λ grid (0 = λ_max).
    pub lambda_index: usize,
    /// λ.
    pub lambda: f64,
    /// λ_max of this (φ_s, φ_z) and weights.
    pub lambda_max: f64,
    /// Mean held-out squared error over the folds.
    pub mean_mse: f64,
    /// Its standard error.
    pub se_mse: f64,
    /// Sites selected by the fit on all rows.
    pub n_active: usize,
}

/// The result of tuning one site set.
#[derive(Debug, Clone)]
pub struct Tuned {
    /// The setting chosen by the one-standard-error rule.
    pub chosen: Setting,
    /// The setting with the smallest mean error.
    pub best: Setting,
    /// Every setting (φ pairs in grid order, λ in path order).
    pub settings: Vec<Setting>,
    /// The fit on all rows at the chosen setting (coefficients in subset order).
    pub fit: Fit,
    /// The site indices of the subset (group `i` of `fit` is site `groups[i]`).
    pub groups: Vec<usize>,
}

impl Tuned {
    /// Site indices selected by the chosen fit.
    pub fn selected(&self) -> Vec<usize> {
        self.fit.active.iter().map(|&i| self.groups[i]).collect()
    }

    /// Penalty norm ‖L_kᵀ b_k‖ of each site of the subset at the chosen fit.
    pub fn norms(&self) -> Vec<(usize, f64)> {
        self.groups
            .iter()
            .zip(&self.fit.norms)
            .map(|(g, n)| (*g, *n))
            .collect()
    }
}

struct PhiResult {
    settings: Vec<Setting>,
    fits: Vec<Fit>,
}

fn run_phi(
    ctx: &Context,
    sub: &FoldGrams,
    groups: &[usize],
    weights: &[f64],
    phi: (f64, f64),
) -> Result<PhiResult> {
    let l = ctx.factor(phi.0, phi.1)?;
    let factors = vec![l; groups.len()];
    let prof = sub.total.profile(ctx.q)?;
    let problem = GroupLasso::new(&prof, &factors)?;
    let lmax = problem.lambda_max(weights)?;
    let cfg = &ctx.cfg;
    // With no signal at all λ_max is 0; use a tiny positive grid so the path is defined.
    let top = if lmax > 0.0 {
        lmax
    } else {
        f64::MIN_POSITIVE.sqrt()
    };
    let grid = lambda_grid(top, cfg.lambda_ratio, cfg.n_lambda);
    let t0 = std::time::Instant::now();
    let (fits, mean, se) = cv_path_early(
        &problem,
        sub,
        ctx.q,
        &factors,
        weights,
        &grid,
        &ctx.opts,
        ctx.cfg.max_sites,
    )?;
    if std::env::var_os("MIRRORSITE_TIMING").is_some() {
        let sweeps: usize = fits.iter().map(|f| f.sweeps).sum();
        eprintln!(
            "tune: phi {phi:?} groups {} lambdas {} sweeps {sweeps} {:.2} s",
            groups.len(),
            fits.len(),
            t0.elapsed().as_secs_f64()
        );
    }
    let settings = (0..fits.len())
        .map(|t| Setting {
            phi_s: phi.0,
            phi_z: phi.1,
            lambda_index: t,
            lambda: grid[t],
            lambda_max: top,
            mean_mse: mean[t],
            se_mse: se[t],
            n_active: fits[t].active.len(),
        })
        .collect();
    Ok(PhiResult { settings, fits })
}

/// One fold's solver state along the path.
struct FoldRun {
    prof: ProfiledGram,
    problem: GroupLasso,
    held: Gram,
    run: PathRun,
}

/// Fits on all rows, and mean held-out errors and their standard errors.
type CvCurve = (Vec<Fit>, Vec<f64>, Vec<f64>);

/// Cross-validates a λ path, solving it `CHUNK` values at a time (each path
/// resumed where it stopped, so the fits are those of one uninterrupted
/// path), and stops early once the mean held-out error has risen `STOP_SE`
/// standard errors above its running minimum for `STOP_AFTER` values (the
/// settings past that point cannot be chosen by the one-standard-error rule).
/// It also stops once the fit on all rows selects more than `max_sites`
/// sites (glmnet's `dfmax`). Returns the fits on all rows and the mean and
/// standard error per solved λ.
#[allow(clippy::too_many_arguments)]
fn cv_path_early(
    full: &GroupLasso,
    sub: &FoldGrams,
    q: usize,
    factors: &[faer::Mat<f64>],
    weights: &[f64],
    grid: &[f64],
    opts: &SolverOptions,
    max_sites: usize,
) -> Result<CvCurve> {
    let mut runs: Vec<FoldRun> = sub
        .train
        .par_iter()
        .zip(sub.held.par_iter())
        .map(|(train, held)| {
            let prof = train.profile(q)?;
            let problem = GroupLasso::new(&prof, factors)?;
            let run = PathRun::new(&problem, weights, grid, opts, None)?;
            Ok(FoldRun {
                prof,
                problem,
                held: held.clone(),
                run,
            })
        })
        .collect::<Result<Vec<_>>>()?;
    let nf = runs.len() as f64;
    let mut full_run = PathRun::new(full, weights, grid, opts, None)?;
    let (mut mean, mut se) = (Vec::new(), Vec::new());
    let mut start = 0;
    while start < grid.len() {
        let end = (start + CHUNK).min(grid.len());
        // all rows and every fold in parallel; each path resumed where the
        // previous chunk left it (warm start, predictor and Newton cache kept)
        let (_, fold_mse) = rayon::join(
            || full_run.advance(full, end),
            || {
                runs.par_iter_mut()
                    .map(|r| {
                        r.run.advance(&r.problem, end);
                        held_out_mse(&r.prof, &r.held, &r.run.fits()[start..end])
                    })
                    .collect::<Result<Vec<Vec<f64>>>>()
            },
        );
        let fold_mse = fold_mse?;
        for t in 0..end - start {
            let m = fold_mse.iter().map(|f| f[t]).sum::<f64>() / nf;
            let v = if nf > 1.0 {
                fold_mse.iter().map(|f| (f[t] - m).powi(2)).sum::<f64>() / (nf - 1.0)
            } else {
                0.0
            };
            mean.push(m);
            se.push((v / nf).sqrt());
        }
        start = end;
        let (imin, mmin) = mean
            .iter()
            .enumerate()
            .fold(
                (0, f64::INFINITY),
                |acc, (i, m)| if *m < acc.1 { (i, *m) } else { acc },
            );
        let last = mean.len() - 1;
        if last >= imin + STOP_AFTER && mean[last] > mmin + STOP_SE * se[imin] {
            break;
        }
        if full_run
            .fits()
            .last()
            .is_some_and(|f| f.active.len() > max_sites)
        {
            break;
        }
    }
    Ok((full_run.into_fits(), mean, se))
}

/// Applies the one-standard-error rule (see the module docs); returns the
/// index of the chosen setting and of the best one.
pub fn one_se_rule(settings: &[Setting]) -> Option<(usize, usize)> {
    let best = settings
        .iter()
        .enumerate()
        .filter(|(_, s)| s.mean_mse.is_finite())
        .min_by(|a, b| a.1.mean_mse.total_cmp(&b.1.mean_mse))?
        .0;
    let thr = settings[best].mean_mse + settings[best].se_mse;
    let chosen = settings
        .iter()
        .enumerate()
        .filter(|(_, s)| s.mean_mse <= thr)
        .min_by(|(_, a), (_, b)| {
            a.n_active
                .cmp(&b.n_active)
                .then(a.lambda_index.cmp(&b.lambda_index))
                .then(b.phi_s.total_cmp(&a.phi_s))
                .then(b.phi_z.total_cmp(&a.phi_z))
        })?
        .0;
    Some((chosen, best))
}

/// Tunes the group lasso on the sites `groups` with penalty weights `weights`
/// (one per group, `+inf` excludes a group).
pub fn tune(ctx: &Context, groups: &[usize], weights: &[f64]) -> Result<Tuned> {
    let phis: Vec<(f64, f64)> = ctx
        .cfg
        .phi_s
        .iter()
        .flat_map(|&s| ctx.cfg.phi_z.iter().map(move |&z| (s, z)))
        .collect();
    // the site subset's fold Grams do not depend on the smoothing: once per call
    let sub = ctx.subset_folds(groups);
    let results: Vec<Result<PhiResult>> = phis
        .par_iter()
        .map(|&phi| run_phi(ctx, &sub, groups, weights, phi))
        .collect();
    let mut settings = Vec::new();
    let mut fits = Vec::new();
    for r in results {
        let r = r?;
        settings.extend(r.settings);
        fits.extend(r.fits);
    }
    let (c, b) = one_se_rule(&settings)
        .ok_or_else(|| crate::Error::Analysis("cross-validation gave no finite error".into()))?;
    Ok(Tuned {
        chosen: settings[c].clone(),
        best: settings[b].clone(),
        fit: fits[c].clone(),
        settings,
        groups: groups.to_vec(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn s(n_active: usize, lambda_index: usize, phi_s: f64, mean: f64, se: f64) -> Setting {
        Setting {
            phi_s,
            phi_z: 1.0,
            lambda_index,
            lambda: 1.0,
            lambda_max: 1.0,
            mean_mse: mean,
            se_mse: se,
            n_active,
        }
    }

    #[test]
    fn one_se_rule_constructed_example() {
        // FACTS §6 constructed check: errors (simplest → most complex)
        // [10.0, 9.0, 8.6, 8.5, 8.55] with SE 0.2 at the minimum → threshold
        // 8.7 → pick index 2 (common practice, constructed example).
        let errs = [10.0, 9.0, 8.6, 8.5, 8.55];
        let set: Vec<Setting> = errs
            .iter()
            .enumerate()
            .map(|(i, e)| s(i, i, 1.0, *e, 0.2))
            .collect();
        assert_eq!(one_se_rule(&set), Some((2, 3)));
    }

    #[test]
    fn ties_break_by_lambda_then_smoothness() {
        let set = vec![
            s(2, 5, 0.1, 1.00, 0.1),
            s(2, 3, 0.1, 1.05, 0.1),
            s(2, 3, 1.0, 1.05, 0.1),
            s(3, 1, 1.0, 0.98, 0.1),
        ];
        // fewest sites: 2 (indices 0..3); then largest λ (index 3 on the grid);
        // then largest φ_s → setting 2
        assert_eq!(one_se_rule(&set).unwrap().0, 2);
    }
}
