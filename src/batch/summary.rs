//! The summary table of a batch: `batch-summary.csv` and a self-contained
//! `batch-summary.html` (inline CSS, no scripts, no network), one row per
//! session.

use super::{Outcome, Status};
use crate::error::{Error, Result};
use crate::output::write_file_atomic;
use crate::report::SitesReport;
use std::path::Path;

/// The CSV's columns.
pub const SUMMARY_COLUMNS: [&str; 8] = [
    "session",
    "subject",
    "status",
    "planned_sites",
    "confidence",
    "flags",
    "details",
    "seconds",
];

/// One row of the summary, as text.
#[derive(Debug, Clone, PartialEq)]
pub struct Row {
    /// Session path relative to the input folder.
    pub session: String,
    /// Subject code (empty when the session could not be read).
    pub subject: String,
    /// `done`, `skipped-current` or `failed`.
    pub status: String,
    /// Planned sites, space-separated.
    pub planned_sites: String,
    /// Per planned site, its confidence in each DoF it serves:
    /// `S3 fingers=high wrist=medium; S5 wrist=high`.
    pub confidence: String,
    /// Number of flags.
    pub flags: usize,
    /// The flag texts (` | `-separated), or the error of a failed session.
    pub details: String,
    /// Wall time, seconds.
    pub seconds: f64,
}

fn confidence(r: &SitesReport) -> String {
    r.plan
        .sites
        .iter()
        .map(|p| {
            let per: Vec<String> = p
                .dofs
                .iter()
                .map(|d| {
                    let c = r
                        .dofs
                        .iter()
                        .find(|x| x.dof == *d)
                        .and_then(|x| x.sites.iter().find(|s| s.site == p.site))
                        .map_or("?", |s| s.confidence.as_str());
                    format!("{d}={c}")
                })
                .collect();
            format!("{} {}", p.site, per.join(" "))
        })
        .collect::<Vec<_>>()
        .join("; ")
}

/// The summary row of one outcome.
pub fn row(o: &Outcome) -> Row {
    let (subject, planned, conf, flags, details) = match (&o.status, &o.report) {
        (Status::Failed(e), _) => (String::new(), String::new(), String::new(), 0, e.clone()),
        (_, Some(r)) => (
            r.subject.clone(),
            r.plan
                .sites
                .iter()
                .map(|p| p.site.as_str())
                .collect::<Vec<_>>()
                .join(" "),
            confidence(r),
            r.flags.len(),
            r.flags
                .iter()
                .map(|f| f.why.as_str())
                .collect::<Vec<_>>()
                .join(" | "),
        ),
        (_, None) => Default::default(),
    };
    Row {
        session: o.rel.clone(),
        subject,
        status: o.status.as_str().into(),
        planned_sites: planned,
        confidence: conf,
        flags,
        details,
        seconds: (o.seconds * 10.0).round() / 10.0,
    }
}

/// `batch-summary.csv`'s text.
pub fn csv_text(rows: &[Row]) -> Result<String> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let err = |e: csv::Error| Error::Analysis(format!("batch summary: {e}"));
    w.write_record(SUMMARY_COLUMNS).map_err(err)?;
    for r in rows {
        w.write_record([
            r.session.as_str(),
            &r.subject,
            &r.status,
            &r.planned_sites,
            &r.confidence,
            &r.flags.to_string(),
            &r.details,
            &format!("{:.1}", r.seconds),
        ])
        .map_err(err)?;
    }
    let bytes = w
        .into_inner()
        .map_err(|e| Error::Analysis(format!("batch summary: {e}")))?;
    Ok(String::from_utf8_lossy(&bytes).into_owned())
}

fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// `batch-summary.html`'s text: one table, inline style, no scripts or links.
pub fn html_text(rows: &[Row]) -> String {
    let count = |s: &str| rows.iter().filter(|r| r.status == s).count();
    let mut h = String::from(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
         <title>mirrorsite batch summary</title>\n<style>\n\
         body { font-family: sans-serif; margin: 1.5em; }\n\
         table { border-collapse: collapse; }\n\
         th, td { border: 1px solid #999; padding: 0.3em 0.5em; vertical-align: top; text-align: left; }\n\
         th { background: #eee; }\n\
         tr.failed td { background: #fde8e8; }\n\
         td.details { max-width: 40em; font-size: 0.9em; }\n\
         </style>\n</head>\n<body>\n<h1>Batch summary</h1>\n",
    );
    h.push_str(&format!(
        "<p>{} sessions: {} done, {} skipped as current, {} failed.</p>\n",
        rows.len(),
        count("done"),
        count("skipped-current"),
        count("failed")
    ));
    h.push_str("<table>\n<tr>");
    for c in [
        "Session",
        "Subject",
        "Status",
        "Planned sites",
        "Confidence",
        "Flags",
        "Flags or error",
        "Seconds",
    ] {
        h.push_str(&format!("<th>{c}</th>"));
    }
    h.push_str("</tr>\n");
    for r in rows {
        let details = if r.status == "failed" {
            esc(&r.details)
        } else {
            r.details
                .split(" | ")
                .filter(|x| !x.is_empty())
                .map(esc)
                .collect::<Vec<_>>()
                .join("<br>")
        };
        h.push_str(&format!(
            "<tr class=\"{}\"><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td>\
             <td>{}</td><td class=\"details\">{}</td><td>{:.1}</td></tr>\n",
            esc(&r.status),
            esc(&r.session),
            esc(&r.subject),
            esc(&r.status),
            esc(&r.planned_sites),
            esc(&r.confidence).replace("; ", "<br>"),
            r.flags,
            details,
            r.seconds
        ));
    }
    h.push_str("</table>\n</body>\n</html>\n");
    h
}

/// Writes both summary files at the top of `out_root`.
pub fn write(out_root: &Path, outcomes: &[Outcome]) -> Result<()> {
    let rows: Vec<Row> = outcomes.iter().map(row).collect();
    write_file_atomic(
        &out_root.join("batch-summary.csv"),
        csv_text(&rows)?.as_bytes(),
    )?;
    write_file_atomic(
        &out_root.join("batch-summary.html"),
        html_text(&rows).as_bytes(),
    )
}
