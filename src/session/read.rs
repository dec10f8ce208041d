//! Reading a whole session folder and checking it against DESIGN.md section 3.

use super::manifest::parse_manifest;
use super::table::{read_small_text, read_table, Table};
use super::types::{Block, Manifest, Recording, Session};
use crate::error::{InputError, InputErrorKind as K};
use crate::Result;
use ndarray::Array2;
use std::path::{Path, PathBuf};

/// Name of the manifest inside a session folder.
pub const MANIFEST: &str = "session.toml";
/// Name of the optional events file inside a session folder.
pub const EVENTS: &str = "events.csv";

/// Smallest share of the EMG recording that the shifted intact recording must cover.
pub const MIN_COVERAGE: f64 = 0.95;
/// Largest plausible |EMG| in mV (DESIGN.md section 3).
pub const MAX_EMG_MV: f64 = 1000.0;
/// Largest relative difference between the median sample interval and `1/rate_hz`.
pub const RATE_TOLERANCE: f64 = 0.01;

/// Reads and validates the session folder at `root`. Never writes anything.
pub fn read(root: &Path) -> Result<Session> {
    let manifest = read_manifest(root)?;
    let emg_path = data_path(root, &manifest.emg_file);
    let emg_table = read_table(&emg_path)?;
    let emg = emg_recording(&manifest, emg_table)?;
    let intact_path = data_path(root, &manifest.intact_file);
    let intact_table = read_table(&intact_path)?;
    let intact = intact_recording(&manifest, intact_table)?;
    check_coverage(&manifest, &emg, &intact)?;
    let events = match find_optional(root, EVENTS) {
        Some(p) => Some(read_events(&p, &manifest, &emg)?),
        None => None,
    };
    Ok(Session {
        root: root.to_path_buf(),
        manifest,
        emg,
        intact,
        events,
    })
}

/// Reads and validates only `session.toml`.
pub fn read_manifest(root: &Path) -> Result<Manifest> {
    match std::fs::metadata(root) {
        Ok(m) if m.is_dir() => {}
        Ok(_) => {
            return Err(InputError::new(
                root,
                K::Unreadable,
                "is not a folder; expected a session folder holding session.toml",
            )
            .into())
        }
        Err(e) => return Err(super::table::unreadable(root, &e).into()),
    }
    let path = root.join(MANIFEST);
    let text = read_small_text(&path)?;
    Ok(parse_manifest(&path, &text)?)
}

/// The path of a data file named in the manifest; `name.gz` is used when only it exists.
fn data_path(root: &Path, name: &str) -> PathBuf {
    let p = root.join(name);
    if !p.exists() && !name.ends_with(".gz") {
        let gz = root.join(format!("{name}.gz"));
        if gz.exists() {
            return gz;
        }
    }
    p
}

fn find_optional(root: &Path, name: &str) -> Option<PathBuf> {
    let p = root.join(name);
    // symlink_metadata so that a dangling or looping link is still "present"
    // and reported when read, not silently ignored.
    if std::fs::symlink_metadata(&p).is_ok() {
        return Some(p);
    }
    let gz = root.join(format!("{name}.gz"));
    std::fs::symlink_metadata(&gz).ok().map(|_| gz)
}

/// Checks the time column: strictly increasing, median interval near `1/rate_hz`.
fn check_times(t: &Table, rate_hz: f64, rate_key: &str) -> Result<(), InputError> {
    let time = &t.columns[0];
    for i in 1..time.len() {
        if time[i] <= time[i - 1] {
            let what = if time[i] == time[i - 1] {
                "repeats the previous time"
            } else {
                "goes back in time"
            };
            return Err(InputError::new(
                &t.file,
                K::BadValue,
                format!(
                    "time {} {what} ({}); times must be strictly increasing",
                    time[i],
                    time[i - 1]
                ),
            )
            .at_line(Table::line_of_row(i))
            .field("time_s"));
        }
    }
    let mut dt: Vec<f64> = time.windows(2).map(|w| w[1] - w[0]).collect();
    let mid = dt.len() / 2;
    let median = *dt.select_nth_unstable_by(mid, |a, b| a.total_cmp(b)).1;
    let expected = 1.0 / rate_hz;
    if ((median - expected) / expected).abs() > RATE_TOLERANCE {
        return Err(InputError::new(
            &t.file,
            K::Inconsistent,
            format!(
                "median sample interval {:.6} s means {:.3} Hz, but session.toml declares {rate_key} = {rate_hz} Hz (allowed: within 1%)",
                median,
                1.0 / median
            ),
        )
        .field("time_s"));
    }
    Ok(())
}

