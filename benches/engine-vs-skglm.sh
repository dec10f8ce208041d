#!/usr/bin/env bash
# Times skglm's group lasso on the problem of `cargo bench --bench engine`
# and checks that both solvers reach the same objective (within 1e-6
# relative) at every λ of (a) the single fit, (b) the path, (c) every fold's
# path. Needs Python 3 with numpy and skglm (tests/fixtures/engine/requirements.txt).
#
# The problem file holds the design [A | X], y, the transform T = L^-T of the
# penalty metric, the folds and the λ grid. Both sides minimise
#   (1/2n) ||y~ - X~ theta||^2 + lambda * sum_k ||theta_k||_2,
# with the baseline A profiled out by least squares on the rows being fitted
# (all rows, or a fold's training rows) and X~_k = X_k T. Our times run from
# the design matrix (Gram, profiling, transform, solve); skglm's times cover
# its fits only (the profiled, transformed matrices are prepared untimed).
#
# Last line: speedup fit A path B cv C gram_floor G
#   A, B, C = skglm time / our time for (a), (b), (c);
#   G = our CV-path time / our time to form the Gram once.
# SKGLM_TOL (default 1e-8) is skglm's stopping tolerance (max distance of
# -grad to the penalty subdifferential, in objective-gradient units).
set -euo pipefail
cd "$(dirname "$0")/.."
cargo bench --bench engine
SKGLM_TOL="${SKGLM_TOL:-1e-8}" python3 - <<'PY'
import json, os, time
import numpy as np
from skglm import GroupLasso

d = "target/engine-bench"
h = json.load(open(f"{d}/problem.json"))
n, q, K, m = h["n"], h["q"], h["n_sites"], h["group_size"]
ncol = q + K * m
Z = np.fromfile(f"{d}/Z.bin", dtype="<f8").reshape(ncol, n).T
y = np.fromfile(f"{d}/y.bin", dtype="<f8")
T = np.fromfile(f"{d}/T.bin", dtype="<f8").reshape(m, m).T
tol = float(os.environ["SKGLM_TOL"])
groups = [list(range(k * m, (k + 1) * m)) for k in range(K)]
lams = np.array(h["lambdas"])


def prep(rows):
    A, X, yy = Z[rows, :q], Z[rows, q:], y[rows]
    Xp = X - A @ np.linalg.lstsq(A, X, rcond=None)[0]
    yp = yy - A @ np.linalg.lstsq(A, yy, rcond=None)[0]
    Xt = np.hstack([Xp[:, k * m:(k + 1) * m] @ T for k in range(K)])
    return np.asfortranarray(Xt), yp


def objective(X, yv, th, lam):
    r = yv - X @ th
    return 0.5 * r @ r / len(yv) + lam * sum(np.linalg.norm(th[g]) for g in groups)


def estimator(lam, warm):
    return GroupLasso(groups=groups, alpha=lam, tol=tol, max_iter=1000, max_epochs=100_000,
                      fit_intercept=False, warm_start=warm)


def path(X, yv):
    est = estimator(lams[0], True)
    objs = []
    t0 = time.perf_counter()
    for lam in lams:
        est.alpha = lam
        est.fit(X, yv)
        objs.append((lam, est.coef_.copy()))
    t = time.perf_counter() - t0
    return t, [objective(X, yv, c, lam) for lam, c in objs]


def worst_rel(a, b):
    return max(abs(x - y) / abs(y) for x, y in zip(a, b))


# compile skglm's numba kernels before timing
rng = np.random.default_rng(0)
Xs = rng.standard_normal((50, 2 * m))
GroupLasso(groups=[list(range(m)), list(range(m, 2 * m))], alpha=0.1, fit_intercept=False).fit(Xs, rng.standard_normal(50))

Xt, yp = prep(np.arange(n))
est = estimator(h["lambda_a"], False)
t0 = time.perf_counter()
est.fit(Xt, yp)
ta = time.perf_counter() - t0
ra = abs(objective(Xt, yp, est.coef_, h["lambda_a"]) - h["ours"]["a"]) / h["ours"]["a"]
print(f"(a) skglm {ta:.3f} s, objective rel diff {ra:.1e}", flush=True)

tb, ob = path(Xt, yp)
rb = worst_rel(ob, h["ours"]["b"])
print(f"(b) skglm {tb:.3f} s, worst objective rel diff over the path {rb:.1e}", flush=True)

tc, rc = 0.0, 0.0
for f, fold in enumerate(h["folds"]):
    lo, hi = fold["excluded"]
    rows = np.r_[0:lo, hi:n]
    Xf, yf = prep(rows)
    t, of = path(Xf, yf)
    tc += t
    rc = max(rc, worst_rel(of, h["ours"]["c"][f]))
    print(f"    fold {f}: {t:.2f} s", flush=True)
print(f"(c) skglm {tc:.3f} s, worst objective rel diff over folds and path {rc:.1e}", flush=True)

ok = max(ra, rb, rc) <= 1e-6
print("same accuracy (objective within 1e-6 relative at every λ):", "yes" if ok else "NO")
t = h["times"]
print(f"ours: gram {t['gram']:.4f} s, fit {t['a']:.4f} s, path {t['b']:.4f} s, cv {t['c']:.4f} s")
print(f"speedup fit {ta / t['a']:.1f} path {tb / t['b']:.1f} cv {tc / t['c']:.1f} gram_floor {t['c'] / t['gram']:.1f}")
PY
