//! Banded dynamic time warping with step patterns and slope limits.
//!
//! For a query x_0..x_{n-1} (here: EMG-side features) and a reference
//! y_0..y_{m-1} (intact-side features) with local cost d(i, j), DTW finds the
//! monotone, continuous path from (0, 0) to (n-1, m-1) that minimises the
//! weighted sum of local costs along it (Sakoe & Chiba 1978, "Dynamic
//! programming algorithm optimization for spoken word recognition", IEEE
//! Trans. ASSP 26(1):43–49). The accumulated cost obeys
//!
//! ```text
//! g(0, 0) = d(0, 0)
//! g(i, j) = min over steps s of  g(i - a_s, j - b_s) + Σ_{(p, q, w) ∈ s} w · d(i - p, j - q)
//! ```
//!
//! where each step s goes from its origin (i - a_s, j - b_s) to (i, j) through
//! the listed cells. Only cells inside the Sakoe–Chiba band |i − j| ≤ r are
//! used. The start `g(0,0) = d(0,0)` (weight 1 even in the symmetric forms)
//! follows Giorgino's R `dtw` package and its port dtw-python, which are the
//! references in the tests.
//!
//! Step patterns:
//! - [`StepPattern::Symmetric1`]: g = d + min(g(i-1,j-1), g(i,j-1), g(i-1,j)).
//! - [`StepPattern::Symmetric2`]: diagonal weight 2, side steps weight 1
//!   (normalisable by n + m).
//! - [`StepPattern::SlopeLimited`]: Sakoe–Chiba symmetric pattern with slope
//!   constraint P = `diag`/`side`: after `side` consecutive side steps the path
//!   must take at least `diag` diagonal steps, so the local slope of the path
//!   stays within [1/s, s] with s = (diag + side)/diag. P = 1/2, 1 and 2 are
//!   dtw-python's `symmetricP05`, `symmetricP1` and `symmetricP2`.
//!
//! A constant `side_penalty` may be added to every non-diagonal step (as
//! dtaidistance's `penalty`), so that the path leaves the diagonal only where
//! the features pay for it.
//!
//! Why not only the `dtw` crate: version 0.1 offers the symmetric1 recursion
//! with a row-segment constraint and returns the path alone. It has no
//! distance, no step patterns or slope limits (which the alignment needs so
//! that no stretch is implausibly fast or slow), no multivariate cost, and
//! its matrix indexing panics on unequal lengths; under a band its fill skips
//! the first in-band cell of each row, so banded paths can be suboptimal.
//! [`crate_symmetric1_path`] wraps it for the one case it gets right
//! (univariate, equal lengths, no band) and the tests check that this core
//! returns the same path there; the alignment uses this core.

use crate::{Error, Result};

/// A DTW step pattern (see the module docs for the recursions).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StepPattern {
    /// g = d + min of the three neighbours; no natural normalisation.
    Symmetric1,
    /// Diagonal step weighted 2, side steps 1; normalisable by n + m.
    Symmetric2,
    /// Sakoe–Chiba symmetric pattern with slope constraint P = diag/side.
    SlopeLimited {
        /// Diagonal steps required after a run of side steps (≥ 1).
        diag: u32,
        /// Longest run of side steps (≥ 1).
        side: u32,
    },
}

impl StepPattern {
    /// The slope-limited pattern whose steepest step is closest to `max_slope`
    /// (> 1): s ≥ 2 gives P = 1/round(s − 1), s < 2 gives P = round(1/(s − 1)).
    pub fn from_max_slope(max_slope: f64) -> Result<Self> {
        if !(max_slope.is_finite() && max_slope > 1.0) {
            return Err(Error::Argument(format!(
                "the slope limit must be a finite number above 1, got {max_slope}"
            )));
        }
        let (diag, side) = if max_slope >= 2.0 {
            (1, ((max_slope - 1.0).round() as u32).clamp(1, 8))
        } else {
            (((1.0 / (max_slope - 1.0)).round() as u32).clamp(1, 8), 1)
        };
        Ok(StepPattern::SlopeLimited { diag, side })
    }

