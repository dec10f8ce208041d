//! Seeded random inputs for the readers and parsers, on the stable
//! toolchain (the fuzz targets in fuzz/ need nightly and run for minutes;
//! this runs in every `cargo test`).
//!
//! Each case mutates a real file of the small simulated session, a shipped
//! protocol or the small scenario 1 to 4 times (byte flips, deletions,
//! truncations, inserted commas, quotes, brackets, line breaks, NUL and
//! non-UTF-8 bytes, numbers replaced by huge, infinite or not-a-number
//! values, duplicated or swapped lines) and feeds it to the reader. The
//! contract checked: no panic, and on rejection an `InputError` that names
//! the file given, fits on one line, and gives a line inside the text when it
//! gives one. A case that breaks it is reported with its seed and input.
//! `ROBUST_RANDOM_SCALE=50 cargo test --release --test suite robust_random_input`
//! searches deeper.

use crate::common;

use common::*;
use mirrorsite::protocol;
use mirrorsite::session::{self, Manifest, Recording};
use mirrorsite::simulate::Scenario;
use mirrorsite::InputError;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::Path;

const NUMBERS: &[&str] = &[
    "1e30",
    "-1e30",
    "1e999",
    "-1e999",
    "NaN",
    "nan",
    "inf",
    "-inf",
    "-0",
    "0x10",
    "1e",
    ".",
    "-",
    "1,5",
    "1.2.3",
    "",
    " ",
    "99999999999999999999999999999999999999999999",
    "0.000000000000000000000000000000000000000000000001",
];
const PIECES: &[&[u8]] = &[
    b",",
    b",,",
    b"\"",
    b"[",
    b"]",
    b"=",
    b"\n",
    b"\r\n",
    b"\0",
    b"\xff",
    b"\xc3",
    b"\xef\xbb\xbf",
    b"#",
    b"[[site]]\n",
    b"[[dof]]\n",
    b"[[task]]\n",
    b"{",
    b"}",
    b"'",
    b"\t",
    b"*",
    b"\\",
];

fn mutate(rng: &mut ChaCha8Rng, input: &[u8]) -> Vec<u8> {
    let mut v = input.to_vec();
    for _ in 0..rng.random_range(1..=4) {
        let n = v.len();
        let at = if n == 0 { 0 } else { rng.random_range(0..=n) };
        match rng.random_range(0..9) {
            0 if n > 0 => {
                let i = at.min(n - 1);
                v[i] ^= 1 << rng.random_range(0..8);
            }
            1 if n > 0 => {
                let len = rng.random_range(1..=16.min(n - at.min(n - 1)));
                let i = at.min(n - len);
                v.drain(i..i + len);
            }
            2 => v.truncate(at),
            3 => {
                let p = PIECES[rng.random_range(0..PIECES.len())];
                v.splice(at..at, p.iter().copied());
            }
            4 => {
                // replace the number (or word) around `at`
                let num = |b: u8| b.is_ascii_alphanumeric() || b"+-.".contains(&b);
                let mut s = at.min(n);
                while s > 0 && num(v[s - 1]) {
                    s -= 1;
                }
                let mut e = at.min(n);
                while e < n && num(v[e]) {
                    e += 1;
                }
                let w = NUMBERS[rng.random_range(0..NUMBERS.len())];
                v.splice(s..e, w.bytes());
            }
            5 | 6 => {
                // duplicate, drop or swap whole lines
                let mut lines: Vec<Vec<u8>> =
                    v.split(|&b| b == b'\n').map(<[u8]>::to_vec).collect();
                let k = lines.len();
                let i = rng.random_range(0..k);
                let j = rng.random_range(0..k);
                match rng.random_range(0..3) {
                    0 => {
                        let l = lines[i].clone();
                        lines.insert(j, l);
                    }
                    1 => {
                        lines.remove(i);
                    }
                    _ => lines.swap(i, j),
                }
                v = lines.join(&b'\n');
            }
            7 => {
                let len = rng.random_range(1..8);
                let bytes: Vec<u8> = (0..len).map(|_| rng.random()).collect();
                v.splice(at..at, bytes);
            }
            _ => {
                // a field's worth of commas or a very long token
                let len = rng.random_range(1..300);
                let b = if rng.random_bool(0.5) { b',' } else { b'9' };
                v.splice(at..at, std::iter::repeat_n(b, len));
            }
        }
    }
    v
}

/// [`check`] for TOML files, whose fields are keys: the field is not a word
/// the parser merely expected (as in "invalid string, expected `"`").
fn check_toml(e: &InputError, file: &Path, text: &str) -> Result<Seen, String> {
    if let Some(f) = &e.field {
        let at = |needle: &str| e.message.find(needle);
        if let (Some(x), Some(q)) = (at("expected"), at(&format!("`{f}`"))) {
            if q > x {
                return Err(format!("field `{f}` is only what the parser expected: {e}"));
            }
        }
    }
    check(e, file, Some(text.as_bytes()))
}

