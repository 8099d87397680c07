#!/usr/bin/python3
"""Generate reference values for the rimwatch VAR estimator tests.

Usage:  /usr/bin/python3 tests/reference/make_reference.py OUTDIR

Writes into OUTDIR (created if missing):
  <case>.csv      the (already transformed) data rows fed to the VAR,
                  header "period,<var1>,...", values printed with %.17g
  reference.json  {"generator": ..., "cases": [...]} with estimates,
                  classical / HC / HAC standard errors, cross-equation
                  sandwich covariances, companion eigenvalue moduli,
                  delta-method SE of the spectral radius, Granger and
                  lag-exclusion Wald tests and lag-order criteria.

Sources of the reference numbers (named again beside each computation):
  * statsmodels 0.13.5 (Seabold & Perktold 2010): VAR.fit, VARResults
    (params, sigma_u, sigma_u_mle, stderr, cov_params, roots,
    test_causality), VAR.select_order, and per-equation OLS with
    cov_type HC0..HC3 / HAC.
  * numpy: the cross-equation sandwich covariances, written directly from
    the HC formulas (White 1980; MacKinnon & White 1985 for HC1..HC3) and
    the Bartlett-kernel HAC formula (Newey & West 1987), companion
    eigenvalues, finite-difference delta method, Wald statistics.
  * scipy.stats: chi2 / F tail probabilities.
  * Data: simulated series from fixed numpy RandomState seeds, and the
    West German investment/income/consumption series e1.dat (Luetkepohl
    2005, New Introduction to Multiple Time Series Analysis) as shipped in
    statsmodels' test suite; it is read from the installed package at run
    time and never copied into the repository.

The run is deterministic; it takes well under a second of compute.
"""

import json
import math
import os
import sys
import platform

import numpy as np
import pandas as pd
import scipy
from scipy import stats
import statsmodels
import statsmodels.api as sm
from statsmodels.tsa.api import VAR

PMAX_CRITERIA = 4
HAC_FIXED_LAGS = 4
REL_TOL = 1e-10

TREND_CODES = {"none": "n", "constant": "c", "trend": "ct"}
N_DET = {"none": 0, "constant": 1, "trend": 2}


class ReferenceCheckFailed(AssertionError):
    pass


def check(cond, msg):
    if not cond:
        raise ReferenceCheckFailed(msg)


def rel_close(a, b, tol=REL_TOL, what=""):
    """Elementwise relative comparison, scaled by the largest magnitude."""
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    check(a.shape == b.shape, f"{what}: shape {a.shape} vs {b.shape}")
    scale = max(np.max(np.abs(a)), np.max(np.abs(b)), 1e-300)
    err = np.max(np.abs(a - b)) / scale if a.size else 0.0
    check(err <= tol, f"{what}: relative mismatch {err:.3e} > {tol:.1e}")


def elementwise_rel_close(a, b, tol=REL_TOL, what=""):
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    check(a.shape == b.shape, f"{what}: shape {a.shape} vs {b.shape}")
    err = np.max(np.abs(a - b) / np.maximum(np.abs(b), 1e-300))
    check(err <= tol, f"{what}: relative mismatch {err:.3e} > {tol:.1e}")


def tolist(x):
    return np.asarray(x, dtype=float).tolist()


# ---------------------------------------------------------------------------
# Data
# ---------------------------------------------------------------------------

def e1_path():
    base = os.path.dirname(statsmodels.__file__)
    path = os.path.join(base, "tsa", "vector_ar", "tests", "results", "e1.dat")
    check(os.path.isfile(path), f"e1.dat not found at {path}")
    return path


def load_e1():
    """West German investment / income / consumption, quarterly,
    1960Q1-1982Q4 (e1.dat as shipped with statsmodels' tests; the data
    set used in Luetkepohl 2005, Sec. 3.2.3)."""
    with open(e1_path()) as fh:
        lines = fh.read().splitlines()
    start = None
    for i, line in enumerate(lines):
        if line.split()[:1] == ["invest"]:
            start = i
            break
    check(start is not None, "e1.dat: header line not found")
    names = lines[start].split()
    check(names == ["invest", "income", "cons"], f"e1.dat header {names}")
    rows = [list(map(float, ln.split())) for ln in lines[start + 1:]
            if ln.strip()]
    levels = np.array(rows)
    check(levels.shape == (92, 3), f"e1.dat shape {levels.shape}")
    labels = [f"{1960 + q // 4}Q{q % 4 + 1}" for q in range(len(levels))]
    return names, labels, levels


