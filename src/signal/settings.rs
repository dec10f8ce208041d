//! Settings of the conditioning stage: the `[signal]` section of the
//! analysis configuration file. Every key has a default; the comments of
//! [`SignalConfig::KEYS`] say where each default comes from.

use super::quality::QualityConfig;
use crate::config::ConfigSection;
use serde::{Deserialize, Deserializer, Serialize, Serializer};

/// Which mains frequency to notch.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub enum Mains {
    /// Detect 50 or 60 Hz from the spectra; no notch when neither shows.
    #[default]
    Auto,
    /// No notch.
    Off,
    /// Notch this frequency (Hz) and its harmonics.
    Fixed(f64),
}

impl Serialize for Mains {
    fn serialize<S: Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        match self {
            Mains::Auto => s.serialize_str("auto"),
            Mains::Off => s.serialize_str("off"),
            Mains::Fixed(f) => s.serialize_f64(*f),
        }
    }
}

impl<'de> Deserialize<'de> for Mains {
    fn deserialize<D: Deserializer<'de>>(d: D) -> std::result::Result<Self, D::Error> {
        struct V;
        impl serde::de::Visitor<'_> for V {
            type Value = Mains;
            fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
                f.write_str(r#""auto", "off" or a frequency in Hz such as 50 or 60"#)
            }
            fn visit_str<E: serde::de::Error>(self, v: &str) -> std::result::Result<Mains, E> {
                match v {
                    "auto" => Ok(Mains::Auto),
                    "off" => Ok(Mains::Off),
                    other => other
                        .parse::<f64>()
                        .map(Mains::Fixed)
                        .map_err(|_| E::invalid_value(serde::de::Unexpected::Str(v), &self)),
                }
            }
            fn visit_i64<E: serde::de::Error>(self, v: i64) -> std::result::Result<Mains, E> {
                Ok(Mains::Fixed(v as f64))
            }
            fn visit_u64<E: serde::de::Error>(self, v: u64) -> std::result::Result<Mains, E> {
                Ok(Mains::Fixed(v as f64))
            }
            fn visit_f64<E: serde::de::Error>(self, v: f64) -> std::result::Result<Mains, E> {
                Ok(Mains::Fixed(v))
            }
        }
        d.deserialize_any(V)
    }
}

/// Which amplitude estimator makes the envelope.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum EnvelopeKind {
    /// Rectification then zero-phase Butterworth low-pass.
    #[default]
    Lowpass,
    /// Moving RMS over `rms_window_s`.
    Rms,
}

/// Settings of the conditioning stage (`[signal]` in the analysis
/// configuration file); every key has a default.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct SignalConfig {
    /// Band-pass corners, Hz.
    pub bandpass_hz: [f64; 2],
    /// Butterworth prototype order of the band-pass (the band-pass has twice as many poles).
    pub bandpass_order: usize,
    /// Mains frequency: `"auto"`, `"off"` or a frequency in Hz.
    pub mains: Mains,
    /// Number of mains harmonics notched (1 = the fundamental only).
    pub notch_harmonics: usize,
    /// Quality factor of each notch (−3 dB width = frequency / Q).
    pub notch_q: f64,
    /// Envelope estimator.
    pub envelope: EnvelopeKind,
    /// Corner of the envelope low-pass, Hz.
    pub envelope_hz: f64,
    /// Butterworth order of the envelope low-pass.
    pub envelope_order: usize,
    /// Window of the moving RMS, s.
    pub rms_window_s: f64,
    /// Rate of the feature grid, Hz.
    pub feature_rate_hz: f64,
    /// Percentile of the session envelope used as the normaliser.
    pub normalise_percentile: f64,
    /// Normalise by the manifest's `mvc_mv` where a site declares one.
    pub use_mvc: bool,
    /// Quality-check thresholds.
    pub quality: QualityConfig,
}

impl Default for SignalConfig {
    fn default() -> Self {
        SignalConfig {
            bandpass_hz: [20.0, 450.0],
            bandpass_order: 4,
            mains: Mains::Auto,
            notch_harmonics: 3,
            notch_q: 30.0,
            envelope: EnvelopeKind::Lowpass,
            envelope_hz: 5.0,
            envelope_order: 2,
            rms_window_s: 0.15,
            feature_rate_hz: 100.0,
            normalise_percentile: 95.0,
            use_mvc: true,
            quality: QualityConfig::default(),
        }
    }
}

/// A setting out of its range: the key (dotted, inside `[signal]`) and what is wrong.
#[derive(Debug, Clone, PartialEq)]
pub struct SettingError {
    /// Key inside `[signal]`, e.g. `quality.clip_bad`.
    pub key: String,
    /// What is wrong and what was expected.
    pub message: String,
}

impl std::fmt::Display for SettingError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "signal.{}: {}", self.key, self.message)
    }
}