fn check(e: &InputError, file: &Path, text: Option<&[u8]>) -> Result<Seen, String> {
    if e.file != file {
        return Err(format!(
            "names {} instead of {}",
            e.file.display(),
            file.display()
        ));
    }
    let shown = e.to_string();
    if shown.contains('\n') {
        return Err(format!("message of several lines: {shown:?}"));
    }
    if let (Some(line), Some(text)) = (e.line, text) {
        let lines = text.iter().filter(|&&b| b == b'\n').count() + 1;
        if line == 0 || line > lines {
            return Err(format!("line {line} of {lines}: {shown}"));
        }
    }
    Ok(Rejected)
}

/// What a reader did with one input: accepted it, or rejected it properly.
/// Anything else is an `Err(reason)`.
#[derive(PartialEq)]
enum Seen {
    Accepted,
    Rejected,
}
use Seen::*;

/// Runs `cases` mutations of the seeds through `run`; panics with the first
/// failures (seed, reason, input) after all cases. Also checks that the
/// mutations did their job: at least 5% of the inputs are rejected and at
/// least 2% pass every check (so the checks after parsing are reached too).
fn battery(
    name: &str,
    seeds: &[Vec<u8>],
    cases: usize,
    mut run: impl FnMut(&[u8]) -> Result<Seen, String>,
) {
    // ROBUST_RANDOM_SCALE=N runs N times as many cases (a deeper search).
    let scale: usize = std::env::var("ROBUST_RANDOM_SCALE")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(1);
    let cases = cases * scale.max(1);
    let mut failures = Vec::new();
    let mut rejected = 0usize;
    for case in 0..cases {
        let seed = 0x5eed_0000 + case as u64;
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let base = &seeds[case % seeds.len()];
        let input = mutate(&mut rng, base);
        let result = catch_unwind(AssertUnwindSafe(|| run(&input))).unwrap_or_else(|p| {
            let msg = p
                .downcast_ref::<String>()
                .cloned()
                .or_else(|| p.downcast_ref::<&str>().map(|s| s.to_string()))
                .unwrap_or_default();
            Err(format!("panicked: {msg}"))
        });
        if result == Ok(Rejected) {
            rejected += 1;
        }
        if let Err(why) = result {
            let keep = Path::new(env!("CARGO_TARGET_TMPDIR")).join(format!("random-{name}-{case}"));
            let _ = std::fs::write(&keep, &input);
            let shown = String::from_utf8_lossy(&input[..input.len().min(2000)]).into_owned();
            failures.push(format!(
                "{name} case {case} (seed {seed:#x}, input kept in {}): {why}\n--- input ---\n{shown}\n---",
                keep.display()
            ));
        }
    }
    assert!(
        failures.is_empty(),
        "{} of {cases} {name} cases broke the contract; first:\n{}",
        failures.len(),
        failures[..failures.len().min(3)].join("\n")
    );
    eprintln!("{name}: {rejected} of {cases} mutated inputs rejected");
    assert!(
        rejected * 20 >= cases && (cases - rejected) * 50 >= cases,
        "{name}: {rejected} of {cases} rejected; the mutations are too mild or too harsh"
    );
}

fn head(path: &Path, lines: usize) -> Vec<u8> {
    let s = std::fs::read_to_string(path).unwrap();
    s.lines()
        .take(lines)
        .map(|l| format!("{l}\n"))
        .collect::<String>()
        .into_bytes()
}

#[test]
fn csv_table_reader() {
    let base = base_session();
    let seeds = vec![
        head(&base.join("emg.csv"), 40),
        head(&base.join("intact.csv"), 40),
    ];
    let t = tempfile::tempdir().unwrap();
    let plain = t.path().join("emg.csv");
    let gz = t.path().join("emg.csv.gz");
    let mut k = 0usize;
    battery("table", &seeds, 1000, |input| {
        k += 1;
        // every fifth case goes through gzip, intact or with its bytes mutated
        let (path, text) = if k % 5 == 0 {
            use std::io::Write;
            let mut enc = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::fast());
            enc.write_all(input).unwrap();
            let mut bytes = enc.finish().unwrap();
            if k % 10 == 0 {
                let i = (k * 7919) % bytes.len();
                bytes[i] ^= 0x20;
            }
            std::fs::write(&gz, bytes).unwrap();
            (&gz, None)
        } else {
            std::fs::write(&plain, input).unwrap();
            (&plain, Some(input))
        };
        match session::read_table(path) {
            Ok(tab) => {
                let ok = tab.header[0] == "time_s"
                    && tab.rows() >= 2
                    && tab.columns.len() == tab.header.len()
                    && tab
                        .columns
                        .iter()
                        .all(|c| c.len() == tab.rows() && c.iter().all(|v| v.is_finite()));
                ok.then_some(Accepted)
                    .ok_or_else(|| "accepted a bad table".to_string())
            }
            Err(e) => check(&e, path, text),
        }
    });
}

