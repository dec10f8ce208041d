//! The validated, in-memory form of a session folder (DESIGN.md section 3).

use ndarray::Array2;
use serde::{Deserialize, Serialize};
use std::path::PathBuf;

/// Which side the residual limb is on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Side {
    /// Left residual limb.
    Left,
    /// Right residual limb.
    Right,
}

impl Side {
    /// `"left"` or `"right"`.
    pub fn as_str(self) -> &'static str {
        match self {
            Side::Left => "left",
            Side::Right => "right",
        }
    }
}

/// Units of the EMG values. Values are converted to millivolts on reading.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum EmgUnits {
    /// Volts.
    #[serde(rename = "V")]
    Volt,
    /// Millivolts.
    #[serde(rename = "mV")]
    Millivolt,
    /// Microvolts (written `uV` or `µV`).
    #[serde(rename = "uV", alias = "µV")]
    Microvolt,
}

impl EmgUnits {
    /// Factor that turns a value in these units into millivolts.
    pub fn to_millivolt(self) -> f64 {
        match self {
            EmgUnits::Volt => 1000.0,
            EmgUnits::Millivolt => 1.0,
            EmgUnits::Microvolt => 1e-3,
        }
    }

    /// The spelling used in `session.toml`.
    pub fn as_str(self) -> &'static str {
        match self {
            EmgUnits::Volt => "V",
            EmgUnits::Millivolt => "mV",
            EmgUnits::Microvolt => "uV",
        }
    }
}

/// One electrode site around the residual forearm.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Site {
    /// Site id, matching an emg.csv column.
    pub id: String,
    /// Angle around the limb in degrees, from the dorsal midline toward the radial side.
    pub angle_deg: f64,
    /// Distance along the limb in cm, distal from the lateral epicondyle.
    pub distance_cm: f64,
    /// Optional maximal (attempted) contraction reference for normalisation,
    /// in the session's EMG units converted to mV.
    pub mvc_mv: Option<f64>,
}

/// One degree of freedom recorded on the intact side.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Dof {
    /// DoF id, matching an intact.csv column.
    pub id: String,
    /// What a positive angle means (e.g. `flexion`).
    pub positive: String,
    /// Plausible range in degrees `[low, high]`.
    pub range_deg: [f64; 2],
}

/// A sampled multi-channel recording: `data[[c, i]]` is channel `c` at `time_s[i]`.
///
/// Channels are stored row by row (each channel contiguous), which suits
/// per-channel filtering.
#[derive(Debug, Clone, PartialEq)]
pub struct Recording {
    /// The file it was read from.
    pub file: PathBuf,
    /// Sample times in seconds on the file's own clock, strictly increasing.
    pub time_s: Vec<f64>,
    /// Declared sampling rate in Hz.
    pub rate_hz: f64,
    /// Channel names in `data` row order (manifest order of sites or DoFs).
    pub channels: Vec<String>,
    /// Values, shape `(channels, samples)`. EMG in mV, angles in degrees.
    pub data: Array2<f64>,
}

impl Recording {
    /// Number of samples.
    pub fn len(&self) -> usize {
        self.time_s.len()
    }

    /// True when there are no samples.
    pub fn is_empty(&self) -> bool {
        self.time_s.is_empty()
    }

    /// Time of the first and last sample.
    pub fn span(&self) -> (f64, f64) {
        match (self.time_s.first(), self.time_s.last()) {
            (Some(a), Some(b)) => (*a, *b),
            _ => (0.0, 0.0),
        }
    }

    /// Index of a channel by name.
    pub fn channel(&self, name: &str) -> Option<usize> {
        self.channels.iter().position(|c| c == name)
    }
}

/// One task block on the EMG clock.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Block {
    /// Start on the EMG clock, s.
    pub start_s: f64,
    /// End on the EMG clock, s (`end_s > start_s`).
    pub end_s: f64,
    /// Task label (free text: `paced`, `hold-release`, `free`, `rest`, ...).
    pub task: String,
    /// The DoF it exercises, or `None` for `*` (several DoFs, or a rest).
    pub dof: Option<String>,
    /// The words shown to the wearer, when known from a protocol.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub words: Option<String>,
}

impl Block {
    /// Duration in seconds.
    pub fn duration_s(&self) -> f64 {
        self.end_s - self.start_s
    }

    /// True for a rest block (task `rest`, case-insensitive).
    pub fn is_rest(&self) -> bool {
        self.task.eq_ignore_ascii_case("rest")
    }

    /// True for a block of free movement (task `free`).
    pub fn is_free(&self) -> bool {
        self.task.eq_ignore_ascii_case("free")
    }

    /// The DoF id as written in events.csv (`*` for none).
    pub fn dof_label(&self) -> &str {
        self.dof.as_deref().unwrap_or("*")
    }
}

/// Where a session's task blocks came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum BlockSource {
    /// From the session's events.csv.
    Events,
    /// From the protocol's nominal timeline at `protocol_start_s`.
    Protocol,
}

/// The manifest `session.toml`, validated.
#[derive(Debug, Clone, PartialEq)]
pub struct Manifest {
    /// Pseudonymous subject code.
    pub subject: String,
    /// ISO date of the recording.
    pub recorded: String,
    /// Side of the residual limb.
    pub residual_side: Side,
    /// Protocol id (shipped in protocols/) or a path.
    pub protocol: String,
    /// Where the protocol's t = 0 falls on the EMG clock.
    pub protocol_start_s: f64,
    /// EMG file name inside the session folder.
    pub emg_file: String,
    /// Declared EMG rate, Hz.
    pub emg_rate_hz: f64,
    /// EMG units.
    pub emg_units: EmgUnits,
    /// Intact-side file name inside the session folder.
    pub intact_file: String,
    /// Declared intact-side rate, Hz.
    pub intact_rate_hz: f64,
    /// Time on the EMG clock of intact.csv's time 0, s.
    pub intact_offset_s: f64,
    /// Sites in manifest order.
    pub sites: Vec<Site>,
    /// DoFs in manifest order.
    pub dofs: Vec<Dof>,
}

/// A validated session: manifest, recordings and task blocks.
#[derive(Debug, Clone)]
pub struct Session {
    /// The session folder.
    pub root: PathBuf,
    /// The manifest.
    pub manifest: Manifest,
    /// Residual-limb EMG, one row per site in manifest order, in mV.
    pub emg: Recording,
    /// Intact-side angles, one row per DoF in manifest order, in degrees,
    /// on intact.csv's own clock (add `manifest.intact_offset_s` for the EMG clock).
    pub intact: Recording,
    /// Task blocks from events.csv, when the session has one.
    pub events: Option<Vec<Block>>,
}

impl Session {
    /// Duration of the EMG recording, s.
    pub fn duration_s(&self) -> f64 {
        let (a, b) = self.emg.span();
        b - a
    }

    /// The sites in manifest order.
    pub fn sites(&self) -> &[Site] {
        &self.manifest.sites
    }

    /// The DoFs in manifest order.
    pub fn dofs(&self) -> &[Dof] {
        &self.manifest.dofs
    }
}
