//! Signal conditioning and channel quality (DESIGN.md section 2).
//!
//! Raw EMG in, conditioned envelopes at the feature rate and a quality
//! verdict per site out. For every site, on the EMG clock:
//!
//! 1. **band-pass**, zero-phase Butterworth, default 20–450 Hz of order 4
//!    (the surface-EMG band; FACTS.md: SENIAM's 10–20 Hz high-pass and
//!    ≈500 Hz low-pass; De Luca et al. 2010 for 20 Hz against movement
//!    artefact);
//! 2. **mains notch** at f₀ = 50 or 60 Hz and its harmonics (default the
//!    first 3: f₀, 2f₀, 3f₀; FACTS.md, harmonics from memory), zero-phase,
//!    Q = 30; f₀ from the settings or detected from the spectra
//!    ([`mains::detect`]); without clear hum no notch is applied, since a
//!    notch also removes genuine EMG power (FACTS.md: McManus et al. 2020);
//! 3. **full-wave rectification** and a **linear envelope**, zero-phase
//!    2nd-order Butterworth low-pass at 5 Hz (FACTS.md: 2–10 Hz corners are
//!    typical; ~6 Hz for activation patterns, Winter via BIOMCH-L), or a
//!    **moving RMS** over 150 ms (FACTS.md: 150–250 ms windows, Smith et
//!    al. 2011; 50–250 ms usual);
//! 4. **resampling** onto the feature grid `t_first + j/rate`, default
//!    100 Hz, by linear interpolation of the envelope (whose band is far
//!    below the grid's Nyquist frequency);
//! 5. **normalisation** by the site's declared MVC amplitude when the
//!    manifest gives one, else by a robust high percentile (default the
//!    95th) of its envelope over the session — a normalisation to the task's
//!    own peak (FACTS.md: ISEK CEDE), robust to a few artefacts;
//! 6. **quality** checks ([`quality`]): flat, clipped, mains, low
//!    signal-to-noise, motion; verdict `ok`, `suspect` or `bad`.
//!
//! The band-pass and the notches run as one cascade through
//! [`filter::sosfiltfilt`], i.e. `scipy.signal.sosfiltfilt` applied to the
//! stacked sections.

mod complex;
pub mod envelope;
pub mod filter;
pub mod lanes;
pub mod mains;
pub mod quality;
mod settings;
pub mod spectrum;

pub use complex::C64;
pub use filter::{butter_sos, iirnotch, sosfilt, sosfilt_zi, sosfiltfilt, Band, Sos};
pub use quality::{Figures, QualityConfig, Reason, SiteQuality, Verdict};
pub use settings::{EnvelopeKind, Mains, SettingError, SignalConfig};

use crate::error::{Error, Result};
use crate::session::{Block, Recording, Site};
use ndarray::Array2;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::borrow::Cow;

/// Where a site's normaliser came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum ScaleSource {
    /// The manifest's `mvc_mv`.
    Mvc,
    /// The configured percentile of the session envelope.
    Percentile,
    /// None usable (a flat envelope): left unscaled.
    Unit,
}

/// The output of conditioning.
#[derive(Debug, Clone)]
pub struct Conditioned {
    /// Site ids, in the recording's channel order.
    pub sites: Vec<String>,
    /// Feature rate, Hz.
    pub rate_hz: f64,
    /// Feature grid on the EMG clock: `t_first + j/rate_hz`.
    pub time_s: Vec<f64>,
    /// Normalised envelopes, shape (sites, frames): envelope / `scale`.
    pub envelopes: Array2<f64>,
    /// Normaliser per site, mV.
    pub scale: Vec<f64>,
    /// Where each normaliser came from.
    pub scale_source: Vec<ScaleSource>,
    /// The mains frequency notched, if any.
    pub mains_hz: Option<f64>,
    /// Strongest mains evidence over the sites at 50 and 60 Hz (peak ratio).
    pub mains_evidence: [f64; 2],
    /// Quality per site, in channel order.
    pub quality: Vec<SiteQuality>,
}

impl Conditioned {
    /// Indices of the sites not judged bad (those selection may use).
    pub fn usable(&self) -> Vec<usize> {
        self.quality
            .iter()
            .enumerate()
            .filter(|(_, q)| q.verdict != Verdict::Bad)
            .map(|(i, _)| i)
            .collect()
    }
}

/// What the first pass measures on a raw channel.
struct RawPass {
    psd: Option<spectrum::Psd>,
    stuck: f64,
    clipped: f64,
}

