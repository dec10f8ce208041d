//! A small valid protocol shared by the protocol tests.
#![allow(dead_code)]

/// Valid: stretch f-paced + holds = 8 + 14 = 22 s, then 10 s rest
/// (>= 22/3), then w-paced + free = 3 + 6 s to the end. Total 41 s.
pub const TINY: &str = r#"format = 1
id = "tiny"
title = "Tiny"
version = "0.1"
dofs = ["fingers", "wrist"]

[[task]]
id = "f-paced"
pattern = "paced"
dof = "fingers"
positions = ["open", "close"]
repetitions = 2
period_s = 4
words = "Open and close."

[[task]]
id = "holds"
pattern = "hold-release"
dof = "wrist"
positions = ["up", "down"]
repetitions = 1
move_s = 1.5
hold_s = 3
relax_s = 2.5
words = "Hold each."

[[task]]
id = "r1"
pattern = "rest"
duration_s = 10
words = "Rest."

[[task]]
id = "w-paced"
pattern = "paced"
dof = "wrist"
positions = ["up", "down"]
repetitions = 1
rate_bpm = 40
words = "Up and down."

[[task]]
id = "free"
pattern = "free"
dofs = ["fingers", "wrist"]
duration_s = 6
words = "Move freely."
"#;

/// The 1-based line of the `nth` (0-based) line of `text` that contains `needle`.
pub fn line_of(text: &str, needle: &str, nth: usize) -> usize {
    text.lines()
        .enumerate()
        .filter(|(_, l)| l.contains(needle))
        .nth(nth)
        .map(|(i, _)| i + 1)
        .unwrap_or_else(|| panic!("`{needle}` not in the text"))
}
