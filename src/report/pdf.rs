//! The PDF sheet: the sheet's blocks laid out on SVG pages, each page turned
//! into a PDF Form XObject by `svg2pdf::to_chunk` and placed on its own page
//! with `pdf-writer`, so one document holds every page.

use super::content::{sheet_blocks, Block};
use super::model::SitesReport;
use super::pages::{Anchor, Col, Layout, BODY, SMALL};
use super::typeset::Fonts;
use super::PageSize;
use crate::error::{Error, Result};
use pdf_writer::{Content, Finish, Name, Pdf, Rect, Ref, TextStr};
use std::collections::HashMap;
use svg2pdf::usvg;

fn render_block(lay: &mut Layout, b: &Block) {
    match b {
        Block::Title { title, badge } => {
            let x = lay.left();
            let w = lay.width();
            lay.y += 20.0;
            lay.text(x, lay.y, title, 20.0, true, Anchor::Start);
            let bw = lay.fonts.width(badge, 9.0, true) + 14.0;
            let y = lay.y;
            lay.rect(x + w - bw, y - 15.0, bw, 19.0, "#fff", 1.6);
            lay.text(x + w - bw / 2.0, y - 2.5, badge, 9.0, true, Anchor::Middle);
            lay.y += 12.0;
        }
        Block::Fields(fields) => {
            let x0 = lay.left();
            let colw = lay.width() / 2.0;
            let label_w = 84.0;
            for pair in fields.chunks(2) {
                let mut h: f64 = 0.0;
                let lines: Vec<Vec<String>> = pair
                    .iter()
                    .map(|(_, v)| lay.fonts.wrap(v, BODY, true, colw - label_w - 8.0))
                    .collect();
                for l in &lines {
                    h = h.max(l.len() as f64 * BODY * 1.25);
                }
                lay.ensure(h + 4.0);
                for (i, ((k, _), l)) in pair.iter().zip(&lines).enumerate() {
                    let x = x0 + i as f64 * colw;
                    lay.text(x, lay.y + BODY, k, SMALL, false, Anchor::Start);
                    for (n, line) in l.iter().enumerate() {
                        let y = lay.y + BODY + n as f64 * BODY * 1.25;
                        lay.text(x + label_w, y, line, BODY, true, Anchor::Start);
                    }
                }
                lay.y += h + 3.0;
            }
            lay.gap(4.0);
        }
        Block::Notice(s) => {
            let pad = 7.0;
            let lines = lay.fonts.wrap(s, BODY, true, lay.width() - 2.0 * pad);
            let h = lines.len() as f64 * BODY * 1.3 + 2.0 * pad - 2.0;
            lay.ensure(h + 6.0);
            let (x, y) = (lay.left(), lay.y);
            let w = lay.width();
            lay.rect(x, y, w, h, "#fff", 1.6);
            for (i, l) in lines.iter().enumerate() {
                let ty = y + pad + BODY + i as f64 * BODY * 1.3 - 1.5;
                lay.text(x + pad, ty, l, BODY, true, Anchor::Start);
            }
            lay.y += h + 6.0;
        }
        Block::Heading(s) => lay.heading(s, 60.0),
        Block::Para(s) => lay.para(s, BODY, false, 0.0),
        Block::Note(s) => lay.para(s, SMALL, false, 0.0),
        Block::Bullet { lead, rest, action } => lay.bullet(lead, rest, action.as_deref(), BODY),
        Block::Table {
            cols,
            rows,
            bold_first,
        } => {
            let cols: Vec<Col> = cols
                .iter()
                .map(|(t, f)| Col {
                    title: t.as_str(),
                    frac: *f,
                })
                .collect();
            lay.table(&cols, rows, *bold_first);
        }
        Block::Figure(f, max_w, caption) => lay.figure(f, *max_w, caption),
        Block::FigurePair(a, b) => lay.figure_pair(a, b.as_deref()),
        Block::SignOff { sites } => sign_off(lay, sites),
    }
}

