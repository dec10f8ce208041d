//! A machine-readable summary of a session (`mirrorsite inspect --json`).

use super::types::{Block, Session};
use serde::Serialize;

/// Summary of one site.
#[derive(Debug, Clone, Serialize)]
pub struct SiteSummary {
    /// Site id.
    pub site: String,
    /// Angle around the limb, degrees.
    pub angle_deg: f64,
    /// Distance from the epicondyle, cm.
    pub distance_cm: f64,
    /// RMS of the raw EMG over the whole recording, mV.
    pub rms_mv: f64,
}

/// Summary of one DoF.
#[derive(Debug, Clone, Serialize)]
pub struct DofSummary {
    /// DoF id.
    pub dof: String,
    /// What a positive angle means.
    pub positive: String,
    /// Declared plausible range, degrees.
    pub range_deg: [f64; 2],
    /// Smallest and largest recorded angle, degrees.
    pub observed_deg: [f64; 2],
}

/// Summary of a session.
#[derive(Debug, Clone, Serialize)]
pub struct Summary {
    /// Pseudonymous subject code.
    pub subject: String,
    /// Recording date.
    pub recorded: String,
    /// Residual side.
    pub residual_side: String,
    /// Protocol id or path.
    pub protocol: String,
    /// Length of the EMG recording, s.
    pub duration_s: f64,
    /// EMG samples.
    pub emg_samples: usize,
    /// Declared EMG rate, Hz.
    pub emg_rate_hz: f64,
    /// Length of the intact recording, s.
    pub intact_duration_s: f64,
    /// Declared intact rate, Hz.
    pub intact_rate_hz: f64,
    /// `intact.offset_s`.
    pub intact_offset_s: f64,
    /// Sites in manifest order.
    pub sites: Vec<SiteSummary>,
    /// DoFs in manifest order.
    pub dofs: Vec<DofSummary>,
    /// Where the blocks came from: `events` or `protocol`.
    pub block_source: String,
    /// Task blocks on the EMG clock.
    pub blocks: Vec<Block>,
}

impl Summary {
    /// Summarises `s` with its task blocks.
    pub fn new(s: &Session, blocks: Vec<Block>, block_source: &str) -> Summary {
        let sites = s
            .sites()
            .iter()
            .zip(s.emg.data.rows())
            .map(|(site, row)| {
                let n = row.len().max(1) as f64;
                SiteSummary {
                    site: site.id.clone(),
                    angle_deg: site.angle_deg,
                    distance_cm: site.distance_cm,
                    rms_mv: crate::simulate::round6(
                        (row.iter().map(|v| v * v).sum::<f64>() / n).sqrt(),
                    ),
                }
            })
            .collect();
        let dofs = s
            .dofs()
            .iter()
            .zip(s.intact.data.rows())
            .map(|(d, row)| DofSummary {
                dof: d.id.clone(),
                positive: d.positive.clone(),
                range_deg: d.range_deg,
                observed_deg: [
                    row.iter().copied().fold(f64::INFINITY, f64::min),
                    row.iter().copied().fold(f64::NEG_INFINITY, f64::max),
                ],
            })
            .collect();
        let (i0, i1) = s.intact.span();
        Summary {
            subject: s.manifest.subject.clone(),
            recorded: s.manifest.recorded.clone(),
            residual_side: s.manifest.residual_side.as_str().into(),
            protocol: s.manifest.protocol.clone(),
            duration_s: s.duration_s(),
            emg_samples: s.emg.len(),
            emg_rate_hz: s.emg.rate_hz,
            intact_duration_s: i1 - i0,
            intact_rate_hz: s.intact.rate_hz,
            intact_offset_s: s.manifest.intact_offset_s,
            sites,
            dofs,
            block_source: block_source.into(),
            blocks,
        }
    }

    /// A plain-text rendering for the terminal.
    pub fn to_text(&self) -> String {
        use std::fmt::Write;
        let mut o = String::new();
        let _ = writeln!(
            o,
            "subject   {}   recorded {}   residual side {}",
            self.subject, self.recorded, self.residual_side
        );
        let _ = writeln!(o, "protocol  {}", self.protocol);
        let _ = writeln!(
            o,
            "EMG       {} sites, {:.1} s at {} Hz ({} samples)",
            self.sites.len(),
            self.duration_s,
            self.emg_rate_hz,
            self.emg_samples
        );
        let _ = writeln!(
            o,
            "intact    {} DoFs, {:.1} s at {} Hz, clock offset {} s",
            self.dofs.len(),
            self.intact_duration_s,
            self.intact_rate_hz,
            self.intact_offset_s
        );
        let _ = writeln!(o, "\nsites     angle°  dist cm   RMS mV");
        for s in &self.sites {
            let _ = writeln!(
                o,
                "  {:<8}{:>6.1}  {:>7.1}  {:>7.4}",
                s.site, s.angle_deg, s.distance_cm, s.rms_mv
            );
        }
        let _ = writeln!(o, "\nDoFs      positive     range°          recorded°");
        for d in &self.dofs {
            let _ = writeln!(
                o,
                "  {:<8}{:<12} [{:>5.0}, {:>5.0}]   [{:>6.1}, {:>6.1}]",
                d.dof,
                d.positive,
                d.range_deg[0],
                d.range_deg[1],
                d.observed_deg[0],
                d.observed_deg[1]
            );
        }
        let _ = writeln!(o, "\nblocks ({}; {})", self.blocks.len(), self.block_source);
        for b in &self.blocks {
            let _ = writeln!(
                o,
                "  {:>8.2} – {:>8.2} s  {:<14} {}",
                b.start_s,
                b.end_s,
                b.task,
                b.dof_label()
            );
        }
        o
    }
}
