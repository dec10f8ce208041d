//! Writing the alignment: `aligned.csv`, `alignment.json` and figures.
//!
//! # `aligned.csv` (the training-data export)
//!
//! One row per EMG feature-grid sample that may be used for fitting (rows of
//! failed blocks, and rows whose intact time falls outside the intact
//! recording, are left out). Columns, in order:
//!
//! | column | unit | meaning |
//! |--------|------|---------|
//! | `time_s` | s | time on the EMG clock (emg.csv's `time_s`) |
//! | `intact_time_s` | s | time on intact.csv's own clock at which the intact hand showed the posture the missing hand was commanded to at `time_s` (the intended posture, which follows the driving EMG by the electro-mechanical delay) |
//! | `<dof>_pos` | degrees | intact angle at `intact_time_s` (anatomical sign, flexion positive), smoothed by the local linear fit of [`super::kinematics`] |
//! | `<dof>_vel` | deg/s | rate of that angle on the EMG clock: dθ/dτ at `intact_time_s` times the local slope of the warp map |
//! | `<site>_env` | envelope units | the site's envelope at `time_s`, not shifted |
//!
//! `_pos` and `_vel` come in pairs per DoF in manifest order, then the sites in
//! manifest order. Numbers are written with enough digits to round-trip.

use super::{Aligned, BlockAlignment};
use crate::output::write_file_atomic;
use crate::{Error, Result};
use plotters::prelude::*;
use serde::Serialize;
use std::fmt::Write as _;
use std::path::Path;

/// The `aligned.csv` text.
pub fn aligned_csv(a: &Aligned) -> String {
    let mut s = String::from("time_s,intact_time_s");
    for d in &a.dofs {
        let _ = write!(s, ",{d}_pos,{d}_vel");
    }
    for k in &a.sites {
        let _ = write!(s, ",{k}_env");
    }
    s.push('\n');
    for i in 0..a.len() {
        if !a.usable[i] {
            continue;
        }
        let _ = write!(s, "{:.6},{:.6}", a.time_s[i], a.intact_time_s[i]);
        for d in 0..a.dofs.len() {
            let _ = write!(s, ",{:.4},{:.4}", a.pos[[d, i]], a.vel[[d, i]]);
        }
        for k in 0..a.sites.len() {
            let _ = write!(s, ",{:.6e}", a.env[[k, i]]);
        }
        s.push('\n');
    }
    s
}

#[derive(Serialize)]
struct JsonBlock<'a> {
    task: &'a str,
    dof: &'a str,
    start_s: f64,
    end_s: f64,
    dofs_used: &'a [String],
    lag_s: Option<f64>,
    lag_iqr_s: Option<f64>,
    lag_p10_s: Option<f64>,
    lag_p90_s: Option<f64>,
    corr_before: Option<f64>,
    corr_after: Option<f64>,
    corr_null: Option<f64>,
    share_at_limit: Option<f64>,
    direction_own_s: Option<f64>,
    quality: &'a str,
    reasons: &'a [String],
}

fn finite(v: f64) -> Option<f64> {
    v.is_finite().then_some((v * 1e6).round() / 1e6)
}

/// The `alignment.json` value: `format`, the settings, and one entry per block.
pub fn alignment_json(a: &Aligned, cfg: &super::AlignConfig) -> serde_json::Value {
    let blocks: Vec<JsonBlock> = a
        .blocks
        .iter()
        .map(|b| {
            let f = b.figures.as_ref();
            JsonBlock {
                task: &b.block.task,
                dof: b.block.dof_label(),
                start_s: b.block.start_s,
                end_s: b.block.end_s,
                dofs_used: &b.dofs_used,
                lag_s: f.and_then(|f| finite(f.lag_median_s)),
                lag_iqr_s: f.and_then(|f| finite(f.lag_iqr_s)),
                lag_p10_s: f.and_then(|f| finite(f.lag_p10_p90_s[0])),
                lag_p90_s: f.and_then(|f| finite(f.lag_p10_p90_s[1])),
                corr_before: f.and_then(|f| finite(f.corr_before)),
                corr_after: f.and_then(|f| finite(f.corr_after)),
                corr_null: f.and_then(|f| finite(f.corr_null)),
                share_at_limit: f.and_then(|f| finite(f.share_at_limit)),
                direction_own_s: b.direction_own_s.and_then(finite),
                quality: b.quality.as_str(),
                reasons: &b.reasons,
            }
        })
        .collect();
    serde_json::json!({
        "format": 1,
        "rows": a.len(),
        "usable_rows": a.usable.iter().filter(|&&u| u).count(),
        "direction_lag_s": a.direction_lag_s.and_then(finite),
        "settings": cfg,
        "blocks": blocks,
    })
}

/// The block shown in the figures: the first warped block judged `ok`, else the first warped one.
pub fn figure_block(a: &Aligned) -> Option<&BlockAlignment> {
    let warped = || {
        a.blocks
            .iter()
            .filter(|b| b.traces.as_ref().is_some_and(|t| !t.labels.is_empty()))
    };
    warped()
        .find(|b| b.quality == super::Verdict::Ok)
        .or_else(|| warped().next())
}

