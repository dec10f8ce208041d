//! The whole job (`run`) on simulated 16-site sessions of 3, 10 and 30
//! minutes: wall time and peak memory, to show how cost grows with session
//! length.
//!
//! Run with `cargo bench --bench run_scaling` (or `-- --minutes 3,10` for a
//! subset). Each session is the demo scenario (16 sites on two rings, two
//! DoFs, 2 kHz EMG) with its blocks repeated to the target length, written
//! as plain CSV into a temporary folder. Each run goes into a fresh child
//! process, so its peak resident memory (VmHWM) is that run's alone; the
//! child calls `pipeline::run_session`, exactly what `mirrorsite run` does.

use mirrorsite::config::Config;
use mirrorsite::pipeline::{run_session, RunOptions};
use mirrorsite::simulate::{write_session, Pattern, Scenario};
use std::path::Path;
use std::process::Command;
use std::time::Instant;

fn peak_rss_mb() -> f64 {
    let status = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    status
        .lines()
        .find(|l| l.starts_with("VmHWM:"))
        .and_then(|l| l.split_whitespace().nth(1))
        .and_then(|kb| kb.parse::<f64>().ok())
        .map_or(f64::NAN, |kb| kb / 1024.0)
}

/// The demo scenario with its blocks repeated to `secs` seconds (the last
/// block cut to a rest that fills the remainder).
fn scenario(root: &Path, secs: f64) -> Scenario {
    let mut sc = Scenario::from_file(&root.join("demo-data/demo-scenario.toml")).unwrap();
    sc.gzip = false;
    sc.emg.units = mirrorsite::session::EmgUnits::Millivolt;
    let one = sc.block.clone();
    while sc.total_duration() < secs {
        sc.block.extend(one.iter().cloned());
    }
    while sc.total_duration() > secs + 1e-9 {
        let last = sc.block.pop().unwrap();
        if sc.total_duration() < secs {
            let mut b = last.clone();
            b.pattern = Pattern::Rest;
            b.dofs.clear();
            b.duration_s = Some(secs - sc.total_duration());
            sc.block.push(b);
            break;
        }
    }
    sc
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if let Some(pos) = args.iter().position(|a| a == "--run-child") {
        let (dir, out) = (Path::new(&args[pos + 1]), Path::new(&args[pos + 2]));
        let t = Instant::now();
        let s =
            run_session(dir, out, &Config::default(), RunOptions::default(), &|_| {}).expect("run");
        let secs = t.elapsed().as_secs_f64();
        println!(
            "{secs:.2} {:.1} {}",
            peak_rss_mb(),
            s.report.plan.sites.len()
        );
        return;
    }
    if args.iter().any(|a| a == "--list") {
        return;
    }
    let minutes: Vec<f64> = args
        .iter()
        .position(|a| a == "--minutes")
        .and_then(|p| args.get(p + 1))
        .map_or_else(
            || vec![3.0, 10.0, 30.0],
            |s| s.split(',').filter_map(|x| x.parse().ok()).collect(),
        );
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let exe = std::env::current_exe().unwrap();
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    println!("run on simulated 16-site sessions ({cores} cores)");
    println!(
        "{:>8} {:>9} {:>10} {:>12} {:>10} {:>13}",
        "minutes", "sim s", "run s", "s per min", "peak MB", "MB per min"
    );
    let mut rows = Vec::new();
    for m in minutes {
        let tmp = tempfile::tempdir().unwrap();
        let dir = tmp.path().join("session");
        let sc = scenario(root, 60.0 * m);
        let t = Instant::now();
        write_session(&sc, &dir, None, false).unwrap();
        let sim = t.elapsed().as_secs_f64();
        let out = Command::new(&exe)
            .arg("--run-child")
            .arg(&dir)
            .arg(tmp.path().join("out"))
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        let line = String::from_utf8_lossy(&out.stdout).trim().to_string();
        let f: Vec<f64> = line
            .split_whitespace()
            .map(|x| x.parse().unwrap())
            .collect();
        let (secs, mb) = (f[0], f[1]);
        println!(
            "{:>8.0} {:>9.1} {:>10.1} {:>12.2} {:>10.0} {:>13.1}",
            sc.total_duration() / 60.0,
            sim,
            secs,
            secs / m,
            mb,
            mb / m
        );
        rows.push((m, secs, mb));
    }
    if rows.len() >= 2 {
        let (a, b) = (rows[0], rows[rows.len() - 1]);
        println!(
            "from {:.0} to {:.0} min ({:.1}x longer): time x{:.2}, peak memory x{:.2}; \
             marginal cost {:.2} s and {:.1} MB per extra minute",
            a.0,
            b.0,
            b.0 / a.0,
            b.1 / a.1,
            b.2 / a.2,
            (b.1 - a.1) / (b.0 - a.0),
            (b.2 - a.2) / (b.0 - a.0)
        );
    }
}
