//! The simulator: known truth that the raw data actually carry.

use crate::common;

use common::*;
use mirrorsite::session;
use mirrorsite::simulate::{self, Role, Scenario, Truth};

/// Rectified raw EMG averaged over 100 ms windows, one value per 10 ms (100 Hz).
fn envelope(raw: &[f64], fs: f64) -> Vec<f64> {
    let hop = (fs / 100.0) as usize;
    let half = (0.05 * fs) as usize;
    let mut prefix = vec![0.0; raw.len() + 1];
    for (i, v) in raw.iter().enumerate() {
        prefix[i + 1] = prefix[i] + v.abs();
    }
    (0..raw.len() / hop)
        .map(|j| {
            let c = j * hop;
            let (a, b) = (c.saturating_sub(half), (c + half).min(raw.len()));
            (prefix[b] - prefix[a]) / (b - a) as f64
        })
        .collect()
}

fn pearson(x: &[f64], y: &[f64]) -> f64 {
    let n = x.len().min(y.len());
    let (mx, my) = (
        x[..n].iter().sum::<f64>() / n as f64,
        y[..n].iter().sum::<f64>() / n as f64,
    );
    let (mut sxy, mut sxx, mut syy) = (0.0, 0.0, 0.0);
    for i in 0..n {
        let (a, b) = (x[i] - mx, y[i] - my);
        sxy += a * b;
        sxx += a * a;
        syy += b * b;
    }
    sxy / (sxx * syy).sqrt()
}

fn small() -> (Scenario, simulate::Simulated) {
    let sc = Scenario::from_file(&fixture("small-scenario.toml")).unwrap();
    let sim = simulate::simulate(&sc).unwrap();
    (sc, sim)
}

#[test]
fn informative_site_envelope_follows_intended_speed() {
    let (sc, sim) = small();
    let s = session::read(base_session()).unwrap();
    let fs = s.emg.rate_hz;
    // intended flexion speed of the fingers, led by the EMD, at 100 Hz
    let q = &sim.movement.q[0];
    let v = simulate::movement::derivative(q, fs);
    let lead = (sc.emg.emd_s * fs) as usize;
    let speed: Vec<f64> = (0..q.len() / 10)
        .map(|j| v[(j * 10 + lead).min(q.len() - 1)].max(0.0))
        .collect();
    let truth = Truth::from_file(&simulate::default_truth_path(base_session())).unwrap();
    let best = &truth.informative_for("fingers", "positive")[0];
    let irrelevant = &truth.sites_with(Role::Irrelevant)[0];
    let k_best = s.emg.channel(best).unwrap();
    let k_irr = s.emg.channel(irrelevant).unwrap();
    let r_best = pearson(
        &envelope(s.emg.data.row(k_best).as_slice().unwrap(), fs),
        &speed,
    );
    let r_irr = pearson(
        &envelope(s.emg.data.row(k_irr).as_slice().unwrap(), fs),
        &speed,
    );
    eprintln!("r({best}) = {r_best:.3}, r({irrelevant}) = {r_irr:.3}");
    // measured: r = 0.90 for the informative site, 0.15 for the irrelevant one
    assert!(r_best > 0.75, "informative site {best}: r = {r_best}");
    assert!(
        r_irr.abs() < 0.25,
        "irrelevant site {irrelevant}: r = {r_irr}"
    );
}

#[test]
fn passive_return_carries_no_muscle_activity() {
    let (sc, sim) = small();
    let fs = sc.emg.rate_hz;
    let truth = &sim.truth;
    let best = &truth.informative_for("fingers", "positive")[0];
    let k = sim.sites.iter().position(|p| p.id == *best).unwrap();
    let env = envelope(&sim.emg[k], fs);
    let b = truth
        .blocks
        .iter()
        .find(|b| b.task == "hold-release")
        .unwrap();
    let bs = &sc.block[2];
    let mean = |a: f64, z: f64| {
        let (i, j) = ((a * 100.0) as usize, (z * 100.0) as usize);
        env[i..j].iter().sum::<f64>() / (j - i) as f64
    };
    let t_move = b.start_s + 0.2;
    let active = mean(t_move, b.start_s + bs.move_s + bs.hold_s);
    // relaxation: from 0.3 s after release (past the EMD and smoothing) to its end
    let relax = mean(b.start_s + bs.move_s + bs.hold_s + 0.3, b.end_s);
    let rest0 = &truth.blocks[0];
    let rest = mean(rest0.start_s + 0.5, rest0.end_s - 0.5);
    eprintln!("active {active:.4} relax {relax:.4} rest {rest:.4}");
    assert!(
        relax < 1.3 * rest,
        "relaxation should look like rest: {relax} vs {rest}"
    );
    assert!(
        active > 4.0 * relax,
        "holding must be active: {active} vs {relax}"
    );
}

