#!/usr/bin/python3
"""Write clients/examples/desk_minutes.csv: an invented example for `rimwatch fit`.

Three invented one-minute return series (percent), `alpha`, `beta` and `gamma`, simulated from a
known stable VAR(2) with a constant:

    y_t = c + A1 y_{t-1} + A2 y_{t-2} + e_t,   e_t ~ N(0, Omega) independent over t.

The numbers below are made up; they describe no market, firm or instrument. Two features are
built in so the README's first command has something to find:
  * beta does not enter the alpha equation at any lag (A1[0, 1] = A2[0, 1] = 0), so the Granger
    non-causality hypothesis beta -> alpha holds in the generating process;
  * the lag-2 block is clearly non-zero, so excluding lag 2 is false in the generating process.
The companion matrix of (A1, A2) has spectral radius about 0.6 (printed by this script; stable
means every companion eigenvalue lies inside the unit circle, Luetkepohl 2005, Sec. 2.1.1).

Run: /usr/bin/python3 clients/examples/make_desk_minutes.py [OUT.csv]
The output is deterministic (fixed seed) and is committed beside this script.
"""

import os
import sys

import numpy as np

SEED = 20240611
ROWS = 600  # bars written, numbered 1..ROWS in the `period` column
BURN_IN = 300  # simulated and discarded so the start does not depend on the zero initial values
NAMES = ("alpha", "beta", "gamma")

CONST = np.array([0.002, -0.001, 0.0015])
A1 = np.array([
    [0.35, 0.00, 0.15],
    [0.20, 0.30, 0.05],
    [0.10, 0.25, 0.30],
])
A2 = np.array([
    [-0.20, 0.00, 0.10],
    [0.10, -0.15, 0.00],
    [0.00, 0.15, -0.20],
])
# Residual covariance (percent^2): standard deviations 0.06, 0.08, 0.05 and correlations 0.3..0.5.
SD = np.array([0.06, 0.08, 0.05])
CORR = np.array([
    [1.0, 0.4, 0.3],
    [0.4, 1.0, 0.5],
    [0.3, 0.5, 1.0],
])
OMEGA = np.outer(SD, SD) * CORR


def companion(a1, a2):
    """F = [[A1, A2], [I, 0]] (Luetkepohl 2005, Sec. 2.1.1)."""
    n = a1.shape[0]
    top = np.hstack([a1, a2])
    bottom = np.hstack([np.eye(n), np.zeros((n, n))])
    return np.vstack([top, bottom])


def simulate(rng):
    n = len(NAMES)
    chol = np.linalg.cholesky(OMEGA)
    total = BURN_IN + ROWS
    y = np.zeros((total + 2, n))
    for t in range(2, total + 2):
        e = chol @ rng.standard_normal(n)
        y[t] = CONST + A1 @ y[t - 1] + A2 @ y[t - 2] + e
    return y[-ROWS:]


def main():
    here = os.path.dirname(os.path.abspath(__file__))
    out = sys.argv[1] if len(sys.argv) > 1 else os.path.join(here, "desk_minutes.csv")
    rho = max(abs(np.linalg.eigvals(companion(A1, A2))))
    if not 0.55 <= rho <= 0.65:
        sys.exit(f"spectral radius {rho:.4f} is not about 0.6; adjust A1, A2")
    y = simulate(np.random.default_rng(SEED))
    with open(out, "w", encoding="ascii", newline="\n") as f:
        f.write("# Invented example data for rimwatch: not market data. Three made-up one-minute\n")
        f.write("# return series in percent, simulated by make_desk_minutes.py (seed %d) from a\n" % SEED)
        f.write("# stable VAR(2) with constant; spectral radius %.4f; beta does not enter the\n" % rho)
        f.write("# alpha equation. Do not use it for anything but trying the tools.\n")
        f.write("period," + ",".join(NAMES) + "\n")
        for i, row in enumerate(y, start=1):
            f.write("%d,%s\n" % (i, ",".join("%.6f" % v for v in row)))
    print(f"wrote {ROWS} rows to {out}; true spectral radius {rho:.6f}")


if __name__ == "__main__":
    main()
