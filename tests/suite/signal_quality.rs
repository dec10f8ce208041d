//! Conditioning and channel quality on synthetic channels made here: one
//! per fault class (flat, clipped, mains hum, motion artefact, low
//! signal-to-noise) beside clean ones, plus textbook amplitude checks.

use mirrorsite::session::{Block, Recording, Site};
use mirrorsite::signal::filter::{butter_sos, sosfiltfilt, Band};
use mirrorsite::signal::{condition, EnvelopeKind, Mains, SignalConfig, Verdict};
use ndarray::Array2;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use std::f64::consts::PI;

const FS: f64 = 2000.0;
const SECONDS: f64 = 60.0;

fn noise(seed: u64, n: usize) -> Vec<f64> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    (0..n).map(|_| StandardNormal.sample(&mut rng)).collect()
}

/// Muscle-like noise: 30–200 Hz, unit RMS.
fn muscle(seed: u64, n: usize) -> Vec<f64> {
    let sos = butter_sos(2, Band::Bandpass(30.0, 200.0), FS).unwrap();
    let x = sosfiltfilt(&sos, &noise(seed, n)).unwrap();
    let r = (x.iter().map(|v| v * v).sum::<f64>() / n as f64).sqrt();
    x.into_iter().map(|v| v / r).collect()
}

/// Activation: bursts of 1 s every 2 s inside the movement block 10–50 s.
fn activation(t: f64) -> f64 {
    if (10.0..50.0).contains(&t) && (t - 10.0) % 2.0 < 1.0 {
        1.0
    } else {
        0.0
    }
}

fn blocks() -> Vec<Block> {
    let b = |s: f64, e: f64, task: &str, dof: Option<&str>| Block {
        start_s: s,
        end_s: e,
        task: task.into(),
        dof: dof.map(Into::into),
        words: None,
    };
    vec![
        b(0.0, 10.0, "rest", None),
        b(10.0, 50.0, "paced", Some("fingers")),
        b(50.0, 60.0, "rest", None),
    ]
}

const NAMES: [&str; 8] = [
    "clean1", "clean2", "clean3", "flat", "clipped", "hum", "motion", "quiet",
];

fn session() -> Recording {
    let n = (SECONDS * FS) as usize;
    let t: Vec<f64> = (0..n).map(|i| i as f64 / FS).collect();
    let mut data = Array2::zeros((NAMES.len(), n));
    for (c, name) in NAMES.iter().enumerate() {
        let m = muscle(100 + c as u64, n);
        let base = noise(200 + c as u64, n);
        let amp = 0.2 + 0.1 * c as f64;
        let mut row: Vec<f64> = (0..n)
            .map(|i| {
                let hum = 0.003 * (2.0 * PI * 60.0 * t[i] + c as f64).sin();
                amp * activation(t[i]) * m[i] + 0.005 * base[i] + hum
            })
            .collect();
        match *name {
            "flat" => row.iter_mut().zip(&base).for_each(|(v, b)| *v = 1e-4 * b),
            "clipped" => row
                .iter_mut()
                .for_each(|v| *v = (*v * 4.0).clamp(-0.3, 0.3)),
            "hum" => row
                .iter_mut()
                .zip(&t)
                .for_each(|(v, &t)| *v += 0.8 * (2.0 * PI * 60.0 * t).sin()),
            "motion" => row.iter_mut().zip(&t).for_each(|(v, &t)| {
                // A 4 Hz half-wave bump of 2 mV lasting 0.25 s every 2 s.
                let u = t % 2.0;
                if u < 0.25 {
                    *v += 2.0 * (PI * u / 0.25).sin();
                }
            }),
            "quiet" => row
                .iter_mut()
                .zip(&base)
                .zip(&t)
                .for_each(|((v, b), &t)| *v = 0.005 * b + 0.003 * (2.0 * PI * 60.0 * t).sin()),
            _ => {}
        }
        data.row_mut(c)
            .assign(&ndarray::ArrayView1::from(row.as_slice()));
    }
    Recording {
        file: "emg.csv".into(),
        time_s: t,
        rate_hz: FS,
        channels: NAMES.iter().map(|s| s.to_string()).collect(),
        data,
    }
}

fn codes(q: &mirrorsite::signal::SiteQuality) -> Vec<&str> {
    q.reasons.iter().map(|r| r.code.as_str()).collect()
}

#[test]
fn each_fault_class_is_classified() {
    let rec = session();
    let out = condition(&rec, &[], &blocks(), &SignalConfig::default()).unwrap();
    assert_eq!(
        out.mains_hz,
        Some(60.0),
        "evidence {:?}",
        out.mains_evidence
    );
    let by = |name: &str| &out.quality[NAMES.iter().position(|n| *n == name).unwrap()];
    for name in ["clean1", "clean2", "clean3"] {
        assert_eq!(
            by(name).verdict,
            Verdict::Ok,
            "{name}: {:?}",
            by(name).reasons
        );
    }
    assert_eq!(by("flat").verdict, Verdict::Bad);
    assert_eq!(codes(by("flat")), ["flat"]);
    let clipped = by("clipped");
    assert_eq!(clipped.verdict, Verdict::Bad, "{:?}", clipped.figures);
    assert!(codes(clipped).contains(&"clipped"));
    // Hum the notch removes: suspect, not bad; the figure is the hum share.
    let hum = by("hum");
    assert_eq!(hum.verdict, Verdict::Suspect, "{:?}", hum.reasons);
    assert_eq!(codes(hum), ["mains"]);
    assert!(hum.figures.hum_fraction.unwrap() > 0.6);
    assert!(hum.figures.residual_hum_fraction.unwrap() < 0.05);
    let motion = by("motion");
    assert_ne!(motion.verdict, Verdict::Ok);
    assert!(codes(motion).contains(&"motion"), "{:?}", motion.figures);
    let quiet = by("quiet");
    assert_eq!(quiet.verdict, Verdict::Suspect, "{:?}", quiet.figures);
    assert_eq!(codes(quiet), ["low-snr"]);
    // Only the bad sites are left out.
    let usable: Vec<&str> = out.usable().iter().map(|&i| NAMES[i]).collect();
    assert!(!usable.contains(&"flat") && !usable.contains(&"clipped"));
    assert!(usable.contains(&"hum") && usable.contains(&"quiet"));
    // Reasons serialise with the verdict spelled in lower case.
    let json = serde_json::to_value(hum).unwrap();
    assert_eq!(json["verdict"], "suspect");
    assert_eq!(json["reasons"][0]["code"], "mains");
    assert!(json["reasons"][0]["value"].as_f64().unwrap() > 0.6);
}

