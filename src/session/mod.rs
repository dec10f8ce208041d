//! Reading and validating a session folder (DESIGN.md section 3).

mod types;

pub use types::*;