def case_e1_data():
    names, labels, levels = load_e1()
    # levels 1960Q1..1978Q4 -> log first differences 1960Q2..1978Q4 (75 rows)
    last = labels.index("1978Q4")
    lv = levels[: last + 1]
    d = np.diff(np.log(lv), axis=0)
    periods = labels[1: last + 1]
    check(len(d) == 75 and periods[0] == "1960Q2" and periods[-1] == "1978Q4",
          "e1 sample selection")
    return names, periods, d


def spectral_radius_of(coefs):
    comp = companion(coefs)
    return np.max(np.abs(np.linalg.eigvals(comp)))


def companion(coefs):
    p, n, _ = coefs.shape
    comp = np.zeros((n * p, n * p))
    comp[:n, :] = np.hstack(list(coefs))
    if p > 1:
        comp[n:, :-n] = np.eye(n * (p - 1))
    return comp


def simulate(rng, coefs, det, T, burn, shocks):
    """y_t = det(t) + sum_l A_l y_{t-l} + u_t, u from `shocks(rng, total)`.
    The first `burn` rows are discarded."""
    p, n, _ = coefs.shape
    total = T + burn
    u = shocks(rng, total)
    y = np.zeros((total, n))
    for t in range(total):
        acc = det(t - burn + 1).copy()  # det evaluated at the kept row index
        for lag in range(1, p + 1):
            if t - lag >= 0:
                acc += coefs[lag - 1] @ y[t - lag]
        y[t] = acc + u[t]
    return y[burn:]


def case_sim_const_data():
    """n=3, p=2, constant, GARCH(1,1)-type conditionally heteroskedastic
    errors with a fixed contemporaneous correlation (invented process)."""
    rng = np.random.RandomState(20240611)
    A1 = np.array([[0.55, 0.15, 0.00],
                   [0.10, 0.45, 0.10],
                   [0.05, 0.20, 0.40]])
    A2 = np.array([[-0.15, 0.00, 0.05],
                   [0.00, 0.10, 0.00],
                   [0.10, -0.05, -0.10]])
    coefs = np.array([A1, A2])
    c = np.array([0.5, -0.2, 0.1])
    L = np.array([[1.0, 0.0, 0.0],
                  [0.3, 0.8, 0.0],
                  [-0.2, 0.1, 0.6]])

    def shocks(rng, total):
        omega, alpha, beta = 0.1, 0.15, 0.75
        h = np.full(3, omega / (1 - alpha - beta))
        e_prev = np.zeros(3)
        out = np.zeros((total, 3))
        for t in range(total):
            h = omega + alpha * e_prev ** 2 + beta * h
            e = np.sqrt(h) * rng.standard_normal(3)
            out[t] = L @ e
            e_prev = e
        return out

    y = simulate(rng, coefs, lambda t: c, 400, 200, shocks)
    return ["y1", "y2", "y3"], list(range(1, 401)), y, coefs


def case_sim_trend_data():
    """n=2, p=3, constant + linear trend, homoskedastic Gaussian errors."""
    rng = np.random.RandomState(7031)
    A1 = np.array([[0.50, 0.10],
                   [0.20, 0.30]])
    A2 = np.array([[-0.20, 0.05],
                   [0.00, 0.15]])
    A3 = np.array([[0.10, 0.00],
                   [-0.05, 0.10]])
    coefs = np.array([A1, A2, A3])
    c = np.array([1.0, -0.5])
    d = np.array([0.02, 0.01])
    chol = np.array([[0.8, 0.0],
                     [0.3, 0.5]])

    def shocks(rng, total):
        return rng.standard_normal((total, 2)) @ chol.T

    y = simulate(rng, coefs, lambda t: c + d * t, 300, 200, shocks)
    return ["a", "b"], list(range(1, 301)), y, coefs