#[test]
fn mirroring_map_is_monotone_and_matches_the_glove() {
    let (sc, sim) = small();
    let map = &sim.truth.map;
    let slopes: Vec<f64> = map
        .intact_time_s
        .windows(2)
        .map(|w| (w[1] - w[0]) * map.rate_hz)
        .collect();
    let (lo, hi) = slopes
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), s| {
            (a.min(*s), b.max(*s))
        });
    assert!(lo > 0.5 && hi < 1.5, "map slope range {lo}..{hi}");
    // The glove at the mapped time shows the intended posture (up to glove noise).
    let s = session::read(base_session()).unwrap();
    let fs = sc.emg.rate_hz;
    let glove_t = &s.intact.time_s;
    let mut errs = Vec::new();
    for (i, &tau) in map.intact_time_s.iter().enumerate().step_by(7) {
        if tau <= glove_t[0] || tau >= *glove_t.last().unwrap() {
            continue;
        }
        let j = glove_t.partition_point(|t| *t < tau);
        let f = (tau - glove_t[j - 1]) / (glove_t[j] - glove_t[j - 1]);
        let shown = s.intact.data[[0, j - 1]] * (1.0 - f) + s.intact.data[[0, j]] * f;
        let intended = sim.movement.q[0][((i as f64 / map.rate_hz) * fs) as usize];
        errs.push((shown - intended).abs());
    }
    errs.sort_by(f64::total_cmp);
    let median = errs[errs.len() / 2];
    eprintln!(
        "median |glove - intended| = {median:.3} deg over {} points",
        errs.len()
    );
    // glove noise σ = 0.4 deg gives a median |error| of 0.27 deg; allow for interpolation
    assert!(median < 0.45, "median error {median}");
    // and a wrong map (shifted by 100 ms) would be clearly worse
    let mut wrong = Vec::new();
    for (i, &tau) in map.intact_time_s.iter().enumerate().step_by(7) {
        let tau = tau + 0.1;
        if tau <= glove_t[0] || tau >= *glove_t.last().unwrap() {
            continue;
        }
        let j = glove_t.partition_point(|t| *t < tau);
        let shown = s.intact.data[[0, j]];
        let intended = sim.movement.q[0][((i as f64 / map.rate_hz) * fs) as usize];
        wrong.push((shown - intended).abs());
    }
    let wrong_mean = wrong.iter().sum::<f64>() / wrong.len() as f64;
    let right_mean = errs.iter().sum::<f64>() / errs.len() as f64;
    assert!(
        wrong_mean > 3.0 * right_mean,
        "{wrong_mean} vs {right_mean}"
    );
}

#[test]
fn faulty_and_irrelevant_sites_are_marked() {
    let (_sc, sim) = small();
    let t = &sim.truth;
    assert_eq!(t.sites_with(Role::Faulty), vec!["S4"]);
    let s4 = sim.sites.iter().position(|p| p.id == "S4").unwrap();
    let rms = (sim.emg[s4].iter().map(|v| v * v).sum::<f64>() / sim.emg[s4].len() as f64).sqrt();
    assert!(rms < 1e-3, "flat site RMS {rms} mV");
    for d in &t.informative {
        assert!(!d.sites.contains(&"S4".to_string()));
        assert!(
            !d.sites.is_empty(),
            "{} {} has informative sites",
            d.dof,
            d.direction
        );
    }
    // S7 (270°, ulnar side) is far from every muscle of the scenario
    assert!(t.sites_with(Role::Irrelevant).contains(&"S7".to_string()));
    // the flexor at 200° serves both DoFs: a site next to it is informative for both
    let f = t.informative_for("fingers", "positive");
    let w = t.informative_for("wrist", "positive");
    assert!(f.iter().any(|s| w.contains(s)), "{f:?} {w:?}");
}

