//! Fonts for the PDF sheet: loading system fonts, measuring and wrapping text.
//!
//! Widths are the sum of the font's horizontal glyph advances (kerning is
//! ignored, which errs by well under 1% of a line for sans-serif text).

use crate::error::{Error, Result};
use std::sync::Arc;
use svg2pdf::usvg::fontdb::{self, Database, Family, Query, Stretch, Style, Weight};

/// Environment variable naming an extra folder of TrueType/OpenType fonts to
/// load before the system fonts (for machines without system fonts).
pub const FONT_DIR_ENV: &str = "MIRRORSITE_FONT_DIR";

/// Sans-serif families tried in this order.
const PREFERRED: [&str; 6] = [
    "DejaVu Sans",
    "Liberation Sans",
    "Noto Sans",
    "FreeSans",
    "Arial",
    "Helvetica",
];

struct FaceData {
    data: Vec<u8>,
    index: u32,
}

/// The loaded font database and the measured faces of the chosen family.
pub(crate) struct Fonts {
    /// Database handed to usvg.
    pub db: Arc<Database>,
    /// The family every text element names.
    pub family: String,
    regular: FaceData,
    bold: FaceData,
}

fn face(db: &Database, family: &str, weight: Weight) -> Option<FaceData> {
    let id = db.query(&Query {
        families: &[Family::Name(family)],
        weight,
        stretch: Stretch::Normal,
        style: Style::Normal,
    })?;
    db.with_face_data(id, |data, index| FaceData {
        data: data.to_vec(),
        index,
    })
}

/// A copy of `sys` in which the faces of `family` are held in memory (usvg
/// reads a file-backed face from disk for every text element it lays out,
/// which costs seconds per page); other faces stay file-backed for the rare
/// fallback glyph.
fn in_memory(sys: &Database, family: &str) -> Database {
    let mut files: Vec<(std::path::PathBuf, bool)> = sys
        .faces()
        .filter_map(|f| match &f.source {
            fontdb::Source::File(p) => {
                Some((p.clone(), f.families.iter().any(|(n, _)| n == family)))
            }
            _ => None,
        })
        .collect();
    files.sort();
    files.dedup_by(|a, b| {
        if a.0 == b.0 {
            b.1 |= a.1;
            true
        } else {
            false
        }
    });
    let mut db = Database::new();
    for (path, wanted) in files {
        if wanted {
            if let Ok(bytes) = std::fs::read(&path) {
                db.load_font_data(bytes);
                continue;
            }
        }
        let _ = db.load_font_file(&path);
    }
    // Faces given as data (none from the system loader) are copied as they are.
    for f in sys.faces() {
        if matches!(f.source, fontdb::Source::Binary(_)) {
            if let Some(bytes) = sys.with_face_data(f.id, |d, _| d.to_vec()) {
                db.load_font_data(bytes);
            }
        }
    }
    db
}

impl Fonts {
    /// Loads the system fonts (and those under [`FONT_DIR_ENV`]) and picks a
    /// sans-serif family with a regular and a bold face.
    pub(crate) fn load() -> Result<Fonts> {
        let mut db = Database::new();
        if let Some(dir) = std::env::var_os(FONT_DIR_ENV) {
            db.load_fonts_dir(dir);
        }
        db.load_system_fonts();
        Fonts::choose(db)
    }

    /// Picks the family from a loaded database (see [`Fonts::load`]).
    fn choose(db: Database) -> Result<Fonts> {
        let mut names: Vec<String> = PREFERRED.iter().map(|s| s.to_string()).collect();
        // Any other family as a last resort, in a stable order.
        let mut others: Vec<String> = db
            .faces()
            .flat_map(|f| f.families.iter().map(|(n, _)| n.clone()))
            .collect();
        others.sort();
        others.dedup();
        names.extend(others);
        for name in names {
            let Some(regular) = face(&db, &name, Weight::NORMAL) else {
                continue;
            };
            if ttf_parser::Face::parse(&regular.data, regular.index).is_err() {
                continue;
            }
            let bold = face(&db, &name, Weight::BOLD).unwrap_or(FaceData {
                data: regular.data.clone(),
                index: regular.index,
            });
            let mut db = in_memory(&db, &name);
            db.set_sans_serif_family(name.clone());
            return Ok(Fonts {
                db: Arc::new(db),
                family: name,
                regular,
                bold,
            });
        }
        Err(Error::Analysis(format!(
            "no usable font found for the PDF sheet: install a sans-serif TrueType or OpenType \
             font (DejaVu Sans is preferred) in the system font folders, or point {FONT_DIR_ENV} \
             at a folder of font files"
        )))
    }

    /// Width of `text` at `size` points.
    pub(crate) fn width(&self, text: &str, size: f64, bold: bool) -> f64 {
        let f = if bold { &self.bold } else { &self.regular };
        let Ok(face) = ttf_parser::Face::parse(&f.data, f.index) else {
            return 0.6 * size * text.chars().count() as f64;
        };
        let upem = face.units_per_em() as f64;
        let units: f64 = text
            .chars()
            .map(|c| {
                face.glyph_index(c)
                    .and_then(|g| face.glyph_hor_advance(g))
                    .map(|a| a as f64)
                    .unwrap_or(0.6 * upem)
            })
            .sum();
        units * size / upem
    }

    /// Greedy word wrap of `text` into lines no wider than `max` points; a
    /// word longer than a line is broken between characters.
    pub(crate) fn wrap(&self, text: &str, size: f64, bold: bool, max: f64) -> Vec<String> {
        let mut lines = Vec::new();
        for para in text.split('\n') {
            let mut line = String::new();
            for word in para.split_whitespace() {
                let candidate = if line.is_empty() {
                    word.to_string()
                } else {
                    format!("{line} {word}")
                };
                if self.width(&candidate, size, bold) <= max {
                    line = candidate;
                    continue;
                }
                if !line.is_empty() {
                    lines.push(std::mem::take(&mut line));
                }
                // The word alone; break it if it is still too long.
                let mut piece = String::new();
                for c in word.chars() {
                    piece.push(c);
                    if self.width(&piece, size, bold) > max && piece.chars().count() > 1 {
                        piece.pop();
                        lines.push(std::mem::take(&mut piece));
                        piece.push(c);
                    }
                }
                line = piece;
            }
            lines.push(line);
        }
        lines
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn no_font_is_a_clear_error_not_textless_pages() {
        let err = Fonts::choose(Database::new()).err().expect("must fail");
        let msg = err.to_string();
        assert!(
            msg.contains("no usable font") && msg.contains(FONT_DIR_ENV),
            "{msg}"
        );
    }

    #[test]
    fn wrapping_respects_the_width() {
        let Ok(f) = Fonts::load() else {
            eprintln!("skipped: no system font");
            return;
        };
        let text = "Check this site on the wearer before relying on it; if its signal is weak \
                    or it loses contact, use one of the listed alternates.";
        let lines = f.wrap(text, 9.5, false, 150.0);
        assert!(lines.len() >= 3);
        for l in &lines {
            assert!(f.width(l, 9.5, false) <= 150.0, "{l}");
        }
        assert_eq!(
            lines.join(" "),
            text.split_whitespace().collect::<Vec<_>>().join(" ")
        );
        // Width scales linearly with size.
        let (a, b) = (
            f.width("Site A2", 10.0, false),
            f.width("Site A2", 20.0, false),
        );
        assert!((b - 2.0 * a).abs() < 1e-9);
    }
}
