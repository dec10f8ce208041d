//! The site plan: which sites the socket carries.
//!
//! Given the per-DoF selections and a channel budget B, the plan starts from
//! the union U of the sites selected for any DoF (a site serving two DoFs
//! counts once) and removes sites one at a time by backward elimination:
//! while more than B sites remain, the site whose removal costs least (the
//! summed drop in cross-validated R² over the DoFs) goes; within the budget, a
//! site still goes if every DoF then keeps its R² within `tolerance_r2` of its
//! best, so that the plan is the fewest sites that serve every DoF. Every R²
//! is that of a model refitted on the candidate set with the final smoothing
//! of that DoF (see [`crate::select::DofSelection::cv_for_sites`]). Each
//! planned site's marginal value is the summed R² lost over the DoFs when it
//! alone is dropped from the plan. When the budget forces a DoF below its
//! tolerance, a `budget` flag says which DoF loses how much.

use crate::report::{Flag, Plan, PlanDof, PlannedSite};
use crate::select::DofSelection;
use crate::Result;
use serde::{Deserialize, Serialize};
use std::collections::{BTreeSet, HashMap};

/// Settings of the plan (the `[plan]` section of the analysis configuration).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct PlanConfig {
    /// Channels the socket carries.
    pub budget: usize,
    /// A DoF is served when its cross-validated R² is within this of its best.
    pub tolerance_r2: f64,
}

impl Default for PlanConfig {
    fn default() -> Self {
        PlanConfig {
            budget: 4,
            tolerance_r2: 0.05,
        }
    }
}

impl PlanConfig {
    /// Checks ranges; on failure the key and the message.
    pub fn check(&self) -> std::result::Result<(), (String, String)> {
        if self.budget == 0 || self.budget > 64 {
            return Err(("budget".into(), "must be between 1 and 64 channels".into()));
        }
        if !(0.0..=1.0).contains(&self.tolerance_r2) {
            return Err(("tolerance_r2".into(), "must lie between 0 and 1".into()));
        }
        Ok(())
    }
}

impl crate::config::ConfigSection for PlanConfig {
    const NAME: &'static str = "plan";
    const ABOUT: &'static str =
        "The site plan for the socket: channel budget and how close to its \
best each DoF must stay.";
    const KEYS: &'static [(&'static str, &'static str)] = &[
        (
            "budget",
            "Electrode channels the socket carries (commonly 2 to 8).",
        ),
        (
            "tolerance_r2",
            "A DoF is served when its cross-validated R-squared with the planned \
sites is within this of its best (engineering judgement).",
        ),
    ];
}

/// R² of every DoF for candidate site sets, memoised.
struct Scorer<'a> {
    sel: &'a [&'a DofSelection],
    memo: HashMap<(usize, Vec<usize>), f64>,
}

impl Scorer<'_> {
    fn r2(&mut self, d: usize, set: &BTreeSet<usize>) -> Result<f64> {
        let key = (d, set.iter().copied().collect::<Vec<_>>());
        if let Some(v) = self.memo.get(&key) {
            return Ok(*v);
        }
        let v = self.sel[d].cv_for_sites(&key.1)?.r2;
        self.memo.insert(key, v);
        Ok(v)
    }

    fn all(&mut self, set: &BTreeSet<usize>) -> Result<Vec<f64>> {
        (0..self.sel.len()).map(|d| self.r2(d, set)).collect()
    }
}

/// Plans the sites for the socket from the selections of every DoF (all over
/// the same site list `sites`). Returns the plan and its flags.
pub fn plan(
    selections: &[&DofSelection],
    sites: &[String],
    cfg: &PlanConfig,
) -> Result<(Plan, Vec<Flag>)> {
    let mut sc = Scorer {
        sel: selections,
        memo: HashMap::new(),
    };
    let union: BTreeSet<usize> = selections
        .iter()
        .flat_map(|s| s.selected.iter().copied())
        .collect();
    let full = sc.all(&union)?;
    let best: Vec<f64> = selections
        .iter()
        .zip(&full)
        .map(|(s, f)| s.refit_cv.r2.max(*f))
        .collect();
    let mut set = union.clone();
    loop {
        if set.is_empty() {
            break;
        }
        let now = sc.all(&set)?;
        let mut choice: Option<(usize, f64, bool)> = None;
        for &k in &set {
            let mut without = set.clone();
            without.remove(&k);
            let r = sc.all(&without)?;
            let cost: f64 = now.iter().zip(&r).map(|(a, b)| (a - b).max(0.0)).sum();
            let within = r.iter().zip(&best).all(|(v, b)| *v >= b - cfg.tolerance_r2);
            if choice.is_none_or(|c| cost < c.1) {
                choice = Some((k, cost, within));
            }
        }
        match choice {
            Some((k, _, within)) if set.len() > cfg.budget || within => {
                set.remove(&k);
            }
            _ => break,
        }
    }
    let now = sc.all(&set)?;
    let mut planned = Vec::new();
    for &k in &set {
        let mut without = set.clone();
        without.remove(&k);
        let r = sc.all(&without)?;
        let drops: Vec<f64> = now.iter().zip(&r).map(|(a, b)| (a - b).max(0.0)).collect();
        // The DoFs it serves: those whose own selection holds it; failing
        // that (a site kept only for what it adds elsewhere), those that
        // would lose more than 0.01 of R² without it.
        let mut dofs: Vec<String> = selections
            .iter()
            .filter(|s| s.selected.contains(&k))
            .map(|s| s.result.dof.clone())
            .collect();
        if dofs.is_empty() {
            dofs = selections
                .iter()
                .enumerate()
                .filter(|(d, _)| drops[*d] > 0.01)
                .map(|(_, s)| s.result.dof.clone())
                .collect();
        }
        let mut alternates: Vec<String> = Vec::new();
        for s in selections {
            if let Some(site) = s.result.sites.iter().find(|x| x.site == sites[k]) {
                for a in &site.alternates {
                    let planned_already = set.iter().any(|&j| sites[j] == a.site);
                    if !planned_already && !alternates.contains(&a.site) {
                        alternates.push(a.site.clone());
                    }
                }
            }
        }
        planned.push(PlannedSite {
            site: sites[k].clone(),
            dofs,
            marginal_value: round4(drops.iter().sum()),
            alternates,
        });
    }
    planned.sort_by(|a, b| {
        b.marginal_value
            .total_cmp(&a.marginal_value)
            .then(a.site.cmp(&b.site))
    });
    let mut flags = Vec::new();
    let plan_dofs: Vec<PlanDof> = selections
        .iter()
        .enumerate()
        .map(|(d, s)| {
            let loss = (best[d] - now[d]).max(0.0);
            if loss > cfg.tolerance_r2 {
                flags.push(Flag {
                    what: "budget".into(),
                    at: s.result.dof.clone(),
                    why: format!(
                        "{}: with {} channel(s) its cross-validated R² is {:.2}, {:.2} below its best {:.2}",
                        s.result.dof, cfg.budget, now[d], loss, best[d]
                    ),
                });
            }
            PlanDof {
                dof: s.result.dof.clone(),
                r2: round4(now[d]),
                best_r2: round4(best[d]),
                loss: round4(loss),
            }
        })
        .collect();
    Ok((
        Plan {
            budget: cfg.budget,
            sites: planned,
            dofs: plan_dofs,
        },
        flags,
    ))
}

fn round4(x: f64) -> f64 {
    (x * 1e4).round() / 1e4
}
