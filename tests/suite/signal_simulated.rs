//! Channel quality on simulated sessions (the simulator's truth names the
//! faulty and the informative sites): every simulated fault is flagged on
//! its site, no informative site is marked bad, and a clean session has no
//! bad site.

use mirrorsite::session::{Block, Recording};
use mirrorsite::signal::{condition, Conditioned, SignalConfig, Verdict};
use mirrorsite::simulate::{simulate, Role, Scenario, Simulated};
use ndarray::Array2;
use std::path::Path;

fn scenario(fault: Option<&str>) -> Scenario {
    let path = Path::new(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/demo-data/demo-scenario.toml"
    ));
    let text = std::fs::read_to_string(path).unwrap();
    let text = match fault {
        Some(kind) => text.replace("kind = \"hum\"", &format!("kind = \"{kind}\"")),
        None => {
            let start = text.find("[fault]").unwrap();
            let end = start + text[start..].find("[[block]]").unwrap();
            format!("{}{}", &text[..start], &text[end..])
        }
    };
    // The blocks up to the second paced block (66 s) keep the tests quick.
    let cut = text.find("[[block]]\npattern = \"hold-release\"").unwrap();
    Scenario::from_toml(path, &text[..cut]).unwrap()
}

fn recording(sim: &Simulated, fs: f64) -> (Recording, Vec<Block>) {
    let n = sim.emg[0].len();
    let mut data = Array2::zeros((sim.emg.len(), n));
    for (k, row) in sim.emg.iter().enumerate() {
        data.row_mut(k)
            .assign(&ndarray::ArrayView1::from(row.as_slice()));
    }
    let rec = Recording {
        file: "emg.csv".into(),
        time_s: (0..n).map(|i| i as f64 / fs).collect(),
        rate_hz: fs,
        channels: sim.sites.iter().map(|s| s.id.clone()).collect(),
        data,
    };
    let blocks = sim
        .movement
        .blocks
        .iter()
        .map(|b| Block {
            start_s: b.start_s,
            end_s: b.end_s,
            task: b.spec.task_label(),
            dof: (b.spec.dofs.len() == 1).then(|| b.spec.dofs[0].clone()),
            words: None,
        })
        .collect();
    (rec, blocks)
}

fn run(fault: Option<&str>) -> (Simulated, Conditioned) {
    let sc = scenario(fault);
    let sim = simulate(&sc).unwrap();
    let (rec, blocks) = recording(&sim, sc.emg.rate_hz);
    let out = condition(&rec, &[], &blocks, &SignalConfig::default()).unwrap();
    for (q, t) in out.quality.iter().zip(&sim.truth.sites) {
        eprintln!(
            "{:>4} {:?} {:>7} rms {:.4} mV hum {:.3}/{:.3} act {:.2} clip {:.4} motion {:.3} {:?}",
            q.site,
            t.role,
            q.verdict.as_str(),
            q.figures.rms_mv,
            q.figures.hum_fraction.unwrap_or(f64::NAN),
            q.figures.residual_hum_fraction.unwrap_or(f64::NAN),
            q.figures.activity_ratio.unwrap_or(f64::NAN),
            q.figures.clipped_fraction,
            q.figures.motion_fraction.unwrap_or(f64::NAN),
            q.reasons
                .iter()
                .map(|r| r.code.as_str())
                .collect::<Vec<_>>()
        );
    }
    (sim, out)
}

fn check(fault: &str, expected_code: &str) {
    let (sim, out) = run(Some(fault));
    assert_eq!(out.mains_hz, Some(50.0), "the simulator's mains is 50 Hz");
    for (q, t) in out.quality.iter().zip(&sim.truth.sites) {
        assert_eq!(q.site, t.site);
        if t.role == Role::Faulty {
            assert_ne!(
                q.verdict,
                Verdict::Ok,
                "{fault} fault on {} not flagged",
                q.site
            );
            assert!(
                q.reasons.iter().any(|r| r.code == expected_code),
                "{fault} fault on {}: reasons {:?}",
                q.site,
                q.reasons
            );
        } else {
            assert!(
                q.reasons.iter().all(|r| r.code != expected_code),
                "{} wrongly flagged {expected_code}",
                q.site
            );
        }
        if t.role == Role::Informative {
            assert_ne!(
                q.verdict,
                Verdict::Bad,
                "informative {} marked bad: {:?}",
                q.site,
                q.reasons
            );
        }
    }
}

#[test]
fn simulated_hum_fault_is_flagged() {
    check("hum", "mains");
}

#[test]
fn simulated_flat_fault_is_flagged() {
    check("flat", "flat");
}

#[test]
fn simulated_clipped_fault_is_flagged() {
    check("clipped", "clipped");
}

#[test]
fn clean_simulated_session_has_no_bad_site() {
    let (sim, out) = run(None);
    assert_eq!(out.mains_hz, Some(50.0));
    for q in &out.quality {
        assert_ne!(q.verdict, Verdict::Bad, "{}: {:?}", q.site, q.reasons);
    }
    // Informative sites carry activity well above rest.
    for (q, t) in out.quality.iter().zip(&sim.truth.sites) {
        if t.role == Role::Informative {
            assert_eq!(q.verdict, Verdict::Ok, "{}: {:?}", q.site, q.reasons);
        }
    }
    assert_eq!(out.envelopes.nrows(), 16);
    assert_eq!(out.time_s.len(), out.envelopes.ncols());
}
