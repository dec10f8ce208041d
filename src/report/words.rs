//! Plain words for the sheet: positions, frequencies, flag advice and the
//! cautions, shared by the HTML and the PDF so both say the same thing.

use super::model::{DofResult, Flag, SitesReport};

/// The aspect of the forearm an angle (degrees from the dorsal midline toward
/// the radial side) faces, in eight sectors of 45°.
pub(crate) fn aspect(angle_deg: f64) -> &'static str {
    const NAMES: [&str; 8] = [
        "dorsal",
        "dorsal-radial",
        "radial",
        "volar-radial",
        "volar",
        "volar-ulnar",
        "ulnar",
        "dorsal-ulnar",
    ];
    let a = angle_deg.rem_euclid(360.0);
    // Sector k covers [45k − 22.5, 45k + 22.5).
    let k = (((a + 22.5) / 45.0).floor() as usize) % 8;
    NAMES[k]
}

/// "dorsal-radial, 45°, 5 cm" (distance from the lateral epicondyle).
pub(crate) fn position(report: &SitesReport, site: &str) -> String {
    match report.site_info.iter().find(|s| s.site == site) {
        Some(s) => format!(
            "{}, {}°, {} cm",
            aspect(s.angle_deg),
            fmt_num(s.angle_deg, 1),
            fmt_num(s.distance_cm, 1)
        ),
        None => "position not recorded".to_string(),
    }
}

/// A number with at most `digits` decimals, trailing zeros dropped.
pub(crate) fn fmt_num(x: f64, digits: usize) -> String {
    if !x.is_finite() {
        return "n/a".to_string();
    }
    let s = format!("{x:.digits$}");
    let s = if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    };
    if s == "-0" {
        "0".to_string()
    } else {
        s
    }
}

/// R² with two decimals (a minus sign, not a hyphen, for negative values).
pub(crate) fn fmt_r2(x: f64) -> String {
    if !x.is_finite() {
        return "n/a".to_string();
    }
    let s = format!("{x:.2}");
    match s.strip_prefix('-') {
        Some(rest) if rest != "0.00" => format!("−{rest}"),
        Some(_) => "0.00".to_string(),
        None => s,
    }
}

/// "chosen in 17 of 20 resamples" (or "chosen in 85% of resamples" when the
/// number of resamples is unknown).
pub(crate) fn frequency(dof: &DofResult, freq: f64) -> String {
    match dof.resamples {
        Some(n) if n > 0 => {
            let k = (freq * n as f64).round().clamp(0.0, n as f64) as usize;
            format!("chosen in {k} of {n} resamples")
        }
        _ => format!("chosen in {}% of resamples", fmt_num(100.0 * freq, 0)),
    }
}

/// The direction opposite to a DoF's positive direction, in words.
pub(crate) fn opposite(positive: &str) -> String {
    let pairs = [
        ("flexion", "extension"),
        ("pronation", "supination"),
        ("radial deviation", "ulnar deviation"),
        ("abduction", "adduction"),
        ("opening", "closing"),
        ("open", "close"),
    ];
    let p = positive.trim().to_lowercase();
    for (a, b) in pairs {
        if p == a {
            return b.to_string();
        }
        if p == b {
            return a.to_string();
        }
    }
    format!("opposite of {positive}")
}

/// What the clinician should do about a flag, by its kind.
pub(crate) fn advice(flag: &Flag) -> &'static str {
    match flag.what.as_str() {
        "low-confidence" | "medium-confidence" | "unstable" => {
            "Check this site on the wearer before relying on it; if its signal is weak or \
             it loses contact, use one of the listed alternates."
        }
        "single-stage" => {
            "The choice rests on one fit only; confirm the site on the wearer and keep \
             the alternates in mind."
        }
        "suspect-signal" => {
            "Re-check skin preparation and electrode contact here, wait for the signal to \
             settle and re-record before using this site."
        }
        "bad-signal" => {
            "Do not use this site as recorded. Re-prepare the skin and electrode and \
             record again, or use a neighbouring site."
        }
        "alignment" => {
            "Ask whether the wearer mirrored this task as instructed; repeat the block if \
             possible. Results that rest on it deserve less trust."
        }
        "budget" => {
            "The socket's channels do not cover everything this DoF needs. Decide with the \
             wearer which movement matters more, or consider more channels."
        }
        "no-site" => {
            "No recorded site explains this movement. Check that the wearer could perform \
             it, review the electrode layout and repeat the tasks before fitting."
        }
        "weak-model" => {
            "The EMG explains this movement only a little better than its position alone; \
             treat the chosen sites as tentative and confirm them on the wearer."
        }
        "fatigue" | "pain" => {
            "Results from a tired wearer or one in pain deserve low confidence; consider a \
             shorter repeat session after a rest."
        }
        _ => "Review this before relying on the plan.",
    }
}

