//! Selection and plan on simulated sessions from three scenarios (different
//! layouts, lags, noise and faults), through the whole pipeline (conditioning,
//! alignment, selection, plan), checked against the simulator's truth.
//!
//! Prints the table of true and false positives per stage.

use mirrorsite::config::Config;
use mirrorsite::pipeline::{analyse, build_report, DofOutcome};
use mirrorsite::simulate::{self, Role, Scenario, Truth};
use std::path::PathBuf;

fn fixture(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures/select")
        .join(name)
}

struct Outcome {
    stage_tp_fp: Vec<Vec<(usize, usize)>>,
    final_fp: Vec<usize>,
}

fn check_scenario(name: &str) -> Outcome {
    let sc = Scenario::from_file(&fixture(name)).unwrap();
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("s");
    simulate::write_session(&sc, &dir, None, false).unwrap();
    let truth = Truth::from_file(&simulate::default_truth_path(&dir)).unwrap();
    let session = mirrorsite::session::read(&dir).unwrap();
    let cfg = Config::default();
    let a = analyse(session, &cfg, &|_| {}).unwrap();
    let faulty = truth.sites_with(Role::Faulty);
    let mut out = Outcome {
        stage_tp_fp: Vec::new(),
        final_fp: Vec::new(),
    };
    for d in &a.dofs {
        let DofOutcome::Selected(sel) = d else {
            panic!("{name}: a DoF could not be fitted")
        };
        let r = &sel.result;
        let pos = truth.informative_for(&r.dof, "positive");
        let neg = truth.informative_for(&r.dof, "negative");
        let informative = |s: &String| pos.contains(s) || neg.contains(s);
        let per_stage: Vec<(usize, usize)> = r
            .stages
            .iter()
            .map(|st| {
                let tp = st.sites.iter().filter(|s| informative(s)).count();
                (tp, st.sites.len() - tp)
            })
            .collect();
        eprintln!(
            "{name} {}: stages {:?} (TP, FP); final {:?}; truth +{pos:?} -{neg:?}; CV R² {:.3} vs linear {:.3}, position {:.3}",
            r.dof,
            per_stage,
            r.selected,
            r.cv.r2,
            r.baselines[0].cv.r2,
            r.baselines[2].cv.r2
        );
        assert!(
            r.selected.iter().any(|s| pos.contains(s)),
            "{name} {}: no informative site for the positive direction among {:?}",
            r.dof,
            r.selected
        );
        assert!(
            r.selected.iter().any(|s| neg.contains(s)),
            "{name} {}: no informative site for the negative direction among {:?}",
            r.dof,
            r.selected
        );
        for f in &faulty {
            assert!(!r.selected.contains(f), "{name}: faulty site {f} selected");
        }
        out.final_fp
            .push(r.selected.iter().filter(|s| !informative(s)).count());
        out.stage_tp_fp.push(per_stage);
    }
    // The plan covers every DoF direction within the budget.
    let (plan, plan_flags) = a.plan(&cfg).unwrap();
    assert!(plan.sites.len() <= cfg.plan.budget);
    let planned: Vec<String> = plan.sites.iter().map(|p| p.site.clone()).collect();
    for dt in &truth.informative {
        assert!(
            dt.sites.iter().any(|s| planned.contains(s)),
            "{name}: plan {planned:?} misses {} {}",
            dt.dof,
            dt.direction
        );
    }
    // The sheet names the planned sites and carries every flag.
    let rep = build_report(&a, &cfg, plan, plan_flags);
    let html = mirrorsite::report::sheet_html(&rep).unwrap();
    for p in &planned {
        assert!(html.contains(p), "{name}: sheet lacks planned site {p}");
    }
    for f in &rep.flags {
        let words = f.why.split(':').next().unwrap();
        assert!(html.contains(words), "{name}: sheet lacks flag {}", f.why);
    }
    for f in &faulty {
        assert!(
            rep.flags.iter().any(|x| x.at == *f),
            "{name}: faulty site {f} is not flagged"
        );
    }
    out
}

#[test]
fn three_scenarios_against_truth() {
    let mut fp_total = 0;
    let mut n_dofs = 0;
    for name in ["scenario-a.toml", "scenario-b.toml", "scenario-c.toml"] {
        let o = check_scenario(name);
        for (stages, fp) in o.stage_tp_fp.iter().zip(&o.final_fp) {
            // the stages cut false positives, never add them
            let first = stages.first().unwrap().1;
            assert!(*fp <= first, "{name}: final FP {fp} > stage-1 FP {first}");
            for w in stages.windows(2) {
                assert!(
                    w[1].1 <= w[0].1,
                    "{name}: FP rose between stages {stages:?}"
                );
            }
        }
        fp_total += o.final_fp.iter().sum::<usize>();
        n_dofs += o.final_fp.len();
    }
    let mean_fp = fp_total as f64 / n_dofs as f64;
    eprintln!("mean false positives per DoF: {mean_fp:.2}");
    assert!(mean_fp <= 1.0, "mean FP per DoF {mean_fp}");
}
