//! Parsing and validating `session.toml`.

use super::types::{Dof, EmgUnits, Manifest, Side, Site};
use crate::error::{InputError, InputErrorKind as K};
use serde::Deserialize;
use std::collections::HashSet;
use std::ops::Range;
use std::path::Path;
use toml::Spanned;

/// The manifest as written, before validation. Spans locate errors.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawManifest {
    format: Spanned<i64>,
    subject: Spanned<String>,
    recorded: Spanned<String>,
    residual_side: Spanned<String>,
    protocol: Spanned<String>,
    protocol_start_s: Option<Spanned<f64>>,
    emg: RawEmg,
    intact: RawIntact,
    #[serde(default)]
    site: Vec<RawSite>,
    #[serde(default)]
    dof: Vec<RawDof>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawEmg {
    file: Spanned<String>,
    rate_hz: Spanned<f64>,
    units: Spanned<String>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawIntact {
    file: Spanned<String>,
    rate_hz: Spanned<f64>,
    #[serde(default)]
    offset_s: Option<Spanned<f64>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSite {
    id: Spanned<String>,
    angle_deg: Spanned<f64>,
    distance_cm: Spanned<f64>,
    /// Optional maximal (attempted) contraction reference, in the EMG units.
    #[serde(default)]
    mvc: Option<Spanned<f64>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDof {
    id: Spanned<String>,
    positive: Spanned<String>,
    range_deg: Spanned<Vec<f64>>,
}

/// 1-based line of a byte offset in `text`.
pub fn line_of(text: &str, offset: usize) -> usize {
    let end = offset.min(text.len());
    text.as_bytes()[..end]
        .iter()
        .filter(|&&b| b == b'\n')
        .count()
        + 1
}

/// Extracts the key named in a toml/serde message such as "missing field `rate_hz`".
/// Other backticked words ("expected `\"`, `'`") are not keys.
fn key_in_message(msg: &str) -> Option<String> {
    let lead = [
        "missing field",
        "unknown field",
        "duplicate key",
        "duplicate field",
    ]
    .into_iter()
    .find(|l| msg.starts_with(l))?;
    let start = lead.len() + msg[lead.len()..].find('`')? + 1;
    let len = msg[start..].find('`')?;
    Some(msg[start..start + len].to_string())
}

struct Ctx<'a> {
    file: &'a Path,
    text: &'a str,
}

impl Ctx<'_> {
    fn err(&self, span: Range<usize>, field: &str, kind: K, msg: impl Into<String>) -> InputError {
        InputError::new(self.file, kind, msg)
            .at_line(line_of(self.text, span.start))
            .field(field)
    }
}

/// Parses and validates manifest text read from `file`.
pub fn parse_manifest(file: &Path, text: &str) -> Result<Manifest, InputError> {
    let raw: RawManifest = toml::from_str(text).map_err(|e| {
        let msg = e.message().to_string();
        let mut err = InputError::new(file, toml_kind(&msg), msg.clone());
        if let Some(span) = e.span() {
            err = err.at_line(line_of(text, span.start));
        }
        if let Some(key) = key_in_message(&msg) {
            err = err.field(key);
        }
        err
    })?;
    let cx = Ctx { file, text };

    if *raw.format.get_ref() != 1 {
        return Err(cx.err(
            raw.format.span(),
            "format",
            K::BadValue,
            format!(
                "format {} is not supported; expected 1",
                raw.format.get_ref()
            ),
        ));
    }
    let subject = nonempty(&cx, &raw.subject, "subject")?;
    let recorded = raw.recorded.get_ref().trim().to_string();
    if !is_iso_date(&recorded) {
        return Err(cx.err(
            raw.recorded.span(),
            "recorded",
            K::BadValue,
            format!("`{recorded}` is not an ISO date; expected YYYY-MM-DD"),
        ));
    }
    let residual_side = match raw.residual_side.get_ref().as_str() {
        "left" => Side::Left,
        "right" => Side::Right,
        other => {
            return Err(cx.err(
                raw.residual_side.span(),
                "residual_side",
                K::BadValue,
                format!("`{other}` is not a side; expected `left` or `right`"),
            ))
        }
    };
    let protocol = nonempty(&cx, &raw.protocol, "protocol")?;
    let protocol_start_s = match &raw.protocol_start_s {
        Some(v) => finite(&cx, v, "protocol_start_s")?,
        None => 0.0,
    };

    let emg_file = nonempty(&cx, &raw.emg.file, "emg.file")?;
    let emg_rate_hz = positive(&cx, &raw.emg.rate_hz, "emg.rate_hz")?;
    let emg_units = match raw.emg.units.get_ref().as_str() {
        "V" => EmgUnits::Volt,
        "mV" => EmgUnits::Millivolt,
        "uV" | "µV" => EmgUnits::Microvolt,
        other => {
            return Err(cx.err(
                raw.emg.units.span(),
                "emg.units",
                K::BadValue,
                format!("`{other}` is not a unit of EMG; expected `V`, `mV` or `uV`"),
            ))
        }
    };
    let intact_file = nonempty(&cx, &raw.intact.file, "intact.file")?;
    let intact_rate_hz = positive(&cx, &raw.intact.rate_hz, "intact.rate_hz")?;
    let intact_offset_s = match &raw.intact.offset_s {
        Some(v) => finite(&cx, v, "intact.offset_s")?,
        None => 0.0,
    };

    if raw.site.is_empty() {
        return Err(InputError::new(
            file,
            K::Missing,
            "no [[site]] tables; expected one per emg.csv column",
        )
        .field("site"));
    }
    let mut seen = HashSet::new();
    let mut sites = Vec::with_capacity(raw.site.len());
    for s in &raw.site {
        let id = column_id(&cx, &s.id, "site.id")?;
        if !seen.insert(id.clone()) {
            return Err(cx.err(
                s.id.span(),
                "site.id",
                K::Unexpected,
                format!("site id `{id}` is declared twice; site ids must be unique"),
            ));
        }
        let angle_deg = finite(&cx, &s.angle_deg, "site.angle_deg")?;
        if !(-360.0..=360.0).contains(&angle_deg) {
            return Err(cx.err(
                s.angle_deg.span(),
                "site.angle_deg",
                K::OutOfRange,
                format!("angle {angle_deg} is outside -360..360 degrees"),
            ));
        }
        let distance_cm = finite(&cx, &s.distance_cm, "site.distance_cm")?;
        if !(0.0..=60.0).contains(&distance_cm) {
            return Err(cx.err(
                s.distance_cm.span(),
                "site.distance_cm",
                K::OutOfRange,
                format!("distance {distance_cm} cm is outside 0..60 cm from the epicondyle"),
            ));
        }
        let mvc_mv = match &s.mvc {
            Some(v) => Some(positive(&cx, v, "site.mvc")? * emg_units.to_millivolt()),
            None => None,
        };
        sites.push(Site {
            id,
            angle_deg,
            distance_cm,
            mvc_mv,
        });
    }

    if raw.dof.is_empty() {
        return Err(InputError::new(
            file,
            K::Missing,
            "no [[dof]] tables; expected one per intact.csv column",
        )
        .field("dof"));
    }
    let mut seen = HashSet::new();
    let mut dofs = Vec::with_capacity(raw.dof.len());
    for d in &raw.dof {
        let id = column_id(&cx, &d.id, "dof.id")?;
        if id == "*" || !seen.insert(id.clone()) {
            return Err(cx.err(
                d.id.span(),
                "dof.id",
                K::Unexpected,
                format!("DoF id `{id}` is declared twice or reserved; DoF ids must be unique"),
            ));
        }
        let positive = nonempty(&cx, &d.positive, "dof.positive")?;
        let r = d.range_deg.get_ref();
        if r.len() != 2 || !r.iter().all(|v| v.is_finite()) || r[0] >= r[1] {
            return Err(cx.err(
                d.range_deg.span(),
                "dof.range_deg",
                K::BadValue,
                "expected two finite numbers [low, high] with low < high",
            ));
        }
        dofs.push(Dof {
            id,
            positive,
            range_deg: [r[0], r[1]],
        });
    }

    Ok(Manifest {
        subject,
        recorded,
        residual_side,
        protocol,
        protocol_start_s,
        emg_file,
        emg_rate_hz,
        emg_units,
        intact_file,
        intact_rate_hz,
        intact_offset_s,
        sites,
        dofs,
    })
}

fn toml_kind(msg: &str) -> K {
    if msg.starts_with("missing field") {
        K::Missing
    } else if msg.starts_with("unknown field") {
        K::Unexpected
    } else if msg.starts_with("invalid type") {
        K::BadValue
    } else {
        K::Malformed
    }
}

fn nonempty(cx: &Ctx, v: &Spanned<String>, field: &str) -> Result<String, InputError> {
    let s = v.get_ref().trim();
    if s.is_empty() {
        return Err(cx.err(v.span(), field, K::BadValue, "must not be empty"));
    }
    Ok(s.to_string())
}

/// An id that can serve as a CSV column name.
fn column_id(cx: &Ctx, v: &Spanned<String>, field: &str) -> Result<String, InputError> {
    let s = nonempty(cx, v, field)?;
    if s.contains(',') || s.contains('"') || s.chars().any(char::is_control) || s == "time_s" {
        return Err(cx.err(
            v.span(),
            field,
            K::BadValue,
            format!("`{s}` cannot be a column name (no commas, quotes, control characters, or `time_s`)"),
        ));
    }
    Ok(s)
}

fn finite(cx: &Ctx, v: &Spanned<f64>, field: &str) -> Result<f64, InputError> {
    let x = *v.get_ref();
    if !x.is_finite() {
        return Err(cx.err(v.span(), field, K::BadValue, "expected a finite number"));
    }
    Ok(x)
}

fn positive(cx: &Ctx, v: &Spanned<f64>, field: &str) -> Result<f64, InputError> {
    let x = finite(cx, v, field)?;
    if x <= 0.0 {
        return Err(cx.err(
            v.span(),
            field,
            K::OutOfRange,
            format!("{x} must be greater than zero"),
        ));
    }
    Ok(x)
}

/// True for `YYYY-MM-DD` with a plausible month and day.
fn is_iso_date(s: &str) -> bool {
    let b = s.as_bytes();
    if b.len() != 10 || b[4] != b'-' || b[7] != b'-' {
        return false;
    }
    let digits = |r: Range<usize>| b[r].iter().all(u8::is_ascii_digit);
    if !(digits(0..4) && digits(5..7) && digits(8..10)) {
        return false;
    }
    let month: u32 = s[5..7].parse().unwrap_or(0);
    let day: u32 = s[8..10].parse().unwrap_or(0);
    (1..=12).contains(&month) && (1..=31).contains(&day)
}
