//! Bad input: every class of defect gets one error naming the right file,
//! line and field, and the session folder is never changed.

use crate::common;

use common::*;
use mirrorsite::session;
use mirrorsite::{InputError, InputErrorKind as K};
use std::path::Path;

/// Reads the session, expecting an input error; checks the folder is unchanged.
fn expect_error(dir: &Path) -> InputError {
    let before = hash_dir(dir);
    let err = session::read(dir).expect_err("session should be rejected");
    assert_eq!(hash_dir(dir), before, "the session folder was modified");
    match err.as_input() {
        Some(e) => e.clone(),
        None => panic!("expected an input error, got: {err}"),
    }
}

fn assert_at(e: &InputError, file: &str, line: Option<usize>, field: Option<&str>, kind: K) {
    assert_eq!(
        e.file.file_name().unwrap().to_string_lossy(),
        file,
        "wrong file in: {e}"
    );
    assert_eq!(e.line, line, "wrong line in: {e}");
    assert_eq!(e.field.as_deref(), field, "wrong field in: {e}");
    assert_eq!(e.kind, kind, "wrong kind in: {e}");
    let msg = e.to_string();
    assert!(msg.contains(file), "message must name the file: {msg}");
    if let Some(l) = line {
        assert!(
            msg.contains(&format!("line {l}")),
            "message must name the line: {msg}"
        );
    }
    if let Some(f) = field {
        assert!(msg.contains(f), "message must name the field: {msg}");
    }
}

#[test]
fn good_session_reads() {
    let s = session::read(base_session()).unwrap();
    assert_eq!(s.manifest.subject, "TEST-01");
    assert_eq!(s.sites().len(), 8);
    assert_eq!(s.emg.data.dim(), (8, s.emg.len()));
    // 1 + 3 + 12 + 6.7 + 9 + 8 + 3 + 1 = 43.7 s at 1 kHz, both ends included
    assert_eq!(s.emg.len(), 43_701);
    assert!((s.duration_s() - 43.7).abs() < 1e-9);
    assert_eq!(s.intact.channels, vec!["fingers", "wrist"]);
    assert_eq!(s.events.as_ref().unwrap().len(), 6);
}

#[test]
fn nan_value() {
    let (_t, d) = copy_session();
    set_field(&d.join("emg.csv"), 10, 3, "NaN");
    let e = expect_error(&d);
    assert_at(&e, "emg.csv", Some(10), Some("S3"), K::BadValue);
}

#[test]
fn text_in_a_number() {
    let (_t, d) = copy_session();
    set_field(&d.join("emg.csv"), 200, 5, "0.01x");
    let e = expect_error(&d);
    assert_at(&e, "emg.csv", Some(200), Some("S5"), K::BadValue);
    assert!(e.message.contains("0.01x"));
}

#[test]
fn empty_value() {
    let (_t, d) = copy_session();
    set_field(&d.join("intact.csv"), 7, 2, "");
    let e = expect_error(&d);
    assert_at(&e, "intact.csv", Some(7), Some("wrist"), K::BadValue);
}

#[test]
fn missing_site_column() {
    let (_t, d) = copy_session();
    let p = d.join("emg.csv");
    let s = std::fs::read_to_string(&p).unwrap();
    // drop the last column everywhere
    let cut: String = s
        .lines()
        .map(|l| l.rsplit_once(',').unwrap().0.to_string() + "\n")
        .collect();
    std::fs::write(&p, cut).unwrap();
    let e = expect_error(&d);
    assert_at(&e, "emg.csv", Some(1), Some("S8"), K::Missing);
}

#[test]
fn undeclared_extra_column() {
    let (_t, d) = copy_session();
    let p = d.join("emg.csv");
    let s = std::fs::read_to_string(&p).unwrap();
    let mut out = String::new();
    for (i, l) in s.lines().enumerate() {
        out.push_str(l);
        out.push_str(if i == 0 { ",X9\n" } else { ",0.0\n" });
    }
    std::fs::write(&p, out).unwrap();
    let e = expect_error(&d);
    assert_at(&e, "emg.csv", Some(1), Some("X9"), K::Unexpected);
}

