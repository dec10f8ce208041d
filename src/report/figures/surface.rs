//! Effect surfaces g_k(s, z) as heat maps, and slices of them at fixed
//! positions as line plots.
//!
//! Heat-map shading: darkness grows with |g| on a scale shared by all sites
//! of a DoF, so darker always means a stronger effect; the sign is carried
//! by a warm (drives the positive direction) or cool (drives the opposite
//! direction) hue and, for black-and-white print, by a dot texture on the
//! cells that drive the opposite direction. A grey line marks g = 0.

use super::{dof_figure_name, draw_err, Figure, FONT, GRID, HALF, INK, MID};
use crate::error::{Error, Result};
use crate::report::model::{DofResult, Effect};
use crate::report::words::opposite;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

type Area<'a> = DrawingArea<SVGBackend<'a>, Shift>;

/// Positions (scaled to [0, 1] over the DoF's range) at which slices are drawn.
pub(crate) const SLICE_POSITIONS: [f64; 3] = [0.25, 0.5, 0.75];

const WARM: (f64, f64, f64) = (120.0, 45.0, 0.0);
const COOL: (f64, f64, f64) = (20.0, 55.0, 125.0);
const COLORBAR_H: u32 = 64;

/// Largest |g| over every effect surface of a DoF (1 when all are zero).
pub(crate) fn common_scale(dof: &DofResult) -> f64 {
    let m = dof
        .effects
        .iter()
        .flat_map(|e| e.surface.iter().flatten())
        .filter(|v| v.is_finite())
        .fold(0.0f64, |m, v| m.max(v.abs()));
    if m > 0.0 {
        m
    } else {
        1.0
    }
}

fn shade(v: f64, scale: f64) -> RGBColor {
    let t = (v.abs() / scale).clamp(0.0, 1.0);
    let (r, g, b) = if v >= 0.0 { WARM } else { COOL };
    let mix = |c: f64| (255.0 + (c - 255.0) * t).round() as u8;
    RGBColor(mix(r), mix(g), mix(b))
}

/// Checks that a surface's grid matches its axes.
fn check(dof: &DofResult, e: &Effect) -> Result<()> {
    let bad = e.lag_s.len() < 2
        || e.position.len() < 2
        || e.surface.len() != e.lag_s.len()
        || e.surface.iter().any(|row| row.len() != e.position.len());
    if bad {
        return Err(Error::Analysis(format!(
            "effect surface of site {} for {}: expected {} rows of {} values (lag × position, \
             at least 2 × 2), found {} rows",
            e.site,
            dof.dof,
            e.lag_s.len(),
            e.position.len(),
            e.surface.len()
        )));
    }
    Ok(())
}

/// Cell edges around grid points: midpoints, extended by half a step at the ends.
fn edges(g: &[f64]) -> Vec<f64> {
    let n = g.len();
    let mut out = Vec::with_capacity(n + 1);
    out.push(g[0] - (g[1] - g[0]) / 2.0);
    for i in 0..n - 1 {
        out.push((g[i] + g[i + 1]) / 2.0);
    }
    out.push(g[n - 1] + (g[n - 1] - g[n - 2]) / 2.0);
    out
}

/// Segments of the zero level of a gridded surface (marching squares with
/// linear interpolation along cell edges).
fn zero_contour(xs: &[f64], ys: &[f64], v: &[Vec<f64>]) -> Vec<[(f64, f64); 2]> {
    let mut segs = Vec::new();
    for i in 0..xs.len() - 1 {
        for j in 0..ys.len() - 1 {
            let corners = [
                (xs[i], ys[j], v[i][j]),
                (xs[i + 1], ys[j], v[i + 1][j]),
                (xs[i + 1], ys[j + 1], v[i + 1][j + 1]),
                (xs[i], ys[j + 1], v[i][j + 1]),
            ];
            let mut cross = Vec::new();
            for k in 0..4 {
                let (x0, y0, a) = corners[k];
                let (x1, y1, b) = corners[(k + 1) % 4];
                if (a > 0.0) != (b > 0.0) && a.is_finite() && b.is_finite() {
                    let t = a / (a - b);
                    cross.push((x0 + t * (x1 - x0), y0 + t * (y1 - y0)));
                }
            }
            for pair in cross.chunks_exact(2) {
                segs.push([pair[0], pair[1]]);
            }
        }
    }
    segs
}