impl From<SettingError> for crate::Error {
    fn from(e: SettingError) -> Self {
        crate::Error::Argument(e.to_string())
    }
}

fn bad_setting(key: &str, message: String) -> SettingError {
    SettingError {
        key: key.to_string(),
        message,
    }
}

impl SignalConfig {
    /// Checks the settings on their own (independent of any recording).
    pub fn validate(&self) -> Result<(), SettingError> {
        let [lo, hi] = self.bandpass_hz;
        if !(lo > 0.0 && hi > lo && hi.is_finite()) {
            return Err(bad_setting(
                "bandpass_hz",
                format!("corners must be positive and increasing, got [{lo}, {hi}]"),
            ));
        }
        let positive = [
            ("notch_q", self.notch_q),
            ("envelope_hz", self.envelope_hz),
            ("rms_window_s", self.rms_window_s),
            ("feature_rate_hz", self.feature_rate_hz),
            ("quality.motion_window_s", self.quality.motion_window_s),
        ];
        for (k, v) in positive {
            if !(v > 0.0 && v.is_finite()) {
                return Err(bad_setting(
                    k,
                    format!("must be a positive number, got {v}"),
                ));
            }
        }
        for (k, v) in [
            ("bandpass_order", self.bandpass_order),
            ("envelope_order", self.envelope_order),
        ] {
            if !(1..=12).contains(&v) {
                return Err(bad_setting(k, format!("must be between 1 and 12, got {v}")));
            }
        }
        if !(self.normalise_percentile > 0.0 && self.normalise_percentile <= 100.0) {
            return Err(bad_setting(
                "normalise_percentile",
                format!("must be in (0, 100], got {}", self.normalise_percentile),
            ));
        }
        let q = &self.quality;
        let fractions = [
            ("quality.flat_relative", q.flat_relative),
            ("quality.stuck_fraction", q.stuck_fraction),
            ("quality.clip_suspect", q.clip_suspect),
            ("quality.clip_bad", q.clip_bad),
            ("quality.mains_suspect", q.mains_suspect),
            ("quality.mains_bad", q.mains_bad),
            ("quality.motion_suspect", q.motion_suspect),
            ("quality.motion_bad", q.motion_bad),
        ];
        for (k, v) in fractions {
            if !(0.0..=1.0).contains(&v) {
                return Err(bad_setting(
                    k,
                    format!("must be a share between 0 and 1, got {v}"),
                ));
            }
        }
        for (k, v) in [
            ("quality.flat_rms_mv", q.flat_rms_mv),
            ("quality.mains_detect_ratio", q.mains_detect_ratio),
            ("quality.snr_suspect", q.snr_suspect),
            ("quality.motion_ratio", q.motion_ratio),
        ] {
            if !(v >= 0.0 && v.is_finite()) {
                return Err(bad_setting(
                    k,
                    format!("must be a non-negative number, got {v}"),
                ));
            }
        }
        if q.psd_segments == 0 {
            return Err(bad_setting(
                "quality.psd_segments",
                "must be at least 1".into(),
            ));
        }
        if let Mains::Fixed(f) = self.mains {
            if !(f > 0.0 && f.is_finite()) {
                return Err(bad_setting("mains", format!("must be positive, got {f}")));
            }
        }
        Ok(())
    }

    /// Checks the settings against a recording's rate and the feature rate.
    pub(crate) fn validate_for(&self, fs: f64) -> Result<(), SettingError> {
        self.validate()?;
        let nyq = fs / 2.0;
        if self.bandpass_hz[1] >= nyq {
            return Err(bad_setting(
                "bandpass_hz",
                format!(
                    "upper corner {} Hz is not below the Nyquist frequency {nyq} Hz of a {fs} Hz recording",
                    self.bandpass_hz[1]
                ),
            ));
        }
        if self.envelope_hz >= nyq || self.envelope_hz >= self.feature_rate_hz / 2.0 {
            return Err(bad_setting(
                "envelope_hz",
                format!(
                    "{} Hz must be below half the feature rate ({} Hz) and the Nyquist frequency",
                    self.envelope_hz,
                    self.feature_rate_hz / 2.0
                ),
            ));
        }
        if self.feature_rate_hz > fs {
            return Err(bad_setting(
                "feature_rate_hz",
                format!("{} Hz is above the EMG rate {fs} Hz", self.feature_rate_hz),
            ));
        }
        Ok(())
    }
}

