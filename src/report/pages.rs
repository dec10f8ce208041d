//! Page layout of the PDF sheet: a small flow layout that places headings,
//! wrapped paragraphs, tables (split across pages with the header repeated)
//! and figures on fixed-size SVG pages, in points.

use super::figures::Figure;
use super::typeset::Fonts;
use super::words::esc;
use super::PageSize;
use std::fmt::Write;

pub(crate) const BODY: f64 = 9.5;
pub(crate) const SMALL: f64 = 8.5;
const HEAD: f64 = 13.0;
const MARGIN_X: f64 = 42.0;
const MARGIN_TOP: f64 = 54.0;
const MARGIN_BOTTOM: f64 = 58.0;
const HEADER_FILL: &str = "#e2e2e2";
const ZEBRA_FILL: &str = "#f4f4f4";

/// Horizontal anchor of a text line.
#[derive(Clone, Copy)]
pub(crate) enum Anchor {
    Start,
    Middle,
}

/// A table column: title and share of the content width.
pub(crate) struct Col<'a> {
    pub title: &'a str,
    pub frac: f64,
}

/// Pages being laid out.
pub(crate) struct Layout<'a> {
    pub fonts: &'a Fonts,
    pub pw: f64,
    pub ph: f64,
    pages: Vec<String>,
    cur: String,
    pub y: f64,
}

