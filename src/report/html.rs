//! `sheet.html`: the sheet as one self-contained page (inline CSS and SVG,
//! no scripts, no fonts or images fetched) that prints cleanly.

use super::content::{sheet_blocks, Block};
use super::figures::Figure;
use super::model::SitesReport;
use super::words::esc;
use crate::error::Result;
use std::fmt::Write;

const CSS: &str = r#"
:root { color: #000; background: #fff; }
body { font-family: "DejaVu Sans", "Liberation Sans", Arial, sans-serif; font-size: 10.5pt;
       line-height: 1.4; max-width: 190mm; margin: 12mm auto; padding: 0 6mm; }
h1 { font-size: 20pt; margin: 0; }
h2 { font-size: 13pt; border-bottom: 1.2pt solid #000; margin: 18pt 0 6pt; padding-bottom: 2pt;
     break-after: avoid; page-break-after: avoid; }
.top { display: flex; justify-content: space-between; align-items: center; gap: 12pt; }
.badge { border: 1.6pt solid #000; padding: 3pt 8pt; font-weight: bold; font-size: 9.5pt; }
dl.fields { display: grid; grid-template-columns: 7.5em 1fr 7.5em 1fr; gap: 2pt 8pt; margin: 10pt 0; }
dl.fields dt { font-size: 9pt; }
dl.fields dd { margin: 0; font-weight: bold; }
.notice { border: 1.6pt solid #000; padding: 6pt 8pt; font-weight: bold; }
p.note, .note { font-size: 9pt; }
table { border-collapse: collapse; width: 100%; font-size: 9pt; margin: 4pt 0 8pt; }
th { background: #e2e2e2; text-align: left; border-top: 0.8pt solid #000; }
th, td { padding: 3pt 4pt; vertical-align: top; border-bottom: 0.4pt solid #000; }
tr:nth-child(even) td { background: #f4f4f4; }
td.key { font-weight: bold; }
tr { break-inside: avoid; page-break-inside: avoid; }
ul.flags { padding-left: 1.2em; }
ul.flags li { margin-bottom: 4pt; }
figure { margin: 6pt 0; break-inside: avoid; page-break-inside: avoid; }
figure svg { width: 100%; height: auto; display: block; }
.pair { display: flex; gap: 10pt; break-inside: avoid; page-break-inside: avoid; }
.pair figure { flex: 1 1 0; max-width: 50%; }
.signoff { border: 1.2pt solid #000; padding: 8pt; break-inside: avoid; page-break-inside: avoid; }
.signoff td { height: 18pt; }
.box { display: inline-block; width: 10pt; height: 10pt; border: 1pt solid #000; }
.sign { display: grid; grid-template-columns: 5em 1fr 5em 1fr; gap: 14pt 8pt; margin: 14pt 0; }
.sign span.line { border-bottom: 0.7pt solid #000; }
.notes { border: 1pt solid #000; height: 70pt; margin-top: 4pt; }
footer { margin-top: 16pt; border-top: 0.6pt solid #000; font-size: 8.5pt; padding-top: 3pt; }
@page { margin: 14mm; }
@media print { body { margin: 0; max-width: none; padding: 0; } }
"#;

/// A plotters SVG for inline use: without its namespace declaration (HTML
/// parsers put `<svg>` in the SVG namespace themselves), sized by CSS.
fn inline_svg(f: &Figure) -> String {
    f.svg
        .replacen(" xmlns=\"http://www.w3.org/2000/svg\"", "", 1)
        .replacen(
            "<svg ",
            &format!(
                "<svg role=\"img\" aria-label=\"{}\" preserveAspectRatio=\"xMidYMid meet\" ",
                esc(&f.caption)
            ),
            1,
        )
}

fn figure(out: &mut String, f: &Figure) {
    let _ = writeln!(out, "<figure>{}</figure>", inline_svg(f));
}

/// The HTML sheet.
pub fn sheet_html(report: &SitesReport) -> Result<String> {
    let blocks = sheet_blocks(report)?;
    let mut h = String::new();
    let _ = writeln!(
        h,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n\
         <title>Electrode site plan — {}</title>\n<style>{CSS}</style>\n</head>\n<body>",
        esc(&report.subject)
    );
    let mut in_list = false;
    for b in &blocks {
        let is_bullet = matches!(b, Block::Bullet { .. });
        if in_list && !is_bullet {
            h.push_str("</ul>\n");
            in_list = false;
        }
        match b {
            Block::Title { title, badge } => {
                let _ = writeln!(
                    h,
                    "<div class=\"top\"><h1>{}</h1><div class=\"badge\">{}</div></div>",
                    esc(title),
                    esc(badge)
                );
            }
            Block::Fields(fields) => {
                h.push_str("<dl class=\"fields\">\n");
                for (k, v) in fields {
                    let _ = writeln!(h, "<dt>{}</dt><dd>{}</dd>", esc(k), esc(v));
                }
                h.push_str("</dl>\n");
            }
            Block::Notice(s) => {
                let _ = writeln!(h, "<p class=\"notice\">{}</p>", esc(s));
            }
            Block::Heading(s) => {
                let _ = writeln!(h, "<h2>{}</h2>", esc(s));
            }
            Block::Para(s) => {
                let _ = writeln!(h, "<p>{}</p>", esc(s));
            }
            Block::Note(s) => {
                let _ = writeln!(h, "<p class=\"note\">{}</p>", esc(s));
            }
            Block::Bullet { lead, rest, action } => {
                if !in_list {
                    h.push_str("<ul class=\"flags\">\n");
                    in_list = true;
                }
                let _ = write!(h, "<li><strong>{}</strong> {}", esc(lead), esc(rest));
                if let Some(a) = action {
                    let _ = write!(h, "<br><strong>What to do:</strong> {}", esc(a));
                }
                h.push_str("</li>\n");
            }
            Block::Table {
                cols,
                rows,
                bold_first,
            } => {
                h.push_str("<table>\n<thead><tr>");
                for (t, _) in cols {
                    let _ = write!(h, "<th>{}</th>", esc(t));
                }
                h.push_str("</tr></thead>\n<tbody>\n");
                for r in rows {
                    h.push_str("<tr>");
                    for (i, c) in r.iter().enumerate() {
                        let class = if *bold_first && i == 0 {
                            " class=\"key\""
                        } else {
                            ""
                        };
                        let _ = write!(h, "<td{class}>{}</td>", esc(c));
                    }
                    h.push_str("</tr>\n");
                }
                h.push_str("</tbody>\n</table>\n");
            }
            Block::Figure(f, _, caption) => {
                let _ = writeln!(
                    h,
                    "<figure>{}<figcaption class=\"note\">{}</figcaption></figure>",
                    inline_svg(f),
                    esc(caption)
                );
            }
            Block::FigurePair(a, b) => {
                h.push_str("<div class=\"pair\">\n");
                figure(&mut h, a);
                if let Some(b) = b {
                    figure(&mut h, b);
                }
                h.push_str("</div>\n");
            }
            Block::SignOff { sites } => {
                h.push_str(
                    "<div class=\"signoff\">\n<p>Tick a site only after checking it on the \
                     wearer: signal on attempted movement, silence at rest, and contact in \
                     the socket through the range of motion. Record any site moved or \
                     replaced.</p>\n<table>\n<thead><tr><th>Site</th><th>Where</th>\
                     <th>Checked on wearer</th><th>Moved to / replaced by</th>\
                     <th>Initials</th></tr></thead>\n<tbody>\n",
                );
                for (s, place) in sites {
                    let _ = writeln!(
                        h,
                        "<tr><td class=\"key\">{}</td><td>{}</td><td><span class=\"box\">\
                         </span></td><td></td><td></td></tr>",
                        esc(s),
                        esc(place)
                    );
                }
                h.push_str(
                    "</tbody>\n</table>\n<div class=\"sign\"><strong>Name</strong>\
                     <span class=\"line\"></span><strong>Role</strong><span class=\"line\">\
                     </span><strong>Date</strong><span class=\"line\"></span>\
                     <strong>Signature</strong><span class=\"line\"></span></div>\n",
                );
                h.push_str("<p><strong>During the session</strong>");
                for item in super::pdf::SESSION_CHECKS {
                    let _ = write!(h, " &nbsp; <span class=\"box\"></span> {}", esc(item));
                }
                h.push_str("</p>\n<strong>Notes</strong>\n<div class=\"notes\"></div>\n</div>\n");
            }
        }
    }
    if in_list {
        h.push_str("</ul>\n");
    }
    let _ = writeln!(
        h,
        "<footer>Electrode site plan · subject {} · recorded {} · {} — decision aid, not a \
         diagnosis: every placement is checked on the wearer and signed off by the treating \
         clinician.</footer>\n</body>\n</html>",
        esc(&report.subject),
        esc(&report.recorded),
        esc(&report.tool)
    );
    Ok(h)
}
