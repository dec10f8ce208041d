//! Selection on simulated sessions with perfect alignment (the simulator's
//! intended movement), against the simulator's truth.

use mirrorsite::select::{select_dof, DofData, SelectConfig};
use mirrorsite::simulate::{self, Role, Scenario, Simulated};
use std::path::PathBuf;

fn fixture(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures")
        .join(name)
}

/// Rectified raw EMG, 100 ms moving average, sampled at 100 Hz, scaled by its 95th percentile.
fn envelope(raw: &[f64], fs: f64) -> Vec<f64> {
    let hop = (fs / 100.0) as usize;
    let half = (0.05 * fs) as usize;
    let mut prefix = vec![0.0; raw.len() + 1];
    for (i, v) in raw.iter().enumerate() {
        prefix[i + 1] = prefix[i] + v.abs();
    }
    let env: Vec<f64> = (0..raw.len() / hop)
        .map(|j| {
            let c = j * hop;
            let (a, b) = (c.saturating_sub(half), (c + half).min(raw.len()));
            (prefix[b] - prefix[a]) / (b - a) as f64
        })
        .collect();
    let mut s = env.clone();
    s.sort_by(f64::total_cmp);
    let p95 = s[(0.95 * (s.len() - 1) as f64) as usize].max(1e-12);
    env.into_iter().map(|v| v / p95).collect()
}

pub fn perfect_data(sc: &Scenario, sim: &Simulated, dof: usize) -> DofData {
    let fs = sc.emg.rate_hz;
    let hop = (fs / 100.0) as usize;
    let envelopes: Vec<Vec<f64>> = sim.emg.iter().map(|e| envelope(e, fs)).collect();
    let n = envelopes[0].len();
    let d = &sc.dof[dof];
    let (lo, hi) = (d.range_deg[0], d.range_deg[1]);
    let z: Vec<f64> = (0..n)
        .map(|j| ((sim.movement.q[dof][j * hop] - lo) / (hi - lo)).clamp(0.0, 1.0))
        .collect();
    let y: Vec<f64> = (0..n)
        .map(|j| {
            let (a, b) = (j.saturating_sub(1), (j + 1).min(n - 1));
            (z[b] - z[a]) * 100.0 / (b - a) as f64
        })
        .collect();
    let faulty = sim.truth.sites_with(Role::Faulty);
    DofData {
        dof: d.id.clone(),
        positive: d.positive.clone(),
        feature_rate: 100.0,
        sites: sim.sites.iter().map(|s| s.id.clone()).collect(),
        envelopes,
        z,
        y,
        usable: vec![true; n],
        excluded: sim.sites.iter().map(|s| faulty.contains(&s.id)).collect(),
    }
}

#[test]
fn demo_scenario_with_perfect_alignment() {
    let sc = Scenario::from_file(
        &PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-data/demo-scenario.toml"),
    )
    .unwrap();
    let sim = simulate::simulate(&sc).unwrap();
    let cfg = SelectConfig::default();
    for dof in 0..sc.dof.len() {
        let data = perfect_data(&sc, &sim, dof);
        let t = std::time::Instant::now();
        let sel = select_dof(&data, &cfg, &vec![false; data.sites.len()], &|_| {}).unwrap();
        let r = &sel.result;
        eprintln!(
            "{}: {:.1} s selected {:?} cv {:?} baselines {:?}",
            r.dof,
            t.elapsed().as_secs_f64(),
            r.selected,
            r.cv,
            r.baselines
        );
        for st in &r.stages {
            eprintln!(
                "  stage {} {:?} r2 {:.3} phi {} {}",
                st.stage, st.sites, st.cv.r2, st.phi_s, st.phi_z
            );
        }
        for s in r.sites.iter().filter(|s| s.frequency > 0.0) {
            eprintln!(
                "  {} freq {} {} alts {:?}",
                s.site,
                s.frequency,
                s.confidence,
                s.alternates
                    .iter()
                    .map(|a| (&a.site, a.cv.r2))
                    .collect::<Vec<_>>()
            );
        }
        for f in &sel.flags {
            eprintln!("  flag {:?}", f);
        }
        let pos = sim.truth.informative_for(&r.dof, "positive");
        let neg = sim.truth.informative_for(&r.dof, "negative");
        eprintln!("  truth +{:?} -{:?}", pos, neg);
    }
}
