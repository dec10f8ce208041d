//! Cross-validated λ paths from fold Grams.
//!
//! For each fold the training Gram is profiled (baseline partialled out on the
//! training rows only), the path is solved on the common λ grid, and the
//! held-out error of each fit is computed from the held-out Gram alone:
//! with full coefficients `c = [α̂(b); b]`,
//! `‖y_h − Z_h c‖² = y_hᵀy_h − 2cᵀZ_hᵀy_h + cᵀZ_hᵀZ_h c`.
//! The folds' paths are spread over the threads by [`schedule`], which
//! splits at most `threads − 1` of them in two so that every thread has the
//! same share of the work (five folds on two threads otherwise leave one
//! thread idle for a fifth of the time); each path is computed sequentially,
//! however it is cut, so the result does not depend on the number of threads.

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Condvar, Mutex};

use faer::Mat;
use rayon::prelude::*;

use super::folds::FoldGrams;
use super::gram::{Gram, ProfiledGram};
use super::solver::{Fit, GroupLasso, PathRun, SolverOptions};
use crate::{Error, Result};

/// Cross-validation of one λ path.
#[derive(Debug, Clone)]
pub struct CvPath {
    /// The λ grid (shared by all folds).
    pub lambdas: Vec<f64>,
    /// Held-out mean squared error, `fold_mse[f][t]` for fold `f` at `lambdas[t]`.
    pub fold_mse: Vec<Vec<f64>>,
    /// Mean over folds of the held-out mean squared error, per λ.
    pub mean_mse: Vec<f64>,
    /// Standard error of that mean (sample SD over folds / √F), per λ.
    pub se_mse: Vec<f64>,
    /// The fits of every fold (for objectives, active sets, warm starts).
    pub fold_fits: Vec<Vec<Fit>>,
}

/// Solves the path on every fold's training Gram and scores it on the
/// held-out block. `q` baseline columns are profiled out; `factors` are the
/// per-group Cholesky factors `L_k`.
pub fn cross_validate(
    grams: &FoldGrams,
    q: usize,
    factors: &[Mat<f64>],
    weights: &[f64],
    lambdas: &[f64],
    opts: &SolverOptions,
) -> Result<CvPath> {
    if grams.train.is_empty() {
        return Err(Error::Argument("no folds".into()));
    }
    // Setup per fold: profiling and the η basis.
    let setups: Vec<Result<(ProfiledGram, GroupLasso)>> = grams
        .train
        .par_iter()
        .map(|train| {
            let prof = train.profile(q)?;
            let problem = GroupLasso::new(&prof, factors)?;
            Ok((prof, problem))
        })
        .collect();
    let setups: Vec<(ProfiledGram, GroupLasso)> = setups.into_iter().collect::<Result<_>>()?;
    let runs: Vec<Mutex<Option<PathRun>>> = setups
        .iter()
        .map(|(_, problem)| {
            PathRun::new(problem, weights, lambdas, opts, None).map(|r| Mutex::new(Some(r)))
        })
        .collect::<Result<_>>()?;
    let fold_fits = run_paths(&setups, &runs, lambdas.len())?;
    let fold_mse: Vec<Vec<f64>> = fold_fits
        .par_iter()
        .zip(setups.par_iter())
        .zip(grams.held.par_iter())
        .map(|((fits, (prof, _)), held)| held_out_mse(prof, held, fits))
        .collect::<Result<_>>()?;
    let nf = fold_mse.len() as f64;
    let nl = lambdas.len();
    let mean_mse: Vec<f64> = (0..nl)
        .map(|t| fold_mse.iter().map(|m| m[t]).sum::<f64>() / nf)
        .collect();
    let se_mse: Vec<f64> = (0..nl)
        .map(|t| {
            if nf < 2.0 {
                return 0.0;
            }
            let v = fold_mse
                .iter()
                .map(|m| (m[t] - mean_mse[t]).powi(2))
                .sum::<f64>()
                / (nf - 1.0);
            (v / nf).sqrt()
        })
        .collect();
    Ok(CvPath {
        lambdas: lambdas.to_vec(),
        fold_mse,
        mean_mse,
        se_mse,
        fold_fits,
    })
}

/// Held-out mean squared error of each fit (penalised coefficients of the
/// profiled problem `prof`) on the rows of `held`, a whole list of fits per
/// matrix product ([`Gram::residual_sums_of_squares`]).
pub fn held_out_mse(prof: &ProfiledGram, held: &Gram, fits: &[Fit]) -> Result<Vec<f64>> {
    let full: Vec<Vec<f64>> = fits.iter().map(|f| prof.full_coef(&f.coef)).collect();
    let d = full.first().map_or(held.dim(), Vec::len);
    let coefs = Mat::from_fn(d, full.len(), |i, t| full[t][i]);
    let nh = held.n.max(1) as f64;
    Ok(held
        .residual_sums_of_squares(coefs.as_ref())?
        .into_iter()
        .map(|r| r / nh)
        .collect())
}

/// A piece of a thread's work: λ indices `from..to` of fold `fold`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Piece {
    /// The fold.
    pub fold: usize,
    /// First λ index.
    pub from: usize,
    /// One past the last λ index.
    pub to: usize,
}

/// Share of a path's cost spent on its first `t` of `n` λ values, modelled as
/// `(t/n)^3`: later λ values have more active groups and cost more (measured
/// on the engine bench's folds: the first 38 to 41 of 50 λ values take half
/// of the time; of the exponents 2, 2.5, 3 and 4, 3 gave the shortest CV).
/// Only the balance between threads depends on it.
const PATH_COST_EXPONENT: f64 = 3.0;

