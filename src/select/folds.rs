//! Contiguous block folds with a gap, and their Grams by subtraction.
//!
//! The usable rows are cut into `F` contiguous blocks of (nearly) equal size
//! in time order. Fold `f` holds out block `f` and also drops from training
//! every row whose lag window overlaps a held-out row's window: with
//! `J = ⌈δ f⌉` samples of lag, training rows with sample index in
//! `[first_held − gap, first_held)` or `(last_held, last_held + gap]` are
//! excluded (default `gap = J`, i.e. a gap of δ on both sides; h-block
//! cross-validation, Burman, Chow & Nolan 1994, *Biometrika* 81:351–358).
//!
//! The rows are split at every block and gap boundary into segments; each
//! segment's Gram is formed once (in parallel over segments, each sequential,
//! so results do not depend on the thread count), the total is their sum in a
//! fixed order, and a fold's training Gram is the total minus its held-out
//! and gap segments. Forming all of them costs one pass over the data.

use std::ops::Range;

use faer::{MatRef, Par};
use rayon::prelude::*;

use super::gram::Gram;
use crate::{Error, Result};

/// One block fold, as ranges of positions in the list of usable rows.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct BlockFold {
    /// Held-out positions.
    pub held: Range<usize>,
    /// Excluded positions just before the held-out block (the gap).
    pub gap_before: Range<usize>,
    /// Excluded positions just after the held-out block (the gap).
    pub gap_after: Range<usize>,
}

impl BlockFold {
    /// All excluded positions (gap, held-out block, gap): one range.
    pub fn excluded(&self) -> Range<usize> {
        self.gap_before.start..self.gap_after.end
    }

    /// Training positions (those outside [`Self::excluded`]), as two ranges.
    pub fn train(&self, n: usize) -> [Range<usize>; 2] {
        [0..self.gap_before.start, self.gap_after.end..n]
    }
}

/// `n_folds` contiguous blocks over `rows` (sorted sample indices) with a gap
/// of `gap_samples` samples on each side of every held-out block.
pub fn block_folds(rows: &[usize], n_folds: usize, gap_samples: usize) -> Result<Vec<BlockFold>> {
    let n = rows.len();
    if n_folds < 2 {
        return Err(Error::Argument(format!(
            "need at least 2 folds, got {n_folds}"
        )));
    }
    if n < 2 * n_folds {
        return Err(Error::Analysis(format!(
            "{n} rows are too few for {n_folds} folds"
        )));
    }
    if rows.windows(2).any(|w| w[0] >= w[1]) {
        return Err(Error::Argument("rows must be strictly increasing".into()));
    }
    let mut folds = Vec::with_capacity(n_folds);
    for f in 0..n_folds {
        let (a, b) = (f * n / n_folds, (f + 1) * n / n_folds);
        let first = rows[a];
        let last = rows[b - 1];
        let lo = rows[..a].partition_point(|&r| r + gap_samples < first);
        let hi = b + rows[b..].partition_point(|&r| r <= last + gap_samples);
        folds.push(BlockFold {
            held: a..b,
            gap_before: lo..a,
            gap_after: b..hi,
        });
    }
    Ok(folds)
}

/// Grams of all rows, and per fold of its training and held-out rows.
#[derive(Debug, Clone)]
pub struct FoldGrams {
    /// The Gram of all rows.
    pub total: Gram,
    /// The folds.
    pub folds: Vec<BlockFold>,
    /// Per fold: the Gram of the training rows (total − held-out − gap).
    pub train: Vec<Gram>,
    /// Per fold: the Gram of the held-out rows.
    pub held: Vec<Gram>,
}

impl FoldGrams {
    /// Forms the Grams from an augmented matrix `[Z | y]` (rows in time order,
    /// matching the positions of `folds`).
    pub fn new(augmented: MatRef<'_, f64>, folds: &[BlockFold]) -> Result<Self> {
        let n = augmented.nrows();
        let mut cuts = vec![0, n];
        for f in folds {
            if f.excluded().end > n {
                return Err(Error::Argument("fold reaches past the last row".into()));
            }
            cuts.extend([
                f.gap_before.start,
                f.held.start,
                f.held.end,
                f.gap_after.end,
            ]);
        }
        cuts.sort_unstable();
        cuts.dedup();
        let segs: Vec<Range<usize>> = cuts.windows(2).map(|w| w[0]..w[1]).collect();
        let grams: Vec<Gram> = segs
            .par_iter()
            .map(|r| Gram::from_augmented(augmented.subrows(r.start, r.len()), Par::Seq))
            .collect();
        let dim = augmented.ncols() - 1;
        // the segment Grams inside a range of positions
        let within = |range: Range<usize>| {
            segs.iter()
                .zip(&grams)
                .filter(move |(s, _)| s.start >= range.start && s.end <= range.end)
                .map(|(_, g)| g)
        };
        let sum_over = |range: Range<usize>| {
            let mut acc = Gram::zeros(dim);
            within(range).for_each(|g| acc.accumulate(g, 1.0));
            acc
        };
        let total = sum_over(0..n);
        let held: Vec<Gram> = folds.iter().map(|f| sum_over(f.held.clone())).collect();
        // training = total − the excluded segments, subtracted one by one
        // (no temporary sum of them)
        let train: Vec<Gram> = folds
            .iter()
            .map(|f| {
                let mut t = total.clone();
                within(f.excluded()).for_each(|g| t.accumulate(g, -1.0));
                t
            })
            .collect();
        Ok(FoldGrams {
            total,
            folds: folds.to_vec(),
            train,
            held,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn folds_cover_rows_and_respect_gap() {
        // rows with a hole (an excluded block) between 40 and 60
        let rows: Vec<usize> = (10..40).chain(60..130).collect();
        let folds = block_folds(&rows, 5, 5).unwrap();
        assert_eq!(folds.len(), 5);
        let mut covered = 0;
        for f in &folds {
            covered += f.held.len();
            let (first, last) = (rows[f.held.start], rows[f.held.end - 1]);
            for (pos, &r) in rows.iter().enumerate() {
                let excluded = f.excluded().contains(&pos);
                let near = r + 5 >= first && r <= last + 5;
                assert_eq!(excluded, near, "fold {f:?} pos {pos}");
            }
        }
        assert_eq!(covered, rows.len());
    }
}
