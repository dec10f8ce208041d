//! The alignment outputs: aligned.csv columns and rows, alignment.json, figures.

use crate::align_support;

use align_support::*;
use mirrorsite::align::{align, output, AlignConfig, Verdict};
use std::path::Path;

#[test]
fn writes_aligned_csv_json_and_figures() {
    let dir = tempfile::tempdir().unwrap();
    let (s, _truth) = simulate(
        Path::new("tests/fixtures/align/scenario-offset.toml"),
        dir.path(),
    );
    let env = signal_envelopes(&s);
    let blocks = s.events.clone().unwrap();
    let cfg = AlignConfig::default();
    let al = align(&s, &env, &blocks, &cfg).unwrap();
    let out = dir.path().join("out");
    std::fs::create_dir(&out).unwrap();
    output::write_all(&out, &al, &cfg).unwrap();

    let csv = std::fs::read_to_string(out.join("aligned.csv")).unwrap();
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let mut want = vec!["time_s".to_string(), "intact_time_s".to_string()];
    for d in s.dofs() {
        want.push(format!("{}_pos", d.id));
        want.push(format!("{}_vel", d.id));
    }
    for k in s.sites() {
        want.push(format!("{}_env", k.id));
    }
    assert_eq!(header, want);
    let rows: Vec<Vec<f64>> = lines
        .map(|l| l.split(',').map(|v| v.parse().unwrap()).collect())
        .collect();
    let usable = al.usable.iter().filter(|&&u| u).count();
    assert_eq!(rows.len(), usable);
    assert!(usable < al.len(), "rows of the failed block are left out");
    // EMG times increase; intact times increase with EMG times and sit on intact.csv's clock
    // (offset 1.7 s: intact time ≈ EMG time − 1.7 − 0.08 lag, within the band).
    for w in rows.windows(2) {
        assert!(w[1][0] > w[0][0]);
        if (w[1][0] - w[0][0]) < 0.011 {
            assert!(
                w[1][1] > w[0][1],
                "intact time must increase: {:?} {:?}",
                w[0],
                w[1]
            );
        }
    }
    for r in &rows {
        let lag = r[1] + 1.7 - r[0];
        assert!(lag.abs() <= 0.5 + 1e-9, "lag {lag} outside the band");
    }

    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("alignment.json")).unwrap())
            .unwrap();
    assert_eq!(json["format"], 1);
    let jb = json["blocks"].as_array().unwrap();
    assert_eq!(jb.len(), blocks.len());
    let failed: Vec<&serde_json::Value> = jb.iter().filter(|b| b["quality"] == "failed").collect();
    assert_eq!(failed.len(), 1);
    assert_eq!(failed[0]["task"], "paced-unmirrored");
    assert!(!failed[0]["reasons"].as_array().unwrap().is_empty());
    let paced = jb.iter().find(|b| b["task"] == "paced").unwrap();
    for k in [
        "lag_s",
        "lag_iqr_s",
        "corr_before",
        "corr_after",
        "share_at_limit",
        "direction_own_s",
    ] {
        assert!(paced[k].is_number(), "{k}");
    }
    // The session's pooled direction lag, as `Aligned` holds it (rounded to 1 µs).
    let eta = json["direction_lag_s"].as_f64().unwrap();
    assert!((eta - al.direction_lag_s.unwrap()).abs() < 1e-6);
    assert!(al.blocks.iter().any(|b| b.quality == Verdict::Ok));

    for f in [
        "alignment-before.svg",
        "alignment-after.svg",
        "alignment-lag.svg",
    ] {
        let svg = std::fs::read_to_string(out.join("figures").join(f)).unwrap();
        assert!(
            svg.starts_with("<svg") && svg.contains("polyline") || svg.contains("path"),
            "{f}"
        );
    }
}
