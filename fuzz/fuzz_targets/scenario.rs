//! The simulator's scenario parser (`simulate::Scenario::from_toml`).
#![no_main]

use libfuzzer_sys::fuzz_target;
use mirrorsite::simulate::Scenario;
use mirrorsite_fuzz::check_error;
use std::path::Path;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let file = Path::new("scenario.toml");
    match Scenario::from_toml(file, text) {
        Ok(sc) => {
            let _ = sc.site_ids();
            assert!(sc.total_duration().is_finite());
        }
        Err(e) => check_error(&e, file, Some(data)),
    }
});
