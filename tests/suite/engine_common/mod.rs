//! Shared utilities of the selection-engine tests: fixture loading.
#![allow(dead_code)]

use serde_json::Value;

/// Loads `tests/fixtures/engine/<name>.json` (made by make_fixtures.py there).
pub fn fixture(name: &str) -> Value {
    let path = format!(
        "{}/tests/fixtures/engine/{name}.json",
        env!("CARGO_MANIFEST_DIR")
    );
    let text = std::fs::read_to_string(&path).expect("fixture readable");
    serde_json::from_str(&text).expect("fixture is JSON")
}

pub fn vec_f64(v: &Value) -> Vec<f64> {
    v.as_array()
        .expect("array")
        .iter()
        .map(|x| x.as_f64().expect("number"))
        .collect()
}

pub fn mat_f64(v: &Value) -> Vec<Vec<f64>> {
    v.as_array().expect("array").iter().map(vec_f64).collect()
}

pub fn vec_usize(v: &Value) -> Vec<usize> {
    v.as_array()
        .expect("array")
        .iter()
        .map(|x| x.as_u64().expect("integer") as usize)
        .collect()
}

/// Column-major faer matrix from a list of columns.
pub fn from_columns(cols: &[Vec<f64>]) -> faer::Mat<f64> {
    let n = cols[0].len();
    faer::Mat::from_fn(n, cols.len(), |i, j| cols[j][i])
}

pub fn rel_diff(a: &[f64], b: &[f64]) -> f64 {
    let num: f64 = a
        .iter()
        .zip(b)
        .map(|(x, y)| (x - y) * (x - y))
        .sum::<f64>()
        .sqrt();
    let den: f64 = b.iter().map(|y| y * y).sum::<f64>().sqrt();
    num / den.max(f64::MIN_POSITIVE)
}
