//! The manifest parser (`session::parse_manifest`).
#![no_main]

use libfuzzer_sys::fuzz_target;
use mirrorsite::session::parse_manifest;
use mirrorsite_fuzz::check_error;
use std::path::Path;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return; // the file reader rejects non-UTF-8 before parsing
    };
    let file = Path::new("session.toml");
    match parse_manifest(file, text) {
        Ok(m) => {
            assert!(m.emg_rate_hz.is_finite() && m.emg_rate_hz > 0.0);
            assert!(m.intact_rate_hz.is_finite() && m.intact_rate_hz > 0.0);
            let mut ids: Vec<&str> = m.sites.iter().map(|s| s.id.as_str()).collect();
            ids.sort_unstable();
            let n = ids.len();
            ids.dedup();
            assert_eq!(ids.len(), n, "site ids are unique");
        }
        Err(e) => check_error(&e, file, Some(data)),
    }
});