/// Height the start of a block needs on the page it begins on.
fn min_height(lay: &Layout, b: &Block) -> f64 {
    let fig_h = |f: &super::figures::Figure, w: f64| f.height as f64 * w / f.width as f64;
    match b {
        Block::Figure(f, max_w, caption) => {
            let lines = lay.fonts.wrap(caption, SMALL, false, lay.width()).len() as f64;
            0.85 * fig_h(f, lay.width().min(*max_w)) + 4.0 + lines * SMALL * 1.3 + 4.0 + 1.0
        }
        Block::Para(_) => 90.0,
        Block::FigurePair(a, _) => fig_h(a, (lay.width() - 10.0) / 2.0) + 4.0,
        Block::Table { .. } => 48.0,
        Block::SignOff { sites } => 200.0 + 22.0 * sites.len() as f64,
        _ => 40.0,
    }
}

/// Things of the session worth ticking on the record (SAFETY.md: note pain,
/// a session cut short, skin reactions).
pub(crate) const SESSION_CHECKS: [&str; 3] =
    ["wearer reported pain", "session cut short", "skin reaction"];

fn checkbox(lay: &mut Layout, x: f64, y: f64) {
    lay.rect(x, y, 10.0, 10.0, "#fff", 1.0);
}

fn sign_off(lay: &mut Layout, sites: &[(String, String)]) {
    let intro = "Tick a site only after checking it on the wearer: signal on attempted \
                 movement, silence at rest, and contact in the socket through the range of \
                 motion. Record any site moved or replaced.";
    let row_h = 22.0;
    let lines = lay.fonts.wrap(intro, BODY, false, lay.width());
    let total = lines.len() as f64 * BODY * 1.3
        + 8.0
        + row_h * (sites.len() as f64 + 1.0)
        + 12.0
        + 2.0 * 30.0
        + 16.0
        + 22.0
        + 80.0;
    lay.ensure(total);
    lay.para(intro, BODY, false, 0.0);
    let x0 = lay.left();
    let w = lay.width();
    // Column starts as shares of the width.
    let cx = [0.0, 0.08, 0.44, 0.64, 0.88].map(|f| x0 + f * w);
    let titles = [
        "Site",
        "Where",
        "Checked on wearer",
        "Moved to / replaced by",
        "Initials",
    ];
    let y = lay.y;
    lay.rect(x0, y, w, row_h, "#e2e2e2", 0.0);
    for (x, t) in cx.iter().zip(titles) {
        lay.text(x + 3.0, y + 14.0, t, SMALL, true, Anchor::Start);
    }
    lay.y += row_h;
    for (site, place) in sites {
        let y = lay.y;
        lay.text(cx[0] + 3.0, y + 14.0, site, BODY, true, Anchor::Start);
        lay.text(cx[1] + 3.0, y + 14.0, place, SMALL, false, Anchor::Start);
        checkbox(lay, cx[2] + 30.0, y + 6.0);
        lay.line(cx[3] + 4.0, y + 17.0, cx[4] - 8.0, y + 17.0, 0.5);
        lay.line(cx[4] + 4.0, y + 17.0, x0 + w - 4.0, y + 17.0, 0.5);
        lay.y += row_h;
    }
    let y_end = lay.y;
    lay.raw(&format!(
        "<rect x=\"{x0:.2}\" y=\"{:.2}\" width=\"{w:.2}\" height=\"{:.2}\" fill=\"none\" stroke=\"#000\" stroke-width=\"1.2\"/>\n",
        y_end - row_h * (sites.len() as f64 + 1.0),
        row_h * (sites.len() as f64 + 1.0)
    ));
    lay.y += 14.0;
    for pair in [["Name", "Role"], ["Date", "Signature"]] {
        let y = lay.y + 20.0;
        for (i, label) in pair.iter().enumerate() {
            let x = x0 + i as f64 * w / 2.0;
            lay.text(x, y, label, BODY, true, Anchor::Start);
            lay.line(x + 56.0, y + 2.0, x + w / 2.0 - 14.0, y + 2.0, 0.7);
        }
        lay.y += 30.0;
    }
    lay.y += 4.0;
    let y = lay.y + 10.0;
    lay.text(x0, y, "During the session", BODY, true, Anchor::Start);
    let mut x = x0 + 110.0;
    for item in SESSION_CHECKS {
        checkbox(lay, x, y - 8.5);
        lay.text(x + 14.0, y, item, BODY, false, Anchor::Start);
        x += 20.0 + lay.fonts.width(item, BODY, false);
    }
    lay.y += 22.0;
    let y = lay.y;
    lay.text(x0, y + 10.0, "Notes", BODY, true, Anchor::Start);
    lay.raw(&format!(
        "<rect x=\"{x0:.2}\" y=\"{:.2}\" width=\"{w:.2}\" height=\"80\" fill=\"none\" stroke=\"#000\" stroke-width=\"1\"/>\n",
        y + 16.0
    ));
    lay.y += 100.0;
}