    /// Largest local slope a path can take (∞ without a limit).
    pub fn max_slope(&self) -> f64 {
        match *self {
            StepPattern::SlopeLimited { diag, side } => (diag + side) as f64 / diag as f64,
            _ => f64::INFINITY,
        }
    }

    /// True when every path's weights sum to n + m, so that distance/(n + m) is comparable across lengths.
    pub fn normalisable(&self) -> bool {
        !matches!(self, StepPattern::Symmetric1)
    }

    /// The steps, each as (origin offset, cells from the origin side to the target).
    fn steps(&self) -> Vec<Step> {
        match *self {
            StepPattern::Symmetric1 => vec![
                Step::new((1, 1), vec![(0, 0, 1.0)]),
                Step::new((0, 1), vec![(0, 0, 1.0)]),
                Step::new((1, 0), vec![(0, 0, 1.0)]),
            ],
            StepPattern::Symmetric2 => vec![
                Step::new((1, 1), vec![(0, 0, 2.0)]),
                Step::new((0, 1), vec![(0, 0, 1.0)]),
                Step::new((1, 0), vec![(0, 0, 1.0)]),
            ],
            StepPattern::SlopeLimited { diag, side } => {
                let (n, m) = (diag.max(1) as usize, side.max(1) as usize);
                let mut steps = Vec::new();
                // Along j (reference moves faster), longest run first as in dtw-python.
                for h in (1..=m).rev() {
                    steps.push(slope_step(n, h, false));
                }
                steps.push(Step::new((1, 1), vec![(0, 0, 2.0)]));
                for h in 1..=m {
                    steps.push(slope_step(n, h, true));
                }
                steps
            }
        }
    }
}

/// n diagonal moves then h side moves, ending at the target; `along_i` mirrors it.
fn slope_step(n: usize, h: usize, along_i: bool) -> Step {
    // Offsets (di, dj) measured back from the target, origin at (n + h, n) or (n, n + h).
    let (oa, ob) = if along_i { (n + h, n) } else { (n, n + h) };
    let mut cells = Vec::new();
    let (mut a, mut b) = (oa, ob);
    for _ in 0..n {
        a -= 1;
        b -= 1;
        cells.push((a, b, 2.0));
    }
    for _ in 0..h {
        if along_i {
            a -= 1;
        } else {
            b -= 1;
        }
        cells.push((a, b, 1.0));
    }
    Step::new((oa, ob), cells)
}

#[derive(Debug, Clone)]
struct Step {
    origin: (usize, usize),
    /// (di, dj, weight) back from the target, ordered from the origin side; last is (0, 0).
    cells: Vec<(usize, usize, f64)>,
    /// True when this step has a side run of the longest allowed length.
    steepest: bool,
}

impl Step {
    fn new(origin: (usize, usize), cells: Vec<(usize, usize, f64)>) -> Self {
        Step {
            origin,
            cells,
            steepest: false,
        }
    }
}

/// A step in the flat layout: origin offset, side penalty, (cell offset, weight).
type StepOffsets = (isize, f64, Vec<(isize, f64)>);

/// The result of a DTW.
#[derive(Debug, Clone, PartialEq)]
pub struct Warp {
    /// Accumulated cost g(n−1, m−1) (not normalised, not square-rooted).
    pub distance: f64,
    /// The warp path from (0, 0) to (n−1, m−1), including the cells inside
    /// multi-cell steps; empty when the path was not requested.
    pub path: Vec<(usize, usize)>,
    /// For each path point after the first: true when it belongs to a step
    /// at the pattern's slope limit (always false without a limit).
    pub at_limit: Vec<bool>,
}

/// Local cost between two samples.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Cost {
    /// (x − y)², summed over features for multivariate series.
    Squared,
    /// |x − y|, summed over features.
    Absolute,
}

impl Cost {
    #[inline(always)]
    fn eval(self, a: f64, b: f64) -> f64 {
        match self {
            Cost::Squared => (a - b) * (a - b),
            Cost::Absolute => (a - b).abs(),
        }
    }
}

