//! Timing of the selection engine on a problem of real-session size.
//!
//! n = 3000 feature-rate samples (100 Hz), K = 16 sites, 7 × 7 surface basis
//! (p = 784) plus an 8-function baseline; envelopes are smooth positive
//! sources with crosstalk between neighbouring sites, so groups are far from
//! orthonormal. Times (best of several runs, each from the design matrix):
//!
//! * `gram`: forming `[Z | y]ᵀ[Z | y]` once;
//! * (a) one fit at 0.1 λ_max (Gram, profiling, transform, solve);
//! * (b) the 50-λ path down to 1e-3 λ_max;
//! * (c) 5-fold block CV of that path (fold Grams by subtraction, profiling
//!   and transform per fold, paths, held-out errors) on the full-data grid,
//!   with `SolverOptions::cross_validation()` (also timed with the options
//!   of (a) and (b), for reference).
//!
//! The same problem is written to `target/engine-bench/` (raw f64 arrays and a
//! JSON header with folds, λ grid and our objectives) for
//! `benches/engine-vs-skglm.sh`.
//!
//! Run: `cargo bench --bench engine`. Environment knobs: `ENGINE_BENCH_VERBOSE`
//! (per-λ sweeps of the path), `ENGINE_BENCH_TOL_GAP` and
//! `ENGINE_BENCH_ANDERSON` (solver options).

use std::io::Write;
use std::time::Instant;

use faer::Par;
use mirrorsite::select::{
    block_folds, cross_validate, lambda_grid, DesignSpec, FoldGrams, FunctionalDesign, Gram,
    GroupLasso, SolverOptions,
};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;

const K: usize = 16;
const N_ROWS: usize = 3000;
const RATE: f64 = 100.0;
const PHI_S: f64 = 1e-4;
const PHI_Z: f64 = 1e-3;

/// Deterministic envelopes, position and velocity (see the module docs).
fn problem() -> FunctionalDesign {
    let spec = DesignSpec::new(RATE);
    let j = spec.lag_samples();
    let len = N_ROWS + j;
    let mut rng = ChaCha8Rng::seed_from_u64(20240611);
    let width = (0.15 * RATE) as usize;
    let kern: Vec<f64> = (0..=2 * width)
        .map(|i| {
            0.5 - 0.5 * (std::f64::consts::PI * (i + 1) as f64 / (2 * width + 2) as f64 * 2.0).cos()
        })
        .collect();
    let ksum: f64 = kern.iter().sum();
    let mut src = vec![vec![0.0; len]; K];
    for (k, s) in src.iter_mut().enumerate() {
        let raw: Vec<f64> = (0..len + 2 * width)
            .map(|_| rng.sample::<f64, _>(StandardNormal).abs())
            .collect();
        for (i, v) in s.iter_mut().enumerate() {
            let t = i as f64 / RATE;
            let sm: f64 = kern.iter().zip(&raw[i..]).map(|(a, b)| a * b).sum::<f64>() / ksum;
            let burst =
                1.0 + (2.0 * std::f64::consts::PI * (0.3 + 0.05 * k as f64) * t + k as f64).sin();
            *v = sm * (0.3 + burst);
        }
    }
    let env: Vec<Vec<f64>> = (0..K)
        .map(|k| {
            (0..len)
                .map(|i| {
                    0.2 + src[k][i] + 0.45 * src[(k + K - 1) % K][i] + 0.45 * src[(k + 1) % K][i]
                })
                .collect()
        })
        .collect();
    let mut z: Vec<f64> = (0..len)
        .map(|i| {
            let t = i as f64 / RATE;
            0.5 + 0.4 * (2.0 * std::f64::consts::PI * 0.2 * t).sin()
                + 0.08 * (2.0 * std::f64::consts::PI * 0.9 * t + 1.0).sin()
        })
        .collect();
    let (lo, hi) = z
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
            (a.min(v), b.max(v))
        });
    z.iter_mut().for_each(|v| *v = (*v - lo) / (hi - lo));
    // truth: sites 2, 7, 11 drive the velocity through short lagged kernels
    let mut y = vec![0.0; len];
    for i in j..len {
        let mut v = 0.3 * (z[i] - 0.5);
        for (site, gain, lag) in [(2usize, 3.0, 8usize), (7, -2.0, 12), (11, 1.5, 5)] {
            let w: f64 = (0..=j)
                .map(|l| (-((l as f64 - lag as f64) / 4.0).powi(2)).exp() * env[site][i - l])
                .sum::<f64>()
                / RATE;
            v += gain * w * (1.0 + z[i]);
        }
        y[i] = v;
    }
    let sd = {
        let m = y[j..].iter().sum::<f64>() / N_ROWS as f64;
        (y[j..].iter().map(|v| (v - m).powi(2)).sum::<f64>() / N_ROWS as f64).sqrt()
    };
    for v in y[j..].iter_mut() {
        *v += 0.3 * sd * rng.sample::<f64, _>(StandardNormal);
    }
    let rows: Vec<usize> = (j..len).collect();
    let refs: Vec<&[f64]> = env.iter().map(|e| e.as_slice()).collect();
    FunctionalDesign::new(&refs, &z, &y, &rows, spec).expect("valid bench problem")
}

