//! Sparse, smooth functional regression of one DoF on many sites.
//!
//! The model (DESIGN.md section 5) for aligned position `z ∈ [0, 1]`,
//! velocity `y` and site envelopes `x_k`:
//!
//! ```text
//! y_i = a(z_i) + Σ_k ∫_{−δ}^{0} x_k(t_i + s) g_k(s, z_i) ds + e_i,
//! minimise (1/2n) ‖y − a − Σ_k X_k b_k‖² + λ Σ_k w_k √(b_kᵀ (M + φ_s P_s + φ_z P_z) b_k).
//! ```
//!
//! The pieces, in the order a caller uses them:
//!
//! 1. [`FunctionalDesign`]: B-spline bases ([`BSplineBasis`], de Boor 1978),
//!    FIR lag integrals of the envelopes, the baseline columns; built once per
//!    DoF. [`SurfaceBasis`] holds the tensor basis, `M`, `P_s`, `P_z`, the
//!    Cholesky factor of the penalty and evaluates fitted surfaces `g_k(s, z)`.
//! 2. [`Gram`]: `ZᵀZ`, `Zᵀy`, `yᵀy` formed once with faer; [`block_folds`] and
//!    [`FoldGrams`] give each training fold's Gram by subtraction;
//!    [`Gram::profile`] partials the baseline out by a Schur complement.
//! 3. [`GroupLasso`]: the weighted group-lasso path solver on a profiled Gram
//!    (block coordinate descent with exact group updates, strong rules, KKT
//!    checks, duality-gap stopping; see [`solver`] for the math).
//! 4. [`cross_validate`]: held-out errors of a path from the fold Grams.
//!
//! ```
//! use mirrorsite::select::*;
//! // two sites, 400 samples at 100 Hz
//! let n = 400;
//! let x1: Vec<f64> = (0..n).map(|i| 1.0 + (i as f64 * 0.05).sin()).collect();
//! let x2: Vec<f64> = (0..n).map(|i| 1.0 + (i as f64 * 0.031).cos()).collect();
//! let z: Vec<f64> = (0..n).map(|i| 0.5 + 0.5 * (i as f64 * 0.01).sin()).collect();
//! let y: Vec<f64> = (0..n).map(|i| x1[i] - 0.5 * z[i]).collect();
//! let mut spec = DesignSpec::new(100.0);
//! spec.n_lag = 5;
//! spec.n_pos = 5;
//! let rows: Vec<usize> = (spec.lag_samples()..n).collect();
//! let design = FunctionalDesign::new(&[&x1, &x2], &z, &y, &rows, spec)?;
//! let prof = design.gram().profile(design.n_baseline())?;
//! let l = design.surface().penalty_factor(1e-4, 1e-2)?;
//! let problem = GroupLasso::new(&prof, &[l.clone(), l])?;
//! let w = [1.0, 1.0];
//! let grid = lambda_grid(problem.lambda_max(&w)?, 1e-3, 20);
//! let path = problem.fit_path(&w, &grid, &SolverOptions::default(), None)?;
//! assert!(path.iter().all(|f| f.kkt <= 1e-6));
//! # Ok::<(), mirrorsite::Error>(())
//! ```

pub mod basis;
pub mod compare;
pub mod config;
pub mod context;
pub mod cv;
pub mod data;
pub mod design;
pub mod dof;
pub mod folds;
pub mod gram;
pub mod penalty;
pub mod solver;
pub mod stability;
pub mod stages;
pub mod symv;
pub mod tune;

pub use basis::BSplineBasis;
pub use config::SelectConfig;
pub use cv::{cross_validate, CvPath};
pub use data::DofData;
pub use design::{DesignSpec, FunctionalDesign};
pub use dof::{select_dof, DofSelection, Step};
pub use folds::{block_folds, BlockFold, FoldGrams};
pub use gram::{Gram, ProfiledGram};
pub use penalty::{cholesky_lower, SurfaceBasis};
pub use solver::{lambda_grid, Fit, GroupLasso, SolverOptions};