def case_sim_none_data():
    """n=2, p=1, no deterministic terms, homoskedastic Gaussian errors;
    A has a complex eigenvalue pair."""
    rng = np.random.RandomState(55)
    A = np.array([[0.5, -0.3],
                  [0.4, 0.4]])
    coefs = A[None]
    chol = np.array([[1.0, 0.0],
                     [0.4, 0.7]])

    def shocks(rng, total):
        return rng.standard_normal((total, 2)) @ chol.T

    y = simulate(rng, coefs, lambda t: np.zeros(2), 200, 200, shocks)
    return ["u", "v"], list(range(1, 201)), y, coefs


# ---------------------------------------------------------------------------
# Reference computations
# ---------------------------------------------------------------------------

def regressor_names(names, p, deterministic):
    out = []
    if deterministic in ("constant", "trend"):
        out.append("const")
    if deterministic == "trend":
        out.append("trend")
    for lag in range(1, p + 1):
        for v in names:
            out.append(f"L{lag}.{v}")
    return out


def system_sandwich(Z, E, kind, hac_lags=None):
    """Cross-equation sandwich covariance of theta = vec(Phi') in
    equation-major order (index eq*k + regressor), written in numpy from
    the formula (White 1980; MacKinnon & White 1985; Newey & West 1987):
        A = (Z'Z)^{-1},  g_t = e_t (x) z_t,  bread = I_n (x) A,
        HC0 meat = sum_t g_t g_t',  HC1 = HC0 * T/(T-k),
        HC2: e_t/sqrt(1-h_t),  HC3: e_t/(1-h_t),  h_t = z_t' A z_t,
        HAC meat = G_0 + sum_{l=1..L} (1 - l/(L+1)) (G_l + G_l'),
                   G_l = sum_t g_t g_{t-l}'  (no small-sample correction).
    """
    T, k = Z.shape
    n = E.shape[1]
    A = np.linalg.inv(Z.T @ Z)
    h = np.einsum("ti,ij,tj->t", Z, A, Z)
    if kind in ("HC0", "HC1", "HAC"):
        Es = E
    elif kind == "HC2":
        Es = E / np.sqrt(1.0 - h)[:, None]
    elif kind == "HC3":
        Es = E / (1.0 - h)[:, None]
    else:
        raise ValueError(kind)
    G = (Es[:, :, None] * Z[:, None, :]).reshape(T, n * k)  # row t = e_t (x) z_t
    meat = G.T @ G
    if kind == "HAC":
        L = hac_lags
        for lag in range(1, L + 1):
            Gl = G[lag:].T @ G[:-lag]
            meat += (1.0 - lag / (L + 1.0)) * (Gl + Gl.T)
    bread = np.kron(np.eye(n), A)
    V = bread @ meat @ bread
    if kind == "HC1":
        V *= T / (T - k)
    return 0.5 * (V + V.T)


def wald(theta, V, R):
    r = R @ theta
    return float(r @ np.linalg.solve(R @ V @ R.T, r))


def spectral_radius_theta(theta, n, k, kdet, p):
    Phi = theta.reshape(n, k)
    coefs = np.array([Phi[:, kdet + l * n: kdet + (l + 1) * n] for l in range(p)])
    return spectral_radius_of(coefs)


