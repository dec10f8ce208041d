//! Selection frequency over resampled refits (stability selection,
//! Meinshausen & Bühlmann 2010, *JRSS B* 72:417–473).
//!
//! The usable rows are cut into contiguous blocks of `resample_block_s`
//! seconds; a resample draws as many blocks with replacement (the moving-block
//! bootstrap, Künsch 1989, *Ann Stat* 17:1217–1241), so that the time
//! dependence inside a block is kept. Its Gram is the count-weighted sum of
//! the drawn blocks' Grams. On each resample the staged procedure is rerun at
//! the settings the full data chose for each stage (λ at the same position
//! relative to the resample's own λ_max), as stability selection prescribes a
//! fixed regularisation; a site's frequency is the share of resamples whose
//! final stage selects it.

use faer::Par;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;

use super::context::Context;
use super::gram::Gram;
use super::solver::{lambda_grid, GroupLasso};
use super::stages::StageRun;
use crate::Result;

/// The Gram of resample `r`: blocks drawn with replacement.
fn resample_gram(ctx: &Context, seed: u64, r: usize) -> Gram {
    let n = ctx.design.n_rows();
    let len =
        ((ctx.cfg.resample_block_s * ctx.design.spec().feature_rate).round() as usize).clamp(1, n);
    let blocks = n.div_ceil(len);
    let mut rng =
        ChaCha8Rng::seed_from_u64(seed ^ (0x9e37_79b9_7f4a_7c15u64.wrapping_mul(r as u64 + 1)));
    let mut counts = vec![0usize; blocks];
    for _ in 0..blocks {
        counts[rng.random_range(0..blocks)] += 1;
    }
    let mut acc = Gram::zeros(ctx.design.n_columns());
    for (b, &c) in counts.iter().enumerate() {
        if c == 0 {
            continue;
        }
        let g = ctx
            .design
            .gram_of(b * len..((b + 1) * len).min(n), Par::Seq);
        for _ in 0..c {
            acc.accumulate(&g, 1.0);
        }
    }
    acc
}

/// Final selection of one resample, rerunning the stages at fixed settings.
fn resample_selection(
    ctx: &Context,
    gram: &Gram,
    candidates: &[usize],
    stages: &[StageRun],
) -> Result<Vec<usize>> {
    let mut groups = candidates.to_vec();
    let mut weights = vec![1.0; groups.len()];
    for st in stages {
        let ch = &st.tuned.chosen;
        let l = ctx.factor(ch.phi_s, ch.phi_z)?;
        let factors = vec![l; groups.len()];
        let prof = ctx.subset(gram, &groups).profile(ctx.q)?;
        let problem = GroupLasso::new(&prof, &factors)?;
        let lmax = problem.lambda_max(&weights)?;
        if lmax <= 0.0 {
            return Ok(Vec::new());
        }
        let grid = lambda_grid(lmax, ctx.cfg.lambda_ratio, ctx.cfg.n_lambda);
        let fits = problem.fit_path(&weights, &grid[..=ch.lambda_index], &ctx.opts, None)?;
        let fit = fits.last().expect("at least one λ");
        let selected: Vec<usize> = fit.active.iter().map(|&i| groups[i]).collect();
        if selected.is_empty() {
            return Ok(selected);
        }
        weights = fit
            .active
            .iter()
            .map(|&i| {
                let n = fit.norms[i];
                if n > 0.0 {
                    1.0 / n
                } else {
                    f64::INFINITY
                }
            })
            .collect();
        groups = selected;
    }
    Ok(groups)
}

/// Selection frequency of every site (index = site), over `ctx.cfg.resamples`
/// moving-block bootstrap resamples seeded by `seed`. `tick` is called after
/// each resample.
pub fn frequencies(
    ctx: &Context,
    candidates: &[usize],
    stages: &[StageRun],
    seed: u64,
    tick: &(dyn Fn() + Sync),
) -> Result<Vec<f64>> {
    let r_total = ctx.cfg.resamples;
    let mut counts = vec![0usize; ctx.n_sites];
    if r_total == 0 || stages.is_empty() {
        return Ok(vec![f64::NAN; ctx.n_sites]);
    }
    let picks: Vec<Result<Vec<usize>>> = (0..r_total)
        .into_par_iter()
        .map(|r| {
            let g = resample_gram(ctx, seed, r);
            let sel = resample_selection(ctx, &g, candidates, stages);
            tick();
            sel
        })
        .collect();
    for p in picks {
        for s in p? {
            counts[s] += 1;
        }
    }
    Ok(counts.iter().map(|&c| c as f64 / r_total as f64).collect())
}