/// Reorders table columns into `ids` order, dropping the rest.
fn gather(t: Table, ids: &[String]) -> (Vec<f64>, Array2<f64>) {
    let n = t.rows();
    let mut cols = t.columns;
    let time = std::mem::take(&mut cols[0]);
    let mut flat = Vec::with_capacity(ids.len() * n);
    for id in ids {
        let j = t.header.iter().position(|h| h == id).expect("checked");
        flat.extend_from_slice(&cols[j]);
        cols[j] = Vec::new();
    }
    let data = Array2::from_shape_vec((ids.len(), n), flat).expect("shape matches");
    (time, data)
}

fn emg_recording(m: &Manifest, t: Table) -> Result<Recording, InputError> {
    let manifest_name = MANIFEST;
    for s in &m.sites {
        if !t.header.iter().skip(1).any(|h| *h == s.id) {
            return Err(InputError::new(
                &t.file,
                K::Missing,
                format!(
                    "site `{}` is declared in {manifest_name} but has no column here",
                    s.id
                ),
            )
            .at_line(1)
            .field(s.id.clone()));
        }
    }
    for h in t.header.iter().skip(1) {
        if !m.sites.iter().any(|s| s.id == *h) {
            return Err(InputError::new(
                &t.file,
                K::Unexpected,
                format!("column `{h}` is not a declared site; add a [[site]] with id = \"{h}\" to {manifest_name} or remove the column"),
            )
            .at_line(1)
            .field(h.clone()));
        }
    }
    check_times(&t, m.emg_rate_hz, "emg.rate_hz")?;
    let to_mv = m.emg_units.to_millivolt();
    let limit = MAX_EMG_MV / to_mv;
    for (j, col) in t.columns.iter().enumerate().skip(1) {
        if let Some(i) = col.iter().position(|v| v.abs() > limit) {
            return Err(InputError::new(
                &t.file,
                K::OutOfRange,
                format!(
                    "value {} {} is not physically plausible surface EMG (|value| at most {} {})",
                    col[i],
                    m.emg_units.as_str(),
                    limit,
                    m.emg_units.as_str()
                ),
            )
            .at_line(Table::line_of_row(i))
            .field(t.header[j].clone()));
        }
    }
    let ids: Vec<String> = m.sites.iter().map(|s| s.id.clone()).collect();
    let file = t.file.clone();
    let (time_s, mut data) = gather(t, &ids);
    if to_mv != 1.0 {
        data.mapv_inplace(|v| v * to_mv);
    }
    Ok(Recording {
        file,
        time_s,
        rate_hz: m.emg_rate_hz,
        channels: ids,
        data,
    })
}

fn intact_recording(m: &Manifest, t: Table) -> Result<Recording, InputError> {
    for d in &m.dofs {
        if !t.header.iter().skip(1).any(|h| *h == d.id) {
            return Err(InputError::new(
                &t.file,
                K::Missing,
                format!(
                    "DoF `{}` is declared in {MANIFEST} but has no column here",
                    d.id
                ),
            )
            .at_line(1)
            .field(d.id.clone()));
        }
    }
    check_times(&t, m.intact_rate_hz, "intact.rate_hz")?;
    for d in &m.dofs {
        let j = t.header.iter().position(|h| *h == d.id).expect("checked");
        let [lo, hi] = d.range_deg;
        let w = hi - lo;
        let (a, b) = (lo - w, hi + w);
        if let Some(i) = t.columns[j].iter().position(|v| *v < a || *v > b) {
            return Err(InputError::new(
                &t.file,
                K::OutOfRange,
                format!(
                    "angle {} deg is far outside the DoF's range [{lo}, {hi}] (allowed {a}..{b}: the range widened by its width on each side)",
                    t.columns[j][i]
                ),
            )
            .at_line(Table::line_of_row(i))
            .field(d.id.clone()));
        }
    }
    let ids: Vec<String> = m.dofs.iter().map(|d| d.id.clone()).collect();
    let file = t.file.clone();
    let (time_s, data) = gather(t, &ids);
    Ok(Recording {
        file,
        time_s,
        rate_hz: m.intact_rate_hz,
        channels: ids,
        data,
    })
}

