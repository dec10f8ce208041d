//! The scenario file: everything the simulator needs, with defaults.

use crate::error::{InputError, InputErrorKind as K};
use crate::session::{EmgUnits, Side};
use serde::Deserialize;
use std::path::Path;

/// A simulation scenario (TOML). Every key except `[[dof]]`, `[[muscle]]`,
/// `[[ring]]` and `[[block]]` has a default.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Scenario {
    /// Scenario format version; must be 1.
    #[serde(default = "one")]
    pub format: i64,
    /// Short name, used in the truth file.
    #[serde(default = "default_name")]
    pub name: String,
    /// Seed of every random stream.
    #[serde(default)]
    pub seed: u64,
    /// Pseudonymous subject code written to session.toml.
    #[serde(default = "default_subject")]
    pub subject: String,
    /// Recording date written to session.toml.
    #[serde(default = "default_date")]
    pub recorded: String,
    /// Side of the residual limb.
    #[serde(default = "default_side")]
    pub residual_side: Side,
    /// Protocol id written to session.toml.
    #[serde(default = "default_protocol")]
    pub protocol: String,
    /// Limb circumference at the sites, cm (turns angles into arc lengths).
    #[serde(default = "default_circumference")]
    pub circumference_cm: f64,
    /// Time before the first block, s.
    #[serde(default = "default_lead_in")]
    pub lead_in_s: f64,
    /// Time after the last block, s.
    #[serde(default = "default_lead_in")]
    pub lead_out_s: f64,
    /// Write emg.csv gzip-compressed as emg.csv.gz.
    #[serde(default)]
    pub gzip: bool,
    /// Residual-limb EMG settings.
    #[serde(default)]
    pub emg: EmgSpec,
    /// Intact-side glove settings.
    #[serde(default)]
    pub intact: IntactSpec,
    /// Mirroring lag between the two sides.
    #[serde(default)]
    pub lag: LagSpec,
    /// DoFs recorded on the intact side.
    pub dof: Vec<DofSpec>,
    /// Muscles under the skin of the residual forearm.
    pub muscle: Vec<MuscleSpec>,
    /// Rings of electrode sites.
    pub ring: Vec<RingSpec>,
    /// The faulty site, if any.
    #[serde(default)]
    pub fault: Option<FaultSpec>,
    /// Task blocks in order.
    pub block: Vec<BlockSpec>,
}

/// EMG acquisition settings.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct EmgSpec {
    /// Sampling rate, Hz.
    pub rate_hz: f64,
    /// Units written to emg.csv.
    pub units: EmgUnits,
    /// Pass band of the muscle noise, Hz.
    pub band_hz: [f64; 2],
    /// Amplitude (RMS, mV) of a muscle at full activation right under a site.
    pub muscle_rms_mv: f64,
    /// RMS of the electrode and amplifier baseline noise, mV.
    pub baseline_rms_mv: f64,
    /// Mains frequency, Hz (50 or 60).
    pub mains_hz: f64,
    /// Amplitude of the mains hum on every site, mV.
    pub mains_mv: f64,
    /// Electro-mechanical delay: muscle activation leads the intended movement by this, s.
    pub emd_s: f64,
}

impl Default for EmgSpec {
    fn default() -> Self {
        EmgSpec {
            rate_hz: 2000.0,
            units: EmgUnits::Millivolt,
            band_hz: [20.0, 250.0],
            muscle_rms_mv: 0.4,
            baseline_rms_mv: 0.008,
            mains_hz: 50.0,
            mains_mv: 0.004,
            emd_s: 0.06,
        }
    }
}

/// Intact-side glove settings.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct IntactSpec {
    /// Glove sampling rate, Hz.
    pub rate_hz: f64,
    /// EMG-clock time of the glove clock's zero, s (written as `intact.offset_s`).
    pub offset_s: f64,
    /// Glove noise (standard deviation), degrees.
    pub noise_deg: f64,
}

impl Default for IntactSpec {
    fn default() -> Self {
        IntactSpec {
            rate_hz: 100.0,
            offset_s: 0.0,
            noise_deg: 0.4,
        }
    }
}

