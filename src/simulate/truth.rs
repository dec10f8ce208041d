//! The truth file written beside a simulated session.

use serde::{Deserialize, Serialize};
use std::path::Path;

/// What each site is, in truth.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Role {
    /// Picks up an agonist of at least one DoF direction strongly.
    Informative,
    /// Picks up some relevant muscle, but not strongly enough to count as informative.
    Weak,
    /// Over no relevant muscle.
    Irrelevant,
    /// The faulty site.
    Faulty,
}

/// One site's truth.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct SiteTruth {
    /// Site id.
    pub site: String,
    /// Angle around the limb, degrees.
    pub angle_deg: f64,
    /// Distance from the epicondyle, cm.
    pub distance_cm: f64,
    /// Its role.
    pub role: Role,
    /// The fault, for the faulty site.
    pub fault: Option<String>,
    /// Pickup weight of each muscle (1 = right over a full-strength muscle).
    pub pickup: Vec<(String, f64)>,
}

/// The informative sites of one DoF direction.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct DirectionTruth {
    /// DoF id.
    pub dof: String,
    /// `positive` or `negative`.
    pub direction: String,
    /// The anatomical word for it (e.g. `flexion`).
    pub word: String,
    /// Informative sites, best first.
    pub sites: Vec<String>,
    /// Pickup score of every site for this direction, in site order.
    pub scores: Vec<(String, f64)>,
}

/// One block as performed.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct BlockTruth {
    /// Start on the EMG clock, s.
    pub start_s: f64,
    /// End on the EMG clock, s.
    pub end_s: f64,
    /// Task label.
    pub task: String,
    /// DoFs moved.
    pub dofs: Vec<String>,
    /// False for a block the intact hand did not mirror.
    pub mirrored: bool,
}

/// The mirroring map on a regular grid of EMG times.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct MapTruth {
    /// Rate of the grid, Hz.
    pub rate_hz: f64,
    /// EMG time of the first entry, s.
    pub t0_s: f64,
    /// True intact.csv-clock time of EMG time `t0_s + i / rate_hz`.
    pub intact_time_s: Vec<f64>,
}

impl MapTruth {
    /// True intact-clock time at EMG time `t` (linear interpolation, clamped).
    pub fn at(&self, t: f64) -> f64 {
        let y = &self.intact_time_s;
        let x = ((t - self.t0_s) * self.rate_hz).clamp(0.0, (y.len() - 1) as f64);
        let i = (x.floor() as usize).min(y.len().saturating_sub(2));
        let f = x - i as f64;
        y[i] * (1.0 - f) + y[(i + 1).min(y.len() - 1)] * f
    }
}

/// Everything known about a simulated session.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Truth {
    /// File format version (1).
    pub format: u32,
    /// Scenario name.
    pub scenario: String,
    /// Seed used.
    pub seed: u64,
    /// Electro-mechanical delay: activation leads the intended movement by this, s.
    pub emd_s: f64,
    /// Declared `intact.offset_s`.
    pub offset_s: f64,
    /// Per-site truth.
    pub sites: Vec<SiteTruth>,
    /// Informative sites per DoF direction.
    pub informative: Vec<DirectionTruth>,
    /// Blocks as performed.
    pub blocks: Vec<BlockTruth>,
    /// The mirroring map.
    pub map: MapTruth,
}

impl Truth {
    /// Reads a truth file.
    pub fn from_file(path: &Path) -> crate::Result<Truth> {
        let text = crate::session::read_small_text(path)?;
        serde_json::from_str(&text).map_err(|e| {
            crate::InputError::new(path, crate::InputErrorKind::Malformed, e.to_string())
                .at_line(e.line())
                .into()
        })
    }

    /// Sites of one role.
    pub fn sites_with(&self, role: Role) -> Vec<String> {
        self.sites
            .iter()
            .filter(|s| s.role == role)
            .map(|s| s.site.clone())
            .collect()
    }

    /// Informative sites of a DoF direction (`positive`/`negative`).
    pub fn informative_for(&self, dof: &str, direction: &str) -> &[String] {
        self.informative
            .iter()
            .find(|d| d.dof == dof && d.direction == direction)
            .map_or(&[], |d| d.sites.as_slice())
    }
}
