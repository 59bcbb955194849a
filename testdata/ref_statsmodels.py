#!/usr/bin/python3
"""Reference values from statsmodels (Debian python3-statsmodels) for eivfit's tests.

Reads JSON from stdin: {"task": "predict", "x": [...], "y": [...], "sy": [...] or null,
"at": [...], "confidence": 0.95} and writes, for OLS (sy null) or WLS with weights
1/sy^2 and the covariance from the stated uncertainties (cov_type="fixed scale"),
{"params": [a, b], "bse": [...], "mean": [...], "mean_se": [...],
"ci_lower": [...], "ci_upper": [...]} from get_prediction(...).summary_frame.
"""
import json
import sys

import numpy as np
import statsmodels.api as sm


def predict(req):
    x = np.asarray(req["x"], dtype=float)
    y = np.asarray(req["y"], dtype=float)
    at = np.asarray(req["at"], dtype=float)
    X = sm.add_constant(x)
    if req.get("sy") is None:
        res = sm.OLS(y, X).fit()
    else:
        w = 1.0 / np.asarray(req["sy"], dtype=float) ** 2
        res = sm.WLS(y, X, weights=w).fit(cov_type="fixed scale")
    pred = res.get_prediction(sm.add_constant(at, has_constant="add"))
    frame = pred.summary_frame(alpha=1 - float(req["confidence"]))
    return {
        "params": res.params.tolist(),
        "bse": res.bse.tolist(),
        "mean": frame["mean"].tolist(),
        "mean_se": frame["mean_se"].tolist(),
        "ci_lower": frame["mean_ci_lower"].tolist(),
        "ci_upper": frame["mean_ci_upper"].tolist(),
    }


def main():
    req = json.load(sys.stdin)
    tasks = {"predict": predict}
    json.dump(tasks[req["task"]](req), sys.stdout)


if __name__ == "__main__":
    main()
