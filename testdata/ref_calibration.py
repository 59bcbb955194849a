#!/usr/bin/python3
"""Reference Gauss-Markov (generalized least squares) calibration lines from
scipy.optimize.least_squares (Debian python3-scipy) for eivfit's tests.

Model (ISO/TS 28037:2010 sections 8-9): x = xi + e, y = a + b*xi + f, with the
joint covariance V of (e, f) given in full:

    V = [[Vx, D], [D, diag(uy^2)]],  D = diag(rho)  (rho_i = cov(x_i, y_i)).

The parameters (a, b, xi_1..xi_m) minimise the generalized distance
(z - zhat)' V^-1 (z - zhat), z = (x, y), written as a least-squares problem
on the residuals whitened by the lower Cholesky factor L of V (V = L L'):
r_w = L^-1 (z - zhat). Solved by least_squares ('lm', MINPACK) with the
analytic Jacobian and tolerances 1e-15; the covariance of (a, b) is the
(a, b) block of (Jw' Jw)^-1 at the solution (unscaled), chi2 = r_w' r_w.
This is independent of eivfit's method, which eliminates xi and iterates
generalized least squares on an m x m matrix.

Reads JSON {"cases": [{"x": [...], "y": [...], "vx": [[...]], "uy": [...],
"rho": [...]}]} on stdin; writes {"results": [{"a", "b", "cov": [[...]],
"chi2", "xi": [...], "status", "nfev"}]}.
"""
import json
import sys

import numpy as np
from scipy.linalg import cholesky, solve_triangular
from scipy.optimize import least_squares


def fit(case):
    x = np.asarray(case["x"], dtype=float)
    y = np.asarray(case["y"], dtype=float)
    vx = np.asarray(case["vx"], dtype=float)
    uy = np.asarray(case["uy"], dtype=float)
    m = len(x)
    rho = np.asarray(case.get("rho") or np.zeros(m), dtype=float)
    V = np.zeros((2 * m, 2 * m))
    V[:m, :m] = vx
    V[m:, m:] = np.diag(uy ** 2)
    V[:m, m:] = np.diag(rho)
    V[m:, :m] = np.diag(rho)
    L = cholesky(V, lower=True)
    z = np.concatenate([x, y])

    def resid(t):
        a, b, xi = t[0], t[1], t[2:]
        return solve_triangular(L, z - np.concatenate([xi, a + b * xi]), lower=True)

    def jac(t):
        b, xi = t[1], t[2:]
        J = np.zeros((2 * m, m + 2))
        J[:m, 2:] = -np.eye(m)
        J[m:, 0] = -1.0
        J[m:, 1] = -xi
        J[m:, 2:] = -b * np.eye(m)
        return solve_triangular(L, J, lower=True)

    b0, a0 = np.polyfit(x, y, 1)
    t0 = np.concatenate([[a0, b0], x])
    out = least_squares(resid, t0, jac=jac, method="lm", xtol=1e-15, ftol=1e-15, gtol=1e-15, max_nfev=10000)
    Jw = jac(out.x)
    cov = np.linalg.inv(Jw.T @ Jw)[:2, :2]
    r = resid(out.x)
    return {
        "a": float(out.x[0]),
        "b": float(out.x[1]),
        "cov": cov.tolist(),
        "chi2": float(r @ r),
        "xi": out.x[2:].tolist(),
        "status": int(out.status),
        "nfev": int(out.nfev),
    }


def main():
    req = json.load(sys.stdin)
    json.dump({"results": [fit(c) for c in req["cases"]]}, sys.stdout)


if __name__ == "__main__":
    main()
