//! Reading and validating a session folder (DESIGN.md section 3).
//!
//! [`read`] returns a validated [`Session`] or one [`InputError`](crate::InputError)
//! naming the file, the 1-based line and the field at fault. The session
//! folder is only ever read.

mod manifest;
mod read;
mod summary;
mod table;
mod types;

pub use manifest::{line_of, parse_manifest};
pub use read::{
    read, read_events, read_manifest, EVENTS, MANIFEST, MAX_EMG_MV, MIN_COVERAGE, RATE_TOLERANCE,
};
pub use summary::{DofSummary, SiteSummary, Summary};
pub use table::{open_text, read_small_text, read_table, Table};
pub use types::*;