impl ConfigSection for SignalConfig {
    const NAME: &'static str = "signal";
    const ABOUT: &'static str = "Conditioning of the raw EMG: band-pass, mains notch, envelope, \
feature grid, normalisation, channel quality.";
    const KEYS: &'static [(&'static str, &'static str)] = &[
        (
            "bandpass_hz",
            "Band-pass corners in Hz (zero-phase Butterworth). The surface-EMG band: \
SENIAM recommends a 10-20 Hz high-pass and a low-pass near 500 Hz; De Luca et al. 2010 \
(J Biomech 43:1573) found a 20 Hz high-pass a good defence against movement artefact.",
        ),
        (
            "bandpass_order",
            "Butterworth prototype order of the band-pass (each edge rolls off at \
order x 20 dB/decade, doubled by the forward-backward pass). 4 is common practice, no source.",
        ),
        (
            "mains",
            "Mains notch: \"auto\" detects 50 or 60 Hz from the spectra and notches nothing \
when neither shows; \"off\"; or a frequency in Hz. A notch also removes genuine EMG power \
(McManus et al. 2020, Front Neurol 11:576729), hence none without hum.",
        ),
        (
            "notch_harmonics",
            "How many mains harmonics are notched (1 = the fundamental only; 3 = \
50/100/150 or 60/120/180 Hz). Mains interference carries harmonics: from memory.",
        ),
        (
            "notch_q",
            "Quality factor of each notch: the -3 dB width is frequency / Q (1.7 Hz at \
50 Hz). Common practice, no source.",
        ),
        (
            "envelope",
            "Amplitude estimator: \"lowpass\" (full-wave rectification then a zero-phase \
Butterworth low-pass, the linear envelope) or \"rms\" (moving RMS). Both are the standard \
pipeline (Rose, KAAP686 notes).",
        ),
        (
            "envelope_hz",
            "Corner of the envelope low-pass in Hz. 2-10 Hz corners are typical; about \
6 Hz for activation patterns (Winter, via BIOMCH-L).",
        ),
        (
            "envelope_order",
            "Butterworth order of the envelope low-pass. Common practice, no source.",
        ),
        (
            "rms_window_s",
            "Window of the moving RMS in seconds. 150-250 ms windows were best in \
real-time myoelectric control (Smith et al. 2011, IEEE TNSRE 19:186); 50-250 ms is usual.",
        ),
        (
            "feature_rate_hz",
            "Rate of the feature grid (envelopes) in Hz, on the EMG clock. Common \
practice, no source; well above twice the envelope corner.",
        ),
        (
            "normalise_percentile",
            "Percentile of a site's session envelope used as its normaliser \
when no MVC is declared: a robust stand-in for the task's own peak (ISEK CEDE, normalisation to \
the task peak). 95 is common practice, no source.",
        ),
        (
            "use_mvc",
            "Normalise by the manifest's mvc_mv (the envelope amplitude of a maximal \
attempted contraction) where a site declares one.",
        ),
        (
            "quality",
            "Thresholds of the channel-quality checks. Defaults are engineering judgement \
(common practice, no source) unless stated.",
        ),
        (
            "quality.flat_rms_mv",
            "A site whose conditioned RMS is below this (mV) is flat: bad. \
Amplifier noise alone is about 1 uV RMS or more (from memory).",
        ),
        (
            "quality.flat_relative",
            "A site whose conditioned RMS is below this share of the median \
site's is flat: bad.",
        ),
        (
            "quality.stuck_fraction",
            "A site where more than this share of samples repeat the one \
before is stuck: bad.",
        ),
        (
            "quality.clip_min_run",
            "Shortest run of samples at the channel's extreme value that \
counts as clipping.",
        ),
        (
            "quality.clip_suspect",
            "Share of clipped samples that makes a site suspect.",
        ),
        (
            "quality.clip_bad",
            "Share of clipped samples that makes a site bad.",
        ),
        (
            "quality.mains_detect_ratio",
            "In auto mode, mains is detected when some site's density \
within 1 Hz of a mains harmonic is this many times the median of the flanks 3-8 Hz away.",
        ),
        (
            "quality.mains_suspect",
            "Share of a site's raw in-band power that is mains hum making it \
suspect (mains-dominated: more hum than everything else).",
        ),
        (
            "quality.mains_bad",
            "Share of power still mains hum after the notch making a site bad.",
        ),
        (
            "quality.snr_suspect",
            "A site whose envelope in its most active movement blocks (90th \
percentile) is below this many times its rest level (median) is suspect: low signal-to-noise.",
        ),
        (
            "quality.motion_window_s",
            "Window of the motion-artefact check in seconds.",
        ),
        (
            "quality.motion_ratio",
            "A window holds a motion burst when its 1-10 Hz RMS exceeds this \
many times its EMG-band RMS (and 3 times the median low-frequency RMS).",
        ),
        (
            "quality.motion_suspect",
            "Share of burst windows that makes a site suspect.",
        ),
        (
            "quality.motion_bad",
            "Share of burst windows that makes a site bad.",
        ),
        (
            "quality.psd_segments",
            "Most Welch segments (about 1 s each) used per site for spectra; \
more is slower and steadier.",
        ),
    ];
}
