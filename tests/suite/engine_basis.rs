//! B-spline bases, penalties and FIR taps against scipy
//! (fixture: tests/fixtures/engine/basis.json, made by make_fixtures.py:
//! scipy.interpolate.BSpline values, scipy.integrate.quad / dblquad integrals).

use crate::engine_common;
use engine_common::*;
use mirrorsite::select::design::lag_taps;
use mirrorsite::select::{BSplineBasis, SurfaceBasis};

#[test]
fn basis_values_and_derivatives_match_scipy() {
    let fx = fixture("basis");
    for b in fx["bases"].as_array().unwrap() {
        let (lo, hi) = (b["lo"].as_f64().unwrap(), b["hi"].as_f64().unwrap());
        let n = b["n"].as_u64().unwrap() as usize;
        let basis = BSplineBasis::new(lo, hi, n).unwrap();
        let knots = vec_f64(&b["knots"]);
        for (a, e) in basis.knots().iter().zip(&knots) {
            assert!((a - e).abs() < 1e-15);
        }
        let xs = vec_f64(&b["x"]);
        for d in 0..3 {
            let expect = mat_f64(&b["values"][d.to_string()]);
            let scale = expect.iter().flatten().fold(0.0f64, |m, v| m.max(v.abs()));
            for (x, e) in xs.iter().zip(&expect) {
                let v = basis.eval(*x, d);
                for (got, want) in v.iter().zip(e) {
                    // rounding only: 1e-12 of the largest value of this derivative order
                    assert!(
                        (got - want).abs() <= 1e-12 * scale,
                        "n={n} d={d} x={x}: {got} vs {want}"
                    );
                }
            }
        }
        let gram = mat_f64(&b["gram"]);
        let rough = mat_f64(&b["roughness"]);
        let (g, r) = (basis.gram(), basis.roughness());
        let gs = gram.iter().flatten().fold(0.0f64, |m, v| m.max(v.abs()));
        let rs = rough.iter().flatten().fold(0.0f64, |m, v| m.max(v.abs()));
        for i in 0..n {
            for j in 0..n {
                // quad is accurate to about 1e-13 relative here; ours is exact up to rounding
                assert!((g[(i, j)] - gram[i][j]).abs() <= 1e-11 * gs);
                assert!((r[(i, j)] - rough[i][j]).abs() <= 1e-11 * rs);
            }
        }
    }
}

#[test]
fn tensor_penalties_match_double_integrals() {
    let fx = fixture("basis");
    let sb = SurfaceBasis::new(0.3, 7, 7).unwrap();
    let (m, ps, pz) = (sb.gram(), sb.penalty_lag(), sb.penalty_pos());
    for e in fx["tensor_entries"].as_array().unwrap() {
        let (r, c) = (
            e["row"].as_u64().unwrap() as usize,
            e["col"].as_u64().unwrap() as usize,
        );
        for (mat, key) in [(&m, "m"), (&ps, "ps"), (&pz, "pz")] {
            let want = e[key].as_f64().unwrap();
            let scale = mat[(r, r)].abs().max(mat[(c, c)].abs());
            // dblquad tolerance 1e-12 relative per span
            assert!(
                (mat[(r, c)] - want).abs() <= 1e-9 * scale,
                "{key}[{r},{c}]: {} vs {want}",
                mat[(r, c)]
            );
        }
    }
}

#[test]
fn fir_taps_match_quadrature() {
    let fx = fixture("basis");
    for t in fx["taps"].as_array().unwrap() {
        let rate = t["rate"].as_f64().unwrap();
        let want = mat_f64(&t["taps"]);
        let lag = BSplineBasis::new(-0.3, 0.0, 7).unwrap();
        let got = lag_taps(&lag, rate, want[0].len());
        let scale = want.iter().flatten().fold(0.0f64, |m, v| m.max(v.abs()));
        for (gl, wl) in got.iter().zip(&want) {
            for (g, w) in gl.iter().zip(wl) {
                assert!((g - w).abs() <= 1e-11 * scale, "rate {rate}: {g} vs {w}");
            }
        }
    }
}
