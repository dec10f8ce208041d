//! Reading numeric CSV tables (`emg.csv`, `intact.csv`, plain or gzip).
//!
//! The reader streams the file once, line by line, and keeps one `Vec<f64>`
//! per column. Every defect is reported with its 1-based file line (the
//! header is line 1) and the column name.

use crate::error::{InputError, InputErrorKind as K};
use flate2::read::MultiGzDecoder;
use std::fs::File;
use std::io::{BufRead, BufReader, Read};
use std::path::{Path, PathBuf};

/// A numeric table: a header and one column of values per header field.
#[derive(Debug, Clone)]
pub struct Table {
    /// The file read.
    pub file: PathBuf,
    /// Column names; the first is `time_s`.
    pub header: Vec<String>,
    /// Column values; `columns[j][i]` is row `i` (file line `i + 2`) of column `j`.
    pub columns: Vec<Vec<f64>>,
}

impl Table {
    /// Number of data rows.
    pub fn rows(&self) -> usize {
        self.columns.first().map_or(0, Vec::len)
    }

    /// File line of data row `i`.
    pub fn line_of_row(i: usize) -> usize {
        i + 2
    }
}

/// Opens a text file for reading, decompressing `.gz` files.
pub fn open_text(path: &Path) -> Result<Box<dyn BufRead>, InputError> {
    let file = File::open(path).map_err(|e| unreadable(path, &e))?;
    let meta = file.metadata().map_err(|e| unreadable(path, &e))?;
    if meta.is_dir() {
        return Err(InputError::new(
            path,
            K::Unreadable,
            "is a folder; expected a file",
        ));
    }
    let is_gz = path
        .file_name()
        .and_then(|n| n.to_str())
        .is_some_and(|n| n.ends_with(".gz"));
    Ok(if is_gz {
        Box::new(BufReader::with_capacity(
            1 << 16,
            MultiGzDecoder::new(BufReader::new(file)),
        ))
    } else {
        Box::new(BufReader::with_capacity(1 << 16, file))
    })
}

/// An error for a file that cannot be opened or read.
pub fn unreadable(path: &Path, e: &std::io::Error) -> InputError {
    let what = match e.kind() {
        std::io::ErrorKind::NotFound => "file not found".to_string(),
        std::io::ErrorKind::PermissionDenied => "permission denied; cannot read it".to_string(),
        _ => format!("cannot be read: {e}"),
    };
    InputError::new(path, K::Unreadable, what)
}

/// Reads the whole of a small text file (manifests, events).
pub fn read_small_text(path: &Path) -> Result<String, InputError> {
    let mut r = open_text(path)?;
    let mut bytes = Vec::new();
    r.read_to_end(&mut bytes)
        .map_err(|e| read_failure(path, &e))?;
    if bytes.contains(&0) {
        return Err(InputError::new(
            path,
            K::Malformed,
            "contains binary data (NUL bytes); expected text",
        ));
    }
    String::from_utf8(bytes).map_err(|_| InputError::new(path, K::Malformed, "is not UTF-8 text"))
}

fn read_failure(path: &Path, e: &std::io::Error) -> InputError {
    if e.kind() == std::io::ErrorKind::InvalidInput || e.kind() == std::io::ErrorKind::InvalidData {
        InputError::new(
            path,
            K::Malformed,
            format!("is not a valid (gzip-compressed) text file: {e}"),
        )
    } else {
        unreadable(path, e)
    }
}

/// Splits a line into fields, trimming spaces and surrounding double quotes.
fn fields(line: &[u8]) -> impl Iterator<Item = &[u8]> {
    line.split(|&b| b == b',').map(|f| {
        let f = f.trim_ascii();
        if f.len() >= 2 && f[0] == b'"' && f[f.len() - 1] == b'"' {
            &f[1..f.len() - 1]
        } else {
            f
        }
    })
}

fn show(bytes: &[u8]) -> String {
    let s = String::from_utf8_lossy(bytes);
    let mut out: String = s.chars().take(40).collect();
    if s.chars().count() > 40 {
        out.push('…');
    }
    out
}