fn best_of<T>(reps: usize, mut f: impl FnMut() -> T) -> (f64, T) {
    let mut best = f64::INFINITY;
    let mut out = None;
    for _ in 0..reps {
        let t = Instant::now();
        let v = f();
        best = best.min(t.elapsed().as_secs_f64());
        out = Some(v);
    }
    (best, out.expect("at least one run"))
}

fn write_f64(path: &std::path::Path, data: impl Iterator<Item = f64>) {
    let mut f = std::io::BufWriter::new(std::fs::File::create(path).expect("create bench file"));
    for v in data {
        f.write_all(&v.to_le_bytes()).expect("write");
    }
}

fn main() {
    let design = problem();
    let q = design.n_baseline();
    let w = vec![1.0; K];
    let mut opts = SolverOptions::default();
    if let Some(v) = std::env::var("ENGINE_BENCH_ANDERSON")
        .ok()
        .and_then(|v| v.parse().ok())
    {
        opts.anderson = v;
    }
    if let Some(v) = std::env::var("ENGINE_BENCH_TOL_GAP")
        .ok()
        .and_then(|v| v.parse().ok())
    {
        opts.tol_gap = v;
    }
    let l = design
        .surface()
        .penalty_factor(PHI_S, PHI_Z)
        .expect("factor");
    let factors = vec![l.clone(); K];
    eprintln!(
        "problem: n = {}, K = {K}, p = {}, q = {q}",
        design.n_rows(),
        K * design.group_size()
    );

    let (t_gram, _) = best_of(5, || {
        Gram::from_augmented(design.augmented(), Par::rayon(0))
    });
    let (t_gram_seq, _) = best_of(5, || Gram::from_augmented(design.augmented(), Par::Seq));
    // the floor: the faster of one and two threads
    let t_gram_floor = t_gram.min(t_gram_seq);

    let setup = || {
        let prof = design.gram().profile(q).expect("profile");
        GroupLasso::new(&prof, &factors).expect("problem")
    };
    let (t_setup, problem) = best_of(3, setup);
    let lmax = problem.lambda_max(&w).expect("λ_max");
    let grid = lambda_grid(lmax, 1e-3, 50);

    let (t_a, fit_a) = best_of(3, || {
        let p = setup();
        p.fit_path(&w, &[0.1 * lmax], &opts, None).expect("fit")
    });
    let (t_b, path) = best_of(3, || {
        let p = setup();
        p.fit_path(&w, &grid, &opts, None).expect("path")
    });
    let folds = block_folds(design.rows(), 5, design.spec().lag_samples()).expect("folds");
    // (c) with the cross-validation preset (the figure compared with skglm),
    // and with the options of (a) and (b) for reference
    let mut cv_opts = SolverOptions::cross_validation();
    cv_opts.anderson = opts.anderson;
    let (t_c, cv) = best_of(3, || {
        let fg = FoldGrams::new(design.augmented(), &folds).expect("fold grams");
        cross_validate(&fg, q, &factors, &w, &grid, &cv_opts).expect("cv")
    });
    let (t_c_tight, _) = best_of(3, || {
        let fg = FoldGrams::new(design.augmented(), &folds).expect("fold grams");
        cross_validate(&fg, q, &factors, &w, &grid, &opts).expect("cv")
    });
    let sweeps_b: usize = path.iter().map(|f| f.sweeps).sum();
    if std::env::var_os("ENGINE_BENCH_VERBOSE").is_some() {
        for f in &path {
            eprintln!(
                "λ/λmax {:.2e}: {} sweeps, {} active, gap {:.1e}, kkt {:.1e}",
                f.lambda / lmax,
                f.sweeps,
                f.active.len(),
                f.gap,
                f.kkt
            );
        }
    }
    let sweeps_c: usize = cv.fold_fits.iter().flatten().map(|f| f.sweeps).sum();
    let all_conv = path
        .iter()
        .chain(cv.fold_fits.iter().flatten())
        .all(|f| f.converged)
        && fit_a[0].converged;
    let worst_kkt = path
        .iter()
        .chain(cv.fold_fits.iter().flatten())
        .map(|f| f.kkt)
        .fold(0.0, f64::max);
    println!("gram (XᵀX once, 2 threads): {t_gram:.4} s   (1 thread: {t_gram_seq:.4} s)");
    println!("setup (Gram + profile + transform): {t_setup:.4} s");
    println!(
        "(a) fit at 0.1 λ_max: {t_a:.4} s  ({} active, {} sweeps)",
        fit_a[0].active.len(),
        fit_a[0].sweeps
    );
    println!(
        "(b) 50-λ path: {t_b:.4} s  ({sweeps_b} sweeps, {} active at the end)",
        path.last().map_or(0, |f| f.active.len())
    );
    println!(
        "(c) 5-fold CV of the path: {t_c:.4} s  ({sweeps_c} sweeps; CV preset tol_gap {:.0e}, tol_kkt {:.0e})",
        cv_opts.tol_gap, cv_opts.tol_kkt
    );
    println!(
        "    with the options of (b): {t_c_tight:.4} s  (cv-path / gram = {:.2})",
        t_c_tight / t_gram_floor
    );
    println!("all converged: {all_conv}, worst KKT residual {worst_kkt:.1e}");
    println!("cv-path / gram = {:.2}", t_c / t_gram_floor);

    // write the problem for the skglm comparison
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("target/engine-bench");
    std::fs::create_dir_all(&dir).expect("bench dir");
    let aug = design.augmented();
    let aug = &aug;
    let ncol = design.n_columns();
    write_f64(
        &dir.join("Z.bin"),
        (0..ncol).flat_map(|j| (0..aug.nrows()).map(move |i| aug[(i, j)])),
    );
    write_f64(&dir.join("y.bin"), design.response().iter().copied());
    let lit = mirrorsite::select::penalty::inverse_transpose_lower(&l);
    let lit = &lit;
    let m = lit.nrows();
    write_f64(
        &dir.join("T.bin"),
        (0..m).flat_map(|j| (0..m).map(move |i| lit[(i, j)])),
    );
    let header = serde_json::json!({
        "n": design.n_rows(), "q": q, "n_sites": K, "group_size": design.group_size(),
        "objective": "(1/2n)||y~ - X~ theta||^2 + lambda * sum_k ||theta_k||, baseline profiled on the rows fitted, X~_k = X_k L^-T",
        "lambdas": grid,
        "lambda_a": 0.1 * lmax,
        "folds": folds.iter().map(|f| serde_json::json!({
            "held": [f.held.start, f.held.end], "excluded": [f.excluded().start, f.excluded().end]
        })).collect::<Vec<_>>(),
        "ours": {
            "a": fit_a[0].objective,
            "b": path.iter().map(|f| f.objective).collect::<Vec<_>>(),
            "c": cv.fold_fits.iter().map(|ff| ff.iter().map(|f| f.objective).collect::<Vec<_>>()).collect::<Vec<_>>(),
            "active_b": path.iter().map(|f| f.active.clone()).collect::<Vec<_>>(),
        },
        "times": {"gram": t_gram_floor, "a": t_a, "b": t_b, "c": t_c},
    });
    std::fs::write(
        dir.join("problem.json"),
        serde_json::to_string(&header).expect("json"),
    )
    .expect("write header");
    println!("wrote {}", dir.join("problem.json").display());
}