/// An axis tick with a true minus sign.
fn tick(v: f64, digits: usize) -> String {
    crate::report::words::fmt_num(v, digits).replace('-', "−")
}

fn label(v: f64) -> String {
    let a = v.abs();
    let s = if a >= 100.0 {
        format!("{a:.0}")
    } else if a >= 1.0 {
        format!("{a:.1}")
    } else {
        format!("{a:.2}")
    };
    if v < 0.0 {
        format!("−{s}")
    } else if v > 0.0 {
        format!("+{s}")
    } else {
        "0".into()
    }
}

fn dots(area: &Area, x0: i32, y0: i32, x1: i32, y1: i32, light: bool) -> Result<()> {
    let step = 7;
    let color = if light {
        RGBColor(255, 255, 255)
    } else {
        RGBColor(40, 40, 40)
    };
    let (xa, xb) = (x0.min(x1), x0.max(x1));
    let (ya, yb) = (y0.min(y1), y0.max(y1));
    let mut y = ya + (step - ya.rem_euclid(step)) % step;
    while y < yb {
        let mut x = xa + (step - xa.rem_euclid(step)) % step;
        // Offset every other row for an even texture.
        if (y / step) % 2 == 1 {
            x += step / 2;
        }
        while x < xb {
            area.draw(&Circle::new((x, y), 1, color.filled()))
                .map_err(|e| draw_err("an effect surface", e))?;
            x += step;
        }
        y += step;
    }
    Ok(())
}

