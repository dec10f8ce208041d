//! The events log written while playing: rows of events.csv as they finish.
//!
//! The prompter hands over *pieces* of played time (a stretch of one cue, or
//! a pause) grouped by repetition (a paced cycle, one hold of a hold-release
//! task, a whole free or rest cue). When a repetition ends, its pieces get
//! their labels: the task's pattern name, `<pattern>-bad` if the repetition
//! was marked bad, `pause` for pauses. Abutting pieces with the same label
//! and DoF merge into one row; a row is written (and flushed) as soon as the
//! next, different row begins, so a crash loses at most the current rows.

use crate::session::Block;
use std::fs::{File, OpenOptions};
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

/// Rows shorter than this (s) are dropped: they would round to nothing.
const MIN_ROW_S: f64 = 5e-4;

#[derive(Debug, Clone)]
struct Piece {
    start_s: f64,
    end_s: f64,
    /// Pattern name, or `None` for a pause.
    pattern: Option<&'static str>,
    dof: Option<String>,
}

/// Turns played pieces into events.csv rows written to `W`.
#[derive(Debug)]
pub struct EventLog<W: Write> {
    sink: W,
    pending: Vec<Piece>,
    open: Option<Block>,
    written: Vec<Block>,
}

impl<W: Write> EventLog<W> {
    /// A log writing to `sink`; writes the header `start_s,end_s,task,dof` now.
    pub fn new(mut sink: W) -> std::io::Result<Self> {
        writeln!(sink, "start_s,end_s,task,dof")?;
        sink.flush()?;
        Ok(EventLog {
            sink,
            pending: Vec::new(),
            open: None,
            written: Vec::new(),
        })
    }

    /// A played stretch of a cue of a task with this pattern and DoF (EMG clock, s).
    pub fn played(&mut self, start_s: f64, end_s: f64, pattern: &'static str, dof: Option<String>) {
        self.pending.push(Piece {
            start_s,
            end_s,
            pattern: Some(pattern),
            dof,
        });
    }

    /// A pause (EMG clock, s).
    pub fn paused(&mut self, start_s: f64, end_s: f64) {
        self.pending.push(Piece {
            start_s,
            end_s,
            pattern: None,
            dof: None,
        });
    }

    /// Ends the current repetition; `bad` labels its played pieces `<pattern>-bad`.
    pub fn end_repetition(&mut self, bad: bool) -> std::io::Result<()> {
        for p in std::mem::take(&mut self.pending) {
            if p.end_s - p.start_s < MIN_ROW_S {
                continue;
            }
            let task = match p.pattern {
                None => "pause".to_string(),
                Some(name) if bad => format!("{name}-bad"),
                Some(name) => name.to_string(),
            };
            let dof = if p.pattern.is_none() { None } else { p.dof };
            if let Some(o) = &mut self.open {
                if o.task == task && o.dof == dof && (o.end_s - p.start_s).abs() < 1e-9 {
                    o.end_s = p.end_s;
                    continue;
                }
            }
            self.write_open()?;
            self.open = Some(Block {
                start_s: p.start_s,
                end_s: p.end_s,
                task,
                dof,
                words: None,
            });
        }
        Ok(())
    }

    fn write_open(&mut self) -> std::io::Result<()> {
        if let Some(b) = self.open.take() {
            writeln!(
                self.sink,
                "{:.3},{:.3},{},{}",
                b.start_s,
                b.end_s,
                b.task,
                b.dof_label()
            )?;
            self.sink.flush()?;
            self.written.push(b);
        }
        Ok(())
    }

    /// Ends the current repetition (not bad unless `bad`), writes every row
    /// and returns the rows written and the sink.
    pub fn finish(mut self, bad: bool) -> std::io::Result<(Vec<Block>, W)> {
        self.end_repetition(bad)?;
        self.write_open()?;
        self.sink.flush()?;
        Ok((self.written, self.sink))
    }

    /// The rows written so far.
    pub fn written(&self) -> &[Block] {
        &self.written
    }
}

/// An events file being written: rows go to `<out>.partial` and the file is
/// renamed to `out` when [`EventFile::commit`] is called (at the end of play,
/// including after an abort). If the process dies before, the rows written
/// so far stay in the `.partial` file.
#[derive(Debug)]
pub struct EventFile {
    out: PathBuf,
    partial: PathBuf,
}

impl EventFile {
    /// Opens `<out>.partial` for writing. Refuses when `out` or the partial
    /// file exists, unless `force`.
    pub fn create(out: &Path, force: bool) -> crate::Result<(EventFile, BufWriter<File>)> {
        let mut name = out.file_name().unwrap_or_default().to_os_string();
        name.push(".partial");
        let partial = out.with_file_name(name);
        if !force {
            for p in [out, partial.as_path()] {
                if p.exists() {
                    return Err(crate::Error::Argument(format!(
                        "{} exists; choose another --out or pass --force to replace it",
                        p.display()
                    )));
                }
            }
        }
        let file = OpenOptions::new()
            .write(true)
            .create(true)
            .truncate(true)
            .open(&partial)
            .map_err(|e| crate::Error::io(&partial, e))?;
        Ok((
            EventFile {
                out: out.to_path_buf(),
                partial,
            },
            BufWriter::new(file),
        ))
    }

    /// The temporary path rows go to while playing.
    pub fn partial_path(&self) -> &Path {
        &self.partial
    }

    /// Renames the partial file to its final name.
    pub fn commit(self) -> crate::Result<PathBuf> {
        std::fs::rename(&self.partial, &self.out).map_err(|e| crate::Error::io(&self.out, e))?;
        Ok(self.out)
    }
}
