//! Conditioning speed: a 10-minute, 16-site, 2 kHz session (19.2 M samples).
//!
//! `cargo bench --bench signal [-- --write FILE]` prints the time of
//! `signal::condition` (one thread and all threads) and of the zero-phase
//! band-pass + notch cascade alone on one thread, the part that
//! `scipy.signal.sosfiltfilt` does. With `--write FILE` the raw data are
//! also written (little-endian f64, site-major) for benches/signal-vs-scipy.sh.

use mirrorsite::session::Recording;
use mirrorsite::signal::filter::{butter_sos, iirnotch, sosfiltfilt_into, Band, Sos};
use mirrorsite::signal::lanes::{sosfiltfilt_many, LANES};
use mirrorsite::signal::{condition, SignalConfig};
use ndarray::Array2;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use std::f64::consts::PI;
use std::io::Write;
use std::time::Instant;

const FS: f64 = 2000.0;
const SITES: usize = 16;
const SECONDS: f64 = 600.0;

fn data() -> Array2<f64> {
    let n = (SECONDS * FS) as usize;
    let mut rng = ChaCha8Rng::seed_from_u64(11);
    let mut a = Array2::zeros((SITES, n));
    for (c, mut row) in a.rows_mut().into_iter().enumerate() {
        for (i, v) in row.iter_mut().enumerate() {
            let t = i as f64 / FS;
            let burst = if (t + c as f64) % 4.0 < 2.0 {
                0.3
            } else {
                0.02
            };
            let g: f64 = StandardNormal.sample(&mut rng);
            *v = burst * g + 0.05 * (2.0 * PI * 50.0 * t + c as f64).sin() + 0.05;
        }
    }
    a
}

fn best_of<F: FnMut()>(runs: usize, mut f: F) -> f64 {
    (0..runs)
        .map(|_| {
            let t = Instant::now();
            f();
            t.elapsed().as_secs_f64()
        })
        .fold(f64::INFINITY, f64::min)
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let write = args
        .iter()
        .position(|a| a == "--write")
        .and_then(|i| args.get(i + 1));
    let data = data();
    let n = data.ncols();
    if let Some(path) = write {
        let mut f = std::io::BufWriter::new(std::fs::File::create(path).expect("create data file"));
        for v in data.iter() {
            f.write_all(&v.to_le_bytes()).expect("write data file");
        }
    }
    let rec = Recording {
        file: "bench".into(),
        time_s: (0..n).map(|i| i as f64 / FS).collect(),
        rate_hz: FS,
        channels: (1..=SITES).map(|k| format!("S{k}")).collect(),
        data,
    };
    let cfg = SignalConfig::default();

    // The cascade of the default settings with mains at 50 Hz.
    let mut cascade = butter_sos(4, Band::Bandpass(20.0, 450.0), FS).unwrap();
    for f0 in [50.0, 100.0, 150.0] {
        cascade = cascade.then(&Sos::new(vec![iirnotch(f0, 30.0, FS).unwrap()]));
    }
    let mut out = Vec::new();
    let filt = best_of(5, || {
        for row in rec.data.rows() {
            sosfiltfilt_into(&cascade, row.as_slice().unwrap(), &mut out).unwrap();
        }
    });
    let rows: Vec<&[f64]> = rec
        .data
        .rows()
        .into_iter()
        .map(|r| r.to_slice().unwrap())
        .collect();
    let mut outs = vec![Vec::new(); LANES];
    let lanes = best_of(5, || {
        for chunk in rows.chunks(LANES) {
            sosfiltfilt_many(&cascade, chunk, &mut outs).unwrap();
        }
    });
    let one = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap();
    let mut mains = None;
    let cond1 = best_of(5, || {
        let c = one.install(|| condition(&rec, &[], &[], &cfg).unwrap());
        mains = c.mains_hz;
    });
    let cond_all = best_of(5, || {
        condition(&rec, &[], &[], &cfg).unwrap();
    });
    println!(
        "samples: {} ({} sites x {} s x {} Hz)",
        SITES * n,
        SITES,
        SECONDS,
        FS
    );
    println!("mains detected: {mains:?}");
    println!(
        "sosfiltfilt cascade ({} sections), {LANES} channels in lockstep, 1 thread: {lanes:.3} s",
        cascade.len()
    );
    println!("sosfiltfilt cascade, one channel at a time, 1 thread: {filt:.3} s");
    println!("condition, 1 thread: {cond1:.3} s");
    println!(
        "condition, {} threads: {cond_all:.3} s",
        rayon::current_num_threads()
    );
}
