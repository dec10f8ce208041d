//! Reading a 10-minute, 16-site, 2 kHz session: wall time and peak memory.
//!
//! Run with `cargo bench --bench read`. The session is simulated once into a
//! temporary folder (the demo scenario, blocks repeated to 600 s, plain CSV);
//! each timed read runs in a fresh child process so that its peak resident
//! memory (VmHWM) is the reader's alone.

use mirrorsite::simulate::{write_session, Scenario};
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

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if let Some(pos) = args.iter().position(|a| a == "--read-child") {
        let dir = Path::new(&args[pos + 1]);
        let t = Instant::now();
        let s = mirrorsite::session::read(dir).expect("valid session");
        let secs = t.elapsed().as_secs_f64();
        println!(
            "{secs:.3} {:.1} {} {}",
            peak_rss_mb(),
            s.emg.len(),
            s.emg.channels.len()
        );
        return;
    }
    if args.iter().any(|a| a == "--list") {
        return;
    }
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut sc = Scenario::from_file(&root.join("demo-data/demo-scenario.toml")).unwrap();
    sc.gzip = false;
    sc.emg.units = mirrorsite::session::EmgUnits::Millivolt;
    let one = sc.block.clone();
    while sc.total_duration() < 600.0 {
        sc.block.extend(one.iter().cloned());
    }
    while sc.total_duration() > 600.0 + 1e-9 {
        let last = sc.block.pop().unwrap();
        if sc.total_duration() < 600.0 {
            let mut b = last.clone();
            b.pattern = mirrorsite::simulate::Pattern::Rest;
            b.dofs.clear();
            b.duration_s = Some(600.0 - sc.total_duration());
            sc.block.push(b);
            break;
        }
    }
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("long");
    let t = Instant::now();
    write_session(&sc, &dir, None, false).unwrap();
    let size: u64 = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().metadata().unwrap().len())
        .sum();
    eprintln!(
        "simulated {:.0} s session ({:.0} MB on disk) in {:.1} s",
        sc.total_duration(),
        size as f64 / 1e6,
        t.elapsed().as_secs_f64()
    );
    let exe = std::env::current_exe().unwrap();
    let mut times = Vec::new();
    for _ in 0..3 {
        let out = Command::new(&exe)
            .arg("--read-child")
            .arg(&dir)
            .output()
            .unwrap();
        let line = String::from_utf8_lossy(&out.stdout).trim().to_string();
        let f: Vec<&str> = line.split_whitespace().collect();
        println!(
            "read: {} s, peak memory {} MB ({} samples x {} sites)",
            f[0], f[1], f[2], f[3]
        );
        times.push(f[0].parse::<f64>().unwrap());
    }
    times.sort_by(f64::total_cmp);
    println!("read median {:.3} s", times[1]);
}
