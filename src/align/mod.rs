//! Alignment: time-warping intact-side kinematics onto the residual-limb EMG clock.

pub mod dtw;