fn check_coverage(m: &Manifest, emg: &Recording, intact: &Recording) -> Result<(), InputError> {
    let (e0, e1) = emg.span();
    let (i0, i1) = intact.span();
    let (i0, i1) = (i0 + m.intact_offset_s, i1 + m.intact_offset_s);
    let overlap = (e1.min(i1) - e0.max(i0)).max(0.0);
    let share = overlap / (e1 - e0);
    if share < MIN_COVERAGE {
        return Err(InputError::new(
            &intact.file,
            K::Inconsistent,
            format!(
                "the intact recording (shifted by intact.offset_s = {} s) covers {:.1}% of the EMG recording ({e0:.3}..{e1:.3} s on the EMG clock); expected at least {:.0}%",
                m.intact_offset_s,
                100.0 * share,
                100.0 * MIN_COVERAGE
            ),
        )
        .field("time_s"));
    }
    Ok(())
}

/// Reads and validates events.csv against the manifest and the EMG span.
pub fn read_events(path: &Path, m: &Manifest, emg: &Recording) -> Result<Vec<Block>, InputError> {
    let text = read_small_text(path)?;
    if text.trim().is_empty() {
        return Err(InputError::new(
            path,
            K::Malformed,
            "is empty; expected a header `start_s,end_s,task,dof`",
        )
        .at_line(1));
    }
    let mut rdr = csv::ReaderBuilder::new()
        .trim(csv::Trim::All)
        .flexible(true)
        .from_reader(text.as_bytes());
    let header = rdr
        .headers()
        .map_err(|e| InputError::new(path, K::Malformed, format!("bad header: {e}")).at_line(1))?
        .clone();
    let col = |name: &str| -> Result<usize, InputError> {
        header.iter().position(|h| h == name).ok_or_else(|| {
            InputError::new(
                path,
                K::Missing,
                format!("header has no `{name}` column; expected `start_s,end_s,task,dof`"),
            )
            .at_line(1)
            .field(name)
        })
    };
    let (cs, ce, ct, cd) = (col("start_s")?, col("end_s")?, col("task")?, col("dof")?);
    let (t0, t1) = emg.span();
    let slack = 1.0 / m.emg_rate_hz;
    let mut out = Vec::new();
    for rec in rdr.records() {
        let rec = rec.map_err(|e| {
            let line = e.position().map_or(0, |p| p.line() as usize);
            InputError::new(path, K::Malformed, format!("unreadable row: {e}")).at_line(line)
        })?;
        let line = rec.position().map_or(0, |p| p.line() as usize);
        if let Some(j) = rec.iter().position(|f| f.contains('\n')) {
            let mut e = InputError::new(
                path,
                K::Malformed,
                "a quote opened in this row is not closed before the line ends; quotes must pair up within a row",
            )
            .at_line(line);
            if let Some(h) = header.get(j) {
                e = e.field(h);
            }
            return Err(e);
        }
        if rec.iter().all(str::is_empty) {
            continue;
        }
        if rec.len() != header.len() {
            return Err(InputError::new(
                path,
                K::Malformed,
                format!("row has {} fields; expected {}", rec.len(), header.len()),
            )
            .at_line(line));
        }
        let num = |c: usize, name: &str| -> Result<f64, InputError> {
            let s = &rec[c];
            match s.parse::<f64>() {
                Ok(v) if v.is_finite() => Ok(v),
                _ => Err(InputError::new(
                    path,
                    K::BadValue,
                    format!("value `{s}` is not a finite number of seconds"),
                )
                .at_line(line)
                .field(name)),
            }
        };
        let start_s = num(cs, "start_s")?;
        let end_s = num(ce, "end_s")?;
        if end_s <= start_s {
            return Err(InputError::new(
                path,
                K::BadValue,
                format!("end_s {end_s} is not after start_s {start_s}"),
            )
            .at_line(line)
            .field("end_s"));
        }
        if start_s < t0 - slack || end_s > t1 + slack {
            let field = if start_s < t0 - slack {
                "start_s"
            } else {
                "end_s"
            };
            return Err(InputError::new(
                path,
                K::OutOfRange,
                format!("block {start_s}..{end_s} s lies outside the EMG recording ({t0}..{t1} s)"),
            )
            .at_line(line)
            .field(field));
        }
        let task = rec[ct].to_string();
        if task.is_empty() {
            return Err(InputError::new(path, K::BadValue, "task is empty")
                .at_line(line)
                .field("task"));
        }
        let dof = match &rec[cd] {
            "*" => None,
            d if m.dofs.iter().any(|x| x.id == d) => Some(d.to_string()),
            d => {
                return Err(InputError::new(
                    path,
                    K::Unexpected,
                    format!("`{d}` is not a declared DoF; expected a [[dof]] id or `*`"),
                )
                .at_line(line)
                .field("dof"))
            }
        };
        out.push(Block {
            start_s,
            end_s,
            task,
            dof,
            words: None,
        });
    }
    Ok(out)
}
