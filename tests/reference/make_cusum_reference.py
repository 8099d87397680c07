#!/usr/bin/python3
"""Reference values for the recursive-residual CUSUM (engine/cusum.h).

Usage:  /usr/bin/python3 tests/reference/make_cusum_reference.py OUTDIR

Writes OUTDIR/cusum_reference.json:
  {"generator": ..., "statsmodels": version,
   "boundary_constants": {"0.90": a, "0.95": a, "0.99": a}   (as statsmodels uses them),
   "cases": [{"name", "kind": "regression" | "var",
              "x": rows x k regressors (regression only), "y": rows (regression only),
              "data": rows x n observations, "variables", "lags", "deterministic" (var only),
              "k", "equations": [{"equation", "rresid_scaled", "rcusum", "rcusumci"}, ...]}]}
Floats are written by json (repr: shortest text that reads back to the same double).

Source of every reference number: statsmodels 0.13.5 (Seabold & Perktold 2010)
statsmodels.stats.diagnostic.recursive_olsresiduals(OLS(y, X).fit(), alpha=...), which
returns (rresid, rparams, rypred, rresid_standardized, rresid_scaled, rcusum, rcusumci).
Conventions checked below and relied on by tests/reference/cusum_reference_test.cc:
  * skip = k: rresid_scaled[k:] are the T - k recursive residuals w_{k+1..T}
    (prediction error / sqrt(1 + x'(X'X)^{-1}x), Brown, Durbin & Evans 1975, Sec. 2.1);
  * sigma^2 = var(rresid_scaled[k:], ddof=1) (mean removed, divisor T - k - 1);
  * rcusum has T - k + 1 entries: rcusum[0] is the standardised in-sample residual of the
    exact initial fit on k rows (zero up to rounding), rcusum[j] = W_{k+j} for j >= 1;
  * rcusumci[:, j] = -+(a sqrt(N) + 2 a j / sqrt(N)), j = 0..N-1, N = T - k: the BDE line at
    r = k + j (so it stops one row short of r = T).
For the VAR cases X is statsmodels' VAR(...).fit(p, trend).endog_lagged (const, trend, lag 1
of every variable, lag 2, ...) and y one column of endog[p:]: one equation of the VAR by OLS.

Data: simulated from fixed numpy RandomState seeds (invented processes). Runs in well under a
second.
"""

import json
import os
import sys

import numpy as np
import pandas as pd
import statsmodels
import statsmodels.api as sm
from statsmodels.stats.diagnostic import recursive_olsresiduals
from statsmodels.tsa.api import VAR

TREND_CODES = {"none": "n", "constant": "c", "trend": "ct"}
LEVELS = (0.90, 0.95, 0.99)


class ReferenceCheckFailed(AssertionError):
    pass


def check(cond, msg):
    if not cond:
        raise ReferenceCheckFailed(msg)


def recursive_reference(y, x):
    """statsmodels 0.13.5 recursive_olsresiduals at the three levels."""
    res = sm.OLS(y, x).fit()
    k = x.shape[1]
    nobs = len(y)
    out = {}
    for alpha in LEVELS:
        (rresid, _rparams, _rypred, rstd, rscaled, rcusum,
         rcusumci) = recursive_olsresiduals(res, alpha=alpha)
        out[alpha] = (np.asarray(rscaled), np.asarray(rstd), np.asarray(rcusum),
                      np.asarray(rcusumci))
    rscaled, rstd, rcusum, _ = out[0.95]
    w = rscaled[k:]
    count = nobs - k
    check(w.shape == (count,) and np.all(np.isfinite(w)), "recursive residuals")
    check(rcusum.shape == (count + 1,), f"rcusum length {rcusum.shape}")
    scale = np.max(np.abs(rcusum))
    check(abs(rcusum[0]) <= 1e-9 * max(scale, 1.0), f"rcusum[0] = {rcusum[0]} not ~0")
    sigma = np.std(w, ddof=1)
    check(np.allclose(rstd[k:], w / sigma, rtol=1e-12, atol=0),
          "sigma convention: var(ddof=1) of rresid_scaled[k:]")
    # numpy cumulative sum as an independent check of statsmodels' path
    check(np.allclose(rcusum[1:] - rcusum[0], np.cumsum(w / sigma), rtol=1e-10,
                      atol=1e-12 * scale), "rcusum = cumsum of standardised residuals")
    equations = {
        "rresid_scaled": w.tolist(),
        "rcusum": rcusum.tolist(),
        "rcusumci": {f"{alpha:.2f}": out[alpha][3].tolist() for alpha in LEVELS},
    }
    return equations


