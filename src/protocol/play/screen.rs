//! Laying out a [`Frame`] as lines of text for a terminal of a given size.
//!
//! From the top: where we are, the cue in large letters, the instruction, the
//! pacing marker (paced cues), the countdown in large digits, what comes
//! next, a progress bar for the whole protocol, a status line and the keys.
//! When the terminal is too small the large text falls back to plain text.

use super::{font, Frame};

/// How a line is drawn.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Style {
    /// Normal text.
    Plain,
    /// Bold text.
    Bold,
    /// Reverse video (for a paused or marked state).
    Reverse,
}

/// One line of the screen.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Line {
    /// The text, at most the screen's width in characters.
    pub text: String,
    /// How to draw it.
    pub style: Style,
}

fn line(text: impl Into<String>, style: Style, width: usize) -> Line {
    let text: String = text.into();
    Line {
        text: text.chars().take(width).collect(),
        style,
    }
}

/// Greedy word wrap to `width` characters.
fn wrap(text: &str, width: usize) -> Vec<String> {
    let mut out = Vec::new();
    let mut cur = String::new();
    for w in text.split_whitespace() {
        if !cur.is_empty() && cur.chars().count() + 1 + w.chars().count() > width {
            out.push(std::mem::take(&mut cur));
        }
        if !cur.is_empty() {
            cur.push(' ');
        }
        cur.push_str(w);
    }
    if !cur.is_empty() {
        out.push(cur);
    }
    out
}

/// The text in the large font wrapped to `width`, at most `max_lines` rows of
/// glyphs, or `None` when it does not fit.
fn big(text: &str, width: usize, max_lines: usize, fill: char) -> Option<Vec<String>> {
    let mut groups: Vec<String> = Vec::new();
    for w in text.split_whitespace() {
        if font::width(w) > width {
            return None;
        }
        match groups.last_mut() {
            Some(g) if font::width(&format!("{g} {w}")) <= width => {
                g.push(' ');
                g.push_str(w);
            }
            _ => groups.push(w.to_string()),
        }
    }
    if groups.len() > max_lines {
        return None;
    }
    let mut rows = Vec::new();
    for (k, g) in groups.iter().enumerate() {
        if k > 0 {
            rows.push(String::new());
        }
        rows.extend(font::render(g, fill));
    }
    Some(rows)
}

fn bar(fraction: f64, width: usize, on: char, off: char) -> String {
    let n = (fraction.clamp(0.0, 1.0) * width as f64).round() as usize;
    std::iter::repeat_n(on, n)
        .chain(std::iter::repeat_n(off, width - n))
        .collect()
}

fn mmss(s: f64) -> String {
    let s = s.max(0.0).round() as u64;
    format!("{}:{:02}", s / 60, s % 60)
}

