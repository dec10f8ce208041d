//! The events reader (`session::read_events`) against the seed manifest.
#![no_main]

use libfuzzer_sys::fuzz_target;
use mirrorsite::session::read_events;
use mirrorsite::session::{Manifest, Recording};
use mirrorsite_fuzz::{check_error, scratch, seed_emg, seed_manifest};
use std::sync::OnceLock;

static SEED: OnceLock<(Manifest, Recording)> = OnceLock::new();

fuzz_target!(|data: &[u8]| {
    let (m, emg) = SEED.get_or_init(|| {
        let m = seed_manifest();
        let emg = seed_emg(&m);
        (m, emg)
    });
    let path = scratch("events.csv");
    std::fs::write(&path, data).expect("scratch file");
    match read_events(&path, m, emg) {
        Ok(blocks) => {
            for b in blocks {
                assert!(b.end_s > b.start_s);
                assert!(b.start_s.is_finite() && b.end_s.is_finite());
            }
        }
        Err(e) => check_error(&e, &path, Some(data)),
    }
});
