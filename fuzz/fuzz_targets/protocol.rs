//! The protocol parser (`protocol::parse`) and checker (`protocol::check_source`).
#![no_main]

use libfuzzer_sys::fuzz_target;
use mirrorsite::protocol;
use mirrorsite_fuzz::check_error;
use std::path::Path;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let file = Path::new("protocol.toml");
    let problems = protocol::check_source(text, file);
    for e in &problems {
        check_error(e, file, Some(data));
    }
    match protocol::parse(text, file) {
        Ok(p) => {
            assert!(problems.is_empty(), "parse accepts what check rejects");
            // Expanding a valid protocol must not panic either.
            let cues = p.timeline(0.0);
            assert!(cues.iter().all(|c| c.end_s >= c.start_s));
            let _ = p.blocks(0.0);
        }
        Err(e) => {
            assert!(!problems.is_empty(), "check accepts what parse rejects");
            let e = e.as_input().expect("an input error");
            check_error(e, file, Some(data));
        }
    }
});
