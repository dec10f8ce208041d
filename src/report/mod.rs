//! Outputs of a run: `sites.json`, `sites.csv`, the site-placement sheet
//! (HTML and PDF) and figures (DESIGN.md section 6).

mod model;

pub use model::*;