/// Lays out the sheet on SVG pages of `size`.
pub(crate) fn sheet_pages(
    report: &SitesReport,
    size: PageSize,
    fonts: &Fonts,
) -> Result<Vec<String>> {
    let blocks = sheet_blocks(report)?;
    let mut lay = Layout::new(fonts, size);
    for (i, b) in blocks.iter().enumerate() {
        match (b, blocks.get(i + 1)) {
            // Keep a heading with the start of what follows it.
            (Block::Heading(s), Some(next)) => {
                let keep = min_height(&lay, next);
                lay.heading(s, keep);
            }
            _ => render_block(&mut lay, b),
        }
    }
    let header = format!(
        "Electrode site plan · subject {} · recorded {} · {} forearm · protocol {}",
        report.subject, report.recorded, report.residual_side, report.protocol
    );
    let footer = "Decision aid, not a diagnosis — clinician review and sign-off required.";
    Ok(lay.finish(&header, footer, &report.tool))
}

fn conv_err(what: String) -> Error {
    Error::Analysis(format!("writing sheet.pdf: {what}"))
}

/// Converts SVG pages (each exactly one page in size, in points) into one PDF.
pub(crate) fn pages_to_pdf(
    pages: &[String],
    size: PageSize,
    fonts: &Fonts,
    title: &str,
) -> Result<Vec<u8>> {
    let (pw, ph) = size.points();
    let opt = usvg::Options {
        fontdb: fonts.db.clone(),
        font_family: fonts.family.clone(),
        ..usvg::Options::default()
    };
    let mut alloc = Ref::new(1);
    let catalog = alloc.bump();
    let tree_id = alloc.bump();
    let info_id = alloc.bump();
    let mut pdf = Pdf::new();
    let mut page_ids = Vec::new();
    for (n, svg) in pages.iter().enumerate() {
        let tree = usvg::Tree::from_str(svg, &opt)
            .map_err(|e| conv_err(format!("page {}: {e}", n + 1)))?;
        let (chunk, xref) = svg2pdf::to_chunk(&tree, svg2pdf::ConversionOptions::default())
            .map_err(|e| conv_err(format!("page {}: {e}", n + 1)))?;
        let mut map = HashMap::new();
        let chunk = chunk.renumber(|old| *map.entry(old).or_insert_with(|| alloc.bump()));
        let xref = *map
            .get(&xref)
            .ok_or_else(|| conv_err(format!("page {}: page graphic missing", n + 1)))?;
        let page_id = alloc.bump();
        let content_id = alloc.bump();
        let name = Name(b"Pg");
        let mut page = pdf.page(page_id);
        page.media_box(Rect::new(0.0, 0.0, pw as f32, ph as f32));
        page.parent(tree_id);
        page.contents(content_id);
        page.resources().x_objects().pair(name, xref);
        page.finish();
        let mut content = Content::new();
        content
            .save_state()
            .transform([pw as f32, 0.0, 0.0, ph as f32, 0.0, 0.0])
            .x_object(name)
            .restore_state();
        pdf.stream(content_id, &content.finish());
        pdf.extend(&chunk);
        page_ids.push(page_id);
    }
    pdf.catalog(catalog).pages(tree_id);
    pdf.pages(tree_id)
        .kids(page_ids.iter().copied())
        .count(page_ids.len() as i32);
    pdf.document_info(info_id)
        .title(TextStr(title))
        .producer(TextStr("mirrorsite"));
    Ok(pdf.finish())
}

/// The PDF sheet on `size` paper and its page count.
///
/// Fails with a clear message when no usable system font is found (see
/// [`super::FONT_DIR_ENV`]) rather than writing pages without text.
pub fn sheet_pdf(report: &SitesReport, size: PageSize) -> Result<(Vec<u8>, usize)> {
    let fonts = Fonts::load()?;
    let pages = sheet_pages(report, size, &fonts)?;
    let title = format!("Electrode site plan — {}", report.subject);
    let pdf = pages_to_pdf(&pages, size, &fonts, &title)?;
    Ok((pdf, pages.len()))
}
