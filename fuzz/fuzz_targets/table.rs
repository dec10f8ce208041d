//! The numeric CSV reader (`session::read_table`), plain and gzip.
#![no_main]

use libfuzzer_sys::fuzz_target;
use mirrorsite::session::read_table;
use mirrorsite_fuzz::{check_error, scratch};

fuzz_target!(|data: &[u8]| {
    // Inputs that start like gzip are read as `.csv.gz`, the rest as `.csv`.
    let path = if data.starts_with(&[0x1f, 0x8b]) {
        scratch("table.csv.gz")
    } else {
        scratch("table.csv")
    };
    std::fs::write(&path, data).expect("scratch file");
    match read_table(&path) {
        Ok(t) => {
            assert_eq!(t.header[0], "time_s");
            assert_eq!(t.columns.len(), t.header.len());
            assert!(t.rows() >= 2);
            for c in &t.columns {
                assert_eq!(c.len(), t.rows());
                assert!(c.iter().all(|v| v.is_finite()));
            }
        }
        // A compressed input's lines are those of the decompressed text, so
        // the line bound is checked on plain inputs only.
        Err(e) if path.extension().is_some_and(|x| x == "gz") => check_error(&e, &path, None),
        Err(e) => check_error(&e, &path, Some(data)),
    }
});
