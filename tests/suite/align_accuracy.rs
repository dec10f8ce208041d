//! Accuracy of the alignment on simulated sessions with a known mirroring map
//! (the simulator's truth file), with the conditioning stage's envelopes.
//!
//! Issue target: over all rows of non-rest blocks (holds included), the
//! median of |intact_time_s − true intact time| at most 15 ms and the 90th
//! percentile at most 35 ms, in each of at least three scenarios. Four are
//! here: a drifting lag; a clock offset with the intact hand leading and other
//! EMG and glove rates; a lag that depends on the direction of movement
//! within every cycle (0.1 s longer while flexing than while extending, so
//! it changes at every reversal and is steady through holds; EMG 1000 Hz,
//! glove 90 Hz); and a ±60 ms, 2 s wobble of the lag that runs on regardless
//! of the movement. The first three meet it. The wobble does not, and its
//! full-target test is ignored with its figures pinned instead. Why, as
//! measured:
//!
//! - Holds and passive returns carry no timing at all (both sides are still,
//!   or the EMG is silent), and the wobble goes on through them. Even with
//!   the true lag on every actively moving row and straight lines across the
//!   rest, the 90th percentile over all non-rest rows of this scenario is
//!   34.4 ms: the target leaves no room for any error elsewhere.
//! - The aligner's lag model is a slow base (half-gain period
//!   `refine_period_s`, 8 s, in paced and hold-release blocks; 3 s in free
//!   movement) plus a part that follows the direction of movement (see
//!   `align::refine`). A lag that changes within seconds for no reason the
//!   movement shows is outside that model. With the settings of the earlier
//!   model (`refine_period_s = refine_period_free_s = 1.5`, `refine_rounds =
//!   1`, `refine_weights = false`, `direction_lag = false`) this scenario
//!   reads 23.5 / 71.3 ms, and the direction scenario 35.0 / 66.5 ms.
//!
//! Every scenario also checks that a block that was not mirrored is marked
//! failed and its rows are unusable.

use crate::align_support;

use align_support::*;
use mirrorsite::align::{align, AlignConfig, Aligned, Verdict};
use mirrorsite::session::Session;
use mirrorsite::simulate::Truth;
use std::path::Path;

fn run_seeded(name: &str, seed: Option<u64>) -> (Session, (Aligned, Truth)) {
    run_with(name, seed, &AlignConfig::default())
}

fn run_with(name: &str, seed: Option<u64>, cfg: &AlignConfig) -> (Session, (Aligned, Truth)) {
    let dir = tempfile::tempdir().unwrap();
    let (s, truth) = simulate_seeded(
        &Path::new("tests/fixtures/align").join(format!("scenario-{name}.toml")),
        dir.path(),
        seed,
    );
    let env = signal_envelopes(&s);
    let blocks = s.events.clone().unwrap();
    let al = align(&s, &env, &blocks, cfg).unwrap();
    (s, (al, truth))
}

/// Median and 90th percentile, ms.
type Pair = (f64, f64);

/// (median, p90) in ms over all non-rest mirrored rows, over paced and free
/// blocks only, and over hold-release blocks only.
fn figures(name: &str) -> (Pair, Pair, Pair, Aligned) {
    figures_with(name, &AlignConfig::default())
}

fn figures_with(name: &str, cfg: &AlignConfig) -> (Pair, Pair, Pair, Aligned) {
    let (_, (al, truth)) = run_with(name, None, cfg);
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
    // Measured: all 9.0 / 21.5 ms; paced+free 7.4 / 18.3 ms; hold-release
    // 17.4 / 23.0 ms (the earlier model: 11.8 / 31.7, 9.2 / 23.7 and 23.3 / 35.9 ms).
    assert!(moving.0 <= 9.0 && moving.1 <= 22.0, "{moving:?}");
    assert!(hold.0 <= 21.0 && hold.1 <= 28.0, "{hold:?}");
    direction_lag_near("drift", &al, 0.0, 0.012);
}

