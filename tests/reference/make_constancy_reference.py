#!/usr/bin/python3
"""Reference values for the rimwatch parameter-constancy tests (engine/constancy.h).

Usage:  /usr/bin/python3 tests/reference/make_constancy_reference.py OUTDIR

Writes into OUTDIR:
  constancy_<case>.csv    data rows, header "period,<var1>,...", values %.17g
  constancy_reference.json
      "nyblom":   per case and window, the Nyblom-Hansen statistic (joint over
                  all n k coefficients and per equation);
      "equality": the Wald statistic of equal coefficients in two samples
                  without common rows, HC0 and HC3 covariances;
      "survival": P(sum of p independent int_0^1 B(r)^2 dr > x) at a grid;
      "critical": its upper 5% points for p = 1, 2, 3.

Sources (named again beside each computation):
  * statsmodels has no heteroskedasticity-robust Nyblom-Hansen test, so the
    statistic is transcribed in numpy from Hansen 1992, "Testing for
    parameter instability in linear models", J. Policy Modeling 14, Sec. 3:
    L = (1/T^2) sum_t S_t' V^{-1} S_t, S_t the partial sums of the scores
    g_t = e_t (x) x_t at the least-squares estimate, V = (1/T) sum g g'.
  * Least squares by numpy.linalg.lstsq (LAPACK gelsd), independent of the
    engine's Givens-rotated QR.
  * Sandwich covariances written from White 1980 (HC0) and MacKinnon &
    White 1985 (HC3) in numpy.
  * The law of sum_j Z_j^2 / (j pi)^2 (Anderson & Darling 1952, Ann. Math.
    Statist. 23) by Imhof's formula (Imhof 1961, "Computing the
    distribution of quadratic forms in normal variables", Biometrika 48,
    eq. 3.2) with the eigenvalues 1/(j pi)^2 summed to J = 4000 plus the
    tail's first-order terms, integrated by scipy.integrate.quad: a method
    independent of the engine's closed-form characteristic function. For
    p = 1 it is also checked here against scipy's asymptotic Cramer-von Mises
    CDF (scipy.stats._hypotests._cdf_cvm_inf, Csorgo & Faraway 1996).

Data: simulated from fixed numpy RandomState seeds (invented processes).
Runs in about ten seconds.
"""

import json
import os
import sys

import numpy as np
import scipy
from scipy import integrate, optimize
from scipy.stats import _hypotests

REL_TOL = 1e-10


class ReferenceCheckFailed(AssertionError):
    pass


def check(cond, msg):
    if not cond:
        raise ReferenceCheckFailed(msg)


# ---------------------------------------------------------------------------
# Data


def simulate(rng, coefs, c, rows, burn, shock):
    p, n, _ = coefs.shape
    total = rows + burn
    y = np.zeros((total, n))
    for t in range(total):
        acc = c.copy()
        for lag in range(1, p + 1):
            if t - lag >= 0:
                acc += coefs[lag - 1] @ y[t - lag]
        y[t] = acc + shock(t)
    return y[burn:]


def case_garch():
    """n = 3, p = 2, constant, GARCH(1,1)-type errors (invented process)."""
    rng = np.random.RandomState(91017)
    a1 = np.array([[0.55, 0.15, 0.00], [0.10, 0.45, 0.10], [0.05, 0.20, 0.40]])
    a2 = np.array([[-0.15, 0.00, 0.00], [0.00, 0.10, 0.00], [0.10, -0.05, -0.10]])
    chol = np.array([[1.0, 0.0, 0.0], [0.3, 0.8, 0.0], [-0.2, 0.1, 0.6]])
    state = {"h": np.ones(3), "g": np.zeros(3)}

    def shock(t):
        state["h"] = 0.1 + 0.15 * state["g"] ** 2 + 0.75 * state["h"]
        state["g"] = np.sqrt(state["h"]) * rng.standard_normal(3)
        return chol @ state["g"]

    y = simulate(rng, np.array([a1, a2]), np.array([0.5, -0.2, 0.1]), 402, 200, shock)
    return ["y1", "y2", "y3"], 2, y


