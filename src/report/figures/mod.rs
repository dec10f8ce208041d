//! Figures of the sheet, drawn with plotters to SVG.
//!
//! Every figure is legible in black-and-white print: categories differ by
//! shape, dash or fill pattern, never by colour alone, and the colour ramps
//! darken monotonically with the magnitude they show.

mod map;
mod stages;
mod surface;

pub(crate) use map::site_map;
pub(crate) use stages::{baseline_name, stage_history};
pub(crate) use surface::{effect_slices, effect_surface};

use super::model::{DofResult, Effect, SitesReport};
use super::words::file_part;
use crate::error::{Error, Result};
use crate::output::write_file_atomic;
use plotters::style::RGBColor;
use std::path::{Path, PathBuf};

/// One drawn figure.
#[derive(Debug, Clone)]
pub struct Figure {
    /// File name under `figures/`, e.g. `site-map.svg`.
    pub name: String,
    /// What it shows, one line.
    pub caption: String,
    /// Width in SVG pixels.
    pub width: u32,
    /// Height in SVG pixels.
    pub height: u32,
    /// The SVG document.
    pub svg: String,
}

/// The font family figures ask for; the PDF maps it to the loaded font.
pub(crate) const FONT: &str = "sans-serif";
pub(crate) const INK: RGBColor = RGBColor(0, 0, 0);
pub(crate) const GRID: RGBColor = RGBColor(200, 200, 200);
pub(crate) const MID: RGBColor = RGBColor(110, 110, 110);

pub(crate) fn draw_err(what: &str, e: impl std::fmt::Display) -> Error {
    Error::Analysis(format!("drawing {what}: {e}"))
}

/// Width and height of half-page figures (surfaces, slices, stage history).
pub(crate) const HALF: (u32, u32) = (460, 340);

/// The effect of `site` for `dof`, when the DoF's model has one.
pub(crate) fn effect_of<'a>(dof: &'a DofResult, site: &str) -> Option<&'a Effect> {
    dof.effects.iter().find(|e| e.site == site)
}

/// All figures of a report, in a fixed order: the site map, then per DoF its
/// stage history and, per effect surface, the surface and its slices.
pub fn figures(report: &SitesReport) -> Result<Vec<Figure>> {
    let mut out = vec![site_map(report)?];
    for dof in &report.dofs {
        out.push(stage_history(dof)?);
        let scale = surface::common_scale(dof);
        for e in &dof.effects {
            out.push(effect_surface(dof, e, scale)?);
            out.push(effect_slices(dof, e)?);
        }
    }
    Ok(out)
}

/// File name of a per-DoF figure.
pub(crate) fn dof_figure_name(kind: &str, dof: &str, site: Option<&str>) -> String {
    match site {
        Some(s) => format!("{kind}-{}-{}.svg", file_part(dof), file_part(s)),
        None => format!("{kind}-{}.svg", file_part(dof)),
    }
}

/// Writes every figure into `dir` (created if needed); returns their paths.
pub fn write_figures(report: &SitesReport, dir: &Path) -> Result<Vec<PathBuf>> {
    std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, e))?;
    let mut paths = Vec::new();
    for f in figures(report)? {
        let p = dir.join(&f.name);
        write_file_atomic(&p, f.svg.as_bytes())?;
        paths.push(p);
    }
    Ok(paths)
}
