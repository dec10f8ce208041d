//! The unrolled forearm: angle around the limb against distance from the
//! elbow, every site drawn by its signal quality and its role in the plan.

use super::{draw_err, Figure, FONT, GRID, INK};
use crate::error::Result;
use crate::report::model::SitesReport;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use std::collections::BTreeSet;

type Area<'a> = DrawingArea<SVGBackend<'a>, Shift>;

const W: u32 = 720;
const H: u32 = 480;
const LEGEND_H: u32 = 88;
const R: i32 = 8;
/// Fill of a site selected for some DoF but left out of the plan.
const SELECTED_FILL: RGBColor = RGBColor(150, 150, 150);
const WHITE_FILL: RGBColor = RGBColor(255, 255, 255);

/// How a site is drawn.
#[derive(Clone, Copy, PartialEq)]
enum Role {
    Planned,
    Selected,
    Other,
}

fn text_style(size: u32, bold: bool, pos: Pos) -> TextStyle<'static> {
    let font = if bold {
        (FONT, size, FontStyle::Bold).into_font()
    } else {
        (FONT, size).into_font()
    };
    font.color(&INK).pos(pos)
}

/// Draws a site marker centred on `c`: circle (ok), triangle (suspect) or
/// crossed square (bad); black fill for planned sites with an outer ring,
/// grey fill for selected-but-not-planned ones.
fn marker(area: &Area, c: (i32, i32), quality: &str, role: Role) -> Result<()> {
    let e = |e| draw_err("the site map", e);
    let fill = match role {
        Role::Planned => INK,
        Role::Selected => SELECTED_FILL,
        Role::Other => WHITE_FILL,
    };
    let stroke = INK.stroke_width(2);
    let (x, y) = c;
    match quality {
        "bad" => {
            let sq = [(x - R, y - R), (x + R, y + R)];
            area.draw(&Rectangle::new(sq, fill.filled())).map_err(e)?;
            area.draw(&Rectangle::new(sq, stroke)).map_err(e)?;
            let cross = if role == Role::Planned {
                WHITE_FILL.stroke_width(2)
            } else {
                stroke
            };
            let d = R - 2;
            area.draw(&PathElement::new(
                vec![(x - d, y - d), (x + d, y + d)],
                cross,
            ))
            .map_err(e)?;
            area.draw(&PathElement::new(
                vec![(x - d, y + d), (x + d, y - d)],
                cross,
            ))
            .map_err(e)?;
        }
        "suspect" => {
            let t = R + 2;
            let pts = vec![(x, y - t), (x + t, y + t - 2), (x - t, y + t - 2)];
            area.draw(&Polygon::new(pts.clone(), fill.filled()))
                .map_err(e)?;
            let mut closed = pts.clone();
            closed.push(pts[0]);
            area.draw(&PathElement::new(closed, stroke)).map_err(e)?;
        }
        _ => {
            area.draw(&Circle::new(c, R, fill.filled())).map_err(e)?;
            area.draw(&Circle::new(c, R, stroke)).map_err(e)?;
        }
    }
    if role == Role::Planned {
        area.draw(&Circle::new(c, R + 6, INK.stroke_width(2)))
            .map_err(e)?;
    }
    Ok(())
}

/// Text on a white patch so that links and grid lines do not run through it.
/// The patch size is estimated from the character count (about 0.6 em per
/// character for a sans-serif face, plotters writing font-size = size / 1.24).
fn label(area: &Area, text: &str, at: (i32, i32), size: u32, bold: bool, pos: Pos) -> Result<()> {
    let em = size as f64 / 1.24;
    let w = (text.chars().count() as f64 * em * if bold { 0.68 } else { 0.6 }).ceil() as i32 + 4;
    let h = em.ceil() as i32 + 2;
    let x0 = match pos.h_pos {
        HPos::Left => at.0 - 2,
        HPos::Center => at.0 - w / 2,
        HPos::Right => at.0 - w + 2,
    };
    let y0 = match pos.v_pos {
        VPos::Top => at.1 - 1,
        VPos::Center => at.1 - h / 2,
        VPos::Bottom => at.1 - h + 1,
    };
    area.draw(&Rectangle::new(
        [(x0, y0), (x0 + w, y0 + h)],
        WHITE_FILL.filled(),
    ))
    .map_err(|e| draw_err("the site map", e))?;
    area.draw(&Text::new(
        text.to_string(),
        at,
        text_style(size, bold, pos),
    ))
    .map_err(|e| draw_err("the site map", e))?;
    Ok(())
}

