//! Group lasso against skglm's `GroupLasso` on well-conditioned random
//! problems (fixture tests/fixtures/engine/group.json, skglm tol 1e-12,
//! `fit_intercept=False`). Objective scaling on both sides:
//! `(1/2n)‖y − Xb‖² + λ Σ_k w_k ‖b_k‖₂`.

use crate::engine_common;
use engine_common::*;
use faer::Mat;
use mirrorsite::select::{Gram, GroupLasso, SolverOptions};

struct Problem {
    x: Vec<Vec<f64>>,
    y: Vec<f64>,
    sizes: Vec<usize>,
}

impl Problem {
    fn objective(&self, b: &[f64], w: &[f64], lam: f64) -> f64 {
        let n = self.y.len();
        let mut r = self.y.clone();
        for (col, bj) in self.x.iter().zip(b) {
            for (ri, xi) in r.iter_mut().zip(col) {
                *ri -= xi * bj;
            }
        }
        let mut pen = 0.0;
        let mut s = 0;
        for (k, &m) in self.sizes.iter().enumerate() {
            if w[k].is_finite() {
                pen += w[k] * b[s..s + m].iter().map(|v| v * v).sum::<f64>().sqrt();
            }
            s += m;
        }
        0.5 * r.iter().map(|v| v * v).sum::<f64>() / n as f64 + lam * pen
    }

    fn lasso(&self) -> GroupLasso {
        let z = from_columns(&self.x);
        let gram = Gram::from_design(z.as_ref(), &self.y, faer::Par::Seq).unwrap();
        let factors: Vec<Mat<f64>> = self.sizes.iter().map(|&m| Mat::identity(m, m)).collect();
        GroupLasso::new(&gram.profile(0).unwrap(), &factors).unwrap()
    }

    /// KKT residual recomputed from the raw data: ‖X_kᵀr/n − λw_k b_k/‖b_k‖‖/(λw_k)
    /// or max(0, ‖X_kᵀr/n‖/(λw_k) − 1).
    fn kkt(&self, b: &[f64], w: &[f64], lam: f64) -> f64 {
        let n = self.y.len() as f64;
        let mut r = self.y.clone();
        for (col, bj) in self.x.iter().zip(b) {
            for (ri, xi) in r.iter_mut().zip(col) {
                *ri -= xi * bj;
            }
        }
        let g: Vec<f64> = self
            .x
            .iter()
            .map(|c| c.iter().zip(&r).map(|(a, b)| a * b).sum::<f64>() / n)
            .collect();
        let mut worst = 0.0f64;
        let mut s = 0;
        for (k, &m) in self.sizes.iter().enumerate() {
            let t = lam * w[k];
            let (gk, bk) = (&g[s..s + m], &b[s..s + m]);
            let nb = bk.iter().map(|v| v * v).sum::<f64>().sqrt();
            let ng = gk.iter().map(|v| v * v).sum::<f64>().sqrt();
            if w[k].is_finite() {
                let v = if nb == 0.0 {
                    (ng / t - 1.0).max(0.0)
                } else {
                    gk.iter()
                        .zip(bk)
                        .map(|(gi, bi)| (gi / t - bi / nb).powi(2))
                        .sum::<f64>()
                        .sqrt()
                };
                worst = worst.max(v);
            }
            s += m;
        }
        worst
    }
}

fn problems() -> Vec<(Problem, serde_json::Value)> {
    let fx = fixture("group");
    fx["problems"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| {
            (
                Problem {
                    x: mat_f64(&p["X"]),
                    y: vec_f64(&p["y"]),
                    sizes: vec_usize(&p["sizes"]),
                },
                p.clone(),
            )
        })
        .collect()
}

