//! Outputs of a run: `sites.json`, `sites.csv`, the site-placement sheet
//! (HTML and PDF) and figures (DESIGN.md section 6).
//!
//! Everything here renders a [`SitesReport`]; nothing is computed anew.
//!
//! - [`write_sites_json`], [`write_sites_csv`]: the machine-readable results
//!   (columns of the CSV: [`SITES_CSV_COLUMNS`]).
//! - [`write_figures`]: `figures/*.svg` — the unrolled site map, per DoF the
//!   stage history and, per effect surface, a heat map and slices at 25%,
//!   50% and 75% of the range.
//! - [`write_sheet`]: `sheet.html` (self-contained: inline SVG and CSS, no
//!   scripts, no network) and `sheet.pdf` on A4 or US Letter ([`PageSize`]).
//! - [`write_all`]: all of the above into one folder.
//!
//! The PDF pages are laid out as SVG (figures plus typeset text) and turned
//! into PDF with `svg2pdf`; text is embedded with system fonts (DejaVu Sans
//! preferred), so it stays selectable and searchable. Output is
//! byte-for-byte deterministic for the same report: no dates or random ids are
//! written into any file.

mod content;
mod figures;
mod html;
mod model;
mod pages;
mod pdf;
mod tables;
mod typeset;
mod words;

pub use figures::{figures, write_figures, Figure};
pub use html::sheet_html;
pub use model::*;
pub use pdf::sheet_pdf;
pub use tables::{sites_csv, sites_json, write_sites_csv, write_sites_json, SITES_CSV_COLUMNS};
pub use typeset::FONT_DIR_ENV;

use crate::error::Result;
use crate::output::write_file_atomic;
use std::path::Path;

/// Paper size of the PDF sheet.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum PageSize {
    /// ISO A4, 210 × 297 mm (595.28 × 841.89 pt).
    #[default]
    A4,
    /// US Letter, 8.5 × 11 in (612 × 792 pt).
    Letter,
}

impl PageSize {
    /// Width and height in PDF points (1/72 in).
    pub fn points(self) -> (f64, f64) {
        match self {
            PageSize::A4 => (595.2756, 841.8898),
            PageSize::Letter => (612.0, 792.0),
        }
    }

    /// `a4` or `letter`.
    pub fn name(self) -> &'static str {
        match self {
            PageSize::A4 => "a4",
            PageSize::Letter => "letter",
        }
    }
}

impl std::str::FromStr for PageSize {
    type Err = crate::Error;
    fn from_str(s: &str) -> Result<Self> {
        match s.to_ascii_lowercase().as_str() {
            "a4" => Ok(PageSize::A4),
            "letter" | "us-letter" => Ok(PageSize::Letter),
            other => Err(crate::Error::Argument(format!(
                "unknown paper size `{other}`; expected `a4` or `letter`"
            ))),
        }
    }
}

/// What [`write_sheet`] wrote.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct SheetInfo {
    /// Number of PDF pages.
    pub pages: usize,
    /// Paper size of the PDF.
    pub page_size: PageSize,
}

/// Writes `sheet.html` and `sheet.pdf` (on `page`) into `out_dir`.
pub fn write_sheet(report: &SitesReport, out_dir: &Path, page: PageSize) -> Result<SheetInfo> {
    let html = sheet_html(report)?;
    let (pdf, pages) = sheet_pdf(report, page)?;
    write_file_atomic(&out_dir.join("sheet.html"), html.as_bytes())?;
    write_file_atomic(&out_dir.join("sheet.pdf"), &pdf)?;
    Ok(SheetInfo {
        pages,
        page_size: page,
    })
}

/// Writes `sites.json`, `sites.csv`, `figures/*.svg`, `sheet.html` and
/// `sheet.pdf` into `out_dir` (which must exist; use
/// [`crate::output::Staging`] to create it safely).
pub fn write_all(report: &SitesReport, out_dir: &Path, page: PageSize) -> Result<SheetInfo> {
    write_sites_json(report, &out_dir.join("sites.json"))?;
    write_sites_csv(report, &out_dir.join("sites.csv"))?;
    write_figures(report, &out_dir.join("figures"))?;
    write_sheet(report, out_dir, page)
}