/// The mirroring lag: EMG-clock time at which the intact hand shows a posture
/// minus the time the missing hand was commanded to it.
///
/// lag(t) = mean + drift·(t/T − ½) + wobble·sin(2πt/wobble_period) +
/// direction·s(t) + per-block jitter (smoothly interpolated between block
/// centres), where s(t) ∈ [−1, 1] is the smoothed direction of the intended
/// movement (+1 while it flexes, −1 while it extends, 0 while still; see
/// `mirror::direction`), so that the lag changes within every movement cycle
/// and is steady through holds.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct LagSpec {
    /// Mean lag, s (positive: the intact hand trails).
    pub mean_s: f64,
    /// Change of the lag from session start to end, s.
    pub drift_s: f64,
    /// Amplitude of the within-cycle lag variation, s.
    pub wobble_s: f64,
    /// Period of the within-cycle variation, s.
    pub wobble_period_s: f64,
    /// Extra lag while the intended movement goes in the positive direction
    /// (and less by as much in the negative one), s.
    pub direction_s: f64,
    /// Standard deviation of the per-block lag jitter, s.
    pub block_jitter_s: f64,
}

impl Default for LagSpec {
    fn default() -> Self {
        LagSpec {
            mean_s: 0.12,
            drift_s: 0.06,
            wobble_s: 0.03,
            wobble_period_s: 3.0,
            direction_s: 0.0,
            block_jitter_s: 0.02,
        }
    }
}

/// One DoF.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DofSpec {
    /// DoF id.
    pub id: String,
    /// What a positive angle means.
    #[serde(default = "default_positive")]
    pub positive: String,
    /// Word for the negative direction (used in the truth file).
    #[serde(default = "default_negative")]
    pub negative: String,
    /// Plausible range, degrees.
    pub range_deg: [f64; 2],
    /// Relaxed posture, degrees.
    #[serde(default)]
    pub rest_deg: f64,
    /// Position dependence of effort: velocity per unit activation falls by
    /// this factor from the low to the high end of the range.
    #[serde(default = "default_position_effect")]
    pub position_effect: f64,
}

/// Which way a muscle drives a DoF.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Direction {
    /// Toward positive angles (e.g. flexion).
    Positive,
    /// Toward negative angles (e.g. extension).
    Negative,
}

impl Direction {
    /// `"positive"` or `"negative"`.
    pub fn as_str(self) -> &'static str {
        match self {
            Direction::Positive => "positive",
            Direction::Negative => "negative",
        }
    }
}

/// One muscle's action on a DoF direction.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Drive {
    /// DoF id.
    pub dof: String,
    /// Direction it moves the DoF.
    pub direction: Direction,
    /// Share of the direction's demand this muscle carries (0..1].
    #[serde(default = "one_f")]
    pub gain: f64,
}

/// A muscle under the skin.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MuscleSpec {
    /// Name (truth file only).
    pub id: String,
    /// Angle around the limb of its belly, degrees.
    pub angle_deg: f64,
    /// Distance from the epicondyle of its belly, cm.
    pub distance_cm: f64,
    /// Spread of its pickup on the skin (Gaussian σ), cm.
    #[serde(default = "default_spread")]
    pub spread_cm: f64,
    /// Relative amplitude (1 = `emg.muscle_rms_mv` at full activation).
    #[serde(default = "one_f")]
    pub strength: f64,
    /// What it drives; empty for a muscle irrelevant to every DoF, which is
    /// then active at random, unrelated to any task.
    #[serde(default)]
    pub drives: Vec<Drive>,
}

/// A ring of equally spaced sites.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RingSpec {
    /// Site id prefix; ids are prefix + 1-based index.
    pub prefix: String,
    /// Distance from the epicondyle, cm.
    pub distance_cm: f64,
    /// Number of sites.
    pub count: usize,
    /// Angle of the first site, degrees.
    #[serde(default)]
    pub first_angle_deg: f64,
}

/// Kinds of site fault.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum FaultKind {
    /// Disconnected: next to no signal.
    Flat,
    /// Amplifier saturation: runs at the rails.
    Clipped,
    /// Strong mains hum (poor skin contact).
    Hum,
}

impl FaultKind {
    /// Lower-case name.
    pub fn as_str(self) -> &'static str {
        match self {
            FaultKind::Flat => "flat",
            FaultKind::Clipped => "clipped",
            FaultKind::Hum => "hum",
        }
    }
}

/// The faulty site.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FaultSpec {
    /// Site id.
    pub site: String,
    /// What is wrong with it.
    pub kind: FaultKind,
}

/// Movement patterns of a block.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Pattern {
    /// Paced cycles between two targets.
    Paced,
    /// Move actively to a position, hold, relax (passive return).
    HoldRelease,
    /// Unscripted smooth movement of one or several DoFs.
    Free,
    /// No movement.
    Rest,
}