/// Heat map of one effect surface (`effect-<dof>-<site>.svg`), shaded on
/// `scale` (see [`common_scale`]).
pub(crate) fn effect_surface(dof: &DofResult, eff: &Effect, scale: f64) -> Result<Figure> {
    check(dof, eff)?;
    let (w, h) = HALF;
    let xs: Vec<f64> = eff.lag_s.iter().map(|s| 1000.0 * s).collect();
    let ys: Vec<f64> = eff.position.iter().map(|z| 100.0 * z).collect();
    let (xe, ye) = (edges(&xs), edges(&ys));
    let mut svg = String::new();
    {
        let e = |e| draw_err("an effect surface", e);
        let root = SVGBackend::with_string(&mut svg, (w, h)).into_drawing_area();
        root.fill(&WHITE).map_err(e)?;
        let (upper, bar) = root.split_vertically(h - COLORBAR_H);
        let mut chart = ChartBuilder::on(&upper)
            .caption(
                format!("Site {} → {}: effect on speed", eff.site, dof.dof),
                (FONT, 18, FontStyle::Bold),
            )
            .margin(8)
            .margin_right(18)
            .x_label_area_size(40)
            .y_label_area_size(54)
            .build_cartesian_2d(xe[0]..xe[xe.len() - 1], ye[0]..ye[ye.len() - 1])
            .map_err(e)?;
        let mut cells = Vec::new();
        for i in 0..xs.len() {
            for j in 0..ys.len() {
                let v = eff.surface[i][j];
                let v = if v.is_finite() { v } else { 0.0 };
                cells.push(Rectangle::new(
                    [(xe[i], ye[j]), (xe[i + 1], ye[j + 1])],
                    shade(v, scale).filled(),
                ));
            }
        }
        chart.draw_series(cells).map_err(e)?;
        for i in 0..xs.len() {
            for j in 0..ys.len() {
                let v = eff.surface[i][j];
                let t = v.abs() / scale;
                if v < 0.0 && t >= 0.08 {
                    let (x0, y0) = chart.backend_coord(&(xe[i], ye[j]));
                    let (x1, y1) = chart.backend_coord(&(xe[i + 1], ye[j + 1]));
                    dots(&upper, x0, y0, x1, y1, t > 0.5)?;
                }
            }
        }
        for seg in zero_contour(&xs, &ys, &eff.surface) {
            chart
                .draw_series(LineSeries::new(seg, MID.stroke_width(2)))
                .map_err(e)?;
        }
        chart
            .configure_mesh()
            .disable_mesh()
            .x_desc("Lag, ms (EMG before the movement)")
            .y_desc("Position, % of range")
            .x_label_formatter(&|v| tick(*v, 0))
            .y_label_formatter(&|v| tick(*v, 0))
            .label_style((FONT, 15))
            .axis_desc_style((FONT, 15))
            .x_labels(6)
            .y_labels(5)
            .draw()
            .map_err(e)?;

        // Colour bar: opposite direction on the left, positive on the right.
        let (bx0, bx1, by0, by1) = (150i32, 310i32, 8i32, 24i32);
        let n = 40;
        for k in 0..n {
            let v = -scale + 2.0 * scale * (k as f64 + 0.5) / n as f64;
            let xa = bx0 + (bx1 - bx0) * k / n;
            let xb = bx0 + (bx1 - bx0) * (k + 1) / n;
            bar.draw(&Rectangle::new(
                [(xa, by0), (xb, by1)],
                shade(v, scale).filled(),
            ))
            .map_err(e)?;
            if v < 0.0 && v.abs() / scale >= 0.08 {
                dots(&bar, xa, by0, xb, by1, v.abs() / scale > 0.5)?;
            }
        }
        bar.draw(&Rectangle::new(
            [(bx0, by0), (bx1, by1)],
            INK.stroke_width(1),
        ))
        .map_err(e)?;
        let small = |hp| {
            (FONT, 14)
                .into_font()
                .color(&INK)
                .pos(Pos::new(hp, VPos::Top))
        };
        for (x, v) in [(bx0, -scale), ((bx0 + bx1) / 2, 0.0), (bx1, scale)] {
            bar.draw(&Text::new(label(v), (x, by1 + 4), small(HPos::Center)))
                .map_err(e)?;
        }
        let mid = |hp| {
            (FONT, 14)
                .into_font()
                .color(&INK)
                .pos(Pos::new(hp, VPos::Center))
        };
        bar.draw(&Text::new(
            format!("drives {}", opposite(&dof.positive)),
            (bx0 - 8, (by0 + by1) / 2),
            mid(HPos::Right),
        ))
        .map_err(e)?;
        bar.draw(&Text::new(
            format!("drives {}", dof.positive),
            (bx1 + 8, (by0 + by1) / 2),
            mid(HPos::Left),
        ))
        .map_err(e)?;
        root.present().map_err(e)?;
    }
    Ok(Figure {
        name: dof_figure_name("effect", &dof.dof, Some(&eff.site)),
        caption: format!(
            "Effect of site {} on {} speed by lag and position (darker = stronger; \
             dotted = drives {}; grey line = no effect)",
            eff.site,
            dof.dof,
            opposite(&dof.positive)
        ),
        width: w,
        height: h,
        svg,
    })
}

/// g(s, z0) along the lag grid, linearly interpolated in position.
pub(crate) fn slice(eff: &Effect, z0: f64) -> Vec<f64> {
    let p = &eff.position;
    let n = p.len();
    let (j, t) = if z0 <= p[0] {
        (0, 0.0)
    } else if z0 >= p[n - 1] {
        (n - 2, 1.0)
    } else {
        let j = p
            .windows(2)
            .position(|w| w[0] <= z0 && z0 <= w[1])
            .unwrap_or(0);
        let d = p[j + 1] - p[j];
        (j, if d > 0.0 { (z0 - p[j]) / d } else { 0.0 })
    };
    eff.surface
        .iter()
        .map(|row| row[j] + t * (row[j + 1] - row[j]))
        .collect()
}