/// `s` trimmed, ending with a full stop unless it ends with other punctuation.
pub(crate) fn ensure_sentence(s: &str) -> String {
    let t = s.trim();
    if t.ends_with('.') || t.ends_with('!') || t.ends_with('?') {
        t.to_string()
    } else {
        format!("{t}.")
    }
}

/// A short label for a flag kind.
pub(crate) fn flag_kind(what: &str) -> String {
    match what {
        "low-confidence" => "Low confidence".into(),
        "unstable" => "Unstable choice".into(),
        "single-stage" => "Single fit".into(),
        "suspect-signal" => "Suspect signal".into(),
        "bad-signal" => "Bad signal".into(),
        "alignment" => "Doubtful alignment".into(),
        "budget" => "Channel budget".into(),
        other => {
            let mut s = other.replace('-', " ");
            if let Some(first) = s.get(0..1) {
                let up = first.to_uppercase();
                s.replace_range(0..1, &up);
            }
            s
        }
    }
}

/// The statement at the top of every sheet.
pub(crate) const REVIEW_NOTICE: &str = "This sheet suggests where surface-EMG electrodes might \
sit; it is not a diagnosis. The treating clinician decides, checks every placement on the \
wearer and signs off at the end of this sheet.";

/// The cautions of the project's safety notes, condensed for the sheet.
pub(crate) const CAUTIONS: [(&str, &str); 7] = [
    (
        "Not a diagnosis.",
        "Research software and a decision aid for a qualified clinician; not a certified \
         medical device. The result is only as good as the session that produced it.",
    ),
    (
        "Check every placement on the wearer.",
        "For each site: signal on attempted movement, silence at rest, contact in the socket \
         through the range of motion. Flagged sites need a second look.",
    ),
    (
        "Skin.",
        "Inspect the residual-limb skin before and after; prepare it gently. Stop and record \
         any redness, blistering or irritation.",
    ),
    (
        "Fatigue.",
        "Keep contractions short, keep the rests, stop when the wearer tires: fatigue biases \
         the calibration.",
    ),
    (
        "Stop on phantom limb pain.",
        "Ask about pain before, during and after (0–10). Pause or stop on pain; sites chosen \
         while the wearer was in pain deserve low confidence.",
    ),
    (
        "Data protection.",
        "This sheet carries the subject code and recording date: keep it with the clinical \
         record and store session data as local data-protection law requires.",
    ),
    (
        "Local regulation first.",
        "Local regulations and licensed practice take precedence over this software and its \
         output.",
    ),
];

/// Escapes text for XML and HTML.
pub(crate) fn esc(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// A site or DoF id made safe for a file name.
pub(crate) fn file_part(id: &str) -> String {
    id.chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' || c == '_' {
                c
            } else {
                '_'
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn aspects_follow_the_angle_convention() {
        // Convention of the session format: 0° dorsal midline, increasing toward radial.
        assert_eq!(aspect(0.0), "dorsal");
        assert_eq!(aspect(359.0), "dorsal");
        assert_eq!(aspect(90.0), "radial");
        assert_eq!(aspect(180.0), "volar");
        assert_eq!(aspect(270.0), "ulnar");
        assert_eq!(aspect(45.0), "dorsal-radial");
        assert_eq!(aspect(-90.0), "ulnar");
    }

    #[test]
    fn numbers_read_cleanly() {
        assert_eq!(fmt_num(5.0, 1), "5");
        assert_eq!(fmt_num(22.5, 1), "22.5");
        assert_eq!(fmt_num(-0.01, 1), "0");
        assert_eq!(fmt_r2(-0.123), "−0.12");
        assert_eq!(fmt_r2(0.805), "0.81");
        assert_eq!(opposite("flexion"), "extension");
        assert_eq!(opposite("extension"), "flexion");
        assert_eq!(file_part("A 1/x"), "A_1_x");
    }
}
