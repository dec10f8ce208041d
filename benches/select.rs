//! The whole selection of one DoF of a 3-minute session: stages, the 3 × 3
//! smoothing grid with 50-λ paths, 5 block folds and 20 bootstrap resamples
//! (the defaults), on the shipped demo session (169 s, 16 sites).
//!
//! Run with `cargo bench --bench select`. Conditioning and alignment run
//! first, untimed; then each DoF's selection is timed three times.

use mirrorsite::align::{self, Envelopes};
use mirrorsite::config::Config;
use mirrorsite::pipeline::dof_data;
use mirrorsite::select::select_dof;
use mirrorsite::signal::{self, Verdict};
use std::path::Path;
use std::time::Instant;

fn main() {
    if std::env::args().any(|a| a == "--list") {
        return;
    }
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let s = mirrorsite::session::read(&root.join("demo-data/session")).expect("demo session");
    let cfg = Config::default();
    let (blocks, _) = mirrorsite::protocol::session_blocks(&s).unwrap();
    let cond = signal::condition(&s.emg, s.sites(), &blocks, &cfg.signal).unwrap();
    let al = align::align(&s, &Envelopes::from(&cond), &blocks, &cfg.align).unwrap();
    println!(
        "session {:.0} s, {} sites, threads {}",
        s.duration_s(),
        s.sites().len(),
        rayon::current_num_threads()
    );
    for d in 0..s.manifest.dofs.len() {
        let data = dof_data(&s, &al, &cond, d);
        let suspect: Vec<bool> = cond
            .quality
            .iter()
            .map(|q| q.verdict == Verdict::Suspect)
            .collect();
        let mut times = Vec::new();
        let mut picks = Vec::new();
        for _ in 0..3 {
            let t = Instant::now();
            let sel = select_dof(&data, &cfg.select, &suspect, &|_| {}).unwrap();
            times.push(t.elapsed().as_secs_f64());
            picks = sel.result.selected.clone();
        }
        times.sort_by(f64::total_cmp);
        println!(
            "select {}: median {:.2} s (min {:.2}, max {:.2}); selected {:?}",
            data.dof, times[1], times[0], times[2], picks
        );
    }
}