#[test]
fn manifest_reader() {
    let seeds = vec![std::fs::read(base_session().join("session.toml")).unwrap()];
    let t = tempfile::tempdir().unwrap();
    let file = t.path().join("session.toml");
    battery("manifest", &seeds, 1200, |input| {
        // through the file reader (which rejects NUL and non-UTF-8 bytes) ...
        std::fs::write(&file, input).unwrap();
        let first = match session::read_manifest(t.path()) {
            Ok(m) => sane_manifest(&m)?,
            Err(e) => {
                let e = e.as_input().ok_or(format!("not an input error: {e}"))?;
                check_toml(e, &file, &String::from_utf8_lossy(input))?
            }
        };
        // ... and the parser alone on the text, invalid bytes replaced
        let text = String::from_utf8_lossy(input);
        match session::parse_manifest(&file, &text) {
            Ok(m) => sane_manifest(&m)?,
            Err(e) => check_toml(&e, &file, &text)?,
        };
        Ok(first)
    });
}

fn sane_manifest(m: &Manifest) -> Result<Seen, String> {
    let ok = m.emg_rate_hz.is_finite()
        && m.emg_rate_hz > 0.0
        && m.intact_rate_hz.is_finite()
        && m.intact_rate_hz > 0.0
        && m.intact_offset_s.is_finite();
    ok.then_some(Accepted)
        .ok_or_else(|| format!("accepted rates {} / {}", m.emg_rate_hz, m.intact_rate_hz))
}

#[test]
fn events_reader() {
    let s = session::read(base_session()).unwrap();
    let (m, emg): (&Manifest, &Recording) = (&s.manifest, &s.emg);
    let (t0, t1) = emg.span();
    let seeds = vec![std::fs::read(base_session().join("events.csv")).unwrap()];
    let t = tempfile::tempdir().unwrap();
    let file = t.path().join("events.csv");
    battery("events", &seeds, 1000, |input| {
        std::fs::write(&file, input).unwrap();
        match session::read_events(&file, m, emg) {
            Ok(blocks) => {
                let slack = 1.0 / m.emg_rate_hz;
                let bad = blocks.iter().find(|b| {
                    !(b.end_s > b.start_s && b.start_s >= t0 - slack && b.end_s <= t1 + slack)
                });
                match bad {
                    Some(b) => Err(format!("accepted block {}..{}", b.start_s, b.end_s)),
                    None => Ok(Accepted),
                }
            }
            Err(e) => check(&e, &file, Some(input)),
        }
    });
}

#[test]
fn protocol_parser() {
    let seeds: Vec<Vec<u8>> = ["hand-basic.toml", "hand-wrist-full.toml"]
        .iter()
        .map(|f| std::fs::read(root().join("protocols").join(f)).unwrap())
        .collect();
    let file = Path::new("protocols/mutated.toml");
    battery("protocol", &seeds, 1000, |input| {
        let text = String::from_utf8_lossy(input);
        let problems = protocol::check_source(&text, file);
        for e in &problems {
            check_toml(e, file, &text)?;
        }
        match protocol::parse(&text, file) {
            Ok(p) => {
                if !problems.is_empty() {
                    return Err("parse accepts what check rejects".into());
                }
                let cues = p.timeline(0.0);
                if cues
                    .iter()
                    .any(|c| c.end_s.partial_cmp(&c.start_s).is_none_or(|o| o.is_lt()))
                {
                    return Err("a cue ends before it starts".into());
                }
                Ok(Accepted)
            }
            Err(e) => {
                if problems.is_empty() {
                    return Err(format!("check accepts what parse rejects: {e}"));
                }
                let e = e.as_input().ok_or(format!("not an input error: {e}"))?;
                check_toml(e, file, &text)
            }
        }
    });
}

#[test]
fn scenario_parser() {
    let seeds = vec![
        std::fs::read(fixture("small-scenario.toml")).unwrap(),
        std::fs::read(root().join("demo-data/demo-scenario.toml")).unwrap(),
    ];
    let file = Path::new("mutated-scenario.toml");
    battery("scenario", &seeds, 1000, |input| {
        let text = String::from_utf8_lossy(input);
        match Scenario::from_toml(file, &text) {
            Ok(sc) => {
                let d = sc.total_duration();
                (d.is_finite() && d > 0.0)
                    .then_some(Accepted)
                    .ok_or_else(|| format!("accepted a scenario of {d} s"))
            }
            Err(e) => check_toml(&e, file, &text),
        }
    });
}