/// Which thread solves which pieces of which fold's path, in order.
///
/// McNaughton's wrap-around rule (McNaughton 1959, "Scheduling with
/// deadlines and loss functions", Management Science 6:1–12), adapted to
/// paths that must be solved in order: the `folds` paths, one unit of work
/// each, are laid end to end and cut into `threads` intervals of
/// `L = folds/threads ≥ 1` units. A path cut by the boundary at fraction φ of
/// its work is split at the λ index where the modelled cost reaches φ. Each
/// thread runs its interval's pieces in reverse order, so the first part of a
/// split path is the first piece of one thread (done by time φ) and its rest
/// the last piece of the next (started at time `L − (1 − φ) ≥ φ`).
pub fn schedule(folds: usize, threads: usize, n_lambda: usize) -> Vec<Vec<Piece>> {
    let threads = threads.clamp(1, folds.max(1));
    let len = folds as f64 / threads as f64;
    let mut plan = vec![Vec::new(); threads];
    for f in 0..folds {
        let t0 = ((f as f64 / len).floor() as usize).min(threads - 1);
        let boundary = (t0 + 1) as f64 * len;
        let phi = boundary - f as f64;
        if t0 + 1 < threads && phi > 1e-9 && phi < 1.0 - 1e-9 {
            let cut = ((n_lambda as f64 * phi.powf(1.0 / PATH_COST_EXPONENT)).round() as usize)
                .clamp(1, n_lambda.saturating_sub(1).max(1));
            plan[t0].push(Piece {
                fold: f,
                from: 0,
                to: cut,
            });
            plan[t0 + 1].push(Piece {
                fold: f,
                from: cut,
                to: n_lambda,
            });
        } else {
            let t = if phi <= 1e-9 {
                (t0 + 1).min(threads - 1)
            } else {
                t0
            };
            plan[t].push(Piece {
                fold: f,
                from: 0,
                to: n_lambda,
            });
        }
    }
    for p in &mut plan {
        p.reverse();
    }
    plan
}

/// Solves every fold's path after [`schedule`], one OS thread per entry of
/// the plan; a piece that continues a path waits until the piece before it
/// is done.
fn run_paths(
    setups: &[(ProfiledGram, GroupLasso)],
    runs: &[Mutex<Option<PathRun>>],
    n_lambda: usize,
) -> Result<Vec<Vec<Fit>>> {
    let plan = schedule(runs.len(), rayon::current_num_threads(), n_lambda);
    let ready = Condvar::new();
    // set when a thread stops early (panic), so that no other waits for it
    let abort = AtomicBool::new(false);
    struct AbortOnPanic<'a>(&'a AtomicBool);
    impl Drop for AbortOnPanic<'_> {
        fn drop(&mut self) {
            if std::thread::panicking() {
                self.0.store(true, Ordering::SeqCst);
            }
        }
    }
    let poisoned = || Error::Analysis("a cross-validation thread panicked".into());
    let work = |pieces: &[Piece]| -> Result<()> {
        let _guard = AbortOnPanic(&abort);
        for piece in pieces {
            let slot = &runs[piece.fold];
            let mut guard = slot.lock().map_err(|_| poisoned())?;
            while guard.as_ref().is_none_or(|r| r.solved() < piece.from) {
                if abort.load(Ordering::SeqCst) {
                    return Err(poisoned());
                }
                guard = ready
                    .wait_timeout(guard, std::time::Duration::from_millis(20))
                    .map_err(|_| poisoned())?
                    .0;
            }
            let mut run = guard.take().ok_or_else(poisoned)?;
            drop(guard);
            run.advance(&setups[piece.fold].1, piece.to);
            *slot.lock().map_err(|_| poisoned())? = Some(run);
            ready.notify_all();
        }
        Ok(())
    };
    if plan.len() == 1 {
        work(&plan[0])?;
    } else {
        std::thread::scope(|scope| {
            let handles: Vec<_> = plan.iter().map(|p| scope.spawn(|| work(p))).collect();
            handles
                .into_iter()
                .map(|h| h.join().map_err(|_| poisoned())?)
                .collect::<Result<Vec<()>>>()
        })?;
    }
    runs.iter()
        .map(|slot| {
            let run = slot
                .lock()
                .map_err(|_| poisoned())?
                .take()
                .ok_or_else(poisoned)?;
            if run.solved() != n_lambda {
                return Err(Error::Analysis(
                    "a cross-validation path did not finish".into(),
                ));
            }
            Ok(run.into_fits())
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn schedule_balances_and_keeps_path_order() {
        for (folds, threads) in [(5, 2), (5, 3), (4, 2), (10, 4), (3, 8), (5, 1)] {
            let plan = schedule(folds, threads, 50);
            // every λ of every fold exactly once
            let mut seen = vec![vec![0; 50]; folds];
            for p in plan.iter().flatten() {
                for c in &mut seen[p.fold][p.from..p.to] {
                    *c += 1;
                }
            }
            assert!(
                seen.iter().flatten().all(|&c| c == 1),
                "{folds}/{threads}: {plan:?}"
            );
            // a split path's first part is the first piece of its thread, its
            // rest the last piece of another
            for (t, pieces) in plan.iter().enumerate() {
                for (i, p) in pieces.iter().enumerate() {
                    if p.from > 0 {
                        assert_eq!(i, pieces.len() - 1, "{plan:?}");
                        let first = plan
                            .iter()
                            .position(|q| q[0].fold == p.fold && q[0].from == 0);
                        assert!(first.is_some_and(|f| f != t), "{plan:?}");
                    }
                }
            }
        }
        // five folds on two threads: two whole paths each and one split
        let plan = schedule(5, 2, 50);
        assert_eq!(plan.iter().flatten().count(), 6);
    }
}