/// What the second pass makes from a channel.
struct CondPass {
    envelope: Vec<f64>,
    rms_mv: f64,
    residual: Option<spectrum::Psd>,
    motion: Option<f64>,
}

/// Per-channel figures of pass 2 from the conditioned signals `ys`.
fn finish(
    ys: &[Vec<f64>],
    envs: Vec<Vec<f64>>,
    motion: Vec<Option<f64>>,
    fs: f64,
    seg: usize,
    with_psd: bool,
    qcfg: &QualityConfig,
) -> Vec<CondPass> {
    ys.iter()
        .zip(envs)
        .zip(motion)
        .map(|((y, envelope), motion)| CondPass {
            envelope,
            rms_mv: envelope::rms(y),
            residual: with_psd.then(|| spectrum::welch(y, fs, seg, qcfg.psd_segments)),
            motion,
        })
        .collect()
}

/// Conditions every channel of `emg` (rows = sites, values in mV): see the
/// module documentation for the steps. `sites` supplies `mvc_mv` by id
/// (channels without a site entry are normalised by percentile); `blocks`
/// are the task blocks on the EMG clock (for the signal-to-noise check;
/// may be empty). Channels are processed in parallel (rayon); the result
/// does not depend on the number of threads.
pub fn condition(
    emg: &Recording,
    sites: &[Site],
    blocks: &[Block],
    cfg: &SignalConfig,
) -> Result<Conditioned> {
    let fs = emg.rate_hz;
    cfg.validate_for(fs)?;
    let n = emg.len();
    let channels = emg.data.nrows();
    if emg.data.ncols() != n || emg.channels.len() != channels {
        return Err(Error::Argument(format!(
            "recording shape ({channels}, {}) does not match {n} times and {} channel names",
            emg.data.ncols(),
            emg.channels.len()
        )));
    }
    let band = Band::Bandpass(cfg.bandpass_hz[0], cfg.bandpass_hz[1]);
    let bandpass = butter_sos(cfg.bandpass_order, band, fs)?;
    let lowpass = butter_sos(cfg.envelope_order, Band::Lowpass(cfg.envelope_hz), fs)?;
    let min_len = bandpass.default_padlen() + 3 * (2 * cfg.notch_harmonics + 1) + 1;
    if n <= min_len.max(lowpass.default_padlen() + 1) {
        return Err(Error::Analysis(format!(
            "the EMG recording has {n} samples, too few to condition (more than {min_len} needed)"
        )));
    }
    let rows: Vec<Cow<[f64]>> = (0..channels)
        .map(|c| {
            let r = emg.data.row(c);
            r.to_slice()
                .map_or_else(|| Cow::Owned(r.to_vec()), Cow::Borrowed)
        })
        .collect();
    let seg = spectrum::segment_len(fs, n);
    let qcfg = &cfg.quality;
    let with_psd = seg >= 256;

    // Pass 1: raw spectra and sample statistics.
    let raw: Vec<RawPass> = rows
        .par_iter()
        .map(|x| RawPass {
            psd: with_psd.then(|| spectrum::welch(x, fs, seg, qcfg.psd_segments)),
            stuck: quality::stuck_fraction(x),
            clipped: quality::clipped_fraction(x, qcfg.clip_min_run),
        })
        .collect();
    let psds: Vec<spectrum::Psd> = raw.iter().filter_map(|r| r.psd.clone()).collect();
    let (detected, evidence) = mains::detect(&psds, cfg.notch_harmonics, qcfg.mains_detect_ratio);
    let mains_hz = match cfg.mains {
        Mains::Auto => detected,
        Mains::Off => None,
        Mains::Fixed(f) => Some(f),
    };
    let cascade = match mains_hz {
        Some(f0) => {
            let limit = cfg.bandpass_hz[1];
            let notches = mains::notch_cascade(f0, cfg.notch_harmonics, cfg.notch_q, limit, fs)?;
            bandpass.then(&notches)
        }
        None => bandpass,
    };
    // Frequency used for the hum figures: the notched one, else the likelier.
    let hum_f0 = mains_hz.unwrap_or(if evidence[1] > evidence[0] {
        60.0
    } else {
        50.0
    });

    let grid = envelope::feature_grid(emg.time_s[0], emg.time_s[n - 1], cfg.feature_rate_hz);
    let times = &emg.time_s;

    // Pass 2: filter, envelope, residual spectrum, motion; channels in
    // groups of `lanes::LANES` filtered in lockstep.
    let motion_sos = quality::motion_band(fs)?;
    let cond: Vec<CondPass> = rows
        .par_chunks(lanes::LANES)
        .map(|chunk| -> Result<Vec<CondPass>> {
            let xs: Vec<&[f64]> = chunk.iter().map(|c| c.as_ref()).collect();
            let k = xs.len();
            let mut ys = vec![Vec::new(); k];
            lanes::sosfiltfilt_many(&cascade, &xs, &mut ys)?;
            let mut lfs = vec![Vec::new(); k];
            lanes::sosfilt_steady_many(&motion_sos, &xs, &mut lfs);
            let motion: Vec<Option<f64>> = lfs
                .iter()
                .zip(&ys)
                .map(|(lf, y)| {
                    let (w, r) = (qcfg.motion_window_s, qcfg.motion_ratio);
                    quality::motion_fraction_of_band(lf, y, fs, w, r)
                })
                .collect();
            let envs: Vec<Vec<f64>> = match cfg.envelope {
                EnvelopeKind::Lowpass => {
                    // Rectify into the low-band buffers, no longer needed.
                    for (r, y) in lfs.iter_mut().zip(&ys) {
                        r.clear();
                        r.extend(y.iter().map(|v| v.abs()));
                    }
                    let refs: Vec<&[f64]> = lfs.iter().map(|r| r.as_slice()).collect();
                    let mut outs = vec![Vec::new(); k];
                    lanes::sosfiltfilt_many(&lowpass, &refs, &mut outs)?;
                    outs.iter_mut()
                        .map(|e| {
                            // A low-pass of a non-negative signal can undershoot
                            // zero after steep bursts; an amplitude cannot.
                            for v in e.iter_mut() {
                                *v = v.max(0.0);
                            }
                            envelope::interpolate(times, e, &grid)
                        })
                        .collect()
                }
                EnvelopeKind::Rms => ys
                    .iter()
                    .map(|y| envelope::moving_rms(times, y, &grid, cfg.rms_window_s))
                    .collect(),
            };
            Ok(finish(&ys, envs, motion, fs, seg, with_psd, qcfg))
        })
        .collect::<Result<Vec<_>>>()?
        .into_iter()
        .flatten()
        .collect();

    let mut rms_all: Vec<f64> = cond.iter().map(|c| c.rms_mv).collect();
    let median_rms = envelope::percentile(&rms_all, 50.0);
    rms_all.clear();

    let frames = grid.len();
    let mut envelopes = Array2::zeros((channels, frames));
    let mut scale = Vec::with_capacity(channels);
    let mut scale_source = Vec::with_capacity(channels);
    let mut quality = Vec::with_capacity(channels);
    let band_lims = (cfg.bandpass_hz[0], cfg.bandpass_hz[1]);
    for (c, (rp, cp)) in raw.iter().zip(&cond).enumerate() {
        let id = &emg.channels[c];
        let mvc = sites
            .iter()
            .find(|s| &s.id == id)
            .and_then(|s| s.mvc_mv)
            .filter(|&m| cfg.use_mvc && m > 0.0 && m.is_finite());
        let (s, src) = match mvc {
            Some(m) => (m, ScaleSource::Mvc),
            None => {
                let p = envelope::percentile(&cp.envelope, cfg.normalise_percentile);
                if p.is_finite() && p > 1e-12 {
                    (p, ScaleSource::Percentile)
                } else {
                    (1.0, ScaleSource::Unit)
                }
            }
        };
        for (dst, &v) in envelopes.row_mut(c).iter_mut().zip(&cp.envelope) {
            *dst = v / s;
        }
        scale.push(s);
        scale_source.push(src);
        let figures = Figures {
            rms_mv: cp.rms_mv,
            stuck_fraction: rp.stuck,
            clipped_fraction: rp.clipped,
            hum_fraction: rp
                .psd
                .as_ref()
                .map(|p| mains::hum_fraction(p, hum_f0, cfg.notch_harmonics, band_lims)),
            residual_hum_fraction: cp
                .residual
                .as_ref()
                .map(|p| mains::hum_fraction(p, hum_f0, cfg.notch_harmonics, band_lims)),
            activity_ratio: quality::activity_ratio(&grid, &cp.envelope, blocks),
            motion_fraction: cp.motion,
        };
        quality.push(quality::judge(id, figures, median_rms, qcfg));
    }
    Ok(Conditioned {
        sites: emg.channels.clone(),
        rate_hz: cfg.feature_rate_hz,
        time_s: grid,
        envelopes,
        scale,
        scale_source,
        mains_hz,
        mains_evidence: evidence,
        quality,
    })
}
