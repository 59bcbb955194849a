#!/usr/bin/python3
"""Reference fits from scipy.odr (ODRPACK; Debian python3-scipy) for eivfit's tests.

Reads JSON from stdin: {"cases": [{"x": [...], "y": [...], "sx": [...], "sy": [...]}],
"tls": [{"x": [...], "y": [...], "lambda": ...}]} and writes {"results": [{"beta": [a, b],
"cov_beta": [[...]], "sd_beta": [...], "res_var": ..., "sum_square": ..., "info": ...}],
"tls": [{"beta": [a, b]}]}.

Settings: explicit ODR (fit_type 0) with analytic derivatives (set_job deriv=2,
which also has ODRPACK check them), sstol = partol = 1e-15 and maxit = 1000:
scipy's defaults (finite differences, loose tolerances) stop short of the
precision eivfit is held to. cov_beta is unscaled; sd_beta is scaled by the
residual variance res_var = sum_square/(n - 2).
"""
import json
import sys

import numpy as np
from scipy import odr


def line(beta, x):
    return beta[0] + beta[1] * x


def jac_beta(beta, x):
    return np.vstack([np.ones_like(x), x])


def jac_x(beta, x):
    return np.full_like(x, beta[1])


def fit(case):
    x = np.asarray(case["x"], dtype=float)
    y = np.asarray(case["y"], dtype=float)
    sx = np.asarray(case["sx"], dtype=float)
    sy = np.asarray(case["sy"], dtype=float)
    data = odr.RealData(x, y, sx=sx, sy=sy)
    model = odr.Model(line, fjacb=jac_beta, fjacd=jac_x)
    beta0 = case.get("beta0") or list(np.polyfit(x, y, 1)[::-1])
    o = odr.ODR(data, model, beta0=beta0, sstol=1e-15, partol=1e-15, maxit=1000)
    o.set_job(fit_type=0, deriv=2)
    out = o.run()
    return {
        "beta": out.beta.tolist(),
        "cov_beta": out.cov_beta.tolist(),
        "sd_beta": out.sd_beta.tolist(),
        "res_var": float(out.res_var),
        "sum_square": float(out.sum_square),
        "info": int(out.info),
        "stopreason": list(out.stopreason),
    }


def tls(case):
    """Deming line by total least squares through numpy's SVD: with y scaled
    by 1/sqrt(lambda) the Deming line is the first principal axis of the
    centred data (an algorithm independent of the closed form and of ODRPACK)."""
    x = np.asarray(case["x"], dtype=float)
    y = np.asarray(case["y"], dtype=float)
    lam = float(case["lambda"])
    ys = y / np.sqrt(lam)
    m = np.column_stack([x - x.mean(), ys - ys.mean()])
    _, _, vt = np.linalg.svd(m, full_matrices=False)
    vx, vy = vt[0]
    b = (vy / vx) * np.sqrt(lam)
    return {"beta": [float(y.mean() - b * x.mean()), float(b)]}


def main():
    req = json.load(sys.stdin)
    out = {"results": [fit(c) for c in req.get("cases", [])],
           "tls": [tls(c) for c in req.get("tls", [])]}
    json.dump(out, sys.stdout)


if __name__ == "__main__":
    main()
