//! The site-placement sheet: HTML content, PDF structure, paper sizes,
//! determinism and (when poppler's pdftotext is installed) the PDF's text.

use crate::report_fixture as fixture;

use mirrorsite::report::{self, PageSize};
use std::path::Path;
use std::process::Command;

/// Un-escapes the five XML entities the sheet writes.
fn unescape(s: &str) -> String {
    s.replace("&lt;", "<")
        .replace("&gt;", ">")
        .replace("&quot;", "\"")
        .replace("&#39;", "'")
        .replace("&amp;", "&")
}

/// Page objects of a PDF written by pdf-writer (uncompressed object
/// dictionaries: `/Type /Page` for pages, `/Type /Pages` for the tree).
fn page_count(pdf: &[u8]) -> usize {
    let s = String::from_utf8_lossy(pdf);
    s.matches("/Type /Page").count() - s.matches("/Type /Pages").count()
}

fn media_boxes(pdf: &[u8]) -> Vec<(f64, f64)> {
    let s = String::from_utf8_lossy(pdf);
    s.match_indices("/MediaBox [")
        .map(|(i, m)| {
            let rest = &s[i + m.len()..];
            let end = rest.find(']').unwrap();
            let v: Vec<f64> = rest[..end]
                .split_whitespace()
                .map(|x| x.parse().unwrap())
                .collect();
            (v[2] - v[0], v[3] - v[1])
        })
        .collect()
}

#[test]
fn html_is_self_contained_and_names_every_planned_site_and_flag() {
    let r = fixture::report();
    let html = report::sheet_html(&r).unwrap();
    assert!(html.starts_with("<!DOCTYPE html>"));
    assert!(!html.contains("http://") && !html.contains("https://"));
    assert!(!html.contains("<script"));
    assert!(!html.contains("<link") && !html.contains("@import") && !html.contains("url("));
    let text = unescape(&html);
    for p in &r.plan.sites {
        assert!(
            text.contains(&format!("<td class=\"key\">{}</td>", p.site)),
            "{}",
            p.site
        );
    }
    for f in &r.flags {
        assert!(text.contains(&f.why), "flag text missing: {}", f.why);
    }
    for key in [
        "DEMO-07",
        "2026-11-20",
        "left forearm",
        "hand-basic",
        "Decision aid — clinician review required",
        "chosen in 11 of 20 resamples",
        "Stop on phantom limb pain.",
        "Signature",
    ] {
        assert!(text.contains(key), "missing {key}");
    }
    // One inline SVG per figure the sheet shows: the map, two stage
    // histories, and a surface and slices for each planned site-DoF pair
    // with an effect (fingers: A1, A6; wrist: A2, A4) → 1 + 2 + 2 × 4 = 11.
    assert_eq!(html.matches("<svg ").count(), 11);
}

#[test]
fn pdf_has_pages_of_the_requested_size() {
    let r = fixture::report();
    let (a4, n_a4) = report::sheet_pdf(&r, PageSize::A4).unwrap();
    let (letter, n_letter) = report::sheet_pdf(&r, PageSize::Letter).unwrap();
    assert!(a4.starts_with(b"%PDF-"));
    assert!(letter.starts_with(b"%PDF-"));
    // The fixture's content (site map, flags, two DoF sections with figures,
    // alignment, cautions, sign-off) does not fit on fewer than 4 pages.
    assert!((4..=9).contains(&n_a4), "{n_a4} pages");
    assert_eq!(page_count(&a4), n_a4);
    assert_eq!(page_count(&letter), n_letter);
    // ISO 216: A4 is 210 × 297 mm = 595.28 × 841.89 pt; US Letter 8.5 × 11 in = 612 × 792 pt.
    let boxes = media_boxes(&a4);
    assert_eq!(boxes.len(), n_a4);
    for (w, h) in boxes {
        assert!(
            (w - 595.28).abs() < 0.5 && (h - 841.89).abs() < 0.5,
            "{w} × {h}"
        );
    }
    for (w, h) in media_boxes(&letter) {
        assert!(
            (w - 612.0).abs() < 0.01 && (h - 792.0).abs() < 0.01,
            "{w} × {h}"
        );
    }
}