/// Reads a numeric CSV table whose first header field must be `time_s`.
///
/// Checks: not empty, text, header names unique and non-empty, every row has
/// as many fields as the header (a shorter last row is reported as
/// truncated), every value a finite number, no blank line before the last
/// data row.
pub fn read_table(path: &Path) -> Result<Table, InputError> {
    let mut reader = open_text(path)?;
    let mut buf = Vec::with_capacity(256);
    let n = reader
        .read_until(b'\n', &mut buf)
        .map_err(|e| read_failure(path, &e))?;
    if n == 0 || buf.trim_ascii().is_empty() {
        return Err(InputError::new(
            path,
            K::Malformed,
            "is empty; expected a header line starting with `time_s`",
        )
        .at_line(1));
    }
    if buf.contains(&0) || std::str::from_utf8(&buf).is_err() {
        return Err(InputError::new(
            path,
            K::Malformed,
            "is not a text CSV file (binary data in the header)",
        )
        .at_line(1));
    }
    let mut line = buf.as_slice();
    if line.starts_with(b"\xEF\xBB\xBF") {
        line = &line[3..];
    }
    let header: Vec<String> = fields(line.trim_ascii_end())
        .map(|f| String::from_utf8_lossy(f).into_owned())
        .collect();
    if header[0] != "time_s" {
        return Err(InputError::new(
            path,
            K::Malformed,
            format!("first header field is `{}`; expected `time_s`", header[0]),
        )
        .at_line(1)
        .field("time_s"));
    }
    for (j, h) in header.iter().enumerate() {
        if h.is_empty() {
            return Err(InputError::new(
                path,
                K::Malformed,
                format!("header field {} is empty; every column needs a name", j + 1),
            )
            .at_line(1));
        }
        if header[..j].contains(h) {
            return Err(InputError::new(
                path,
                K::Unexpected,
                format!("column `{h}` appears twice in the header"),
            )
            .at_line(1)
            .field(h.clone()));
        }
    }

    let width = header.len();
    let mut columns: Vec<Vec<f64>> = vec![Vec::new(); width];
    let mut line_no = 1usize;
    let mut blank_at: Option<usize> = None;
    loop {
        buf.clear();
        let n = reader
            .read_until(b'\n', &mut buf)
            .map_err(|e| read_failure(path, &e))?;
        if n == 0 {
            break;
        }
        line_no += 1;
        let ended = buf.last() == Some(&b'\n');
        let line = buf.trim_ascii_end();
        if line.is_empty() {
            blank_at.get_or_insert(line_no);
            continue;
        }
        if let Some(b) = blank_at {
            return Err(InputError::new(
                path,
                K::Malformed,
                "blank line inside the data; expected one row per sample",
            )
            .at_line(b));
        }
        let mut count = 0;
        for (j, f) in fields(line).enumerate() {
            if j >= width {
                return Err(InputError::new(
                    path,
                    K::Malformed,
                    format!(
                        "row has more fields than the header's {width}; expected one value per column"
                    ),
                )
                .at_line(line_no));
            }
            let v = std::str::from_utf8(f)
                .ok()
                .and_then(|s| s.parse::<f64>().ok());
            match v {
                Some(v) if v.is_finite() => columns[j].push(v),
                Some(_) => {
                    return Err(InputError::new(
                        path,
                        K::BadValue,
                        format!("value `{}` is not a finite number", show(f)),
                    )
                    .at_line(line_no)
                    .field(header[j].clone()))
                }
                None => {
                    let what = if f.is_empty() {
                        "is empty; expected a number".to_string()
                    } else {
                        format!("value `{}` is not a number", show(f))
                    };
                    return Err(InputError::new(path, K::BadValue, what)
                        .at_line(line_no)
                        .field(header[j].clone()));
                }
            }
            count += 1;
        }
        if count < width {
            let msg = if ended {
                format!("row has {count} fields; expected {width} (one per header column)")
            } else {
                format!("last row is truncated: {count} of {width} fields")
            };
            return Err(InputError::new(path, K::Malformed, msg)
                .at_line(line_no)
                .field(header[count].clone()));
        }
    }
    let rows = columns[0].len();
    if rows < 2 {
        return Err(InputError::new(
            path,
            K::Malformed,
            format!("has {rows} data row(s); expected at least two samples"),
        ));
    }
    Ok(Table {
        file: path.to_path_buf(),
        header,
        columns,
    })
}