def boundary_constants():
    """The constant a statsmodels 0.13.5 puts in rcusumci at each level,
    read back from its output: rcusumci[1, 0] = a sqrt(N)."""
    rng = np.random.RandomState(1)
    x = np.column_stack([np.ones(40), rng.standard_normal(40)])
    y = x @ np.array([1.0, 0.5]) + rng.standard_normal(40)
    res = sm.OLS(y, x).fit()
    out = {}
    for alpha in LEVELS:
        ci = recursive_olsresiduals(res, alpha=alpha)[6]
        out[f"{alpha:.2f}"] = float(ci[1, 0] / np.sqrt(40 - 2))
    return out


def case_regression():
    """y = 1 + 0.5 x1 - 0.3 x2 + e with a level shift of +0.8 after row 90
    (so the path leaves the band), T = 150, k = 3."""
    rng = np.random.RandomState(20240917)
    T = 150
    x = np.column_stack([np.ones(T), rng.standard_normal(T),
                         rng.uniform(-1.0, 2.0, T)])
    y = x @ np.array([1.0, 0.5, -0.3]) + rng.standard_normal(T)
    y[90:] += 0.8
    eq = recursive_reference(y, x)
    eq["equation"] = 0
    return {"name": "regression", "kind": "regression", "k": 3,
            "x": x.tolist(), "y": y.tolist(), "equations": [eq]}


def simulate_var(rng, coefs, det, T, burn, chol):
    p, n, _ = coefs.shape
    total = T + burn
    u = rng.standard_normal((total, n)) @ chol.T
    y = np.zeros((total, n))
    for t in range(total):
        acc = det(t - burn + 1).copy()
        for lag in range(1, p + 1):
            if t - lag >= 0:
                acc += coefs[lag - 1] @ y[t - lag]
        y[t] = acc + u[t]
    return y[burn:]


def case_var(name, names, coefs, det, deterministic, T, seed, chol):
    rng = np.random.RandomState(seed)
    data = simulate_var(rng, coefs, det, T, 200, chol)
    p = coefs.shape[0]
    res = VAR(pd.DataFrame(data, columns=names)).fit(p, trend=TREND_CODES[deterministic])
    Z = np.asarray(res.endog_lagged, dtype=float)
    Y = np.asarray(res.endog, dtype=float)[p:]
    k = Z.shape[1]
    # the VAR's equation i by OLS on the VAR's own regressor matrix
    for i in range(len(names)):
        check(np.allclose(sm.OLS(Y[:, i], Z).fit().params,
                          np.asarray(res.params)[:, i], rtol=1e-9, atol=1e-12),
              f"{name}: OLS eq {i} vs VAR params")
    equations = []
    for i in range(len(names)):
        eq = recursive_reference(Y[:, i], Z)
        eq["equation"] = i
        equations.append(eq)
    return {"name": name, "kind": "var", "variables": names, "lags": p,
            "deterministic": deterministic, "k": k, "data": data.tolist(),
            "equations": equations}


def main():
    outdir = sys.argv[1] if len(sys.argv) > 1 else "."
    os.makedirs(outdir, exist_ok=True)
    A1 = np.array([[0.55, 0.15, 0.00],
                   [0.10, 0.45, 0.10],
                   [0.05, 0.20, 0.40]])
    A2 = np.array([[-0.15, 0.00, 0.05],
                   [0.00, 0.10, 0.00],
                   [0.10, -0.05, -0.10]])
    chol3 = np.array([[1.0, 0.0, 0.0], [0.3, 0.8, 0.0], [-0.2, 0.1, 0.6]])
    c3 = np.array([0.5, -0.2, 0.1])
    B1 = np.array([[0.5, 0.1], [0.2, 0.3]])
    B2 = np.array([[-0.2, 0.05], [0.0, 0.15]])
    chol2 = np.array([[0.8, 0.0], [0.3, 0.5]])
    cases = [
        case_regression(),
        case_var("var_const", ["a", "b", "c"], np.array([A1, A2]), lambda t: c3,
                 "constant", 260, 818, chol3),
        case_var("var_trend", ["u", "v"], np.array([B1, B2]),
                 lambda t: np.array([1.0, -0.5]) + np.array([0.02, 0.01]) * t,
                 "trend", 220, 4242, chol2),
    ]
    out = {
        "generator": "tests/reference/make_cusum_reference.py",
        "statsmodels": statsmodels.__version__,
        "boundary_constants": boundary_constants(),
        "cases": cases,
    }
    with open(os.path.join(outdir, "cusum_reference.json"), "w") as fh:
        json.dump(out, fh)
    print(f"cusum reference: {len(cases)} cases, statsmodels {statsmodels.__version__}, "
          f"constants {out['boundary_constants']}")


if __name__ == "__main__":
    main()
