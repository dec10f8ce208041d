//! `sites.json`, `sites.csv` and `figures/*.svg`: contract keys, round trip,
//! rows, determinism.

use crate::report_fixture as fixture;

use mirrorsite::report::{self, SitesReport, SITES_CSV_COLUMNS};
use serde_json::Value;

#[test]
fn sites_json_round_trips_and_carries_the_contract_keys() {
    let r = fixture::report();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("sites.json");
    report::write_sites_json(&r, &path).unwrap();
    let text = std::fs::read_to_string(&path).unwrap();
    let back: SitesReport = serde_json::from_str(&text).unwrap();
    // Exact: serde_json's float_roundtrip parsing reads back every f64 bit for bit.
    assert!(
        back == r,
        "sites.json does not read back to the same report"
    );

    // DESIGN.md section 6: the keys every reader may rely on.
    let v: Value = serde_json::from_str(&text).unwrap();
    assert_eq!(v["format"], 1);
    assert_eq!(v["subject"], "DEMO-07");
    let dofs = v["dofs"].as_array().unwrap();
    assert_eq!(dofs.len(), 2);
    for d in dofs {
        assert!(d["dof"].is_string());
        assert!(d["selected"].is_array());
        assert!(d["cv"]["r2"].is_number() && d["cv"]["rmse"].is_number());
        let sites = d["sites"].as_array().unwrap();
        assert_eq!(sites.len(), 16);
        for s in sites {
            assert!(s["site"].is_string());
            assert!(s["frequency"].is_number());
            assert!(s["confidence"].is_string());
            assert!(s["alternates"].is_array());
        }
    }
    assert_eq!(v["plan"]["budget"], 4);
    assert_eq!(v["plan"]["sites"].as_array().unwrap().len(), 4);
    for b in v["alignment"].as_array().unwrap() {
        for k in ["task", "dof", "lag_s", "quality"] {
            assert!(!b[k].is_null(), "alignment lacks {k}");
        }
    }
    for f in v["flags"].as_array().unwrap() {
        for k in ["what", "where", "why"] {
            assert!(f[k].is_string(), "flag lacks {k}");
        }
    }
}

#[test]
fn resamples_is_optional_in_sites_json() {
    // Older or external writers may leave it out; readers must accept that.
    let mut r = fixture::report();
    for d in &mut r.dofs {
        d.resamples = None;
    }
    let text = report::sites_json(&r).unwrap();
    assert!(!text.contains("\"resamples\""));
    let back: SitesReport = serde_json::from_str(&text).unwrap();
    assert!(back == r);
}

#[test]
fn non_finite_numbers_are_refused_with_their_place() {
    let mut r = fixture::report();
    r.dofs[1].cv.r2 = f64::NAN;
    let err = report::sites_json(&r).unwrap_err().to_string();
    assert!(err.contains("dofs[1].cv.r2"), "{err}");
}

#[test]
fn sites_csv_has_one_row_per_dof_and_site() {
    let r = fixture::report();
    let text = report::sites_csv(&r).unwrap();
    let mut rd = csv::Reader::from_reader(text.as_bytes());
    let header: Vec<String> = rd.headers().unwrap().iter().map(String::from).collect();
    assert_eq!(header, SITES_CSV_COLUMNS);
    let rows: Vec<csv::StringRecord> = rd.records().map(|r| r.unwrap()).collect();
    assert_eq!(rows.len(), 2 * 16);
    let row = |dof: &str, site: &str| {
        rows.iter()
            .find(|r| &r[0] == dof && &r[1] == site)
            .unwrap_or_else(|| panic!("no row {dof} {site}"))
            .clone()
    };
    let a1 = row("fingers", "A1");
    assert_eq!(&a1[2], "0");
    assert_eq!(&a1[3], "5");
    assert_eq!(&a1[5], "true");
    assert_eq!(&a1[6], "true");
    assert_eq!(&a1[7], "0.95");
    assert_eq!(&a1[8], "high");
    assert_eq!(&a1[9], "B1;B8");
    // Planned for fingers only: not planned in the wrist rows.
    assert_eq!(&row("wrist", "A6")[6], "false");
    // Selected for wrist but left out of the plan by the budget.
    let a5 = row("wrist", "A5");
    assert_eq!((&a5[5], &a5[6]), ("true", "false"));
    assert_eq!(&row("wrist", "B7")[4], "bad");
    assert_eq!(&row("fingers", "B4")[4], "suspect");
}

#[test]
fn outputs_are_byte_identical_for_the_same_report() {
    let r = fixture::report();
    assert!(report::sites_json(&r).unwrap() == report::sites_json(&r).unwrap());
    assert!(report::sites_csv(&r).unwrap() == report::sites_csv(&r).unwrap());
    assert!(report::sheet_html(&r).unwrap() == report::sheet_html(&r).unwrap());
    let a = report::figures(&r).unwrap();
    let b = report::figures(&r).unwrap();
    assert_eq!(a.len(), b.len());
    for (x, y) in a.iter().zip(&b) {
        assert_eq!(x.name, y.name);
        assert!(x.svg == y.svg, "{} differs between runs", x.name);
    }
}

#[test]
fn figures_cover_the_map_stages_and_every_effect() {
    let r = fixture::report();
    let dir = tempfile::tempdir().unwrap();
    let paths = report::write_figures(&r, &dir.path().join("figures")).unwrap();
    let names: Vec<String> = paths
        .iter()
        .map(|p| p.file_name().unwrap().to_string_lossy().into_owned())
        .collect();
    // Map + 2 stage histories + (2 + 3 effects) × (surface + slices).
    assert_eq!(names.len(), 1 + 2 + 2 * 5);
    for n in [
        "site-map.svg",
        "stages-fingers.svg",
        "stages-wrist.svg",
        "effect-wrist-A2.svg",
        "slices-wrist-A2.svg",
        "effect-fingers-A6.svg",
    ] {
        assert!(names.iter().any(|x| x == n), "missing {n}");
    }
    let map = std::fs::read_to_string(dir.path().join("figures/site-map.svg")).unwrap();
    assert!(map.starts_with("<svg"));
    for id in fixture::site_ids() {
        assert!(
            map.contains(&format!(">\n{id}\n<")) || map.contains(&format!(">{id}<")),
            "map lacks {id}"
        );
    }
    for aspect in ["DORSAL", "RADIAL", "VOLAR", "ULNAR"] {
        assert!(map.contains(aspect));
    }
    // Every figure parses as SVG (usvg is what the PDF path uses).
    for p in &paths {
        let s = std::fs::read_to_string(p).unwrap();
        svg2pdf::usvg::Tree::from_str(&s, &svg2pdf::usvg::Options::default())
            .unwrap_or_else(|e| panic!("{}: {e}", p.display()));
    }
}

#[test]
fn a_malformed_effect_grid_is_an_error_not_a_panic() {
    let mut r = fixture::report();
    r.dofs[0].effects[0].surface.pop();
    let err = report::figures(&r).unwrap_err().to_string();
    assert!(err.contains("site A1") && err.contains("fingers"), "{err}");
}