#[test]
fn matches_skglm_group_lasso() {
    for (prob, fx) in problems() {
        let w = vec_f64(&fx["weights"]);
        let lasso = prob.lasso();
        let lmax = lasso.lambda_max(&w).unwrap();
        let want_lmax = fx["lambda_max"].as_f64().unwrap();
        assert!((lmax - want_lmax).abs() <= 1e-12 * want_lmax);
        let fits = fx["fits"].as_array().unwrap();
        let lams: Vec<f64> = fits.iter().map(|f| f["lambda"].as_f64().unwrap()).collect();
        let path = lasso
            .fit_path(&w, &lams, &SolverOptions::default(), None)
            .unwrap();
        for (got, want) in path.iter().zip(fits) {
            let lam = got.lambda;
            let b_ref = vec_f64(&want["coef"]);
            let obj_ref = want["objective"].as_f64().unwrap();
            let rel = rel_diff(&got.coef, &b_ref);
            assert!(rel < 1e-6, "λ {lam}: coefficients differ by {rel:e}");
            // our objective, recomputed from the raw data
            let obj = prob.objective(&got.coef, &w, lam);
            assert!(
                (obj - obj_ref).abs() <= 1e-9 * obj_ref,
                "λ {lam}: {obj} vs {obj_ref}"
            );
            assert!((got.objective - obj).abs() <= 1e-12 * obj);
            assert!(got.converged && got.gap <= 1e-10 * lasso.null_objective());
            // KKT from the raw data, to the documented tolerance
            let kkt = prob.kkt(&got.coef, &w, lam);
            assert!(kkt <= 1e-6, "λ {lam}: KKT residual {kkt:e}");
        }
    }
}

#[test]
fn infinite_weights_and_zero_groups() {
    let (mut prob, fx) = problems().remove(0);
    let mut w = vec_f64(&fx["weights"]);
    // group 1 (a true signal group) excluded; group 5 replaced by zero columns
    w[1] = f64::INFINITY;
    let s5: usize = prob.sizes[..5].iter().sum();
    for j in s5..s5 + prob.sizes[5] {
        prob.x[j].iter_mut().for_each(|v| *v = 0.0);
    }
    let lasso = prob.lasso();
    let lmax = lasso.lambda_max(&w).unwrap();
    let lams: Vec<f64> = [0.5, 0.1, 0.01].iter().map(|f| f * lmax).collect();
    let path = lasso
        .fit_path(&w, &lams, &SolverOptions::default(), None)
        .unwrap();
    for fit in &path {
        assert!(fit.converged);
        assert!(fit.coef.iter().all(|v| v.is_finite()));
        assert!(!fit.active.contains(&1) && !fit.active.contains(&5));
        let s1: usize = prob.sizes[0];
        assert!(fit.coef[s1..s1 + prob.sizes[1]].iter().all(|&v| v == 0.0));
        assert!(prob.kkt(&fit.coef, &w, fit.lambda) <= 1e-6);
    }
    // excluding group 1 equals solving without its columns
    let mut reduced = Problem {
        x: prob.x.clone(),
        y: prob.y.clone(),
        sizes: prob.sizes.clone(),
    };
    let s1 = prob.sizes[0];
    reduced.x.drain(s1..s1 + prob.sizes[1]);
    reduced.sizes.remove(1);
    let mut wr = w.clone();
    wr.remove(1);
    let rpath = reduced
        .lasso()
        .fit_path(&wr, &lams, &SolverOptions::default(), None)
        .unwrap();
    for (a, b) in path.iter().zip(&rpath) {
        assert!((a.objective - b.objective).abs() <= 1e-10 * b.objective);
    }
}

#[test]
fn rejects_bad_weights() {
    let (prob, _) = problems().remove(0);
    let lasso = prob.lasso();
    let mut w = vec![1.0; prob.sizes.len()];
    w[0] = 0.0;
    assert!(lasso.lambda_max(&w).is_err());
    w[0] = f64::NAN;
    assert!(lasso
        .fit_path(&w, &[0.1], &SolverOptions::default(), None)
        .is_err());
    assert!(lasso
        .fit_path(&[1.0], &[0.1], &SolverOptions::default(), None)
        .is_err());
}
