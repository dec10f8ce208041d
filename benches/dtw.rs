//! Speed of the banded DTW core, in cells per second.
//!
//! Run with `cargo bench --bench dtw`; `benches/dtw-vs-dtaidistance.sh` runs
//! it beside dtaidistance's C implementation on the same series and prints
//! the ratios. Series: x_i = s(i), y_i = s(i − 17 + 9 sin(i/700)) with
//! s(t) = sin(0.013 t) + 0.5 sin(0.071 t + 1) + 0.25 sin(0.37 t), the same
//! formula as the script's Python side.

use mirrorsite::align::dtw::{crate_symmetric1_path, dtw_series, Cost, DtwOptions, StepPattern};
use std::time::Instant;

fn s(t: f64) -> f64 {
    (0.013 * t).sin() + 0.5 * (0.071 * t + 1.0).sin() + 0.25 * (0.37 * t).sin()
}

fn series(n: usize) -> (Vec<f64>, Vec<f64>) {
    let x = (0..n).map(|i| s(i as f64)).collect();
    let y = (0..n)
        .map(|i| {
            let t = i as f64;
            s(t - 17.0 + 9.0 * (t / 700.0).sin())
        })
        .collect();
    (x, y)
}

fn band_cells(n: usize, r: usize) -> usize {
    (0..n)
        .map(|i| (i + r).min(n - 1) - i.saturating_sub(r) + 1)
        .sum()
}

/// Median wall time of `reps` runs, s.
fn time<F: FnMut() -> f64>(reps: usize, mut f: F) -> (f64, f64) {
    let mut out = 0.0;
    let mut t: Vec<f64> = (0..reps)
        .map(|_| {
            let a = Instant::now();
            out = std::hint::black_box(f());
            a.elapsed().as_secs_f64()
        })
        .collect();
    t.sort_by(f64::total_cmp);
    (t[reps / 2], out)
}

fn report(name: &str, cells: usize, secs: f64, value: f64) {
    println!(
        "{name:<34} cells {cells:>9}  time {:>8.3} ms  {:>7.1} Mcells/s  distance {value:.9e}",
        secs * 1e3,
        cells as f64 / secs / 1e6
    );
}

fn main() {
    let n: usize = std::env::var("DTW_BENCH_N")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(6000);
    let r: usize = std::env::var("DTW_BENCH_BAND")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(50);
    let (x, y) = series(n);
    let cells = band_cells(n, r);
    let run = |pattern: StepPattern, path: bool| {
        let o = DtwOptions {
            band: Some(r),
            pattern,
            path,
            side_penalty: 0.0,
            open_ends: false,
        };
        let (x, y) = (&x, &y);
        move || {
            dtw_series(x, y, Cost::Squared, &o)
                .map(|w| w.distance)
                .unwrap_or(f64::NAN)
        }
    };
    println!("n = {n}, band radius r = {r} (|i - j| <= r), squared cost");
    let (t, d) = time(31, run(StepPattern::Symmetric1, false));
    report("ours symmetric1 distance", cells, t, d);
    let (t, d) = time(31, run(StepPattern::Symmetric1, true));
    report("ours symmetric1 with path", cells, t, d);
    let (t, d) = time(15, run(StepPattern::Symmetric2, true));
    report("ours symmetric2 with path", cells, t, d);
    let (t, d) = time(
        15,
        run(StepPattern::SlopeLimited { diag: 1, side: 1 }, true),
    );
    report("ours slope-limited P=1 with path", cells, t, d);
    // The dtw crate has no usable band (see align::dtw); time it on the full grid of a shorter pair.
    let m = 1500;
    let (xs, ys) = series(m);
    let (t, d) = time(5, || {
        crate_symmetric1_path(&xs, &ys)
            .map(|w| w.distance)
            .unwrap_or(f64::NAN)
    });
    report(&format!("dtw crate full grid n={m} (|x-y|)"), m * m, t, d);
}
