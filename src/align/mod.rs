//! Alignment: time-warping intact-side kinematics onto the residual-limb EMG clock.

mod config;
pub mod dtw;
pub mod quality;
pub mod warpmap;

pub use config::{AlignConfig, QualityThresholds};