#[test]
fn time_goes_back() {
    let (_t, d) = copy_session();
    set_field(&d.join("emg.csv"), 500, 0, "0.1000");
    let e = expect_error(&d);
    assert_at(&e, "emg.csv", Some(500), Some("time_s"), K::BadValue);
    assert!(e.message.contains("strictly increasing"));
}

#[test]
fn duplicated_time() {
    let (_t, d) = copy_session();
    let p = d.join("intact.csv");
    let prev = get_line(&p, 41);
    let t = prev.split(',').next().unwrap().to_string();
    set_field(&p, 42, 0, &t);
    let e = expect_error(&d);
    assert_at(&e, "intact.csv", Some(42), Some("time_s"), K::BadValue);
    assert!(e.message.contains("repeats"));
}

#[test]
fn truncated_last_line() {
    let (_t, d) = copy_session();
    let p = d.join("emg.csv");
    let s = std::fs::read_to_string(&p).unwrap();
    let n = s.lines().count();
    let last = s.lines().last().unwrap();
    let keep = &s[..s.len() - last.len() - 1];
    let half: String = last.split(',').take(4).collect::<Vec<_>>().join(",");
    std::fs::write(&p, format!("{keep}{half}")).unwrap();
    let e = expect_error(&d);
    assert_at(&e, "emg.csv", Some(n), Some("S4"), K::Malformed);
    assert!(e.message.contains("truncated"));
}

#[test]
fn empty_file() {
    let (_t, d) = copy_session();
    std::fs::write(d.join("intact.csv"), "").unwrap();
    let e = expect_error(&d);
    assert_at(&e, "intact.csv", Some(1), None, K::Malformed);
    assert!(e.message.contains("empty"));
}

#[test]
fn header_only() {
    let (_t, d) = copy_session();
    std::fs::write(d.join("intact.csv"), "time_s,fingers,wrist\n").unwrap();
    let e = expect_error(&d);
    assert_at(&e, "intact.csv", None, None, K::Malformed);
    assert!(e.message.contains("at least two samples"));
}

#[test]
fn rate_far_from_declared() {
    let (_t, d) = copy_session();
    let p = d.join("session.toml");
    let s = std::fs::read_to_string(&p).unwrap();
    std::fs::write(&p, s.replace("rate_hz = 1000.0", "rate_hz = 1024.0")).unwrap();
    let e = expect_error(&d);
    assert_at(&e, "emg.csv", None, Some("time_s"), K::Inconsistent);
    assert!(e.message.contains("1024"), "{e}");
}

#[test]
fn rate_within_one_percent_is_accepted() {
    let (_t, d) = copy_session();
    let p = d.join("session.toml");
    let s = std::fs::read_to_string(&p).unwrap();
    std::fs::write(&p, s.replace("rate_hz = 1000.0", "rate_hz = 1008.0")).unwrap();
    assert!(session::read(&d).is_ok());
}

#[test]
fn manifest_site_absent_from_data() {
    let (_t, d) = copy_session();
    let p = d.join("session.toml");
    let s = std::fs::read_to_string(&p).unwrap();
    std::fs::write(&p, s.replacen("id = \"S2\"", "id = \"S22\"", 1)).unwrap();
    let e = expect_error(&d);
    // S22 is declared but has no column
    assert_at(&e, "emg.csv", Some(1), Some("S22"), K::Missing);
}

#[test]
fn missing_dof_column() {
    let (_t, d) = copy_session();
    let p = d.join("session.toml");
    let s = std::fs::read_to_string(&p).unwrap();
    std::fs::write(&p, s.replace("id = \"wrist\"", "id = \"rotation\"")).unwrap();
    let e = expect_error(&d);
    assert_at(&e, "intact.csv", Some(1), Some("rotation"), K::Missing);
}

#[test]
fn malformed_toml() {
    let (_t, d) = copy_session();
    let p = d.join("session.toml");
    set_line(&p, 4, "recorded = \"2026-10-01");
    let e = expect_error(&d);
    assert_eq!(e.file.file_name().unwrap(), "session.toml");
    assert_eq!(e.line, Some(4), "{e}");
    assert_eq!(e.kind, K::Malformed);
}