/// One task block.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BlockSpec {
    /// Pattern.
    pub pattern: Pattern,
    /// Task label written to events.csv (defaults to the pattern's name).
    #[serde(default)]
    pub task: Option<String>,
    /// DoFs moved (one for paced and hold-release; one or more for free; none for rest).
    #[serde(default)]
    pub dofs: Vec<String>,
    /// Duration of paced, free and rest blocks, s.
    #[serde(default)]
    pub duration_s: Option<f64>,
    /// Cycle period of a paced block, s.
    #[serde(default = "default_period")]
    pub period_s: f64,
    /// Targets of a paced block, degrees (default: the middle 70% of the range).
    #[serde(default)]
    pub targets_deg: Option<[f64; 2]>,
    /// Hold positions of a hold-release block, degrees.
    #[serde(default)]
    pub positions_deg: Vec<f64>,
    /// Active move time to each hold position, s.
    #[serde(default = "default_move")]
    pub move_s: f64,
    /// Hold time, s.
    #[serde(default = "default_hold")]
    pub hold_s: f64,
    /// Passive relaxation time after each hold, s.
    #[serde(default = "default_relax")]
    pub relax_s: f64,
    /// Do not mirror: the intact hand moves at random (tests failure handling).
    #[serde(default)]
    pub unmirrored: bool,
}

impl BlockSpec {
    /// The task label.
    pub fn task_label(&self) -> String {
        self.task.clone().unwrap_or_else(|| {
            match self.pattern {
                Pattern::Paced => "paced",
                Pattern::HoldRelease => "hold-release",
                Pattern::Free => "free",
                Pattern::Rest => "rest",
            }
            .to_string()
        })
    }

    /// Duration of the block, s.
    pub fn duration(&self) -> f64 {
        match self.pattern {
            Pattern::HoldRelease => {
                self.positions_deg.len() as f64 * (self.move_s + self.hold_s + self.relax_s)
            }
            _ => self.duration_s.unwrap_or(0.0),
        }
    }
}

fn one() -> i64 {
    1
}
fn one_f() -> f64 {
    1.0
}
fn default_name() -> String {
    "scenario".into()
}
fn default_subject() -> String {
    "SIM-0001".into()
}
fn default_date() -> String {
    "2026-01-15".into()
}
fn default_side() -> Side {
    Side::Left
}
fn default_protocol() -> String {
    "hand-basic".into()
}
fn default_circumference() -> f64 {
    24.0
}
fn default_lead_in() -> f64 {
    2.0
}
fn default_positive() -> String {
    "flexion".into()
}
fn default_negative() -> String {
    "extension".into()
}
fn default_position_effect() -> f64 {
    0.5
}
fn default_spread() -> f64 {
    1.5
}
fn default_period() -> f64 {
    4.0
}
fn default_move() -> f64 {
    1.2
}
fn default_hold() -> f64 {
    3.0
}
fn default_relax() -> f64 {
    2.5
}

/// Longest simulated session, s (4 h: far beyond a calibration session, and
/// about what fits in memory at 2 kHz with a few dozen sites).
pub const MAX_DURATION_S: f64 = 4.0 * 3600.0;
/// Most sites on one ring.
pub const MAX_RING_SITES: usize = 256;

impl Scenario {
    /// Reads and checks a scenario file.
    pub fn from_file(path: &Path) -> crate::Result<Scenario> {
        let text = crate::session::read_small_text(path)?;
        Ok(Self::from_toml(path, &text)?)
    }

    /// Parses and checks scenario text; `path` is used in errors.
    pub fn from_toml(path: &Path, text: &str) -> Result<Scenario, InputError> {
        let sc: Scenario = toml::from_str(text).map_err(|e| {
            let mut err = InputError::new(path, K::Malformed, e.message().to_string());
            if let Some(span) = e.span() {
                err = err.at_line(crate::session::line_of(text, span.start));
            }
            err
        })?;
        sc.check(path)?;
        Ok(sc)
    }

