//! Cross-validated R² per refitting stage, with the two baselines as
//! reference lines.

use super::{dof_figure_name, draw_err, Figure, FONT, GRID, HALF, INK};
use crate::error::Result;
use crate::report::model::DofResult;
use crate::report::words::fmt_r2;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// Human name of a baseline.
pub(crate) fn baseline_name(name: &str) -> String {
    match name {
        "linear" => "linear baseline".into(),
        "position" => "position-only baseline".into(),
        other => format!("{other} baseline"),
    }
}

/// The stage history figure (`stages-<dof>.svg`).
pub(crate) fn stage_history(dof: &DofResult) -> Result<Figure> {
    let (w, h) = HALF;
    let n = dof.stages.len().max(1);
    let mut lo = 0.0f64;
    for v in dof
        .stages
        .iter()
        .map(|s| s.cv.r2)
        .chain(dof.baselines.iter().map(|b| b.cv.r2))
        .filter(|v| v.is_finite())
    {
        lo = lo.min(v);
    }
    let lo = if lo < 0.0 {
        (lo * 10.0).floor() / 10.0
    } else {
        0.0
    };
    let mut svg = String::new();
    {
        let e = |e| draw_err("the stage history", e);
        let root = SVGBackend::with_string(&mut svg, (w, h)).into_drawing_area();
        root.fill(&WHITE).map_err(e)?;
        let mut chart = ChartBuilder::on(&root)
            .caption(
                format!("{}: cross-validated R² by stage", dof.dof),
                (FONT, 18, FontStyle::Bold),
            )
            .margin(8)
            .margin_right(150)
            .x_label_area_size(40)
            .y_label_area_size(50)
            .build_cartesian_2d(0.5f64..n as f64 + 0.5, lo..1.0f64)
            .map_err(e)?;
        chart
            .configure_mesh()
            .light_line_style(WHITE)
            .bold_line_style(GRID.stroke_width(1))
            .disable_x_mesh()
            .x_labels(0)
            .y_label_formatter(&|y| fmt_r2(*y))
            .x_desc("Stage (each refits the sites kept by the one before)")
            .y_desc("CV R²")
            .label_style((FONT, 15))
            .axis_desc_style((FONT, 15))
            .draw()
            .map_err(e)?;
        let (x0, x1) = (0.5, n as f64 + 0.5);
        for k in 1..=n {
            let (px, py) = chart.backend_coord(&(k as f64, lo));
            root.draw(&Text::new(
                k.to_string(),
                (px, py + 6),
                (FONT, 15)
                    .into_font()
                    .color(&INK)
                    .pos(Pos::new(HPos::Center, VPos::Top)),
            ))
            .map_err(e)?;
        }
        for b in &dof.baselines {
            if !b.cv.r2.is_finite() {
                continue;
            }
            let y = b.cv.r2;
            let style = INK.stroke_width(2);
            if b.name == "position" {
                chart
                    .draw_series(DashedLineSeries::new(vec![(x0, y), (x1, y)], 2, 4, style))
                    .map_err(e)?;
            } else {
                chart
                    .draw_series(DashedLineSeries::new(vec![(x0, y), (x1, y)], 9, 5, style))
                    .map_err(e)?;
            }
            let (px, py) = chart.backend_coord(&(x1, y));
            root.draw(&Text::new(
                format!("{} {}", baseline_name(&b.name), fmt_r2(y)),
                (px + 6, py),
                (FONT, 14)
                    .into_font()
                    .color(&INK)
                    .pos(Pos::new(HPos::Left, VPos::Center)),
            ))
            .map_err(e)?;
        }
        let pts: Vec<(f64, f64)> = dof
            .stages
            .iter()
            .enumerate()
            .filter(|(_, s)| s.cv.r2.is_finite())
            .map(|(i, s)| ((i + 1) as f64, s.cv.r2))
            .collect();
        chart
            .draw_series(LineSeries::new(pts.clone(), INK.stroke_width(3)))
            .map_err(e)?;
        chart
            .draw_series(pts.iter().map(|&p| Circle::new(p, 5, INK.filled())))
            .map_err(e)?;
        for (i, s) in dof.stages.iter().enumerate() {
            if !s.cv.r2.is_finite() {
                continue;
            }
            let (px, py) = chart.backend_coord(&((i + 1) as f64, s.cv.r2));
            let k = s.sites.len();
            root.draw(&Text::new(
                format!("{k} site{}", if k == 1 { "" } else { "s" }),
                (px, py - 10),
                (FONT, 14)
                    .into_font()
                    .color(&INK)
                    .pos(Pos::new(HPos::Center, VPos::Bottom)),
            ))
            .map_err(e)?;
        }
        if let Some(&(px, py)) = pts.last() {
            let (bx, by) = chart.backend_coord(&(px, py));
            root.draw(&Text::new(
                format!("model {}", fmt_r2(py)),
                (bx + 10, by + 12),
                (FONT, 14, FontStyle::Bold)
                    .into_font()
                    .color(&INK)
                    .pos(Pos::new(HPos::Left, VPos::Top)),
            ))
            .map_err(e)?;
        }
        root.present().map_err(e)?;
    }
    Ok(Figure {
        name: dof_figure_name("stages", &dof.dof, None),
        caption: format!(
            "{}: cross-validated R² of the model at each stage; dashed = linear baseline, \
             dotted = position-only baseline",
            dof.dof
        ),
        width: w,
        height: h,
        svg,
    })
}