def case_break():
    """n = 2, p = 1, constant; A(1,2) moves from 0 to 0.5 half way."""
    rng = np.random.RandomState(5120)
    rows, burn = 301, 100
    a_before = np.array([[0.4, 0.0], [0.2, 0.3]])
    a_after = np.array([[0.4, 0.5], [0.2, 0.3]])
    c = np.array([0.2, -0.1])
    y = np.zeros((rows + burn, 2))
    for t in range(1, rows + burn):
        a = a_before if t < burn + rows // 2 else a_after
        y[t] = c + a @ y[t - 1] + rng.standard_normal(2)
    return ["a", "b"], 1, y[burn:]


def write_csv(path, names, y):
    with open(path, "w") as fh:
        fh.write("period," + ",".join(names) + "\n")
        for i, row in enumerate(y):
            fh.write(str(i + 1) + "," + ",".join("%.17g" % v for v in row) + "\n")


# ---------------------------------------------------------------------------
# Least squares, scores, Nyblom-Hansen (Hansen 1992, Sec. 3)


def regressors(y, lags, first, last):
    """Estimation rows first..last-1 (data row indices >= lags): x_t = [1,
    y_{t-1}, ..., y_{t-p}] (constant, then lag 1 of every variable, ...)."""
    xs = []
    for t in range(first, last):
        xs.append(np.concatenate([[1.0]] + [y[t - l] for l in range(1, lags + 1)]))
    return np.array(xs), y[first:last]


def ols(x, yy):
    b, *_ = np.linalg.lstsq(x, yy, rcond=None)  # LAPACK gelsd
    return b, yy - x @ b


def nyblom(x, e):
    t_rows, k = x.shape
    n = e.shape[1]
    g = np.array([np.kron(e[t], x[t]) for t in range(t_rows)])  # index eq * k + j
    check(np.max(np.abs(g.sum(axis=0))) <= 1e-8 * np.max(np.abs(g)) * t_rows,
          "scores at the LS estimate must sum to zero")
    s = np.cumsum(g, axis=0)

    def stat(cols):
        v = g[:, cols].T @ g[:, cols] / t_rows
        sub = s[:, cols]
        return float(np.sum(sub * np.linalg.solve(v, sub.T).T) / t_rows ** 2)

    joint = stat(list(range(n * k)))
    eq = [stat(list(range(i * k, (i + 1) * k))) for i in range(n)]
    return joint, eq


def sandwich(x, e, kind):
    """(I (x) A) [sum_t (c_t e_t)(c_t e_t)' (x) x_t x_t'] (I (x) A), A =
    (X'X)^{-1}, c_t = 1 (HC0, White 1980) or 1 / (1 - h_t) (HC3, MacKinnon &
    White 1985), h_t = x_t' A x_t."""
    a = np.linalg.inv(x.T @ x)
    h = np.einsum("ij,jk,ik->i", x, a, x)
    scale = np.ones_like(h) if kind == "HC0" else 1.0 / (1.0 - h)
    n = e.shape[1]
    ia = np.kron(np.eye(n), a)
    g = np.array([np.kron(scale[t] * e[t], x[t]) for t in range(len(x))])
    return ia @ (g.T @ g) @ ia


# ---------------------------------------------------------------------------
# The law of sum_{j<=p} int B_j^2 (Imhof 1961, eq. 3.2)

J_TERMS = 4000
LAM = 1.0 / (np.arange(1, J_TERMS + 1) * np.pi) ** 2
TAIL1 = (1.0 / J_TERMS - 1.0 / (2 * J_TERMS ** 2) + 1.0 / (6 * J_TERMS ** 3)) / np.pi ** 2
TAIL2 = 1.0 / (3 * J_TERMS ** 3) / np.pi ** 4