#[test]
fn clock_offset_leading_intact_hand_and_an_unmirrored_block() {
    let (all, moving, hold, al) = figures("offset");
    verdicts("offset", &al);
    assert_full_target("offset", all);
    // Measured: all 11.5 / 26.1 ms; paced+free 11.0 / 25.8 ms; hold-release
    // 14.0 / 26.3 ms (the earlier model: 9.4 / 27.8, 8.8 / 24.8 and 14.8 / 52.2 ms;
    // the stiffer base lag of the paced blocks follows the scenario's ±20 ms,
    // 5 s wobble less: 14.8 ms median there).
    assert!(moving.0 <= 13.5 && moving.1 <= 31.0, "{moving:?}");
    assert!(hold.0 <= 17.0 && hold.1 <= 32.0, "{hold:?}");
    direction_lag_near("offset", &al, 0.0, 0.012);
}

#[test]
fn a_block_no_feature_matches_is_failed_not_an_error() {
    // With seed 3 the offset scenario's unmirrored block matches no
    // composite at all (every correlation below the floor): that used to end
    // the whole alignment with an error.
    let (_, (al, _)) = run_seeded("offset", Some(3));
    verdicts("offset seed 3", &al);
    let b = al
        .blocks
        .iter()
        .find(|b| b.block.task.contains("unmirrored"))
        .unwrap();
    assert_eq!(b.quality, Verdict::Failed);
}

#[test]
fn lag_varying_within_cycles() {
    let (all, moving, hold, al) = figures("cycle");
    verdicts("cycle", &al);
    // Measured: all 35.9 / 73.5 ms; paced+free 34.6 / 73.3 ms; hold-release
    // 40.4 / 73.7 ms. The 2 s wobble is outside the lag model (see the module
    // docs); the pooled direction lag takes up a spurious −18 ms of it.
    assert!(moving.0 <= 44.0 && moving.1 <= 88.0, "{moving:?}");
    assert!(all.0 <= 45.0 && all.1 <= 88.0, "{all:?}");
    assert!(hold.0 <= 48.0 && hold.1 <= 88.0, "{hold:?}");
}

#[test]
fn the_earlier_lag_model_remains_available_by_configuration() {
    // A flexible base without a direction part, one round, the weights kept
    // from the DTW map: it follows the 2 s wobble better (measured 23.5 / 71.3 ms
    // on all rows, exactly the figures of the aligner before the direction part).
    let cfg = AlignConfig {
        refine_period_s: 1.5,
        refine_period_free_s: 1.5,
        refine_rounds: 1,
        refine_weights: false,
        direction_lag: false,
        ..AlignConfig::default()
    };
    let (all, _, _, al) = figures_with("cycle", &cfg);
    verdicts("cycle, earlier model", &al);
    assert!(al.direction_lag_s.is_none());
    assert!(all.0 <= 26.0 && all.1 <= 78.0, "{all:?}");
}

#[test]
#[ignore = "not met (35.9 / 73.5 ms): a 2 s wobble of the lag independent of the movement is outside the lag model, and holds carry no timing through it; see the module docs"]
fn full_target_lag_varying_within_cycles() {
    let (all, _, _, _) = figures("cycle");
    assert_full_target("cycle", all);
}

#[test]
fn lag_depending_on_movement_direction() {
    let (all, moving, hold, al) = figures("direction");
    verdicts("direction", &al);
    assert_full_target("direction", all);
    // Measured: all 10.2 / 28.3 ms; paced+free 10.0 / 26.3 ms; hold-release
    // 11.9 / 38.5 ms (the earlier model, whose lag had no direction part:
    // 35.0 / 66.5, 33.0 / 61.5 and 41.7 / 77.7 ms).
    assert!(moving.0 <= 12.0 && moving.1 <= 32.0, "{moving:?}");
    assert!(hold.0 <= 14.5 && hold.1 <= 46.0, "{hold:?}");
    // The simulated direction term is 50 ms; the pooled estimate reads 36 ms.
    direction_lag_near("direction", &al, 0.045, 0.015);
}

/// The session's pooled direction lag lies within `tol` s of `want`.
fn direction_lag_near(name: &str, al: &Aligned, want: f64, tol: f64) {
    let eta = al.direction_lag_s.expect("a direction lag estimate");
    eprintln!("{name}: direction lag {:+.1} ms", eta * 1e3);
    assert!(
        (eta - want).abs() <= tol,
        "{name}: direction lag {eta} s, expected {want} ± {tol} s"
    );
}
