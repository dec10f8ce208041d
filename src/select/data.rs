//! The aligned data of one DoF, as the selection needs them.

use crate::{Error, Result};

/// Aligned pairs of one DoF on the feature-rate grid.
#[derive(Debug, Clone)]
pub struct DofData {
    /// DoF id.
    pub dof: String,
    /// What a positive angle means.
    pub positive: String,
    /// Feature rate, Hz.
    pub feature_rate: f64,
    /// Site ids, one per envelope.
    pub sites: Vec<String>,
    /// Conditioned envelopes, `envelopes[k][i]` for site `k` at frame `i`.
    pub envelopes: Vec<Vec<f64>>,
    /// Aligned position scaled to [0, 1] over the DoF's range, per frame.
    pub z: Vec<f64>,
    /// Velocity dz/dt per frame, 1/s.
    pub y: Vec<f64>,
    /// Whether a frame may be used (inside a trusted block, data present).
    pub usable: Vec<bool>,
    /// Sites left out of selection (bad signal quality).
    pub excluded: Vec<bool>,
}

impl DofData {
    /// Number of frames.
    pub fn len(&self) -> usize {
        self.z.len()
    }

    /// True when there are no frames.
    pub fn is_empty(&self) -> bool {
        self.z.is_empty()
    }

    /// Checks that every series has the same length.
    pub fn check(&self) -> Result<()> {
        let n = self.len();
        let ok = self.y.len() == n
            && self.usable.len() == n
            && self.envelopes.len() == self.sites.len()
            && self.excluded.len() == self.sites.len()
            && self.envelopes.iter().all(|e| e.len() == n);
        if !ok {
            return Err(Error::Argument(format!(
                "aligned data of `{}` have series of different lengths",
                self.dof
            )));
        }
        Ok(())
    }

    /// Frames whose whole lag window of `j` samples back is usable and finite.
    pub fn rows(&self, j: usize) -> Vec<usize> {
        let n = self.len();
        let good: Vec<bool> = (0..n)
            .map(|i| {
                self.usable[i]
                    && self.z[i].is_finite()
                    && self.y[i].is_finite()
                    && self.envelopes.iter().all(|e| e[i].is_finite())
            })
            .collect();
        let mut run = 0usize;
        let mut rows = Vec::new();
        for (i, g) in good.iter().enumerate() {
            run = if *g { run + 1 } else { 0 };
            if run > j {
                rows.push(i);
            }
        }
        rows
    }
}