/// Options of one DTW run.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DtwOptions {
    /// Sakoe–Chiba band radius r in samples (|i − j| ≤ r); `None` for no band.
    pub band: Option<usize>,
    /// The step pattern.
    pub pattern: StepPattern,
    /// Whether to trace the path back (otherwise only the distance).
    pub path: bool,
    /// Cost added to every step that is not a pure diagonal move (a
    /// compression or expansion), discouraging warps that only chase noise.
    /// 0 for plain DTW. With the squared cost, dtaidistance's `penalty = p`
    /// is `side_penalty = p²`.
    pub side_penalty: f64,
    /// Open begin and end: the path may start at any cell of the first row
    /// or column and end at any cell of the last row or column inside the
    /// band (each start costs its local cost, like (0, 0)); the end is the
    /// one of least accumulated cost. Used with context margins so that the
    /// ends of a window do not force a zero lag.
    pub open_ends: bool,
}

impl Default for DtwOptions {
    fn default() -> Self {
        DtwOptions {
            band: None,
            pattern: StepPattern::Symmetric1,
            path: true,
            side_penalty: 0.0,
            open_ends: false,
        }
    }
}

/// DTW of two univariate series with the given local cost.
pub fn dtw_series(x: &[f64], y: &[f64], cost: Cost, opts: &DtwOptions) -> Result<Warp> {
    banded(x.len(), y.len(), opts, |i, j| cost.eval(x[i], y[j]))
}

/// DTW of two multivariate series given row by row: `x[i*c..(i+1)*c]` is
/// sample i with `c` features; the local cost sums over features.
pub fn dtw_rows(x: &[f64], y: &[f64], c: usize, cost: Cost, opts: &DtwOptions) -> Result<Warp> {
    if c == 0 || x.len() % c != 0 || y.len() % c != 0 {
        return Err(Error::Argument(format!(
            "series of {} and {} values do not split into rows of {c} features",
            x.len(),
            y.len()
        )));
    }
    banded(x.len() / c, y.len() / c, opts, |i, j| {
        let (a, b) = (&x[i * c..(i + 1) * c], &y[j * c..(j + 1) * c]);
        a.iter().zip(b).map(|(&p, &q)| cost.eval(p, q)).sum()
    })
}

/// Banded DTW over an n × m grid with local cost `d(i, j)`.
///
/// Errors when a series is empty, the end cell lies outside the band, or the
/// step pattern cannot reach it (e.g. lengths too different for the slope limit).
pub fn banded<F: Fn(usize, usize) -> f64>(
    n: usize,
    m: usize,
    opts: &DtwOptions,
    d: F,
) -> Result<Warp> {
    if n == 0 || m == 0 {
        return Err(Error::Argument("DTW needs two non-empty series".into()));
    }
    let r = opts.band.unwrap_or(n.max(m)).min(n.max(m));
    if n.abs_diff(m) > r {
        return Err(Error::Argument(format!(
            "series of lengths {n} and {m} differ by more than the band of {r} samples"
        )));
    }
    let mut grid = match opts.pattern {
        StepPattern::Symmetric1 => Grid::symmetric1(n, m, r, opts.side_penalty, opts.open_ends, &d),
        p => Grid::general(n, m, r, &p.steps(), opts.side_penalty, opts.open_ends, &d),
    };
    let mut end = (n - 1, m - 1);
    if opts.open_ends {
        let mut best = grid.g(n - 1, m - 1);
        let cells = (0..m).map(|j| (n - 1, j)).chain((0..n).map(|i| (i, m - 1)));
        for (i, j) in cells {
            let v = grid.g(i, j);
            if v < best {
                best = v;
                end = (i, j);
            }
        }
    }
    let distance = grid.g(end.0, end.1);
    if !distance.is_finite() {
        return Err(Error::Analysis(format!(
            "no warp path of lengths {n} and {m} satisfies the band of {r} samples and the slope limit"
        )));
    }
    let (path, at_limit) = if opts.path {
        grid.trace(end)
    } else {
        (Vec::new(), Vec::new())
    };
    grid.release();
    Ok(Warp {
        distance,
        path,
        at_limit,
    })
}