def survival(x, p):
    """P(Q > x) = 1/2 + (1/pi) int_0^inf sin(theta(u)) / (u rho(u)) du with
    theta = (p/2) sum arctan(lam_j u) - x u / 2 and
    rho = prod (1 + lam_j^2 u^2)^(p/4); j > J enters through
    sum lam_j ~ TAIL1 and sum lam_j^2 ~ TAIL2."""
    def f(u):
        th = 0.5 * p * (np.arctan(LAM * u).sum() + u * TAIL1) - 0.5 * x * u
        logrho = 0.25 * p * (np.log1p((LAM * u) ** 2).sum() + TAIL2 * u * u)
        return np.sin(th) * np.exp(-logrho) / u

    val, _ = integrate.quad(f, 0, np.inf, limit=5000, epsabs=1e-12, epsrel=1e-10)
    return 0.5 + val / np.pi


# ---------------------------------------------------------------------------


def main(argv):
    if len(argv) != 2:
        print(__doc__)
        return 2
    out = argv[1]
    os.makedirs(out, exist_ok=True)
    result = {"generator": {"numpy": np.__version__, "scipy": scipy.__version__,
                            "python": sys.version.split()[0]},
              "nyblom": [], "equality": [], "survival": [], "critical": []}

    cases = {"garch": case_garch(), "break": case_break()}
    for name, (names, lags, y) in cases.items():
        write_csv(os.path.join(out, "constancy_" + name + ".csv"), names, y)
        rows = len(y) - lags
        windows = [("expanding", rows)]
        if name == "garch":
            windows.append(("sliding", 200))
        for kind, w in windows:
            x, yy = regressors(y, lags, len(y) - w, len(y))
            _, e = ols(x, yy)
            joint, eq = nyblom(x, e)
            result["nyblom"].append({"case": name, "lags": lags, "window": kind, "rows": w,
                                     "joint": joint, "equation": eq})

    # Equality: first 200 estimation rows against the last 200 (no common row).
    names, lags, y = cases["garch"]
    x1, y1 = regressors(y, lags, lags, lags + 200)
    x2, y2 = regressors(y, lags, len(y) - 200, len(y))
    check(lags + 200 <= len(y) - 200, "equality samples overlap")
    b1, e1 = ols(x1, y1)
    b2, e2 = ols(x2, y2)
    d = (b2.T.reshape(-1) - b1.T.reshape(-1))  # theta = vec(Phi'), eq * k + j
    for kind in ("HC0", "HC3"):
        v = sandwich(x1, e1, kind) + sandwich(x2, e2, kind)
        w = float(d @ np.linalg.solve(v, d))
        result["equality"].append({"case": "garch", "kind": kind, "reference_rows": 200,
                                   "recent_rows": 200, "statistic": w, "df": len(d)})

    # The asymptotic law.
    for p in (1, 2, 3, 7, 21):
        for q in (0.5, 1.0, 2.0):
            x = q * p / 6.0 + 0.1 * np.sqrt(p)  # around the mean p / 6 and above
            result["survival"].append({"p": p, "x": x, "survival": survival(x, p)})
    for p in (1, 2, 3):
        c = optimize.brentq(lambda x: survival(x, p) - 0.05, 0.05, 5.0, xtol=1e-13)
        result["critical"].append({"p": p, "alpha": 0.05, "value": c})
    # Cross-check of the Imhof evaluation for p = 1 against scipy's series.
    for x in (0.2, 0.46136, 0.9):
        s_scipy = 1.0 - float(_hypotests._cdf_cvm_inf(x))
        check(abs(s_scipy - survival(x, 1)) < 1e-7,
              f"Imhof vs scipy CvM at x = {x}: {survival(x, 1)} vs {s_scipy}")

    with open(os.path.join(out, "constancy_reference.json"), "w") as fh:
        json.dump(result, fh, indent=1, allow_nan=False)
        fh.write("\n")
    print(f"wrote constancy reference ({len(result['nyblom'])} Nyblom cases) to {out}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
