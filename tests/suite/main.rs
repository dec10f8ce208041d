//! The integration-test suite, built as one test binary.
//!
//! Each module below was a test file of its own; keeping them in one binary
//! links the library and its dependencies once instead of thirty-one times,
//! which keeps the build's disk footprint and link time small. Run one area
//! with a filter, e.g. `cargo test --release --test suite align_`.

mod align_support;
mod common;
mod engine_common;
mod protocol_common;
#[path = "../fixtures/report/fixture.rs"]
mod report_fixture;

mod align_accuracy;
mod align_dtw;
mod align_output;
mod batch_faults;
mod batch_run;
mod cli_inspect;
mod cli_run;
mod engine_basis;
mod engine_functional;
mod engine_group;
mod engine_lasso;
mod protocol_check;
mod protocol_cli;
mod protocol_play;
mod protocol_session;
mod protocol_timeline;
mod report_files;
mod report_sheet;
mod robust_bad_input;
mod robust_degenerate;
mod robust_determinism;
mod robust_output;
mod robust_random_input;
mod robust_regressions;
mod select_accuracy;
mod session_errors;
mod signal_inspect;
mod signal_quality;
mod signal_scipy;
mod signal_simulated;
mod simulate;
