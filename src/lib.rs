//! # mirrorsite
//!
//! Electrode-site selection for myoelectric hands from mirrored bilateral
//! calibration sessions.
//!
//! A person with one-sided below-elbow limb loss wears many surface-EMG
//! electrodes around the residual forearm while performing *mirrored*
//! movements: the intact hand moves and the wearer attempts the same movement
//! with the missing hand; a glove records the intact-side angles. This crate
//! reads such a session, conditions the EMG, time-warps the intact kinematics
//! onto the EMG clock, fits position-dependent lagged effects of every site
//! with a sparse, smooth group-lasso model, and plans the few sites a socket
//! can carry.
//!
//! Data flow one way through the stages, one module each:
//!
//! ```text
//! session ─▶ signal ─▶ align ─▶ select (per DoF) ─▶ plan ─▶ report
//!    protocol ──────────┴─────────┘
//! ```
//!
//! [`simulate`] makes synthetic sessions with known truth for the demo and
//! for tests. The `mirrorsite` binary is a thin command-line shell over these
//! modules.

#![warn(missing_docs)]
// `!(x > 0.0)` is used on purpose throughout: unlike `x <= 0.0` it also
// rejects NaN, which user data and degenerate fits can produce.
#![allow(clippy::neg_cmp_op_on_partial_ord)]

pub mod align;
pub mod batch;
pub mod config;
pub mod error;
pub mod output;
pub mod pipeline;
pub mod plan;
pub mod protocol;
pub mod report;
pub mod select;
pub mod session;
pub mod signal;
pub mod simulate;

pub use error::{Error, InputError, InputErrorKind, Result};