#[test]
fn missing_key() {
    let (_t, d) = copy_session();
    let p = d.join("session.toml");
    let s = std::fs::read_to_string(&p).unwrap();
    std::fs::write(&p, s.replace("units = \"mV\"\n", "")).unwrap();
    let e = expect_error(&d);
    assert_eq!(e.file.file_name().unwrap(), "session.toml");
    assert_eq!(e.field.as_deref(), Some("units"), "{e}");
    assert_eq!(e.kind, K::Missing);
    assert!(
        e.line.is_some(),
        "the table lacking the key is located: {e}"
    );
}

#[test]
fn wrong_type() {
    let (_t, d) = copy_session();
    let p = d.join("session.toml");
    let s = std::fs::read_to_string(&p).unwrap();
    let line = s.lines().position(|l| l.starts_with("offset_s")).unwrap() + 1;
    std::fs::write(&p, s.replace("offset_s = 0.5", "offset_s = \"half\"")).unwrap();
    let e = expect_error(&d);
    assert_eq!(e.line, Some(line), "{e}");
    assert_eq!(e.kind, K::BadValue);
}

#[test]
fn unknown_key() {
    let (_t, d) = copy_session();
    let p = d.join("session.toml");
    let s = std::fs::read_to_string(&p).unwrap();
    std::fs::write(&p, s.replace("[emg]\n", "[emg]\ngain = 3\n")).unwrap();
    let e = expect_error(&d);
    assert_eq!(e.field.as_deref(), Some("gain"), "{e}");
    assert_eq!(e.kind, K::Unexpected);
}

#[test]
fn unsupported_format() {
    let (_t, d) = copy_session();
    let p = d.join("session.toml");
    let s = std::fs::read_to_string(&p).unwrap();
    let line = s.lines().position(|l| l.starts_with("format")).unwrap() + 1;
    std::fs::write(&p, s.replace("format = 1", "format = 2")).unwrap();
    let e = expect_error(&d);
    assert_at(&e, "session.toml", Some(line), Some("format"), K::BadValue);
}

#[test]
fn duplicate_site_id() {
    let (_t, d) = copy_session();
    let p = d.join("session.toml");
    let s = std::fs::read_to_string(&p).unwrap();
    let s = s.replacen("id = \"S2\"", "id = \"S1\"", 1);
    let line = s
        .match_indices("id = \"S1\"")
        .nth(1)
        .map(|(i, _)| s[..i].lines().count() + 1);
    std::fs::write(&p, &s).unwrap();
    let e = expect_error(&d);
    assert_at(&e, "session.toml", line, Some("site.id"), K::Unexpected);
}

#[test]
fn events_reversed() {
    let (_t, d) = copy_session();
    set_line(&d.join("events.csv"), 3, "16.000,4.000,paced,fingers");
    let e = expect_error(&d);
    assert_at(&e, "events.csv", Some(3), Some("end_s"), K::BadValue);
}

#[test]
fn events_outside_recording() {
    let (_t, d) = copy_session();
    set_line(&d.join("events.csv"), 7, "39.700,80.000,rest,*");
    let e = expect_error(&d);
    assert_at(&e, "events.csv", Some(7), Some("end_s"), K::OutOfRange);
}

#[test]
fn events_unknown_dof() {
    let (_t, d) = copy_session();
    set_line(&d.join("events.csv"), 2, "1.000,4.000,rest,elbow");
    let e = expect_error(&d);
    assert_at(&e, "events.csv", Some(2), Some("dof"), K::Unexpected);
}

#[test]
fn intact_much_shorter_than_emg() {
    let (_t, d) = copy_session();
    let p = d.join("intact.csv");
    let s = std::fs::read_to_string(&p).unwrap();
    let short: String = s.lines().take(2001).map(|l| format!("{l}\n")).collect();
    std::fs::write(&p, short).unwrap();
    let e = expect_error(&d);
    assert_at(&e, "intact.csv", None, Some("time_s"), K::Inconsistent);
    assert!(e.message.contains("covers"), "{e}");
}

#[test]
fn offset_moves_the_intact_recording_away() {
    let (_t, d) = copy_session();
    let p = d.join("session.toml");
    let s = std::fs::read_to_string(&p).unwrap();
    std::fs::write(&p, s.replace("offset_s = 0.5", "offset_s = 10.0")).unwrap();
    let e = expect_error(&d);
    assert_at(&e, "intact.csv", None, Some("time_s"), K::Inconsistent);
}

