//! Accuracy of the alignment on simulated sessions with a known mirroring map.
//!
//! Requirement: over all rows of non-rest blocks (holds included), the median
//! of |intact_time_s − true intact time| is at most 15 ms and the 90th
//! percentile at most 35 ms, in each scenario (drifting lag; lag varying
//! within cycles; a clock offset with the intact hand leading, other EMG and
//! glove rates). A block that was not mirrored must be marked failed.

mod align_support;

use align_support::*;
use mirrorsite::align::{align, AlignConfig, Verdict};
use std::path::Path;

fn run(name: &str) -> (f64, f64, Vec<(String, Verdict, String)>) {
    let dir = tempfile::tempdir().unwrap();
    let (s, truth) = simulate(
        &Path::new("tests/fixtures/align").join(format!("scenario-{name}.toml")),
        dir.path(),
    );
    let env = rms_envelopes(&s, 100.0);
    let blocks = s.events.clone().unwrap();
    let al = align(&s, &env, &blocks, &AlignConfig::default()).unwrap();
    let e = errors(&al, &truth);
    assert!(e.len() > 1000, "{name}: only {} rows scored", e.len());
    let (med, p90) = (quantile(&e, 0.5), quantile(&e, 0.9));
    let verdicts = al
        .blocks
        .iter()
        .map(|b| {
            let f = b.figures.as_ref().map_or(String::new(), |f| {
                format!(
                    "lag {:.3} iqr {:.3} corr {:.2}->{:.2} null {:.2} limit {:.2}",
                    f.lag_median_s, f.lag_iqr_s, f.corr_before, f.corr_after, f.corr_null, f.share_at_limit
                )
            });
            (b.block.task.clone(), b.quality, f)
        })
        .collect();
    eprintln!("{name}: median {:.1} ms, p90 {:.1} ms over {} rows", med * 1e3, p90 * 1e3, e.len());
    (med, p90, verdicts)
}

fn check(name: &str) {
    let (med, p90, v) = run(name);
    for (task, q, f) in &v {
        eprintln!("  {task:<18} {:<9} {f}", q.as_str());
    }
    for (task, q, _) in &v {
        if task.contains("unmirrored") {
            assert_eq!(*q, Verdict::Failed, "{name}: the unmirrored block must fail");
        } else if task != "rest" {
            assert_ne!(*q, Verdict::Failed, "{name}: mirrored block `{task}` failed");
        }
    }
    assert!(med <= 0.015, "{name}: median error {:.1} ms", med * 1e3);
    assert!(p90 <= 0.035, "{name}: 90th percentile {:.1} ms", p90 * 1e3);
}

#[test]
fn drifting_lag() {
    check("drift");
}

#[test]
fn lag_varying_within_cycles() {
    check("cycle");
}

#[test]
fn clock_offset_leading_intact_hand_and_an_unmirrored_block() {
    check("offset");
}