/// SVG of one block's first feature: composite EMG activation against the
/// intact feature before (`after = false`) or after warping.
pub fn block_svg(b: &BlockAlignment, after: bool) -> Result<String> {
    let tr = b
        .traces
        .as_ref()
        .ok_or_else(|| Error::Analysis("block has no traces".into()))?;
    let intact = if after { &tr.after } else { &tr.before };
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, (900, 360)).into_drawing_area();
        fn e<E: std::fmt::Debug>(x: E) -> Error {
            Error::Analysis(format!("figure: {x:?}"))
        }
        root.fill(&WHITE).map_err(e)?;
        let (t0, t1) = (tr.time_s[0], *tr.time_s.last().unwrap_or(&tr.time_s[0]));
        let vals = tr.composite[0].iter().chain(&intact[0]);
        let (lo, hi) = vals.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
            (a.min(v), b.max(v))
        });
        let title = format!(
            "{} {} ({}), {} warping",
            b.block.task,
            b.block.dof_label(),
            tr.labels[0],
            if after { "after" } else { "before" }
        );
        let mut chart = ChartBuilder::on(&root)
            .caption(title, ("sans-serif", 18))
            .margin(10)
            .x_label_area_size(36)
            .y_label_area_size(48)
            .build_cartesian_2d(t0..t1.max(t0 + 1e-3), (lo - 0.1)..(hi + 0.1))
            .map_err(e)?;
        chart
            .configure_mesh()
            .x_desc("EMG time (s)")
            .y_desc("standardised feature")
            .draw()
            .map_err(e)?;
        let pts = |y: &[f64]| {
            tr.time_s
                .iter()
                .copied()
                .zip(y.iter().copied())
                .collect::<Vec<_>>()
        };
        chart
            .draw_series(LineSeries::new(pts(&tr.composite[0]), BLUE.stroke_width(2)))
            .map_err(e)?
            .label("EMG composite (shifted by the expected EMD)")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], BLUE));
        chart
            .draw_series(LineSeries::new(pts(&intact[0]), RED.stroke_width(2)))
            .map_err(e)?
            .label("intact side")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], RED));
        chart
            .configure_series_labels()
            .background_style(WHITE.mix(0.8))
            .border_style(BLACK)
            .draw()
            .map_err(e)?;
        root.present().map_err(e)?;
    }
    Ok(out)
}

/// SVG of the lag over the whole session: intact time (on the EMG clock)
/// minus EMG time, in ms, against EMG time, with every task block shaded by
/// its verdict (ok, doubtful, failed) and rests left white. Rows are thinned
/// to at most 4000 points.
pub fn lag_svg(a: &Aligned) -> Result<String> {
    let n = a.len();
    if n < 2 {
        return Err(Error::Analysis("no rows to plot".into()));
    }
    let stride = n.div_ceil(4000).max(1);
    let pts: Vec<(f64, f64)> = (0..n)
        .step_by(stride)
        .map(|i| (a.time_s[i], a.lag_at(i) * 1e3))
        .collect();
    let (lo, hi) = pts
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), p| {
            (l.min(p.1), h.max(p.1))
        });
    let pad = ((hi - lo) * 0.1).max(5.0);
    let (t0, t1) = (a.time_s[0], a.time_s[n - 1]);
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, (900, 320)).into_drawing_area();
        fn e<E: std::fmt::Debug>(x: E) -> Error {
            Error::Analysis(format!("figure: {x:?}"))
        }
        root.fill(&WHITE).map_err(e)?;
        let title = match a.direction_lag_s {
            Some(eta) => format!(
                "lag over the session (flexing minus extending {:+.0} ms)",
                2.0 * eta * 1e3
            ),
            None => "lag over the session".to_string(),
        };
        let mut chart = ChartBuilder::on(&root)
            .caption(title, ("sans-serif", 18))
            .margin(10)
            .x_label_area_size(36)
            .y_label_area_size(52)
            .build_cartesian_2d(t0..t1.max(t0 + 1e-3), (lo - pad)..(hi + pad))
            .map_err(e)?;
        chart
            .configure_mesh()
            .x_desc("EMG time (s); shaded: task blocks (blue ok, yellow doubtful, grey failed)")
            .y_desc("intact − EMG time (ms)")
            .draw()
            .map_err(e)?;
        let shade = |q: super::Verdict| match q {
            super::Verdict::Ok => RGBColor(214, 230, 245),
            super::Verdict::Doubtful => RGBColor(250, 236, 200),
            super::Verdict::Failed => RGBColor(222, 222, 222),
        };
        chart
            .draw_series(a.blocks.iter().filter(|b| !b.block.is_rest()).map(|b| {
                Rectangle::new(
                    [(b.block.start_s, lo - pad), (b.block.end_s, hi + pad)],
                    shade(b.quality).filled(),
                )
            }))
            .map_err(e)?;
        chart
            .draw_series(LineSeries::new(pts, BLACK.stroke_width(2)))
            .map_err(e)?;
        root.present().map_err(e)?;
    }
    Ok(out)
}

/// Writes `aligned.csv`, `alignment.json`, `figures/alignment-lag.svg` and
/// `figures/alignment-before.svg`, `figures/alignment-after.svg` into `dir`
/// (which must exist).
pub fn write_all(dir: &Path, a: &Aligned, cfg: &super::AlignConfig) -> Result<()> {
    write_file_atomic(&dir.join("aligned.csv"), aligned_csv(a).as_bytes())?;
    let json = serde_json::to_string_pretty(&alignment_json(a, cfg))
        .map_err(|e| Error::Analysis(e.to_string()))?;
    write_file_atomic(&dir.join("alignment.json"), json.as_bytes())?;
    let fig = dir.join("figures");
    if a.len() >= 2 {
        std::fs::create_dir_all(&fig).map_err(|e| Error::io(&fig, e))?;
        write_file_atomic(&fig.join("alignment-lag.svg"), lag_svg(a)?.as_bytes())?;
    }
    if let Some(b) = figure_block(a) {
        std::fs::create_dir_all(&fig).map_err(|e| Error::io(&fig, e))?;
        write_file_atomic(
            &fig.join("alignment-before.svg"),
            block_svg(b, false)?.as_bytes(),
        )?;
        write_file_atomic(
            &fig.join("alignment-after.svg"),
            block_svg(b, true)?.as_bytes(),
        )?;
    }
    Ok(())
}
