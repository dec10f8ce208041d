//! `sites.json` and `sites.csv`.

use super::model::SitesReport;
use crate::error::{Error, Result};
use crate::output::write_file_atomic;
use std::path::Path;

/// The header of `sites.csv`, one row per DoF × candidate site.
///
/// | column | meaning |
/// |---|---|
/// | `dof` | DoF id |
/// | `site` | site id |
/// | `angle_deg` | angle around the limb, degrees from the dorsal midline toward the radial side |
/// | `distance_cm` | distance distal from the lateral epicondyle, cm |
/// | `quality` | signal quality: `ok`, `suspect` or `bad` |
/// | `selected` | `true` when the DoF's final model uses the site |
/// | `planned` | `true` when the plan places the site and lists this DoF among those it serves |
/// | `frequency` | share of resampled refits that selected the site (0–1) |
/// | `confidence` | `high`, `medium` or `low` |
/// | `alternates` | interchangeable sites, best first, joined by `;` |
///
/// Position and quality are empty for a site missing from `site_info`.
pub const SITES_CSV_COLUMNS: [&str; 10] = [
    "dof",
    "site",
    "angle_deg",
    "distance_cm",
    "quality",
    "selected",
    "planned",
    "frequency",
    "confidence",
    "alternates",
];

/// `sites.json`: pretty-printed, fields in the order of the model, ending
/// with a newline. Fails if a number is not finite (JSON has no NaN).
pub fn sites_json(report: &SitesReport) -> Result<String> {
    let value = serde_json::to_value(report)
        .map_err(|e| Error::Analysis(format!("sites.json: cannot encode the report: {e}")))?;
    if let Some(path) = first_null_number(&value, String::new()) {
        return Err(Error::Analysis(format!(
            "sites.json: `{path}` is not a finite number"
        )));
    }
    let mut s = serde_json::to_string_pretty(report)
        .map_err(|e| Error::Analysis(format!("sites.json: cannot encode the report: {e}")))?;
    s.push('\n');
    Ok(s)
}

/// serde_json writes non-finite floats as `null`; the model has no optional
/// numbers other than `resamples`, so a `null` elsewhere is a non-finite value.
fn first_null_number(v: &serde_json::Value, path: String) -> Option<String> {
    match v {
        serde_json::Value::Null => Some(path),
        serde_json::Value::Array(a) => a
            .iter()
            .enumerate()
            .find_map(|(i, x)| first_null_number(x, format!("{path}[{i}]"))),
        serde_json::Value::Object(o) => o.iter().find_map(|(k, x)| {
            let p = if path.is_empty() {
                k.clone()
            } else {
                format!("{path}.{k}")
            };
            first_null_number(x, p)
        }),
        _ => None,
    }
}

/// Writes `sites.json` to `path` (atomically).
pub fn write_sites_json(report: &SitesReport, path: &Path) -> Result<()> {
    write_file_atomic(path, sites_json(report)?.as_bytes())
}

/// `sites.csv` (columns: [`SITES_CSV_COLUMNS`]), rows in the report's DoF
/// order, then its site order within each DoF.
pub fn sites_csv(report: &SitesReport) -> Result<String> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let err = |e: csv::Error| Error::Analysis(format!("sites.csv: {e}"));
    w.write_record(SITES_CSV_COLUMNS).map_err(err)?;
    for dof in &report.dofs {
        for s in &dof.sites {
            let info = report.site_info.iter().find(|i| i.site == s.site);
            let planned = report
                .plan
                .sites
                .iter()
                .any(|p| p.site == s.site && p.dofs.iter().any(|d| d == &dof.dof));
            let alternates: Vec<&str> = s.alternates.iter().map(|a| a.site.as_str()).collect();
            let row = [
                dof.dof.clone(),
                s.site.clone(),
                info.map(|i| i.angle_deg.to_string()).unwrap_or_default(),
                info.map(|i| i.distance_cm.to_string()).unwrap_or_default(),
                info.map(|i| i.quality.clone()).unwrap_or_default(),
                s.selected.to_string(),
                planned.to_string(),
                s.frequency.to_string(),
                s.confidence.clone(),
                alternates.join(";"),
            ];
            w.write_record(&row).map_err(err)?;
        }
    }
    let bytes = w
        .into_inner()
        .map_err(|e| Error::Analysis(format!("sites.csv: {e}")))?;
    String::from_utf8(bytes).map_err(|e| Error::Analysis(format!("sites.csv: {e}")))
}

/// Writes `sites.csv` to `path` (atomically).
pub fn write_sites_csv(report: &SitesReport, path: &Path) -> Result<()> {
    write_file_atomic(path, sites_csv(report)?.as_bytes())
}
