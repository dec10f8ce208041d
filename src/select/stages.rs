//! Staged adaptive refits.
//!
//! Stage 1 tunes the group lasso on every candidate site with weights
//! w_k = 1. Each later stage keeps only the sites the stage before selected,
//! sets w_k = 1 / ‖L_kᵀ b_k‖ from that stage's fit (the adaptive lasso of
//! Zou 2006, *JASA* 101:1418–1429; for groups, Wang & Leng 2008) and re-tunes
//! λ, φ_s and φ_z on the reduced set, which lets the refit shrink the kept
//! sites less (the relaxed-lasso idea, Meinshausen 2007, *CSDA* 52:374–393).
//! The stages stop after `stages` of them or as soon as a stage keeps every
//! site it was given (the selection no longer changes), or selects none.

use super::context::Context;
use super::tune::{tune, Tuned};
use crate::Result;

/// One stage of the procedure.
#[derive(Debug, Clone)]
pub struct StageRun {
    /// 1-based stage number.
    pub stage: usize,
    /// Penalty weight of each site of the stage's subset.
    pub weights: Vec<f64>,
    /// The tuning of the stage.
    pub tuned: Tuned,
}

/// Adaptive weights 1/‖L_kᵀb_k‖ of the sites a fit selected (same order as `selected`).
pub fn adaptive_weights(tuned: &Tuned, selected: &[usize]) -> Vec<f64> {
    let norms = tuned.norms();
    selected
        .iter()
        .map(|s| {
            let n = norms.iter().find(|(g, _)| g == s).map_or(0.0, |(_, n)| *n);
            if n > 0.0 {
                1.0 / n
            } else {
                f64::INFINITY
            }
        })
        .collect()
}

/// Runs the stages on the candidate sites; `on_stage` is called after each.
pub fn run_stages(
    ctx: &Context,
    candidates: &[usize],
    on_stage: &dyn Fn(&StageRun),
) -> Result<Vec<StageRun>> {
    let mut groups = candidates.to_vec();
    let mut weights = vec![1.0; groups.len()];
    let mut runs = Vec::new();
    for stage in 1..=ctx.cfg.stages {
        let tuned = tune(ctx, &groups, &weights)?;
        let selected = tuned.selected();
        let run = StageRun {
            stage,
            weights: weights.clone(),
            tuned,
        };
        on_stage(&run);
        let unchanged = selected == groups;
        let next_weights = adaptive_weights(&run.tuned, &selected);
        runs.push(run);
        if selected.is_empty() || (unchanged && stage > 1) {
            break;
        }
        groups = selected;
        weights = next_weights;
    }
    Ok(runs)
}