def build_case(name, names, periods, data, p, deterministic, outdir,
               true_coefs=None):
    n = len(names)
    trend_code = TREND_CODES[deterministic]
    kdet = N_DET[deterministic]
    k = kdet + n * p
    T_raw = data.shape[0]
    nobs = T_raw - p

    # -- CSV ------------------------------------------------------------
    csv_name = f"{name}.csv"
    with open(os.path.join(outdir, csv_name), "w") as fh:
        fh.write("period," + ",".join(names) + "\n")
        for per, row in zip(periods, data):
            fh.write(str(per) + "," + ",".join("%.17g" % v for v in row) + "\n")

    df = pd.DataFrame(data, columns=names)

    # -- statsmodels 0.13.5 VAR.fit ---------------------------------------
    model = VAR(df)
    res = model.fit(p, trend=trend_code)
    regs = regressor_names(names, p, deterministic)
    check(list(res.exog_names) == regs,
          f"{name}: regressor names {list(res.exog_names)} vs {regs}")
    check(res.nobs == nobs, f"{name}: nobs {res.nobs} vs {nobs}")

    Z = np.asarray(res.endog_lagged, dtype=float)          # nobs x k
    Y = np.asarray(res.endog, dtype=float)[p:]             # nobs x n
    check(Z.shape == (nobs, k), f"{name}: Z shape {Z.shape}")
    if deterministic == "trend":
        # Trend convention (statsmodels VAR, JMulTi-compatible): add_trend
        # first builds 1..nobs, then VAR._estimate_var shifts it by +p, so
        # the trend regressor at estimation row j (0-based) is p+1+j, i.e.
        # it equals the 1-based row number of the data fed to the VAR
        # (= the integer "period" column of the CSV). It does NOT start at 1.
        check(np.array_equal(Z[:, 1], np.arange(p + 1, T_raw + 1, dtype=float)),
              f"{name}: trend column convention changed")
    if kdet >= 1:
        check(np.all(Z[:, 0] == 1.0), f"{name}: const column")
    # lag block check: column kdet + (lag-1)*n + j is y_{t-lag, j}
    for lag in range(1, p + 1):
        check(np.array_equal(Z[:, kdet + (lag - 1) * n: kdet + lag * n],
                             data[p - lag: T_raw - lag]),
              f"{name}: lag block {lag}")

    Phi = np.asarray(res.params, dtype=float).T             # n x k
    sigma = np.asarray(res.sigma_u, dtype=float)
    sigma_ml = np.asarray(res.sigma_u_mle, dtype=float)
    E = Y - Z @ Phi.T
    rel_close(E, np.asarray(res.resid), 1e-9, f"{name}: residuals")
    rel_close(sigma, E.T @ E / (nobs - k), 1e-10, f"{name}: sigma_u df")
    rel_close(sigma_ml, E.T @ E / nobs, 1e-10, f"{name}: sigma_u_mle")

    # statsmodels 0.13.5 VARResults.stderr (k x n) -> n x k
    se_classical = np.asarray(res.stderr, dtype=float).T

    # statsmodels cov_params() = kron(inv(Z'Z), sigma_u): regressor-major
    # (index regressor*n + eq). Re-order to equation-major (eq*k + regressor).
    C_sm = np.asarray(res.cov_params(), dtype=float)
    perm = np.array([r * n + i for i in range(n) for r in range(k)])
    V_classical = C_sm[np.ix_(perm, perm)]
    ZZinv = np.linalg.inv(Z.T @ Z)
    rel_close(V_classical, np.kron(sigma, ZZinv), 1e-9,
              f"{name}: classical cov reorder")
    rel_close(np.sqrt(np.diag(V_classical)).reshape(n, k), se_classical,
              1e-10, f"{name}: classical se")

    # -- per-equation statsmodels 0.13.5 OLS robust SEs on the VAR's Z ----
    hac_auto = int(math.floor(4.0 * (nobs / 100.0) ** (2.0 / 9.0)))
    se = {"classical": tolist(se_classical)}
    eq_cov = {key: [] for key in ("HC0", "HC1", "HC2", "HC3", "HAC4")}
    se_arr = {}
    for key, kwargs in (("HC0", dict(cov_type="HC0")),
                        ("HC1", dict(cov_type="HC1")),
                        ("HC2", dict(cov_type="HC2")),
                        ("HC3", dict(cov_type="HC3")),
                        ("HAC4", dict(cov_type="HAC",
                                      cov_kwds={"maxlags": HAC_FIXED_LAGS})),
                        ("HAC_auto", dict(cov_type="HAC",
                                          cov_kwds={"maxlags": hac_auto}))):
        rows = []
        for i in range(n):
            ols = sm.OLS(Y[:, i], Z).fit(**kwargs)
            rel_close(ols.params, Phi[i], 1e-9, f"{name}: OLS params eq{i}")
            rows.append(np.asarray(ols.bse, dtype=float))
            if key in eq_cov:
                eq_cov[key].append(np.asarray(ols.cov_params(), dtype=float))
        se_arr[key] = np.array(rows)
        se[key] = tolist(se_arr[key])

    # -- numpy cross-equation sandwiches ---------------------------------
    system_cov = {}
    sys_V = {}
    for key in ("HC0", "HC1", "HC2", "HC3", "HAC4"):
        if key == "HAC4":
            V = system_sandwich(Z, E, "HAC", HAC_FIXED_LAGS)
        else:
            V = system_sandwich(Z, E, key)
        sys_V[key] = V
        system_cov[key] = tolist(V)
        # cross-check against per-equation statsmodels OLS
        diag_se = np.sqrt(np.diag(V)).reshape(n, k)
        elementwise_rel_close(diag_se, se_arr[key], REL_TOL,
                              f"{name}: system {key} diag vs statsmodels OLS")
        for i in range(n):
            blk = V[i * k:(i + 1) * k, i * k:(i + 1) * k]
            rel_close(blk, eq_cov[key][i], 1e-9,
                      f"{name}: system {key} block {i} vs statsmodels OLS")
    V_hac_auto = system_sandwich(Z, E, "HAC", hac_auto)
    elementwise_rel_close(np.sqrt(np.diag(V_hac_auto)).reshape(n, k),
                          se_arr["HAC_auto"], REL_TOL,
                          f"{name}: system HAC_auto diag")

    theta = Phi.reshape(-1)  # vec(Phi'), equation-major

    # -- companion eigenvalues (numpy eigvals on statsmodels coefs) ------
    coefs = np.asarray(res.coefs, dtype=float)
    eig = np.linalg.eigvals(companion(coefs))
    order = np.argsort(-np.abs(eig), kind="stable")
    eig = eig[order]
    moduli = np.abs(eig)
    # cross-check: statsmodels VARResults.roots are inverse eigenvalues
    sm_mod = np.sort(1.0 / np.abs(np.asarray(res.roots)))[::-1]
    rel_close(moduli, sm_mod, 1e-10, f"{name}: eigen moduli vs roots")
    check(moduli[0] < 1.0, f"{name}: estimated VAR not stable")

    # -- delta-method SE of the spectral radius ---------------------------
    top = eig[0]
    is_complex = abs(top.imag) > 1e-12 * max(1.0, abs(top))
    # the top eigenvalue counts as simple if no eigenvalue other than itself
    # (and its conjugate, for a complex pair) shares its modulus
    n_top = 2 if is_complex else 1
    simple_top = len(moduli) <= n_top or (moduli[0] - moduli[n_top]) > 1e-6
    spectral_se = None
    if simple_top:
        # numpy central finite differences, step 1e-6 * max(1, |theta_j|)
        grad = np.zeros_like(theta)
        for j in range(theta.size):
            if j % k < kdet:
                continue  # deterministic coefficients do not enter
            hstep = 1e-6 * max(1.0, abs(theta[j]))
            tp = theta.copy(); tp[j] += hstep
            tm = theta.copy(); tm[j] -= hstep
            grad[j] = (spectral_radius_theta(tp, n, k, kdet, p)
                       - spectral_radius_theta(tm, n, k, kdet, p)) / (2 * hstep)
        # cross-check the finite differences against the analytic
        # eigenvalue derivative d lambda / d C_ab = u_a v_b / (u^T v)
        # (u^T C = lambda u^T, C v = lambda v; C the companion), projected on
        # the modulus: d|lambda| = Re(conj(lambda) d lambda) / |lambda|
        Cm = companion(coefs)
        evals, V_r = np.linalg.eig(Cm)
        evals_l, W_l = np.linalg.eig(Cm.T)
        ir = int(np.argmin(np.abs(evals - top)))
        il = int(np.argmin(np.abs(evals_l - top)))
        v = V_r[:, ir]
        u = W_l[:, il]
        dl = np.outer(u, v) / (u @ v)
        dmod = np.real(np.conj(top) * dl) / abs(top)
        grad_an = np.zeros_like(theta)
        for i in range(n):
            grad_an[i * k + kdet: (i + 1) * k] = dmod[i, :]
        rel_close(grad, grad_an, 1e-6, f"{name}: spectral radius gradient")
        spectral_se = {
            "classical": float(np.sqrt(grad @ V_classical @ grad)),
            "HC3": float(np.sqrt(grad @ sys_V["HC3"] @ grad)),
        }

    # -- Granger causality ------------------------------------------------
    def restriction(causing, caused, lags):
        rows = []
        for lag in lags:
            for c_ing in causing:
                j = names.index(c_ing)
                for c_ed in caused:
                    i = names.index(c_ed)
                    r = np.zeros(n * k)
                    r[i * k + kdet + (lag - 1) * n + j] = 1.0
                    rows.append(r)
        return np.array(rows)

    if n == 3:
        tests = [([names[1], names[2]], [names[0]]),
                 ([names[0]], [names[1], names[2]]),
                 ([names[0]], [names[1]])]
    else:
        tests = [([names[1]], [names[0]]), ([names[0]], [names[1]])]
    granger = []
    for causing, caused in tests:
        # statsmodels 0.13.5 VARResults.test_causality(kind='wald')
        tw = res.test_causality(caused, causing, kind="wald")
        R = restriction(causing, caused, range(1, p + 1))
        q = R.shape[0]
        w_cl = wald(theta, V_classical, R)
        rel_close(w_cl, tw.test_statistic, 1e-9, f"{name}: granger wald")
        check(int(tw.df) == q, f"{name}: granger df")
        w_hc3 = wald(theta, sys_V["HC3"], R)
        # F form: W/q with df2 = nobs - k (per-equation residual df).
        # NB statsmodels' own kind='f' uses df2 = n*(nobs - k); we do not.
        tf = res.test_causality(caused, causing, kind="f")
        rel_close(tf.test_statistic, w_cl / q, 1e-9, f"{name}: granger F stat")
        f_df2 = nobs - k
        granger.append({
            "causing": list(causing),
            "caused": list(caused),
            "wald_classical": float(tw.test_statistic),
            "df": q,
            "p_value": float(tw.pvalue),
            "wald_HC3": w_hc3,
            "p_value_HC3": float(stats.chi2.sf(w_hc3, q)),
            "f_statistic": w_cl / q,
            "f_df1": q,
            "f_df2": f_df2,
            "f_p_value": float(stats.f.sf(w_cl / q, q, f_df2)),
        })

    # -- exclusion of the top lag (numpy Wald, scipy chi2) ---------------
    R = np.array([np.eye(n * k)[i * k + kdet + (p - 1) * n + j]
                  for i in range(n) for j in range(n)])
    w_cl = wald(theta, V_classical, R)
    w_hc3 = wald(theta, sys_V["HC3"], R)
    exclude_lag = {
        "lag": p,
        "wald_classical": w_cl,
        "wald_HC3": w_hc3,
        "df": n * n,
        "p_value_classical": float(stats.chi2.sf(w_cl, n * n)),
        "p_value_HC3": float(stats.chi2.sf(w_hc3, n * n)),
    }

    # -- lag-order criteria: statsmodels 0.13.5 VAR.select_order ---------
    sel = VAR(df).select_order(maxlags=PMAX_CRITERIA, trend=trend_code)
    ics = sel.ics
    p_min = 0 if trend_code != "n" else 1  # statsmodels skips p=0 for 'n'
    crit_p = {}
    for idx, pp in enumerate(range(p_min, PMAX_CRITERIA + 1)):
        crit_p[str(pp)] = {"aic": float(ics["aic"][idx]),
                           "hq": float(ics["hqic"][idx]),
                           "bic": float(ics["bic"][idx]),
                           "fpe": float(ics["fpe"][idx])}
    # cross-check one entry from the formula on the common sample
    sub = data[PMAX_CRITERIA - p:]
    r_chk = VAR(pd.DataFrame(sub, columns=names)).fit(p, trend=trend_code)
    m = p * n * n + n * kdet
    Tc = T_raw - PMAX_CRITERIA
    ld = np.linalg.slogdet(np.asarray(r_chk.sigma_u_mle))[1]
    rel_close(crit_p[str(p)]["aic"], ld + 2.0 * m / Tc, 1e-10,
              f"{name}: aic formula")
    rel_close(crit_p[str(p)]["bic"], ld + math.log(Tc) * m / Tc, 1e-10,
              f"{name}: bic formula")
    rel_close(crit_p[str(p)]["hq"], ld + 2.0 * math.log(math.log(Tc)) * m / Tc,
              1e-10, f"{name}: hq formula")
    rel_close(crit_p[str(p)]["fpe"],
              ((Tc + k) / (Tc - k)) ** n * math.exp(ld), 1e-10,
              f"{name}: fpe formula")
    criteria = {
        "pmax": PMAX_CRITERIA,
        "sample_rows": Tc,
        "parameter_count_convention":
            "m = p n^2 + n * (number of deterministic terms)",
        "fpe_convention": "((T_c + k)/(T_c - k))^n det(sigma_ml), k = p n + ndet",
        "log_det": "ln det(sigma_ml) (ML residual covariance, divides by T_c)",
        "p": crit_p,
        "selected": {("hq" if key == "hqic" else key): int(v)
                     for key, v in sel.selected_orders.items()},
    }

    case = {
        "name": name,
        "csv": csv_name,
        "variables": list(names),
        "lags": p,
        "deterministic": deterministic,
        "raw_rows": T_raw,
        "nobs": nobs,
        "k": k,
        "regressors": regs,
        "trend_first_value": (p + 1) if deterministic == "trend" else None,
        "params": tolist(Phi),
        "sigma": tolist(sigma),
        "sigma_ml": tolist(sigma_ml),
        "se": se,
        "hac_auto_lags": hac_auto,
        "system_cov": system_cov,
        "system_cov_order": "theta index = eq*k + regressor (vec(Phi'), equation-major)",
        "eigen_moduli": tolist(moduli),
        "top_eigenvalue": {"re": float(top.real), "im": float(top.imag)},
        "spectral_radius_se": spectral_se,
        "granger": granger,
        "exclude_lag": exclude_lag,
        "criteria": criteria,
    }
    if true_coefs is not None:
        case["true_spectral_radius"] = float(spectral_radius_of(true_coefs))
    return case, res


