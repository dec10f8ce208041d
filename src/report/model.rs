//! The content of `sites.json` (DESIGN.md section 6): what a run found, in a
//! form the sheet, the CSV and outside users read.
//!
//! Field names are part of the output contract; add fields, never rename.

use serde::{Deserialize, Serialize};

/// Version of the `sites.json` format.
pub const SITES_FORMAT: u32 = 1;

/// Everything a run reports.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SitesReport {
    /// Format version ([`SITES_FORMAT`]).
    pub format: u32,
    /// Tool name and version that wrote it.
    pub tool: String,
    /// Pseudonymous subject code.
    pub subject: String,
    /// Recording date.
    pub recorded: String,
    /// `left` or `right`.
    pub residual_side: String,
    /// Protocol id or path.
    pub protocol: String,
    /// Seed of every resampling step.
    pub seed: u64,
    /// Every site of the session with its position and signal quality.
    pub site_info: Vec<SiteInfo>,
    /// Per-DoF results.
    pub dofs: Vec<DofResult>,
    /// The site plan for the socket.
    pub plan: Plan,
    /// Alignment quality per task block.
    pub alignment: Vec<BlockAlignment>,
    /// Everything a clinician should look at, in plain words.
    pub flags: Vec<Flag>,
}

/// A site's position and signal quality.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SiteInfo {
    /// Site id.
    pub site: String,
    /// Angle around the limb, degrees from the dorsal midline toward the radial side.
    pub angle_deg: f64,
    /// Distance distal from the lateral epicondyle, cm.
    pub distance_cm: f64,
    /// `ok`, `suspect` or `bad`.
    pub quality: String,
    /// Why it is not `ok`, with measured figures.
    pub reasons: Vec<String>,
}

/// Cross-validated accuracy of a model for one DoF.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct CvFigures {
    /// Share of the velocity variance explained on held-out blocks.
    pub r2: f64,
    /// Root mean squared error on held-out blocks, in scaled position units per second.
    pub rmse: f64,
}

/// A comparison model's cross-validated accuracy.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Baseline {
    /// `linear` (concurrent linear model of the envelopes) or `position`
    /// (position main effect only).
    pub name: String,
    /// Its cross-validated figures on the same folds.
    pub cv: CvFigures,
}

/// One refitting stage of the selection.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Stage {
    /// 1-based stage number.
    pub stage: usize,
    /// Sites selected at this stage.
    pub sites: Vec<String>,
    /// Cross-validated figures of the chosen setting.
    pub cv: CvFigures,
    /// Chosen λ.
    pub lambda: f64,
    /// Chosen smoothing along the lag.
    pub phi_s: f64,
    /// Chosen smoothing along the position.
    pub phi_z: f64,
}

/// A site that could replace a selected one.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Alternate {
    /// Site id.
    pub site: String,
    /// Correlation of its envelope with the selected site's.
    pub correlation: f64,
    /// Cross-validated figures of the final model with it swapped in.
    pub cv: CvFigures,
}

/// One candidate site's result for one DoF.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SiteResult {
    /// Site id.
    pub site: String,
    /// Selected in the final model.
    pub selected: bool,
    /// Share of resampled refits that selected it.
    pub frequency: f64,
    /// `high`, `medium` or `low`.
    pub confidence: String,
    /// Interchangeable sites, best first.
    pub alternates: Vec<Alternate>,
}

/// A fitted effect surface g_k(s, z) on a grid.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Effect {
    /// Site id.
    pub site: String,
    /// Lag grid s (s, from −δ to 0).
    pub lag_s: Vec<f64>,
    /// Position grid z (scaled to [0, 1] over the DoF's range).
    pub position: Vec<f64>,
    /// `surface[i][j]` = g(lag_s[i], position[j]).
    pub surface: Vec<Vec<f64>>,
}

/// Results for one DoF.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DofResult {
    /// DoF id.
    pub dof: String,
    /// What a positive angle means.
    pub positive: String,
    /// Sites of the final model.
    pub selected: Vec<String>,
    /// Every candidate site.
    pub sites: Vec<SiteResult>,
    /// Cross-validated figures of the final model.
    pub cv: CvFigures,
    /// Comparison models.
    pub baselines: Vec<Baseline>,
    /// Stage history.
    pub stages: Vec<Stage>,
    /// Effect surfaces of the selected sites.
    pub effects: Vec<Effect>,
    /// Number of resampled refits behind each site's `frequency`, when known
    /// (the sheet then says "chosen in k of N resamples").
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub resamples: Option<usize>,
}

/// One planned site.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PlannedSite {
    /// Site id.
    pub site: String,
    /// DoFs it serves.
    pub dofs: Vec<String>,
    /// Increase of the summed cross-validated error (1 − R² summed over DoFs)
    /// when it is dropped from the plan.
    pub marginal_value: f64,
    /// Sites that could stand in for it.
    pub alternates: Vec<String>,
}

/// How well the plan serves one DoF.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PlanDof {
    /// DoF id.
    pub dof: String,
    /// Cross-validated R² with the planned sites.
    pub r2: f64,
    /// Cross-validated R² of the DoF's own final model.
    pub best_r2: f64,
    /// `best_r2 − r2`.
    pub loss: f64,
}

/// The site set for the socket.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Plan {
    /// Channel budget.
    pub budget: usize,
    /// Planned sites.
    pub sites: Vec<PlannedSite>,
    /// Per-DoF accuracy with the plan.
    pub dofs: Vec<PlanDof>,
}

/// Alignment quality of one task block.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BlockAlignment {
    /// Task label.
    pub task: String,
    /// DoF id or `*`.
    pub dof: String,
    /// Start on the EMG clock, s.
    pub start_s: f64,
    /// End on the EMG clock, s.
    pub end_s: f64,
    /// Median of intact time minus EMG time, s.
    pub lag_s: f64,
    /// Spread of the lag (interquartile range), s.
    pub lag_spread_s: f64,
    /// `ok`, `doubtful` or `failed`.
    pub quality: String,
    /// Why it is not `ok`.
    pub reasons: Vec<String>,
}

/// Something a clinician should look at.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Flag {
    /// What kind of issue (`low-confidence`, `single-stage`, `suspect-signal`,
    /// `bad-signal`, `alignment`, `budget`, ...).
    pub what: String,
    /// Where: a site, a DoF or a block.
    #[serde(rename = "where")]
    pub at: String,
    /// Why, in words a clinician understands, with the figures.
    pub why: String,
}