#[test]
fn binary_file() {
    let (_t, d) = copy_session();
    let bytes: Vec<u8> = (0..4096u32)
        .map(|i| (i.wrapping_mul(2654435761) >> 13) as u8)
        .collect();
    std::fs::write(d.join("emg.csv"), bytes).unwrap();
    let e = expect_error(&d);
    assert_eq!(e.file.file_name().unwrap(), "emg.csv");
    assert_eq!(e.kind, K::Malformed, "{e}");
}

#[test]
fn implausible_value() {
    let (_t, d) = copy_session();
    set_field(&d.join("emg.csv"), 321, 2, "1e30");
    let e = expect_error(&d);
    assert_at(&e, "emg.csv", Some(321), Some("S2"), K::OutOfRange);
}

#[test]
fn angle_far_outside_range() {
    let (_t, d) = copy_session();
    set_field(&d.join("intact.csv"), 99, 1, "400.0");
    let e = expect_error(&d);
    assert_at(&e, "intact.csv", Some(99), Some("fingers"), K::OutOfRange);
}

#[test]
fn first_header_field_must_be_time() {
    let (_t, d) = copy_session();
    set_field(&d.join("intact.csv"), 1, 0, "t");
    let e = expect_error(&d);
    assert_at(&e, "intact.csv", Some(1), Some("time_s"), K::Malformed);
}

#[test]
fn gzip_is_read_and_corrupt_gzip_is_reported() {
    use std::io::Write;
    let (_t, d) = copy_session();
    let raw = std::fs::read(d.join("emg.csv")).unwrap();
    std::fs::remove_file(d.join("emg.csv")).unwrap();
    let gz = d.join("emg.csv.gz");
    let mut enc = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::fast());
    enc.write_all(&raw).unwrap();
    std::fs::write(&gz, enc.finish().unwrap()).unwrap();
    let plain = session::read(base_session()).unwrap();
    let zipped = session::read(&d).unwrap();
    assert_eq!(plain.emg.data, zipped.emg.data);
    // corrupt the compressed stream in the middle
    let mut bytes = std::fs::read(&gz).unwrap();
    let mid = bytes.len() / 2;
    for b in &mut bytes[mid..mid + 64] {
        *b ^= 0x5a;
    }
    std::fs::write(&gz, bytes).unwrap();
    // Deflate has no check before the trailing CRC, so the garbage may be
    // caught first as a malformed row or value: either way it names the file.
    let e = expect_error(&d);
    assert_eq!(e.file.file_name().unwrap(), "emg.csv.gz");
    assert!(matches!(e.kind, K::Malformed | K::BadValue), "{e}");
    // a broken gzip header is reported as not being a valid gzip file
    std::fs::write(&gz, b"\x1f\x8b\x08garbage").unwrap();
    let e = expect_error(&d);
    assert_eq!(e.file.file_name().unwrap(), "emg.csv.gz");
    assert_eq!(e.kind, K::Malformed, "{e}");
}

#[cfg(unix)]
#[test]
fn symlink_loop() {
    let (_t, d) = copy_session();
    std::fs::remove_file(d.join("events.csv")).unwrap();
    std::os::unix::fs::symlink("events.csv", d.join("events.csv")).unwrap();
    let e = expect_error(&d);
    assert_at(&e, "events.csv", None, None, K::Unreadable);
}

#[test]
fn missing_session_folder() {
    let tmp = tempfile::tempdir().unwrap();
    let err = session::read(&tmp.path().join("nope")).unwrap_err();
    let e = err.as_input().unwrap();
    assert_eq!(e.kind, K::Unreadable);
    assert!(e.to_string().contains("nope"));
}

#[test]
fn units_are_converted_to_millivolts() {
    let (_t, d) = copy_session();
    let p = d.join("session.toml");
    let s = std::fs::read_to_string(&p).unwrap();
    std::fs::write(&p, s.replace("units = \"mV\"", "units = \"uV\"")).unwrap();
    let micro = session::read(&d).unwrap();
    let milli = session::read(base_session()).unwrap();
    assert!((micro.emg.data[[0, 10]] - 1e-3 * milli.emg.data[[0, 10]]).abs() < 1e-12);
}