/// Accumulated costs over the band, padded with ∞ so no lookup needs a bound check.
struct Grid {
    n: usize,
    m: usize,
    r: usize,
    /// Row stride: band width 2r+1 plus `pad` on each side.
    stride: usize,
    pad: usize,
    top: usize,
    g: Vec<f64>,
    /// Chosen step per cell (general patterns only).
    choice: Vec<u8>,
    steps: Vec<Step>,
    /// Side-step penalty (symmetric1 trace needs it).
    penalty: f64,
    /// Open begin: the trace stops on the first row or column.
    open: bool,
}

impl Grid {
    #[inline(always)]
    fn at(&self, i: usize, k: usize) -> usize {
        (i + self.top) * self.stride + self.pad + k
    }

    /// g(i, j) for an in-band cell (∞ outside).
    fn g(&self, i: usize, j: usize) -> f64 {
        if i >= self.n || j >= self.m || i.abs_diff(j) > self.r {
            return f64::INFINITY;
        }
        self.g[self.at(i, j + self.r - i)]
    }

    fn alloc(n: usize, m: usize, r: usize, pad: usize, top: usize) -> Self {
        let stride = 2 * r + 1 + 2 * pad;
        Grid {
            n,
            m,
            r,
            stride,
            pad,
            top,
            g: vec![f64::INFINITY; (n + top) * stride],
            choice: Vec::new(),
            steps: Vec::new(),
            penalty: 0.0,
            open: false,
        }
    }

    /// In-band k range of row i (k = j − i + r), clipped to 0 ≤ j < m.
    #[inline(always)]
    fn k_range(&self, i: usize) -> (usize, usize) {
        let lo = self.r.saturating_sub(i);
        let hi = (2 * self.r).min(self.m - 1 + self.r - i);
        (lo, hi)
    }

    fn symmetric1<F: Fn(usize, usize) -> f64>(
        n: usize,
        m: usize,
        r: usize,
        pen: f64,
        open: bool,
        d: &F,
    ) -> Self {
        let mut grid = Grid::alloc(n, m, r, 1, 1);
        grid.penalty = pen;
        grid.open = open;
        let s = grid.stride;
        for i in 0..n {
            let (lo, hi) = grid.k_range(i);
            let base = grid.at(i, 0);
            let g = &mut grid.g;
            for k in lo..=hi {
                let j = i + k - r;
                let c = base + k;
                let best = if (i == 0 && j == 0) || (open && (i == 0 || j == 0)) {
                    0.0
                } else {
                    // (i-1, j-1) sits at the same k one row up, (i-1, j) at k+1, (i, j-1) at k-1.
                    let diag = g[c - s];
                    let up = g[c - s + 1] + pen;
                    let left = g[c - 1] + pen;
                    diag.min(left).min(up)
                };
                g[c] = best + d(i, j);
            }
        }
        grid
    }

