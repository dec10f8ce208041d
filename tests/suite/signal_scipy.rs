//! Filter designs and zero-phase filtering checked against scipy.signal
//! (butter, iirnotch, sos2tf, sosfreqz, sosfilt, sosfilt_zi, sosfiltfilt).
//! The fixture and the script that made it are in tests/fixtures/signal/.
//!
//! Tolerances: coefficients within 1e-9 relative (each coefficient against
//! the largest magnitude in its section or polynomial, so that exact zeros
//! compare too); filtered output within 1e-6 relative to the peak of the
//! reference output.

use mirrorsite::signal::filter::{
    butter_sos, iirnotch, sosfilt, sosfilt_zi, sosfiltfilt, Band, Sos,
};
use serde_json::Value;

fn fixture() -> Value {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/signal/scipy_filters.json"
    );
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

fn vec(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

fn sos_of(v: &Value) -> Sos {
    Sos::new(
        v.as_array()
            .unwrap()
            .iter()
            .map(|row| {
                let r = vec(row);
                [r[0], r[1], r[2], r[3], r[4], r[5]]
            })
            .collect(),
    )
}

/// Largest |a − b| over max |b| (0-safe relative error of a vector).
fn rel_err(a: &[f64], b: &[f64]) -> f64 {
    assert_eq!(a.len(), b.len());
    let scale = b.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    a.iter()
        .zip(b)
        .map(|(x, y)| (x - y).abs())
        .fold(0.0, f64::max)
        / scale
}

fn band_of(d: &Value) -> Band {
    let wn = vec(&d["wn"]);
    match d["btype"].as_str().unwrap() {
        "lowpass" => Band::Lowpass(wn[0]),
        "highpass" => Band::Highpass(wn[0]),
        "bandpass" => Band::Bandpass(wn[0], wn[1]),
        other => panic!("unexpected btype {other}"),
    }
}

#[test]
fn butterworth_sections_match_scipy_one_by_one() {
    // scipy.signal.butter(N, Wn, btype, fs=fs, output="sos"): same pairing
    // and order of sections, so sections compare one by one.
    let fx = fixture();
    let mut worst = 0.0f64;
    for d in fx["butter"].as_array().unwrap() {
        let order = d["order"].as_u64().unwrap() as usize;
        let fs = d["fs"].as_f64().unwrap();
        let ours = butter_sos(order, band_of(d), fs).unwrap();
        let theirs = sos_of(&d["sos"]);
        assert_eq!(ours.len(), theirs.len(), "{d:?}");
        for (a, b) in ours.sections.iter().zip(&theirs.sections) {
            let e = rel_err(a, b);
            worst = worst.max(e);
            assert!(e < 1e-9, "section {a:?} vs scipy {b:?}: {e:e}");
        }
    }
    eprintln!("largest relative deviation of SOS coefficients from scipy: {worst:e}");
}

#[test]
fn butterworth_transfer_functions_and_responses_match_scipy() {
    // scipy.signal.sos2tf and scipy.signal.sosfreqz on 97 frequencies 0..fs/2.
    let fx = fixture();
    for d in fx["butter"].as_array().unwrap() {
        let order = d["order"].as_u64().unwrap() as usize;
        let fs = d["fs"].as_f64().unwrap();
        let ours = butter_sos(order, band_of(d), fs).unwrap();
        let (b, a) = ours.to_tf();
        assert!(rel_err(&b, &vec(&d["b"])) < 1e-9);
        assert!(rel_err(&a, &vec(&d["a"])) < 1e-9);
        let f = vec(&d["freq_hz"]);
        let (hre, him) = (vec(&d["h_re"]), vec(&d["h_im"]));
        for i in 0..f.len() {
            let h = ours.response(f[i], fs);
            let err = ((h.re - hre[i]).powi(2) + (h.im - him[i]).powi(2)).sqrt();
            // |H| ≤ 1 for a Butterworth filter: absolute error is relative to the passband.
            assert!(err < 1e-9, "f = {} Hz: {err:e}", f[i]);
        }
    }
}

#[test]
fn notch_matches_scipy_iirnotch() {
    let fx = fixture();
    for d in fx["notch"].as_array().unwrap() {
        let s = iirnotch(
            d["f0"].as_f64().unwrap(),
            d["q"].as_f64().unwrap(),
            d["fs"].as_f64().unwrap(),
        )
        .unwrap();
        assert!(rel_err(&s[..3], &vec(&d["b"])) < 1e-9);
        assert!(rel_err(&s[3..], &vec(&d["a"])) < 1e-9);
    }
}

#[test]
fn filtering_matches_scipy() {
    let fx = fixture();
    let f = &fx["filtering"];
    let fs = f["fs"].as_f64().unwrap();
    let x = vec(&f["x"]);
    let bp = butter_sos(4, Band::Bandpass(20.0, 450.0), fs).unwrap();

    // Our default cascade: band-pass then notches at 50/100/150 Hz, Q = 30.
    let mut cascade = bp.clone();
    for f0 in [50.0, 100.0, 150.0] {
        cascade = cascade.then(&Sos::new(vec![iirnotch(f0, 30.0, fs).unwrap()]));
    }
    assert!(
        rel_err(
            &cascade.sections.concat(),
            &sos_of(&f["cascade"]).sections.concat()
        ) < 1e-9
    );
    let zi: Vec<f64> = sosfilt_zi(&cascade).concat();
    let zi_ref: Vec<f64> = f["cascade_zi"]
        .as_array()
        .unwrap()
        .iter()
        .flat_map(vec)
        .collect();
    assert!(
        rel_err(&zi, &zi_ref) < 1e-9,
        "sosfilt_zi {:e}",
        rel_err(&zi, &zi_ref)
    );

    let mut report = Vec::new();
    let mut check = |name: &str, ours: Vec<f64>| {
        let e = rel_err(&ours, &vec(&f[name]));
        report.push(format!("{name}: {e:.2e}"));
        assert!(e < 1e-6, "{name}: {e:e}");
    };
    check("sosfilt_bandpass", sosfilt(&bp, &x));
    check("sosfiltfilt_bandpass", sosfiltfilt(&bp, &x).unwrap());
    let y = sosfiltfilt(&cascade, &x).unwrap();
    let lp = butter_sos(2, Band::Lowpass(5.0), fs).unwrap();
    let rect: Vec<f64> = y.iter().map(|v| v.abs()).collect();
    check("sosfiltfilt_envelope", sosfiltfilt(&lp, &rect).unwrap());
    check("sosfiltfilt_cascade", y);
    let hp = butter_sos(5, Band::Highpass(30.0), fs).unwrap();
    check("sosfiltfilt_highpass", sosfiltfilt(&hp, &x).unwrap());
    // An odd order: one section with b2 = a2 = 0 shortens scipy's default padding.
    let lp3 = butter_sos(3, Band::Lowpass(100.0), fs).unwrap();
    assert_eq!(lp3.default_padlen(), 3 * (2 * 2 + 1 - 1));
    check("sosfiltfilt_lowpass_odd", sosfiltfilt(&lp3, &x).unwrap());
    eprintln!(
        "largest relative deviation from scipy (of the peak): {}",
        report.join(", ")
    );
}
