//! The whole selection of one DoF: stages, confidence, alternates, baselines
//! and effect surfaces, gathered into the report's [`DofResult`].

use super::compare::{
    cv_for_set, envelope_correlation, linear_baseline, position_baseline, relaxed_fit,
};
use super::config::SelectConfig;
use super::context::Context;
use super::data::DofData;
use super::stability::frequencies;
use super::stages::{run_stages, StageRun};
use crate::report::{Alternate, Baseline, CvFigures, DofResult, Effect, Flag, SiteResult, Stage};
use crate::Result;

/// Points of the lag grid of reported effect surfaces.
pub const EFFECT_LAG_POINTS: usize = 31;
/// Points of the position grid of reported effect surfaces.
pub const EFFECT_POSITION_POINTS: usize = 21;

/// What happens during a selection, for progress display.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Step {
    /// A stage finished (1-based).
    Stage(usize),
    /// A resample finished.
    Resample,
    /// Alternates and baselines are being computed.
    Compare,
}

/// The selection of one DoF.
pub struct DofSelection {
    /// What goes into `sites.json`.
    pub result: DofResult,
    /// Flags raised for this DoF.
    pub flags: Vec<Flag>,
    /// The precomputed statistics (for evaluating other site sets).
    pub ctx: Context,
    /// The stages as run.
    pub stages: Vec<StageRun>,
    /// Site indices of the final model.
    pub selected: Vec<usize>,
    /// Selection frequency per site (NaN for excluded sites).
    pub frequency: Vec<f64>,
    /// Cross-validated figures of the final site set refitted with weights 1
    /// (the same procedure as [`DofSelection::cv_for_sites`], for fair comparison).
    pub refit_cv: CvFigures,
}

impl DofSelection {
    /// Cross-validated figures of a model on the given site indices, refitted
    /// with the final smoothing (weights 1, λ at the smallest CV error).
    pub fn cv_for_sites(&self, sites: &[usize]) -> Result<CvFigures> {
        let phi = self.final_phi();
        cv_for_set(&self.ctx, sites, phi)
    }

    /// The (φ_s, φ_z) of the final stage.
    pub fn final_phi(&self) -> (f64, f64) {
        self.stages
            .last()
            .map_or((1.0, 1.0), |s| (s.tuned.chosen.phi_s, s.tuned.chosen.phi_z))
    }
}

/// Confidence word for a selection frequency.
pub fn confidence(freq: f64, cfg: &SelectConfig) -> &'static str {
    if freq >= cfg.high_frequency {
        "high"
    } else if freq >= cfg.low_frequency {
        "medium"
    } else {
        "low"
    }
}

fn label_seed(seed: u64, label: &str) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for b in label.bytes() {
        h ^= b as u64;
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    seed ^ h
}

