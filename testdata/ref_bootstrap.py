#!/usr/bin/python3
"""BCa and percentile bootstrap intervals from scipy.stats.bootstrap (Debian
python3-scipy) for eivfit's tests.

Reads JSON from stdin: {"x": [...], "y": [...], "statistic": "ols_slope" |
"deming_slope", "lambda": 1.0, "n_resamples": 20000, "confidence": 0.95,
"seed": 1} and writes {"bca": [lo, hi], "percentile": [lo, hi],
"standard_error": se}. The statistic is computed on paired resamples
(paired=True), the pairs bootstrap.
"""
import json
import sys

import numpy as np
from scipy import stats


def ols_slope(x, y):
    xc = x - x.mean()
    return np.sum(xc * (y - y.mean())) / np.sum(xc * xc)


def deming_slope(lam):
    def f(x, y):
        xc, yc = x - x.mean(), y - y.mean()
        sxx, syy, sxy = np.sum(xc * xc), np.sum(yc * yc), np.sum(xc * yc)
        d = syy - lam * sxx
        return (d + np.sqrt(d * d + 4 * lam * sxy * sxy)) / (2 * sxy)
    return f


def main():
    req = json.load(sys.stdin)
    x = np.asarray(req["x"], dtype=float)
    y = np.asarray(req["y"], dtype=float)
    stat = ols_slope if req["statistic"] == "ols_slope" else deming_slope(float(req["lambda"]))
    out = {}
    for method in ("BCa", "percentile"):
        res = stats.bootstrap((x, y), stat, paired=True, vectorized=False,
                              n_resamples=int(req["n_resamples"]),
                              confidence_level=float(req["confidence"]),
                              method=method, random_state=np.random.default_rng(int(req["seed"])))
        ci = res.confidence_interval
        out[method.lower()] = [float(ci.low), float(ci.high)]
        out["standard_error"] = float(res.standard_error)
    json.dump(out, sys.stdout)


if __name__ == "__main__":
    main()