fn dashed(area: &Area, a: (i32, i32), b: (i32, i32)) -> Result<()> {
    let (dx, dy) = ((b.0 - a.0) as f64, (b.1 - a.1) as f64);
    let len = (dx * dx + dy * dy).sqrt();
    if len < 1.0 {
        return Ok(());
    }
    let (on, off) = (7.0, 5.0);
    let mut t = 0.0;
    while t < len {
        let t1 = (t + on).min(len);
        let p = |s: f64| {
            (
                a.0 + (dx * s / len).round() as i32,
                a.1 + (dy * s / len).round() as i32,
            )
        };
        area.draw(&PathElement::new(vec![p(t), p(t1)], INK.stroke_width(2)))
            .map_err(|e| draw_err("the site map", e))?;
        t = t1 + off;
    }
    Ok(())
}

/// The site map figure (`site-map.svg`).
pub(crate) fn site_map(report: &SitesReport) -> Result<Figure> {
    let mut svg = String::new();
    let planned: BTreeSet<&str> = report.plan.sites.iter().map(|p| p.site.as_str()).collect();
    let selected: BTreeSet<&str> = report
        .dofs
        .iter()
        .flat_map(|d| d.selected.iter().map(|s| s.as_str()))
        .collect();
    let (mut dmin, mut dmax) = (f64::INFINITY, f64::NEG_INFINITY);
    for s in &report.site_info {
        dmin = dmin.min(s.distance_cm);
        dmax = dmax.max(s.distance_cm);
    }
    if !dmin.is_finite() {
        (dmin, dmax) = (0.0, 15.0);
    }
    let y0 = (dmin - 2.0).floor().max(0.0);
    let y1 = (dmax + 1.5).ceil();
    {
        let root = SVGBackend::with_string(&mut svg, (W, H)).into_drawing_area();
        let e = |e| draw_err("the site map", e);
        root.fill(&WHITE).map_err(e)?;
        let (upper, legend) = root.split_vertically(H - LEGEND_H);
        let mut chart = ChartBuilder::on(&upper)
            .margin_top(30)
            .margin_right(24)
            .margin_left(8)
            .x_label_area_size(46)
            .y_label_area_size(58)
            .build_cartesian_2d(-14f64..374f64, -y1..-y0)
            .map_err(e)?;
        chart
            .configure_mesh()
            .light_line_style(WHITE)
            .bold_line_style(GRID.stroke_width(1))
            .disable_x_mesh()
            .x_labels(0)
            .y_label_formatter(&|d| format!("{:.0}", -d))
            .x_desc("Angle around the limb, ° (0 = dorsal midline, increasing toward radial)")
            .y_desc("Distance from the lateral epicondyle, cm")
            .label_style((FONT, 15))
            .axis_desc_style((FONT, 15))
            .draw()
            .map_err(e)?;

        // Angle grid every 45° with its tick labels.
        for k in 0..=8 {
            let a = 45.0 * k as f64;
            if k % 2 == 1 {
                chart
                    .draw_series(LineSeries::new(
                        vec![(a, -y1), (a, -y0)],
                        GRID.stroke_width(1),
                    ))
                    .map_err(e)?;
            }
            let (px, py) = chart.backend_coord(&(a, -y1));
            upper
                .draw(&Text::new(
                    format!("{a:.0}°"),
                    (px, py + 6),
                    text_style(15, false, Pos::new(HPos::Center, VPos::Top)),
                ))
                .map_err(e)?;
        }
        // Aspect lines and names.
        for (a, name) in [
            (0.0, "DORSAL"),
            (90.0, "RADIAL"),
            (180.0, "VOLAR"),
            (270.0, "ULNAR"),
            (360.0, "DORSAL"),
        ] {
            chart
                .draw_series(LineSeries::new(
                    vec![(a, -y1), (a, -y0)],
                    RGBColor(120, 120, 120).stroke_width(1),
                ))
                .map_err(e)?;
            let (px, py) = chart.backend_coord(&(a, -y0));
            let h = if a == 0.0 {
                HPos::Left
            } else if a == 360.0 {
                HPos::Right
            } else {
                HPos::Center
            };
            upper
                .draw(&Text::new(
                    name,
                    (px, py - 8),
                    text_style(15, true, Pos::new(h, VPos::Bottom)),
                ))
                .map_err(e)?;
        }
        let (lx, ly) = chart.backend_coord(&(0.0, -y0));
        upper
            .draw(&Text::new(
                "↑ toward the elbow",
                (lx + 6, ly + 6),
                text_style(13, false, Pos::new(HPos::Left, VPos::Top)),
            ))
            .map_err(e)?;

        let at = |site: &str| {
            report
                .site_info
                .iter()
                .find(|s| s.site == site)
                .map(|s| (s.angle_deg.rem_euclid(360.0), s.distance_cm))
        };
        // Alternate links under the markers; a link across the 0°/360° seam
        // goes the short way round, leaving one edge and entering the other.
        for p in &report.plan.sites {
            let Some((pa, pd)) = at(&p.site) else {
                continue;
            };
            for alt in &p.alternates {
                let Some((aa, ad)) = at(alt) else { continue };
                if (pa - aa).abs() <= 180.0 {
                    dashed(
                        &upper,
                        chart.backend_coord(&(aa, -ad)),
                        chart.backend_coord(&(pa, -pd)),
                    )?;
                } else {
                    let (lo, hi) = if aa < pa { (aa, pa) } else { (pa, aa) };
                    let (dlo, dhi) = if aa < pa { (ad, pd) } else { (pd, ad) };
                    let span = lo + 360.0 - hi;
                    let dm = dhi + (dlo - dhi) * (360.0 - hi) / span;
                    dashed(
                        &upper,
                        chart.backend_coord(&(hi, -dhi)),
                        chart.backend_coord(&(360.0, -dm)),
                    )?;
                    dashed(
                        &upper,
                        chart.backend_coord(&(0.0, -dm)),
                        chart.backend_coord(&(lo, -dlo)),
                    )?;
                }
            }
        }
        let role_of = |site: &str| {
            if planned.contains(site) {
                Role::Planned
            } else if selected.contains(site) {
                Role::Selected
            } else {
                Role::Other
            }
        };
        let centre = |s: &crate::report::model::SiteInfo| {
            chart.backend_coord(&(s.angle_deg.rem_euclid(360.0), -s.distance_cm))
        };
        for s in &report.site_info {
            marker(&upper, centre(s), &s.quality, role_of(&s.site))?;
        }
        for s in &report.site_info {
            let c = centre(s);
            let bold = role_of(&s.site) == Role::Planned;
            let off = if bold { R + 5 } else { R + 2 };
            label(
                &upper,
                &s.site,
                (c.0 + off, c.1 - off),
                if bold { 17 } else { 15 },
                bold,
                Pos::new(HPos::Left, VPos::Bottom),
            )?;
            if let Some(p) = report.plan.sites.iter().find(|p| p.site == s.site) {
                label(
                    &upper,
                    &p.dofs.join(", "),
                    (c.0, c.1 + R + 9),
                    13,
                    false,
                    Pos::new(HPos::Center, VPos::Top),
                )?;
            }
        }

        // Legend: two columns of three.
        let col = [24, 384];
        let rows = [16, 44, 72];
        marker(&legend, (col[0], rows[0]), "ok", Role::Planned)?;
        marker(&legend, (col[0], rows[1]), "ok", Role::Selected)?;
        dashed(&legend, (col[0] - 14, rows[2]), (col[0] + 14, rows[2]))?;
        marker(&legend, (col[1], rows[0]), "ok", Role::Other)?;
        marker(&legend, (col[1], rows[1]), "suspect", Role::Other)?;
        marker(&legend, (col[1], rows[2]), "bad", Role::Other)?;
        let items = [
            (
                col[0],
                rows[0],
                "planned site (DoFs it serves written below)",
            ),
            (col[0], rows[1], "selected for a DoF but not planned"),
            (
                col[0],
                rows[2],
                "alternate ↔ the planned site it can replace",
            ),
            (col[1], rows[0], "signal ok"),
            (col[1], rows[1], "suspect signal"),
            (col[1], rows[2], "bad signal"),
        ];
        for (x, y, t) in items {
            legend
                .draw(&Text::new(
                    t,
                    (x + 24, y),
                    text_style(14, false, Pos::new(HPos::Left, VPos::Center)),
                ))
                .map_err(e)?;
        }
        root.present().map_err(e)?;
    }
    Ok(Figure {
        name: "site-map.svg".into(),
        caption: "Forearm unrolled: every recorded site by angle around the limb and \
                  distance from the elbow"
            .into(),
        width: W,
        height: H,
        svg,
    })
}
