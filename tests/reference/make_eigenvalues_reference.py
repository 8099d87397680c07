#!/usr/bin/python3
"""Reference eigenvalues for the small-matrix eigenvalue routine (engine/eigenvalues.h).

Usage:  /usr/bin/python3 tests/reference/make_eigenvalues_reference.py OUTDIR

Writes OUTDIR/eigenvalues_reference.json:
  {"generator": ..., "numpy": version,
   "cases": [{"name", "kind", "a": m x m rows, "re": [...], "im": [...], "scale": ||A||_max}]}
Floats are written by json (repr: shortest text that reads back to the same double).

Source of every reference number: numpy.linalg.eigvals (LAPACK dgeev through numpy; Harris et
al. 2020, "Array programming with NumPy", Nature 585). Matrices (fixed numpy RandomState seeds,
invented): dense Gaussian matrices of sizes 1..16; companion matrices of simulated stable and
explosive VAR(p) coefficient sets (n in 1..6, p in 1..5), the shape rimwatch feeds it on every
row; matrices with known complex pairs (block rotations); badly scaled ones (entries times
1e150 and 1e-150). Defective (Jordan) matrices are left to the unit test, since any solver
recovers them only to about sqrt(eps).
"""

import json
import os
import sys

import numpy as np


def companion(coefs):
    n = coefs[0].shape[0]
    p = len(coefs)
    f = np.zeros((n * p, n * p))
    f[:n, :] = np.hstack(coefs)
    if p > 1:
        f[n:, :-n] = np.eye(n * (p - 1))
    return f


def case(name, kind, a):
    ev = np.linalg.eigvals(a)
    return {"name": name, "kind": kind, "a": a.tolist(),
            "re": [float(v) for v in ev.real], "im": [float(v) for v in ev.imag],
            "scale": float(np.max(np.abs(a))) if a.size else 0.0}


def main():
    out = sys.argv[1]
    os.makedirs(out, exist_ok=True)
    rng = np.random.RandomState(20261203)
    cases = []
    for m in range(1, 17):
        for r in range(6):
            cases.append(case("dense m=%d #%d" % (m, r), "dense", rng.standard_normal((m, m))))
    for n in range(1, 7):
        for p in range(1, 6):
            for target in (0.5, 0.95, 0.999, 1.2):
                coefs = [rng.standard_normal((n, n)) * 0.3 / (j + 1) for j in range(p)]
                f = companion(coefs)
                rho = np.max(np.abs(np.linalg.eigvals(f)))
                # Scale lag j by c^j: the eigenvalues scale by c, so rho becomes `target`.
                c = target / rho
                f = companion([coefs[j] * c ** (j + 1) for j in range(p)])
                cases.append(case("companion n=%d p=%d rho=%g" % (n, p, target), "companion", f))
    for m in (2, 4, 6, 8):
        for r in range(3):
            blocks = []
            for b in range(m // 2):
                th = rng.uniform(0.1, 3.0)
                rad = rng.uniform(0.2, 1.5)
                blocks.append(rad * np.array([[np.cos(th), -np.sin(th)], [np.sin(th), np.cos(th)]]))
            d = np.zeros((m, m))
            for b, blk in enumerate(blocks):
                d[2 * b:2 * b + 2, 2 * b:2 * b + 2] = blk
            q, _ = np.linalg.qr(rng.standard_normal((m, m)))
            cases.append(case("rotations m=%d #%d" % (m, r), "rotations", q @ d @ q.T))
    for m in (3, 6, 9):
        for factor in (1e150, 1e-150):
            cases.append(case("scaled m=%d x%g" % (m, factor), "scaled",
                              rng.standard_normal((m, m)) * factor))
    doc = {"generator": os.path.basename(__file__), "numpy": np.__version__, "cases": cases}
    with open(os.path.join(out, "eigenvalues_reference.json"), "w") as f:
        json.dump(doc, f)
    print("eigenvalues reference: %d matrices" % len(cases))


if __name__ == "__main__":
    main()