/// Selects the sites of one DoF. `suspect[k]` marks sites whose signal
/// quality was `suspect` (kept, but flagged when picked); `data.excluded`
/// marks `bad` ones (left out).
pub fn select_dof(
    data: &DofData,
    cfg: &SelectConfig,
    suspect: &[bool],
    progress: &(dyn Fn(Step) + Sync),
) -> Result<DofSelection> {
    let ctx = Context::new(data, cfg)?;
    let candidates: Vec<usize> = (0..data.sites.len())
        .filter(|&k| !data.excluded[k])
        .collect();
    if candidates.is_empty() {
        return Err(crate::Error::Analysis(format!(
            "DoF `{}`: every site was excluded for bad signal quality",
            data.dof
        )));
    }
    let stages = run_stages(&ctx, &candidates, &|s| progress(Step::Stage(s.stage)))?;
    let last = stages.last().expect("at least one stage");
    let selected = last.tuned.selected();
    let freq = frequencies(
        &ctx,
        &candidates,
        &stages,
        label_seed(cfg.seed, &data.dof),
        &|| progress(Step::Resample),
    )?;
    progress(Step::Compare);
    let phi = (last.tuned.chosen.phi_s, last.tuned.chosen.phi_z);
    let rows = ctx.design.rows().to_vec();
    // The final model: the sites the stages kept, refitted with weights 1 at
    // the λ of smallest cross-validated error (relaxed lasso).
    let (refit_cv, relaxed) = relaxed_fit(&ctx, &selected, phi)?;

    // alternates: strongly correlated, unselected, usable sites, swapped in
    let mut alternates: Vec<Vec<Alternate>> = vec![Vec::new(); data.sites.len()];
    for &k in &selected {
        let mut cands: Vec<(usize, f64)> = candidates
            .iter()
            .filter(|j| !selected.contains(j))
            .map(|&j| (j, envelope_correlation(data, &rows, k, j)))
            .filter(|(_, r)| r.abs() >= cfg.alternate_correlation)
            .collect();
        cands.sort_by(|a, b| b.1.abs().total_cmp(&a.1.abs()).then(a.0.cmp(&b.0)));
        cands.truncate(cfg.max_alternates);
        for (j, r) in cands {
            let swapped: Vec<usize> = selected
                .iter()
                .map(|&s| if s == k { j } else { s })
                .collect();
            alternates[k].push(Alternate {
                site: data.sites[j].clone(),
                correlation: round(r, 4),
                cv: rounded(cv_for_set(&ctx, &swapped, phi)?),
            });
        }
    }

    // The concurrent linear model on the same sites shows what the lagged,
    // position-dependent model buys; on every usable site, what a model
    // needing all electrodes could reach.
    let linear_sites = if selected.is_empty() {
        &candidates
    } else {
        &selected
    };
    let baselines = vec![
        Baseline {
            name: "linear".into(),
            cv: rounded(linear_baseline(&ctx, data, linear_sites)?),
        },
        Baseline {
            name: "linear-all-sites".into(),
            cv: rounded(linear_baseline(&ctx, data, &candidates)?),
        },
        Baseline {
            name: "position".into(),
            cv: rounded(position_baseline(&ctx)?),
        },
    ];

    // effect surfaces of the final picks
    let surface = ctx.design.surface();
    let delta = cfg.lag_window_s;
    let s_grid: Vec<f64> = (0..EFFECT_LAG_POINTS)
        .map(|i| -delta + delta * i as f64 / (EFFECT_LAG_POINTS - 1) as f64)
        .collect();
    let z_grid: Vec<f64> = (0..EFFECT_POSITION_POINTS)
        .map(|j| j as f64 / (EFFECT_POSITION_POINTS - 1) as f64)
        .collect();
    let mut effects = Vec::new();
    for (i, &g) in selected.iter().enumerate() {
        let Some(fit) = &relaxed else { break };
        let coef = &fit.coef[i * ctx.pk..(i + 1) * ctx.pk];
        let vals = surface.evaluate(coef, &s_grid, &z_grid)?;
        effects.push(Effect {
            site: data.sites[g].clone(),
            lag_s: s_grid.iter().map(|v| round(*v, 6)).collect(),
            position: z_grid.iter().map(|v| round(*v, 6)).collect(),
            surface: vals
                .chunks(z_grid.len())
                .map(|row| row.iter().map(|v| round(*v, 6)).collect())
                .collect(),
        });
    }

    let stage_hist: Vec<Stage> = stages
        .iter()
        .map(|s| Stage {
            stage: s.stage,
            sites: s
                .tuned
                .selected()
                .iter()
                .map(|&g| data.sites[g].clone())
                .collect(),
            cv: rounded(ctx.figures(s.tuned.chosen.mean_mse)),
            lambda: s.tuned.chosen.lambda,
            phi_s: s.tuned.chosen.phi_s,
            phi_z: s.tuned.chosen.phi_z,
        })
        .collect();
    let stage_count = |k: usize| {
        stages
            .iter()
            .filter(|s| s.tuned.selected().contains(&k))
            .count()
    };

    let sites: Vec<SiteResult> = candidates
        .iter()
        .map(|&k| SiteResult {
            site: data.sites[k].clone(),
            selected: selected.contains(&k),
            frequency: round(freq[k], 4),
            confidence: confidence(freq[k], cfg).into(),
            alternates: alternates[k].clone(),
        })
        .collect();

    let cv = rounded(refit_cv);
    let mut flags = Vec::new();
    let n_res = cfg.resamples;
    for &k in &selected {
        let id = &data.sites[k];
        let f = freq[k];
        let conf = confidence(f, cfg);
        if conf != "high" && n_res > 0 {
            let chosen = (f * n_res as f64).round() as usize;
            let alt = alternates[k]
                .first()
                .map(|a| {
                    format!(
                        "; consider {} (envelope correlation {:.2})",
                        a.site, a.correlation
                    )
                })
                .unwrap_or_default();
            flags.push(Flag {
                what: format!("{conf}-confidence"),
                at: id.clone(),
                why: format!(
                    "site {id} ({}): chosen in {chosen} of {n_res} resamples{alt}",
                    data.dof
                ),
            });
        }
        if stage_count(k) == 1 && stages.len() > 1 {
            flags.push(Flag {
                what: "single-stage".into(),
                at: id.clone(),
                why: format!("site {id} ({}): selected at one stage only", data.dof),
            });
        }
        if suspect.get(k).copied().unwrap_or(false) {
            flags.push(Flag {
                what: "suspect-signal".into(),
                at: id.clone(),
                why: format!(
                    "site {id} ({}): chosen, but its signal quality is suspect; check skin contact before relying on it",
                    data.dof
                ),
            });
        }
    }
    if selected.is_empty() {
        flags.push(Flag {
            what: "no-site".into(),
            at: data.dof.clone(),
            why: format!(
                "{}: no site explains this DoF better than its position alone; repeat the tasks or review the electrode layout",
                data.dof
            ),
        });
    } else if cv.r2 < baselines[2].cv.r2 + 0.02 {
        flags.push(Flag {
            what: "weak-model".into(),
            at: data.dof.clone(),
            why: format!(
                "{}: the EMG model (cross-validated R² {:.2}) is hardly better than position alone (R² {:.2})",
                data.dof, cv.r2, baselines[2].cv.r2
            ),
        });
    }

    let result = DofResult {
        dof: data.dof.clone(),
        positive: data.positive.clone(),
        selected: selected.iter().map(|&k| data.sites[k].clone()).collect(),
        sites,
        cv,
        baselines,
        stages: stage_hist,
        effects,
        resamples: Some(cfg.resamples),
    };
    Ok(DofSelection {
        result,
        flags,
        ctx,
        stages,
        selected,
        frequency: freq,
        refit_cv,
    })
}

fn round(x: f64, digits: i32) -> f64 {
    if !x.is_finite() {
        return x;
    }
    let s = 10f64.powi(digits);
    (x * s).round() / s
}

fn rounded(c: CvFigures) -> CvFigures {
    CvFigures {
        r2: round(c.r2, 6),
        rmse: round(c.rmse, 6),
    }
}