#[test]
fn same_scenario_and_seed_give_the_same_bytes() {
    let sc = Scenario::from_file(&fixture("small-scenario.toml")).unwrap();
    let tmp = tempfile::tempdir().unwrap();
    let (a, b) = (tmp.path().join("a"), tmp.path().join("b"));
    simulate::write_session(&sc, &a, None, false).unwrap();
    simulate::write_session(&sc, &b, None, false).unwrap();
    assert_eq!(hash_dir(&a), hash_dir(&b));
    let ta = std::fs::read(simulate::default_truth_path(&a)).unwrap();
    let tb = std::fs::read(simulate::default_truth_path(&b)).unwrap();
    assert_eq!(ta, tb);
    // an existing output is never replaced unless asked
    assert!(simulate::write_session(&sc, &a, None, false).is_err());
    // a different seed gives different data
    let mut sc2 = sc.clone();
    sc2.seed += 1;
    let c = tmp.path().join("c");
    simulate::write_session(&sc2, &c, None, false).unwrap();
    assert_ne!(hash_dir(&a)["emg.csv"], hash_dir(&c)["emg.csv"]);
}

#[test]
fn scenario_errors_name_the_line() {
    let text = std::fs::read_to_string(fixture("small-scenario.toml")).unwrap();
    let bad = text.replace("[intact]\n", "[intact]\nrate = 100.0\n");
    let line = bad.lines().position(|l| l.starts_with("rate = ")).unwrap() + 1;
    let e = Scenario::from_toml(std::path::Path::new("x.toml"), &bad).unwrap_err();
    assert_eq!(e.line, Some(line), "{e}");
    assert!(e.message.contains("rate"), "{e}");
    let bad = text.replace("site = \"S4\"", "site = \"Q4\"");
    let e = Scenario::from_toml(std::path::Path::new("x.toml"), &bad).unwrap_err();
    assert_eq!(e.field.as_deref(), Some("fault.site"));
}

#[test]
fn direction_term_lengthens_the_lag_while_flexing() {
    // scenario with lag.direction_s = 0.05: the lag is 0.1 s longer while
    // the intended movement flexes than while it extends
    let sc = Scenario::from_file(std::path::Path::new(
        "tests/fixtures/align/scenario-direction.toml",
    ))
    .unwrap();
    let sim = simulate::simulate(&sc).unwrap();
    let fs = sc.emg.rate_hz;
    let speeds: Vec<Vec<f64>> = sim
        .movement
        .q
        .iter()
        .zip(&sc.dof)
        .map(|(q, d)| {
            let range = d.range_deg[1] - d.range_deg[0];
            simulate::movement::derivative(q, fs)
                .iter()
                .map(|v| v / range)
                .collect()
        })
        .collect();
    let (mut flex, mut ext) = (Vec::new(), Vec::new());
    for i in 0..speeds[0].len() {
        let t = i as f64 / fs;
        let lag = sim.truth.map.at(t) - t - sc.intact.offset_s;
        // clearly moving one way (0.3 ranges/s) and no DoF the other way
        let up = speeds.iter().any(|v| v[i] > 0.3) && speeds.iter().all(|v| v[i] > -0.05);
        let down = speeds.iter().any(|v| v[i] < -0.3) && speeds.iter().all(|v| v[i] < 0.05);
        if up {
            flex.push(lag);
        } else if down {
            ext.push(lag);
        }
    }
    let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
    let diff = mean(&flex) - mean(&ext);
    eprintln!(
        "lag flexing {:.3} s ({} samples), extending {:.3} s ({}), difference {diff:.3} s",
        mean(&flex),
        flex.len(),
        mean(&ext),
        ext.len()
    );
    // 2 × 0.05 s, less what the 0.4 s smoothing of the direction takes off
    // near reversals; wobble, drift and jitter average out over the cycles
    assert!(flex.len() > 1000 && ext.len() > 1000);
    assert!((0.07..=0.11).contains(&diff), "difference {diff}");
}