    // Negated comparisons are deliberate: a NaN must fail every check.
    #[allow(clippy::neg_cmp_op_on_partial_ord)]
    fn check(&self, path: &Path) -> Result<(), InputError> {
        let bad = |field: &str, msg: String| InputError::new(path, K::BadValue, msg).field(field);
        if self.format != 1 {
            return Err(bad("format", "expected format = 1".into()));
        }
        if !(self.emg.rate_hz >= 500.0) {
            return Err(bad("emg.rate_hz", "must be at least 500 Hz".into()));
        }
        if !(self.emg.band_hz[0] > 0.0 && self.emg.band_hz[1] < self.emg.rate_hz / 2.0) {
            return Err(bad(
                "emg.band_hz",
                "must lie between 0 and half the EMG rate".into(),
            ));
        }
        if !(self.intact.rate_hz >= 20.0) {
            return Err(bad("intact.rate_hz", "must be at least 20 Hz".into()));
        }
        if !(0.0..=0.2).contains(&self.emg.emd_s) {
            return Err(bad("emg.emd_s", "must be within 0..0.2 s".into()));
        }
        let lag_slope = self.lag.drift_s.abs() / self.total_duration().max(1.0)
            + 2.0 * std::f64::consts::PI * self.lag.wobble_s.abs()
                / self.lag.wobble_period_s.max(1e-3)
            + 2.0 * self.lag.direction_s.abs() / super::mirror::DIRECTION_SMOOTH_S
            + 4.0 * self.lag.block_jitter_s.abs() / 5.0;
        if lag_slope > 0.5 {
            return Err(bad(
                "lag",
                format!("lag changes too fast (slope up to {lag_slope:.2}); the mirroring map would not be monotone"),
            ));
        }
        if self.dof.is_empty() || self.muscle.is_empty() || self.ring.is_empty() {
            return Err(bad(
                "dof",
                "needs at least one [[dof]], [[muscle]] and [[ring]]".into(),
            ));
        }
        for d in &self.dof {
            if !(d.range_deg[0] < d.rest_deg && d.rest_deg < d.range_deg[1]) {
                return Err(bad(
                    "dof.rest_deg",
                    format!("rest of `{}` must lie inside its range", d.id),
                ));
            }
        }
        let dof_known = |id: &str| self.dof.iter().any(|d| d.id == id);
        for m in &self.muscle {
            for dr in &m.drives {
                if !dof_known(&dr.dof) {
                    return Err(bad(
                        "muscle.drives.dof",
                        format!("muscle `{}` drives unknown DoF `{}`", m.id, dr.dof),
                    ));
                }
            }
        }
        for (i, b) in self.block.iter().enumerate() {
            for d in &b.dofs {
                if !dof_known(d) {
                    return Err(bad(
                        "block.dofs",
                        format!("block {} moves unknown DoF `{d}`", i + 1),
                    ));
                }
            }
            let need_one = matches!(b.pattern, Pattern::Paced | Pattern::HoldRelease);
            if need_one && b.dofs.len() != 1 {
                return Err(bad(
                    "block.dofs",
                    format!("block {} must move exactly one DoF", i + 1),
                ));
            }
            if b.pattern == Pattern::Free && b.dofs.is_empty() {
                return Err(bad(
                    "block.dofs",
                    format!("free block {} must move at least one DoF", i + 1),
                ));
            }
            if b.pattern == Pattern::HoldRelease && b.positions_deg.is_empty() {
                return Err(bad(
                    "block.positions_deg",
                    format!("hold-release block {} needs positions", i + 1),
                ));
            }
            if b.pattern != Pattern::HoldRelease && !(b.duration_s.unwrap_or(0.0) > 0.0) {
                return Err(bad(
                    "block.duration_s",
                    format!("block {} needs a positive duration_s", i + 1),
                ));
            }
            if !(b.period_s > 0.5) {
                return Err(bad("block.period_s", "must exceed 0.5 s".into()));
            }
        }
        for (field, v) in [
            ("lead_in_s", self.lead_in_s),
            ("lead_out_s", self.lead_out_s),
        ] {
            if !(v >= 0.0 && v.is_finite()) {
                return Err(bad(
                    field,
                    format!("must be a number of seconds >= 0, not {v}"),
                ));
            }
        }
        let total = self.total_duration();
        if !(total <= MAX_DURATION_S) {
            return Err(bad(
                "block.duration_s",
                format!("the session would last {total} s; at most {MAX_DURATION_S} s"),
            ));
        }
        if let Some(r) = self
            .ring
            .iter()
            .find(|r| !(1..=MAX_RING_SITES).contains(&r.count))
        {
            return Err(bad(
                "ring.count",
                format!(
                    "ring `{}` has {} sites; expected 1 to {MAX_RING_SITES}",
                    r.prefix, r.count
                ),
            ));
        }
        let ids = self.site_ids();
        if let Some(f) = &self.fault {
            if !ids.contains(&f.site) {
                return Err(bad(
                    "fault.site",
                    format!("`{}` is not a site of any ring", f.site),
                ));
            }
        }
        let mut sorted = ids.clone();
        sorted.sort();
        sorted.dedup();
        if sorted.len() != ids.len() {
            return Err(bad("ring.prefix", "site ids repeat across rings".into()));
        }
        Ok(())
    }

    /// Site ids in ring order.
    pub fn site_ids(&self) -> Vec<String> {
        self.ring
            .iter()
            .flat_map(|r| (1..=r.count).map(move |i| format!("{}{}", r.prefix, i)))
            .collect()
    }

    /// Length of the EMG recording, s.
    pub fn total_duration(&self) -> f64 {
        self.lead_in_s + self.block.iter().map(BlockSpec::duration).sum::<f64>() + self.lead_out_s
    }
}