    fn general<F: Fn(usize, usize) -> f64>(
        n: usize,
        m: usize,
        r: usize,
        steps: &[Step],
        pen: f64,
        open: bool,
        d: &F,
    ) -> Self {
        let mut steps = steps.to_vec();
        let longest = steps
            .iter()
            .map(|s| s.origin.0.abs_diff(s.origin.1))
            .max()
            .unwrap_or(0);
        for s in &mut steps {
            s.steepest = longest > 0 && s.origin.0.abs_diff(s.origin.1) == longest;
        }
        let top = steps.iter().map(|s| s.origin.0).max().unwrap_or(1);
        let pad = longest.max(1);
        let mut grid = Grid::alloc(n, m, r, pad, top);
        grid.open = open;
        // Local costs in the same layout (∞ outside the grid).
        let mut local = vec![f64::INFINITY; grid.g.len()];
        for i in 0..n {
            let (lo, hi) = grid.k_range(i);
            let base = grid.at(i, 0);
            for k in lo..=hi {
                local[base + k] = d(i, i + k - r);
            }
        }
        // Offsets of each step's cells in the flat layout, relative to the target.
        let s = grid.stride as isize;
        let offs: Vec<StepOffsets> = steps
            .iter()
            .map(|st| {
                let o = |a: usize, b: usize| -(a as isize) * s + (a as isize - b as isize);
                let extra = if st.origin.0 == st.origin.1 { 0.0 } else { pen };
                (
                    o(st.origin.0, st.origin.1),
                    extra,
                    st.cells.iter().map(|&(a, b, w)| (o(a, b), w)).collect(),
                )
            })
            .collect();
        grid.choice = vec![u8::MAX; grid.g.len()];
        for i in 0..n {
            let (lo, hi) = grid.k_range(i);
            let base = grid.at(i, 0);
            for k in lo..=hi {
                let c = base + k;
                if (i == 0 && i + k == r) || (open && (i == 0 || i + k == r)) {
                    grid.g[c] = local[c];
                    continue;
                }
                let mut best = f64::INFINITY;
                let mut which = u8::MAX;
                for (p, (origin, extra, cells)) in offs.iter().enumerate() {
                    let mut v = grid.g[(c as isize + origin) as usize];
                    if v == f64::INFINITY {
                        continue;
                    }
                    v += extra;
                    for &(o, w) in cells {
                        v += w * local[(c as isize + o) as usize];
                    }
                    if v < best {
                        best = v;
                        which = p as u8;
                    }
                }
                grid.g[c] = best;
                grid.choice[c] = which;
            }
        }
        grid.steps = steps;
        grid
    }

    /// Traces the optimal path back from (n−1, m−1).
    fn trace(&self, end: (usize, usize)) -> (Vec<(usize, usize)>, Vec<bool>) {
        let (mut i, mut j) = end;
        let mut path = vec![(i, j)];
        let mut limit = Vec::new();
        while (i, j) != (0, 0) && !(self.open && (i == 0 || j == 0)) {
            if self.steps.is_empty() {
                // Symmetric1: recompute the argmin; ties go diagonal, then (i, j−1), then (i−1, j).
                let cands = [(1, 1), (0, 1), (1, 0)];
                let mut best = (f64::INFINITY, (1, 1));
                for (a, b) in cands {
                    if a <= i && b <= j {
                        let extra = if a == b { 0.0 } else { self.penalty };
                        let v = self.g(i - a, j - b) + extra;
                        if v < best.0 {
                            best = (v, (a, b));
                        }
                    }
                }
                if !best.0.is_finite() {
                    break;
                }
                i -= best.1 .0;
                j -= best.1 .1;
                path.push((i, j));
                limit.push(false);
            } else {
                let c = self.at(i, j + self.r - i);
                let st = &self.steps[self.choice[c] as usize];
                for &(a, b, _) in st.cells.iter().rev().skip(1) {
                    path.push((i - a, j - b));
                    limit.push(st.steepest);
                }
                i -= st.origin.0;
                j -= st.origin.1;
                path.push((i, j));
                limit.push(st.steepest);
            }
        }
        path.reverse();
        limit.reverse();
        (path, limit)
    }

    fn release(&mut self) {
        self.g = Vec::new();
        self.choice = Vec::new();
    }
}

/// The unconstrained symmetric1 path of two univariate series computed by
/// the `dtw` crate (cost |x − y|), with its distance summed along the path.
///
/// The crate is right only in this case: under a row constraint its fill
/// skips the first in-band cell of every row (so banded paths can be
/// suboptimal), and its matrix indexing panics on unequal lengths. It serves
/// as an independent check of [`banded`] and in the benchmark.
pub fn crate_symmetric1_path(x: &[f64], y: &[f64]) -> Result<Warp> {
    if x.is_empty() || x.len() != y.len() {
        return Err(Error::Argument(
            "the dtw crate path needs two non-empty series of equal length".into(),
        ));
    }
    let path = dtw::dtw_with_cmp(x, y, &|a: f64, b: f64| (a - b).abs(), &f64::total_cmp);
    let distance = path.iter().map(|&(i, j)| (x[i] - y[j]).abs()).sum();
    let at_limit = vec![false; path.len().saturating_sub(1)];
    Ok(Warp {
        distance,
        path,
        at_limit,
    })
}