#[test]
fn sheet_is_repeatable_and_written_where_asked() {
    let r = fixture::report();
    let dir = tempfile::tempdir().unwrap();
    let info = report::write_sheet(&r, dir.path(), PageSize::A4).unwrap();
    let pdf1 = std::fs::read(dir.path().join("sheet.pdf")).unwrap();
    let html1 = std::fs::read(dir.path().join("sheet.html")).unwrap();
    assert!(
        html1 == report::sheet_html(&r).unwrap().into_bytes(),
        "same report, same HTML"
    );
    // svg2pdf 0.12 keeps fonts and resource names in hash maps, so object
    // order inside the PDF may differ between runs; the pages, their count
    // and their text do not (compared below when pdftotext is installed).
    let (pdf2, n) = report::sheet_pdf(&r, PageSize::A4).unwrap();
    assert_eq!(n, info.pages);
    assert_eq!(page_count(&pdf2), page_count(&pdf1));
    // No creation date or other clock reading is embedded.
    let s = String::from_utf8_lossy(&pdf1);
    assert!(!s.contains("/CreationDate") && !s.contains("/ModDate"));
    let p2 = dir.path().join("again.pdf");
    std::fs::write(&p2, &pdf2).unwrap();
    match (pdftotext(&dir.path().join("sheet.pdf")), pdftotext(&p2)) {
        (Some(a), Some(b)) => assert!(a == b, "same report, same PDF text"),
        _ => eprintln!("text comparison skipped: pdftotext (poppler-utils) is not installed"),
    }
}

fn pdftotext(pdf: &Path) -> Option<String> {
    let out = Command::new("pdftotext")
        .arg("-layout")
        .arg(pdf)
        .arg("-")
        .output()
        .ok()?;
    out.status
        .success()
        .then(|| String::from_utf8_lossy(&out.stdout).into_owned())
}

#[test]
fn pdf_text_shows_planned_sites_and_flags() {
    let r = fixture::report();
    let dir = tempfile::tempdir().unwrap();
    report::write_sheet(&r, dir.path(), PageSize::A4).unwrap();
    let Some(text) = pdftotext(&dir.path().join("sheet.pdf")) else {
        eprintln!("skipped: pdftotext (poppler-utils) is not installed");
        return;
    };
    let flat = text.split_whitespace().collect::<Vec<_>>().join(" ");
    for key in [
        "Electrode site plan",
        "DEMO-07",
        "Decision aid — clinician review required",
        "Planned sites",
        "Flags — look at these before fitting",
        "Low confidence — A6:",
        "Suspect signal — B4:",
        "Bad signal — B7:",
        "Doubtful alignment — fingers-flex-2:",
        "Channel budget — wrist:",
        "Clinician review and sign-off",
        "DORSAL",
        "VOLAR",
    ] {
        assert!(flat.contains(key), "PDF text lacks {key:?}");
    }
    for p in &r.plan.sites {
        assert!(flat.contains(&p.site), "{}", p.site);
    }
}

/// Writes every output of the fixture into `$MIRRORSITE_SHEET_SAMPLE` for a
/// look by eye (`pdftoppm -png -r 60 sheet.pdf page`); does nothing unset.
#[test]
fn write_sample_when_asked() {
    let Some(dir) = std::env::var_os("MIRRORSITE_SHEET_SAMPLE") else {
        return;
    };
    let dir = Path::new(&dir);
    std::fs::create_dir_all(dir).unwrap();
    let r = fixture::report();
    report::write_all(&r, dir, PageSize::A4).unwrap();
    let (letter, _) = report::sheet_pdf(&r, PageSize::Letter).unwrap();
    std::fs::write(dir.join("sheet-letter.pdf"), letter).unwrap();
}

#[test]
fn an_empty_result_still_makes_a_sheet_that_says_so() {
    // A session where nothing could be selected: no DoF results, no plan.
    let mut r = fixture::report();
    r.dofs.clear();
    r.plan.sites.clear();
    r.plan.dofs.clear();
    r.alignment.clear();
    r.flags.clear();
    let html = report::sheet_html(&r).unwrap();
    assert!(html.contains("No site was planned"));
    assert!(html.contains("No flags were raised"));
    let (pdf, n) = report::sheet_pdf(&r, PageSize::Letter).unwrap();
    assert!(pdf.starts_with(b"%PDF-") && n >= 1);
    r.site_info.clear();
    assert!(report::sheet_html(&r).is_ok());
}