#[test]
fn hum_left_in_without_a_notch_is_bad() {
    let rec = session();
    let cfg = SignalConfig {
        mains: Mains::Off,
        ..SignalConfig::default()
    };
    let out = condition(&rec, &[], &blocks(), &cfg).unwrap();
    assert_eq!(out.mains_hz, None);
    let hum = &out.quality[5];
    assert_eq!(hum.verdict, Verdict::Bad);
    assert!(codes(hum).contains(&"mains-residual"));
}

#[test]
fn envelopes_are_normalised_on_the_feature_grid() {
    let rec = session();
    let out = condition(&rec, &[], &blocks(), &SignalConfig::default()).unwrap();
    // Feature grid: t_first + j/100 up to the last sample.
    assert_eq!(out.time_s.len(), 6000);
    assert!((out.time_s[123] - 1.23).abs() < 1e-12);
    assert_eq!(out.envelopes.dim(), (8, 6000));
    // Normalised by the 95th percentile: that percentile of each envelope is 1.
    for c in [0, 1, 2, 5] {
        let row: Vec<f64> = out.envelopes.row(c).to_vec();
        let p = mirrorsite::signal::envelope::percentile(&row, 95.0);
        assert!((p - 1.0).abs() < 1e-12);
    }
    // Deterministic.
    let again = condition(&rec, &[], &blocks(), &SignalConfig::default()).unwrap();
    assert_eq!(out.envelopes, again.envelopes);
    assert_eq!(out.scale, again.scale);
}

fn sine_recording(a: f64, f: f64) -> Recording {
    let n = (20.0 * FS) as usize;
    let t: Vec<f64> = (0..n).map(|i| 3.0 + i as f64 / FS).collect();
    let row: Vec<f64> = t.iter().map(|&t| a * (2.0 * PI * f * t).sin()).collect();
    Recording {
        file: "emg.csv".into(),
        time_s: t,
        rate_hz: FS,
        channels: vec!["s".into()],
        data: Array2::from_shape_vec((1, n), row).unwrap(),
    }
}

#[test]
fn rms_envelope_of_a_sine_is_amplitude_over_root_two() {
    // Textbook: RMS of A·sin is A/√2. With a declared MVC of 1 mV the
    // envelope is in mV. The band-pass passes 100 Hz with |H|² within 1e-4 of 1.
    let a = 0.8;
    let rec = sine_recording(a, 100.0);
    let site = Site {
        id: "s".into(),
        angle_deg: 0.0,
        distance_cm: 5.0,
        mvc_mv: Some(1.0),
    };
    let cfg = SignalConfig {
        envelope: EnvelopeKind::Rms,
        mains: Mains::Off,
        ..SignalConfig::default()
    };
    let out = condition(&rec, &[site], &[], &cfg).unwrap();
    assert_eq!(out.scale, vec![1.0]);
    assert!(
        (out.time_s[0] - 3.0).abs() < 1e-12,
        "grid starts at the first sample"
    );
    let expect = a / 2f64.sqrt();
    for &v in out.envelopes.row(0).iter().skip(100).take(1800) {
        assert!((v - expect).abs() < 2e-3 * expect, "{v} vs {expect}");
    }
}

#[test]
fn linear_envelope_of_a_sine_is_its_rectified_mean() {
    // Textbook: the mean of |A·sin| is 2A/π; the 5 Hz low-pass keeps the
    // mean and removes the ripple of the rectified sine. (97.3 Hz, not a
    // divisor of the rate: samples at fixed phases would bias the mean.)
    let a = 0.5;
    let rec = sine_recording(a, 97.3);
    let site = Site {
        id: "s".into(),
        angle_deg: 0.0,
        distance_cm: 5.0,
        mvc_mv: Some(1.0),
    };
    let cfg = SignalConfig {
        mains: Mains::Off,
        ..SignalConfig::default()
    };
    let out = condition(&rec, &[site], &[], &cfg).unwrap();
    let expect = 2.0 * a / PI;
    for &v in out.envelopes.row(0).iter().skip(200).take(1600) {
        assert!((v - expect).abs() < 1e-3 * expect, "{v} vs {expect}");
    }
}

#[test]
fn impossible_settings_and_short_recordings_are_errors() {
    let rec = sine_recording(1.0, 50.0);
    let mut slow = rec.clone();
    slow.rate_hz = 500.0;
    assert!(condition(&slow, &[], &[], &SignalConfig::default()).is_err());
    let mut short = rec.clone();
    short.time_s.truncate(20);
    short.data = short.data.slice(ndarray::s![.., ..20]).to_owned();
    assert!(condition(&short, &[], &[], &SignalConfig::default()).is_err());
}