impl<'a> Layout<'a> {
    pub(crate) fn new(fonts: &'a Fonts, size: PageSize) -> Layout<'a> {
        let (pw, ph) = size.points();
        Layout {
            fonts,
            pw,
            ph,
            pages: Vec::new(),
            cur: String::new(),
            y: MARGIN_TOP,
        }
    }

    pub(crate) fn left(&self) -> f64 {
        MARGIN_X
    }

    pub(crate) fn width(&self) -> f64 {
        self.pw - 2.0 * MARGIN_X
    }

    fn bottom(&self) -> f64 {
        self.ph - MARGIN_BOTTOM
    }

    pub(crate) fn break_page(&mut self) {
        self.pages.push(std::mem::take(&mut self.cur));
        self.y = MARGIN_TOP;
    }

    /// Starts a new page unless `h` points fit on this one.
    pub(crate) fn ensure(&mut self, h: f64) {
        if self.y + h > self.bottom() && self.y > MARGIN_TOP + 1.0 {
            self.break_page();
        }
    }

    pub(crate) fn gap(&mut self, h: f64) {
        self.y += h;
    }

    /// Raw SVG on the current page.
    pub(crate) fn raw(&mut self, s: &str) {
        self.cur.push_str(s);
    }

    pub(crate) fn text(&mut self, x: f64, y: f64, s: &str, size: f64, bold: bool, a: Anchor) {
        let anchor = match a {
            Anchor::Start => "",
            Anchor::Middle => " text-anchor=\"middle\"",
        };
        let weight = if bold { " font-weight=\"bold\"" } else { "" };
        let _ = writeln!(
            self.cur,
            "<text x=\"{x:.2}\" y=\"{y:.2}\" font-size=\"{size}\"{weight}{anchor}>{}</text>",
            esc(s)
        );
    }

    pub(crate) fn rect(&mut self, x: f64, y: f64, w: f64, h: f64, fill: &str, stroke: f64) {
        let stroke = if stroke > 0.0 {
            format!(" stroke=\"#000\" stroke-width=\"{stroke}\"")
        } else {
            String::new()
        };
        let _ = writeln!(
            self.cur,
            "<rect x=\"{x:.2}\" y=\"{y:.2}\" width=\"{w:.2}\" height=\"{h:.2}\" fill=\"{fill}\"{stroke}/>"
        );
    }

    pub(crate) fn line(&mut self, x0: f64, y0: f64, x1: f64, y1: f64, width: f64) {
        let _ = writeln!(
            self.cur,
            "<line x1=\"{x0:.2}\" y1=\"{y0:.2}\" x2=\"{x1:.2}\" y2=\"{y1:.2}\" stroke=\"#000\" stroke-width=\"{width}\"/>"
        );
    }

    /// A section heading with a rule; kept with at least `keep` points of
    /// what follows.
    pub(crate) fn heading(&mut self, s: &str, keep: f64) {
        self.ensure(HEAD * 2.2 + keep);
        if self.y > MARGIN_TOP + 1.0 {
            self.gap(8.0);
        }
        let (x, w) = (self.left(), self.width());
        self.y += HEAD;
        self.text(x, self.y, s, HEAD, true, Anchor::Start);
        self.y += 4.0;
        self.line(x, self.y, x + w, self.y, 1.2);
        self.y += 9.0;
    }

    /// A wrapped paragraph, `indent` points in from the left margin.
    pub(crate) fn para(&mut self, s: &str, size: f64, bold: bool, indent: f64) {
        let lh = size * 1.3;
        let lines = self.fonts.wrap(s, size, bold, self.width() - indent);
        for l in lines {
            self.ensure(lh);
            self.y += size;
            let x = self.left() + indent;
            self.text(x, self.y, &l, size, bold, Anchor::Start);
            self.y += lh - size;
        }
        self.y += size * 0.4;
    }

    /// A bullet: a bold lead-in (`lead`) then `rest`, wrapped with a hanging
    /// indent; `action`, when given, follows on its own line after a bold
    /// "What to do:".
    pub(crate) fn bullet(&mut self, lead: &str, rest: &str, action: Option<&str>, size: f64) {
        let lh = size * 1.3;
        let x = self.left();
        self.ensure(lh * 3.0);
        self.raw(&format!(
            "<circle cx=\"{:.2}\" cy=\"{:.2}\" r=\"1.8\" fill=\"#000\"/>\n",
            x + 4.0,
            self.y + size * 0.67
        ));
        self.lead_run(lead, rest, size);
        if let Some(a) = action {
            self.lead_run("What to do:", a, size);
        }
        self.y += size * 0.35;
    }

    /// Bold `lead`, then `rest` filling the first line and wrapping under it,
    /// 12 pt in from the left margin.
    fn lead_run(&mut self, lead: &str, rest: &str, size: f64) {
        let lh = size * 1.3;
        let indent = 12.0;
        let w = self.width() - indent;
        let lead_w = self.fonts.width(lead, size, true) + self.fonts.width(" ", size, false);
        let first_room = (w - lead_w).max(w * 0.3);
        let mut words = rest.split_whitespace().peekable();
        let mut first = String::new();
        while let Some(wd) = words.peek() {
            let cand = if first.is_empty() {
                wd.to_string()
            } else {
                format!("{first} {wd}")
            };
            if self.fonts.width(&cand, size, false) > first_room {
                break;
            }
            first = cand;
            words.next();
        }
        let remainder: Vec<&str> = words.collect();
        let more = self.fonts.wrap(&remainder.join(" "), size, false, w);
        self.ensure(lh);
        self.y += size;
        let x = self.left() + indent;
        self.text(x, self.y, lead, size, true, Anchor::Start);
        self.text(x + lead_w, self.y, &first, size, false, Anchor::Start);
        self.y += lh - size;
        for l in more.iter().filter(|l| !l.is_empty()) {
            self.ensure(lh);
            self.y += size;
            self.text(x, self.y, l, size, false, Anchor::Start);
            self.y += lh - size;
        }
    }

    /// A table with wrapped cells; split across pages with the header repeated.
    /// Cells of the first column are bold when `bold_first`.
    pub(crate) fn table(&mut self, cols: &[Col], rows: &[Vec<String>], bold_first: bool) {
        let size = SMALL;
        let lh = size * 1.25;
        let pad = 3.0;
        let total: f64 = cols.iter().map(|c| c.frac).sum();
        let widths: Vec<f64> = cols.iter().map(|c| self.width() * c.frac / total).collect();
        let wrap_row = |cells: &[String], bold: &dyn Fn(usize) -> bool| -> Vec<Vec<String>> {
            cells
                .iter()
                .enumerate()
                .map(|(i, c)| {
                    let w = widths.get(i).copied().unwrap_or(50.0) - 2.0 * pad;
                    self.fonts.wrap(c, size, bold(i), w)
                })
                .collect()
        };
        let header: Vec<String> = cols.iter().map(|c| c.title.to_string()).collect();
        let head_cells = wrap_row(&header, &|_| true);
        let row_h = |cells: &Vec<Vec<String>>| {
            cells.iter().map(|c| c.len()).max().unwrap_or(1) as f64 * lh + 2.0 * pad
        };
        let head_h = row_h(&head_cells);
        let body: Vec<Vec<Vec<String>>> = rows
            .iter()
            .map(|r| wrap_row(r, &|i| bold_first && i == 0))
            .collect();
        let first_h = body.first().map(&row_h).unwrap_or(0.0);
        self.ensure(head_h + first_h);
        let draw_row = |lay: &mut Layout,
                        cells: &Vec<Vec<String>>,
                        h: f64,
                        fill: Option<&str>,
                        bold: &dyn Fn(usize) -> bool| {
            let x0 = lay.left();
            let y0 = lay.y;
            if let Some(f) = fill {
                lay.rect(x0, y0, lay.width(), h, f, 0.0);
            }
            let mut x = x0;
            for (i, lines) in cells.iter().enumerate() {
                for (k, l) in lines.iter().enumerate() {
                    let ty = y0 + pad + size + k as f64 * lh - 1.0;
                    lay.text(x + pad, ty, l, size, bold(i), Anchor::Start);
                }
                x += widths.get(i).copied().unwrap_or(50.0);
            }
            lay.y += h;
            let yl = lay.y;
            lay.line(x0, yl, x0 + lay.width(), yl, 0.4);
        };
        let draw_head = |lay: &mut Layout| {
            let y = lay.y;
            draw_row(lay, &head_cells, head_h, Some(HEADER_FILL), &|_| true);
            let x0 = lay.left();
            lay.line(x0, y, x0 + lay.width(), y, 0.8);
        };
        draw_head(self);
        for (n, cells) in body.iter().enumerate() {
            let h = row_h(cells);
            if self.y + h > self.bottom() {
                self.break_page();
                draw_head(self);
            }
            let fill = if n % 2 == 1 { Some(ZEBRA_FILL) } else { None };
            draw_row(self, cells, h, fill, &|i| bold_first && i == 0);
        }
        self.y += 8.0;
    }

    /// A figure scaled to `width` points at `x`, top at the current `y`
    /// (does not advance `y`); returns its height in points.
    pub(crate) fn place_figure(&mut self, fig: &Figure, x: f64, width: f64) -> f64 {
        let s = width / fig.width as f64;
        let _ = writeln!(
            self.cur,
            "<g transform=\"translate({x:.2} {:.2}) scale({s:.5})\">\n{}\n</g>",
            self.y,
            svg_body(&fig.svg)
        );
        fig.height as f64 * s
    }

    /// One figure at full width (or `max_w`, centred) with `caption` under it,
    /// kept on one page; it shrinks to as little as 85% of that width to stay
    /// on the current page.
    pub(crate) fn figure(&mut self, fig: &Figure, max_w: f64, caption: &str) {
        let full = self.width().min(max_w);
        let cap_lines = self.fonts.wrap(caption, SMALL, false, self.width());
        let cap_h = if caption.is_empty() {
            0.0
        } else {
            cap_lines.len() as f64 * SMALL * 1.3 + 4.0
        };
        let aspect = fig.height as f64 / fig.width as f64;
        let room = self.bottom() - self.y - 4.0 - cap_h;
        let w = if full * aspect > room && room / aspect >= 0.85 * full {
            room / aspect
        } else {
            full
        };
        let h = aspect * w;
        self.ensure(h + 4.0 + cap_h);
        let x = self.left() + (self.width() - w) / 2.0;
        self.place_figure(fig, x, w);
        self.y += h + 4.0;
        if !caption.is_empty() {
            self.para(caption, SMALL, false, 0.0);
        }
    }

    /// Two figures side by side, kept on one page.
    pub(crate) fn figure_pair(&mut self, a: &Figure, b: Option<&Figure>) {
        let gap = 10.0;
        let w = (self.width() - gap) / 2.0;
        let ha = a.height as f64 * w / a.width as f64;
        let hb = b
            .map(|b| b.height as f64 * w / b.width as f64)
            .unwrap_or(0.0);
        let h = ha.max(hb);
        self.ensure(h + 4.0);
        let x = self.left();
        self.place_figure(a, x, w);
        if let Some(b) = b {
            self.place_figure(b, x + w + gap, w);
        }
        self.y += h + 4.0;
    }

    /// The finished pages as SVG documents, with running header and footer.
    pub(crate) fn finish(mut self, header: &str, footer: &str, tool: &str) -> Vec<String> {
        if !self.cur.is_empty() {
            self.pages.push(std::mem::take(&mut self.cur));
        }
        let n = self.pages.len();
        let (pw, ph) = (self.pw, self.ph);
        let family = esc(&self.fonts.family);
        let x0 = MARGIN_X;
        let x1 = pw - MARGIN_X;
        let pages = std::mem::take(&mut self.pages);
        // Trim the running header so it never runs into the page number.
        let right_w = self.fonts.width("page 99 of 99", 8.5, false);
        let room = x1 - x0 - right_w - 12.0;
        let mut header = header.to_string();
        if self.fonts.width(&header, 8.5, false) > room {
            while !header.is_empty() && self.fonts.width(&format!("{header}…"), 8.5, false) > room
            {
                header.pop();
            }
            header.push('…');
        }
        let header = header.as_str();
        pages
            .into_iter()
            .enumerate()
            .map(|(i, body)| {
                let mut s = String::new();
                let _ = writeln!(
                    s,
                    "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"{pw}\" height=\"{ph}\" \
                     viewBox=\"0 0 {pw} {ph}\" font-family=\"{family}\" fill=\"#000\">"
                );
                let _ = writeln!(s, "<rect x=\"0\" y=\"0\" width=\"{pw}\" height=\"{ph}\" fill=\"#fff\"/>");
                let hy = 30.0;
                let _ = writeln!(
                    s,
                    "<text x=\"{x0}\" y=\"{hy}\" font-size=\"8.5\">{}</text>",
                    esc(header)
                );
                let _ = writeln!(
                    s,
                    "<text x=\"{x1:.2}\" y=\"{hy}\" font-size=\"8.5\" text-anchor=\"end\">page {} of {n}</text>",
                    i + 1
                );
                let _ = writeln!(
                    s,
                    "<line x1=\"{x0}\" y1=\"{:.2}\" x2=\"{x1:.2}\" y2=\"{:.2}\" stroke=\"#000\" stroke-width=\"0.6\"/>",
                    hy + 5.0,
                    hy + 5.0
                );
                s.push_str(&body);
                let fy = ph - 34.0;
                let _ = writeln!(
                    s,
                    "<line x1=\"{x0}\" y1=\"{fy:.2}\" x2=\"{x1:.2}\" y2=\"{fy:.2}\" stroke=\"#000\" stroke-width=\"0.6\"/>"
                );
                let _ = writeln!(
                    s,
                    "<text x=\"{x0}\" y=\"{:.2}\" font-size=\"8\" font-weight=\"bold\">{}</text>",
                    fy + 12.0,
                    esc(footer)
                );
                let _ = writeln!(
                    s,
                    "<text x=\"{x1:.2}\" y=\"{:.2}\" font-size=\"8\" text-anchor=\"end\">{}</text>",
                    fy + 12.0,
                    esc(tool)
                );
                s.push_str("</svg>\n");
                s
            })
            .collect()
    }
}

/// The content of an SVG document without its outer `<svg>` element.
pub(crate) fn svg_body(svg: &str) -> &str {
    let start = svg
        .find("<svg")
        .and_then(|i| svg[i..].find('>').map(|j| i + j + 1))
        .unwrap_or(0);
    let end = svg.rfind("</svg>").unwrap_or(svg.len());
    if end > start {
        &svg[start..end]
    } else {
        ""
    }
}