/// The lines of a frame for a `width` × `height` terminal; `fill` draws the
/// large font (`█`, or `#` for terminals without Unicode).
pub fn render(frame: &Frame, width: usize, height: usize, fill: char) -> Vec<Line> {
    let width = width.max(20);
    let cue = frame.cue.to_uppercase();
    let secs = frame.countdown_s.max(0.0).ceil() as u64;
    let count = format!("{secs}");
    let ascii = fill == '#';
    for (big_cue, big_count) in [(true, true), (true, false), (false, false)] {
        let mut out = Vec::new();
        out.push(line(
            format!("{}  |  {}", frame.title, frame.place),
            Style::Plain,
            width,
        ));
        out.push(line("", Style::Plain, width));
        let cue_rows = if big_cue {
            big(&cue, width, 2, fill)
        } else {
            None
        };
        match cue_rows {
            Some(rows) => out.extend(rows.into_iter().map(|r| line(r, Style::Bold, width))),
            None => out.push(line(cue.clone(), Style::Bold, width)),
        }
        out.push(line("", Style::Plain, width));
        for l in wrap(&frame.instruction, width) {
            out.push(line(l, Style::Bold, width));
        }
        if let Some(p) = &frame.pacing {
            out.push(line("", Style::Plain, width));
            let labels = p.from.chars().count() + p.to.chars().count() + 6;
            let track = width.saturating_sub(labels).clamp(10, 60);
            let at = (p.position.clamp(0.0, 1.0) * (track - 1) as f64).round() as usize;
            let (rail, mark) = if ascii { ('-', 'O') } else { ('─', '●') };
            let t: String = (0..track)
                .map(|k| if k == at { mark } else { rail })
                .collect();
            out.push(line(
                format!("{} |{}| {}", p.from, t, p.to),
                Style::Plain,
                width,
            ));
        }
        out.push(line("", Style::Plain, width));
        let count_rows = if big_count {
            big(&count, width, 1, fill)
        } else {
            None
        };
        match count_rows {
            Some(rows) => out.extend(rows.into_iter().map(|r| line(r, Style::Plain, width))),
            None => out.push(line(format!("{secs} s"), Style::Bold, width)),
        }
        out.push(line("", Style::Plain, width));
        out.push(line(frame.next.clone(), Style::Plain, width));
        let tail = format!(
            " {:3.0}%  {} / {}",
            100.0 * frame.progress(),
            mmss(frame.done_s),
            mmss(frame.total_s)
        );
        let bw = width.saturating_sub(tail.len() + 2).clamp(5, 60);
        let (on, off) = if ascii { ('#', '.') } else { ('█', '░') };
        out.push(line(
            format!("[{}]{tail}", bar(frame.progress(), bw, on, off)),
            Style::Plain,
            width,
        ));
        let mut status = frame.status.clone();
        if frame.marked_bad && !status.contains("marked bad") {
            status = format!("this repetition is marked bad. {status}");
        }
        let style = if frame.paused || frame.marked_bad {
            Style::Reverse
        } else {
            Style::Plain
        };
        out.push(line(status, style, width));
        out.push(line(
            if frame.lead_in {
                "q abort"
            } else {
                "space pause/resume   b bad repetition   n next cue   s skip task   q abort"
            },
            Style::Plain,
            width,
        ));
        if out.len() <= height || !big_cue {
            return out;
        }
    }
    unreachable!("the plain layout is always returned")
}

#[cfg(test)]
mod tests {
    use super::super::Pacing;
    use super::*;

    fn frame() -> Frame {
        Frame {
            title: "Basic hand".into(),
            place: "Task 2 of 11: fingers-paced, cycle 3 of 8".into(),
            cue: "Close".into(),
            instruction: "Open and close both hands together, following the marker.".into(),
            countdown_s: 1.2,
            next: "Next: Open".into(),
            pacing: Some(Pacing {
                from: "open".into(),
                to: "close".into(),
                position: 1.0,
            }),
            done_s: 45.0,
            total_s: 180.0,
            paused: false,
            lead_in: false,
            marked_bad: false,
            status: String::new(),
        }
    }

    #[test]
    fn fits_an_ordinary_terminal_with_large_text() {
        let lines = render(&frame(), 80, 24, '#');
        assert!(lines.len() <= 24);
        assert!(lines.iter().all(|l| l.text.chars().count() <= 80));
        // The cue in the large font: 5 rows of `#` cells.
        assert_eq!(lines[2].text, font::render("CLOSE", '#')[0]);
        // The countdown rounds up: 1.2 s left shows 2.
        assert!(lines.iter().any(|l| l.text == font::render("2", '#')[0]));
        // Marker at the right end of the track.
        let pace = lines.iter().find(|l| l.text.starts_with("open |")).unwrap();
        assert!(pace.text.ends_with("O| close"));
        // 45 of 180 s is 25%.
        assert!(lines.iter().any(|l| l.text.contains(" 25%  0:45 / 3:00")));
    }

    #[test]
    fn small_terminal_falls_back_to_plain_text() {
        let lines = render(&frame(), 40, 12, '#');
        assert!(lines.iter().any(|l| l.text == "CLOSE"));
        assert!(lines.iter().any(|l| l.text == "2 s"));
    }
}
