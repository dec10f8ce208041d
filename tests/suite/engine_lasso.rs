//! Singleton groups with identity metrics are the lasso.
//! Outside sources: scikit-learn's diabetes data and `Lasso` (tol 1e-12,
//! intercept fitted; fixture tests/fixtures/engine/lasso.json), and the order
//! in which variables enter the lasso path published by Efron, Hastie,
//! Johnstone & Tibshirani (2004, "Least angle regression", Ann Stat 32:407–499,
//! Fig. 1; see FACTS.md section 7): 3, 9, 4, 7, 2, 10, 5, 8, 6, 1 (1-based).

use crate::engine_common;
use engine_common::*;
use faer::Mat;
use mirrorsite::select::{lambda_grid, Gram, GroupLasso, SolverOptions};

fn diabetes() -> (Gram, usize, usize) {
    let fx = fixture("lasso");
    let x = mat_f64(&fx["X"]);
    let y = vec_f64(&fx["y"]);
    let n = y.len();
    // intercept column first: profiled out like the baseline
    let mut cols = vec![vec![1.0; n]];
    cols.extend(x.iter().cloned());
    let z = from_columns(&cols);
    (
        Gram::from_design(z.as_ref(), &y, faer::Par::Seq).unwrap(),
        n,
        x.len(),
    )
}

#[test]
fn matches_sklearn_lasso_on_diabetes() {
    let fx = fixture("lasso");
    let (gram, _n, p) = diabetes();
    let prof = gram.profile(1).unwrap();
    let ones: Vec<Mat<f64>> = (0..p).map(|_| Mat::identity(1, 1)).collect();
    let problem = GroupLasso::new(&prof, &ones).unwrap();
    let w = vec![1.0; p];
    let opts = SolverOptions::default();
    for fit in fx["fits"].as_array().unwrap() {
        let alpha = fit["alpha"].as_f64().unwrap();
        let want = vec_f64(&fit["coef"]);
        let got = &problem.fit_path(&w, &[alpha], &opts, None).unwrap()[0];
        assert!(got.converged && got.kkt <= 1e-6);
        let rel = rel_diff(&got.coef, &want);
        assert!(
            rel < 1e-6,
            "alpha {alpha}: relative coefficient difference {rel:e}"
        );
        // zero pattern identical
        for (g, w) in got.coef.iter().zip(&want) {
            assert_eq!(
                *g == 0.0,
                *w == 0.0,
                "alpha {alpha}: {:?} vs {want:?}",
                got.coef
            );
        }
        let icpt = prof.baseline_coef(&got.coef)[0];
        let want_icpt = fit["intercept"].as_f64().unwrap();
        assert!(
            (icpt - want_icpt).abs() < 1e-6 * want_icpt.abs(),
            "{icpt} vs {want_icpt}"
        );
    }
}

#[test]
fn entry_order_matches_efron_et_al_2004() {
    let fx = fixture("lasso");
    let (gram, _n, p) = diabetes();
    let prof = gram.profile(1).unwrap();
    let ones: Vec<Mat<f64>> = (0..p).map(|_| Mat::identity(1, 1)).collect();
    let problem = GroupLasso::new(&prof, &ones).unwrap();
    let w = vec![1.0; p];
    let lmax = problem.lambda_max(&w).unwrap();
    // λ_max = max|xᵀ(y − ȳ)|/n = 2.14804 (first sklearn lasso knot, FACTS.md)
    assert!((lmax - 2.14804).abs() < 1e-5, "{lmax}");
    // fine grid: consecutive entries are ≥ 6.8% apart in λ, the grid step is 3.4%
    let grid = lambda_grid(lmax, 1e-3, 200);
    let path = problem
        .fit_path(&w, &grid, &SolverOptions::default(), None)
        .unwrap();
    let mut order: Vec<usize> = Vec::new();
    for fit in &path {
        assert!(fit.converged, "λ = {}", fit.lambda);
        let new: Vec<usize> = fit
            .active
            .iter()
            .copied()
            .filter(|k| !order.contains(k))
            .collect();
        assert!(
            new.len() <= 1,
            "two variables entered between grid points: {new:?}"
        );
        order.extend(new);
    }
    let published = [3, 9, 4, 7, 2, 10, 5, 8, 6, 1];
    let got: Vec<usize> = order.iter().map(|k| k + 1).collect();
    assert_eq!(got, published);
    // and the same order as scikit-learn's lars_path(method="lasso")
    assert_eq!(order, vec_usize(&fx["lars_entry_order"]));
}