def check_e1_published(res):
    """Luetkepohl (2005), Sec. 3.2.3: estimates for the e1 VAR(2) with
    constant, sample 1960Q2-1978Q4 of log differences, printed decimals."""
    Phi = np.asarray(res.params, dtype=float).T
    nu = Phi[:, 0]
    A1_row = Phi[0, 1:4]
    A2_row = Phi[0, 4:7]
    sig4 = np.diag(np.asarray(res.sigma_u)) * 1e4
    pub = [("constant", nu, [-0.017, 0.016, 0.013], 3),
           ("A1 row 1", A1_row, [-0.320, 0.146, 0.961], 3),
           ("A2 row 1", A2_row, [-0.161, 0.115, 0.934], 3),
           ("Sigma*1e4 diag", sig4, [21.30, 1.37, 0.89], 2)]
    for label, got, want, dec in pub:
        for g, w in zip(got, want):
            check(abs(g - w) <= 0.5 * 10.0 ** (-dec) + 1e-12,
                  f"e1 {label}: {g:.6f} does not round to published {w}")
        print(f"  e1 {label:15s}: " + ", ".join(f"{g:.{dec + 3}f}" for g in got)
              + f"   (published {want})")


def main(argv):
    if len(argv) != 2:
        print(__doc__)
        return 2
    outdir = argv[1]
    os.makedirs(outdir, exist_ok=True)

    cases = []

    names, periods, d = case_e1_data()
    case, res = build_case("e1", names, periods, d, 2, "constant", outdir)
    check_e1_published(res)
    cases.append(case)

    names, periods, y, coefs = case_sim_const_data()
    case, _ = build_case("sim_const", names, periods, y, 2, "constant", outdir,
                         coefs)
    cases.append(case)

    names, periods, y, coefs = case_sim_trend_data()
    case, _ = build_case("sim_trend", names, periods, y, 3, "trend", outdir,
                         coefs)
    cases.append(case)

    names, periods, y, coefs = case_sim_none_data()
    case, _ = build_case("sim_none", names, periods, y, 1, "none", outdir,
                         coefs)
    cases.append(case)

    for c in cases:
        srse = c["spectral_radius_se"]
        print(f"  {c['name']:10s} nobs={c['nobs']:4d} k={c['k']:2d} "
              f"rho={c['eigen_moduli'][0]:.4f}"
              + (f" (true {c['true_spectral_radius']:.4f})"
                 if "true_spectral_radius" in c else "")
              + (f" se_cl={srse['classical']:.4f} se_hc3={srse['HC3']:.4f}"
                 if srse else " se=n/a"))

    generator = (
        "tests/reference/make_reference.py; "
        f"python {platform.python_version()}, statsmodels {statsmodels.__version__}, "
        f"numpy {np.__version__}, scipy {scipy.__version__}, pandas {pd.__version__}"
    )
    with open(os.path.join(outdir, "reference.json"), "w") as fh:
        json.dump({"generator": generator, "cases": cases}, fh, indent=1,
                  allow_nan=False)
        fh.write("\n")
    print(f"wrote {len(cases)} cases to {outdir}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
