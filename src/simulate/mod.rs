//! Synthetic mirrored sessions with known truth.
