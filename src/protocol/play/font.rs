//! A 5-row block font for the prompter's large text (letters, digits and a
//! little punctuation), so cues can be read from across the room.

/// Rows of a glyph, `#` for a filled cell.
fn glyph(c: char) -> Option<[&'static str; 5]> {
    Some(match c.to_ascii_uppercase() {
        'A' => [" ### ", "#   #", "#####", "#   #", "#   #"],
        'B' => ["#### ", "#   #", "#### ", "#   #", "#### "],
        'C' => [" ####", "#    ", "#    ", "#    ", " ####"],
        'D' => ["#### ", "#   #", "#   #", "#   #", "#### "],
        'E' => ["#####", "#    ", "#### ", "#    ", "#####"],
        'F' => ["#####", "#    ", "#### ", "#    ", "#    "],
        'G' => [" ####", "#    ", "#  ##", "#   #", " ####"],
        'H' => ["#   #", "#   #", "#####", "#   #", "#   #"],
        'I' => ["###", " # ", " # ", " # ", "###"],
        'J' => ["  ###", "   # ", "   # ", "#  # ", " ##  "],
        'K' => ["#   #", "#  # ", "###  ", "#  # ", "#   #"],
        'L' => ["#    ", "#    ", "#    ", "#    ", "#####"],
        'M' => ["#   #", "## ##", "# # #", "#   #", "#   #"],
        'N' => ["#   #", "##  #", "# # #", "#  ##", "#   #"],
        'O' => [" ### ", "#   #", "#   #", "#   #", " ### "],
        'P' => ["#### ", "#   #", "#### ", "#    ", "#    "],
        'Q' => [" ### ", "#   #", "# # #", "#  # ", " ## #"],
        'R' => ["#### ", "#   #", "#### ", "#  # ", "#   #"],
        'S' => [" ####", "#    ", " ### ", "    #", "#### "],
        'T' => ["#####", "  #  ", "  #  ", "  #  ", "  #  "],
        'U' => ["#   #", "#   #", "#   #", "#   #", " ### "],
        'V' => ["#   #", "#   #", "#   #", " # # ", "  #  "],
        'W' => ["#   #", "#   #", "# # #", "## ##", "#   #"],
        'X' => ["#   #", " # # ", "  #  ", " # # ", "#   #"],
        'Y' => ["#   #", " # # ", "  #  ", "  #  ", "  #  "],
        'Z' => ["#####", "   # ", "  #  ", " #   ", "#####"],
        '0' => [" ### ", "#  ##", "# # #", "##  #", " ### "],
        '1' => [" # ", "## ", " # ", " # ", "###"],
        '2' => [" ### ", "#   #", "  ## ", " #   ", "#####"],
        '3' => ["#### ", "    #", " ### ", "    #", "#### "],
        '4' => ["#   #", "#   #", "#####", "    #", "    #"],
        '5' => ["#####", "#    ", "#### ", "    #", "#### "],
        '6' => [" ### ", "#    ", "#### ", "#   #", " ### "],
        '7' => ["#####", "    #", "   # ", "  #  ", "  #  "],
        '8' => [" ### ", "#   #", " ### ", "#   #", " ### "],
        '9' => [" ### ", "#   #", " ####", "    #", " ### "],
        ' ' => ["   ", "   ", "   ", "   ", "   "],
        '.' => [" ", " ", " ", " ", "#"],
        ',' => [" ", " ", " ", "#", "#"],
        ':' => [" ", "#", " ", "#", " "],
        '-' => ["    ", "    ", "####", "    ", "    "],
        '!' => ["#", "#", "#", " ", "#"],
        '\'' => ["#", "#", " ", " ", " "],
        _ => return None,
    })
}

/// Width in cells of `text` in the large font (one blank column between glyphs).
pub fn width(text: &str) -> usize {
    let n = text.chars().count();
    text.chars()
        .map(|c| glyph(c).map_or(3, |g| g[0].len()))
        .sum::<usize>()
        + n.saturating_sub(1)
}

/// The 5 rows of `text` in the large font; `fill` is the character drawn for
/// a filled cell (`█`, or `#` for terminals without Unicode). Characters the
/// font lacks are drawn as blanks.
pub fn render(text: &str, fill: char) -> [String; 5] {
    let mut rows: [String; 5] = Default::default();
    for (i, c) in text.chars().enumerate() {
        let g = glyph(c).unwrap_or(["   "; 5]);
        for (r, row) in rows.iter_mut().enumerate() {
            if i > 0 {
                row.push(' ');
            }
            row.extend(g[r].chars().map(|x| if x == '#' { fill } else { ' ' }));
        }
    }
    rows
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rows_have_the_announced_width() {
        for text in ["HOLD", "Relax, let go", "12", "a-b:c.!"] {
            let rows = render(text, '#');
            for r in &rows {
                assert_eq!(r.chars().count(), width(text), "{text}");
            }
        }
    }

    #[test]
    fn every_glyph_is_rectangular() {
        for c in ('A'..='Z').chain('0'..='9').chain(" .,:-!'".chars()) {
            let g = glyph(c).unwrap();
            assert!(g.iter().all(|r| r.len() == g[0].len()), "{c}");
        }
    }
}