/// Slices of one effect surface at [`SLICE_POSITIONS`]
/// (`slices-<dof>-<site>.svg`).
pub(crate) fn effect_slices(dof: &DofResult, eff: &Effect) -> Result<Figure> {
    check(dof, eff)?;
    let (w, h) = HALF;
    let xs: Vec<f64> = eff.lag_s.iter().map(|s| 1000.0 * s).collect();
    let lines: Vec<Vec<f64>> = SLICE_POSITIONS.iter().map(|&z| slice(eff, z)).collect();
    let (mut lo, mut hi) = (0.0f64, 0.0f64);
    for v in lines.iter().flatten().filter(|v| v.is_finite()) {
        lo = lo.min(*v);
        hi = hi.max(*v);
    }
    let pad = 0.12 * (hi - lo).max(1e-12);
    let (lo, hi) = (lo - pad, hi + pad);
    let mut svg = String::new();
    {
        let e = |e| draw_err("effect slices", e);
        let root = SVGBackend::with_string(&mut svg, (w, h)).into_drawing_area();
        root.fill(&WHITE).map_err(e)?;
        let mut chart = ChartBuilder::on(&root)
            .caption(
                format!("Site {} → {}: slices at fixed positions", eff.site, dof.dof),
                (FONT, 18, FontStyle::Bold),
            )
            .margin(8)
            .margin_right(18)
            .x_label_area_size(40)
            .y_label_area_size(62)
            .build_cartesian_2d(xs[0]..xs[xs.len() - 1], lo..hi)
            .map_err(e)?;
        chart
            .configure_mesh()
            .light_line_style(WHITE)
            .bold_line_style(GRID.stroke_width(1))
            .x_desc("Lag, ms (EMG before the movement)")
            .y_desc("Effect on speed")
            .x_label_formatter(&|v| tick(*v, 0))
            .y_label_formatter(&|v| tick(*v, 2))
            .label_style((FONT, 15))
            .axis_desc_style((FONT, 15))
            .x_labels(6)
            .y_labels(5)
            .draw()
            .map_err(e)?;
        chart
            .draw_series(LineSeries::new(
                vec![(xs[0], 0.0), (xs[xs.len() - 1], 0.0)],
                MID.stroke_width(1),
            ))
            .map_err(e)?;
        let style = INK.stroke_width(2);
        for (k, (z, ys)) in SLICE_POSITIONS.iter().zip(&lines).enumerate() {
            let pts: Vec<(f64, f64)> = xs.iter().copied().zip(ys.iter().copied()).collect();
            let name = format!("at {:.0}% of range", 100.0 * z);
            let every = (pts.len() / 8).max(1);
            let marks: Vec<(f64, f64)> = pts.iter().copied().step_by(every).collect();
            match k {
                0 => {
                    chart
                        .draw_series(LineSeries::new(pts, style))
                        .map_err(e)?
                        .label(name)
                        .legend(move |(x, y)| {
                            EmptyElement::at((x, y))
                                + PathElement::new(vec![(-4, 0), (22, 0)], style)
                                + Circle::new((9, 0), 4, INK.filled())
                        });
                    chart
                        .draw_series(marks.into_iter().map(|p| Circle::new(p, 4, INK.filled())))
                        .map_err(e)?;
                }
                1 => {
                    chart
                        .draw_series(DashedLineSeries::new(pts, 9, 5, style))
                        .map_err(e)?
                        .label(name)
                        .legend(move |(x, y)| {
                            EmptyElement::at((x, y))
                                + PathElement::new(vec![(-4, 0), (5, 0)], style)
                                + PathElement::new(vec![(13, 0), (22, 0)], style)
                                + TriangleMarker::new((9, 0), 5, INK.filled())
                        });
                    chart
                        .draw_series(
                            marks
                                .into_iter()
                                .map(|p| TriangleMarker::new(p, 5, INK.filled())),
                        )
                        .map_err(e)?;
                }
                _ => {
                    chart
                        .draw_series(DashedLineSeries::new(pts, 2, 4, style))
                        .map_err(e)?
                        .label(name)
                        .legend(move |(x, y)| {
                            EmptyElement::at((x, y))
                                + PathElement::new(vec![(-4, 0), (-2, 0)], style)
                                + PathElement::new(vec![(2, 0), (4, 0)], style)
                                + PathElement::new(vec![(16, 0), (18, 0)], style)
                                + PathElement::new(vec![(20, 0), (22, 0)], style)
                                + Rectangle::new([(5, -4), (13, 4)], WHITE.filled())
                                + Rectangle::new([(5, -4), (13, 4)], INK.stroke_width(2))
                        });
                    chart
                        .draw_series(marks.into_iter().map(|p| {
                            EmptyElement::at(p)
                                + Rectangle::new([(-4, -4), (4, 4)], WHITE.filled())
                                + Rectangle::new([(-4, -4), (4, 4)], INK.stroke_width(2))
                        }))
                        .map_err(e)?;
                }
            }
        }
        chart
            .configure_series_labels()
            // Curves that dip below zero leave the lower left free; others the upper left.
            .position(if -lo > hi {
                SeriesLabelPosition::LowerLeft
            } else {
                SeriesLabelPosition::UpperLeft
            })
            .background_style(WHITE.mix(0.9))
            .border_style(INK)
            .label_font((FONT, 14))
            .draw()
            .map_err(e)?;
        root.present().map_err(e)?;
    }
    Ok(Figure {
        name: dof_figure_name("slices", &dof.dof, Some(&eff.site)),
        caption: format!(
            "Effect of site {} on {} speed against lag at three positions of the range",
            eff.site, dof.dof
        ),
        width: w,
        height: h,
        svg,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn slices_interpolate_linearly_in_position() {
        // g(s, z) = s + 10 z is linear in z, so the slice at z = 0.25 between
        // grid points 0 and 0.5 is exact: s + 2.5.
        let eff = Effect {
            site: "A1".into(),
            lag_s: vec![-0.2, -0.1, 0.0],
            position: vec![0.0, 0.5, 1.0],
            surface: [-0.2, -0.1, 0.0]
                .iter()
                .map(|s| [0.0, 0.5, 1.0].iter().map(|z| s + 10.0 * z).collect())
                .collect(),
        };
        let v = slice(&eff, 0.25);
        for (a, s) in v.iter().zip([-0.2, -0.1, 0.0]) {
            assert!((a - (s + 2.5)).abs() < 1e-12);
        }
    }

    #[test]
    fn zero_contour_of_a_plane_is_its_zero_line() {
        // v(x, y) = x − 0.5 on [0, 1]²: every segment lies on x = 0.5.
        let g = [0.0, 0.25, 0.5, 0.75, 1.0];
        let v: Vec<Vec<f64>> = g
            .iter()
            .map(|x| g.iter().map(|_| x - 0.5 + 1e-9).collect())
            .collect();
        let segs = zero_contour(&g, &g, &v);
        assert_eq!(segs.len(), 4);
        for s in segs {
            for (x, _) in s {
                assert!((x - 0.5).abs() < 1e-6);
            }
        }
    }

    #[test]
    fn shading_darkens_with_magnitude_either_sign() {
        let lum = |c: RGBColor| 0.299 * c.0 as f64 + 0.587 * c.1 as f64 + 0.114 * c.2 as f64;
        let mut last = 256.0;
        for k in 0..=10 {
            let t = k as f64 / 10.0;
            let (p, n) = (lum(shade(t, 1.0)), lum(shade(-t, 1.0)));
            assert!(p <= last + 1e-9);
            assert!(
                (p - n).abs() < 25.0,
                "both signs about equally dark at |g| = {t}"
            );
            last = p;
        }
    }
}
