#!/usr/bin/python3
"""High-precision reference values for eivfit's straight lines (Debian python3-mpmath).

Every input double is taken exactly (mpmath.mpf(float) is exact) and every
sum, product and square root is carried to 50 significant digits, so the
results are the exact values of the formulas for the data as stored, to far
more digits than double precision holds. Written from the formulas:

- OLS: b = Sxy/Sxx, a = ybar - b*xbar, s^2 = SSR/(n-2), se(b)^2 = s^2/Sxx,
  se(a)^2 = s^2*(1/n + xbar^2/Sxx), se(yhat(x0))^2 = se(a)^2 + x0^2*se(b)^2
  + 2*x0*cov(a,b) with cov(a,b) = -xbar*se(b)^2, R^2 = 1 - SSR/Syy.
- Deming (error-variance ratio lam): the closed-form slope, and Fuller (1987,
  Theorem 1.3.1) large-sample variances in the form
  V(b) = (sxx*svv + suu*svv - suv^2)/((n-1)*sxx^2), V(a) = svv/n + xbar^2*V(b),
  with svv = SSR/(n-2), suu = svv/(lam+b^2), suv = -b*suu and
  sxx = Sxx/(n-1) - (n-2)*suu/(n-1).
- Weighted Deming (Linnet 1990, 1993): reweighting with w = 1/((xhat+yhat)/2)^2
  from w = 1/((x+y)/2)^2 until the slope changes by less than 1e-40.
- Jackknife: every leave-one-out fit refitted from scratch;
  se = sqrt((n-1)/n * sum((t_i - mean t)^2)), for the slope, the intercept and
  yhat(x0).

Reads JSON {"cases": [{"name", "x", "y", "lambda", "at", "weighted"}]} on stdin and
writes {"name": {"ols": {...}, "deming": {...}, "weighted_deming": {...}}}.
"""
import json
import sys

from mpmath import mp, mpf, sqrt

mp.dps = 50


def moments(x, y):
    n = len(x)
    mx = sum(x) / n
    my = sum(y) / n
    sxx = sum((a - mx) ** 2 for a in x)
    syy = sum((b - my) ** 2 for b in y)
    sxy = sum((a - mx) * (b - my) for a, b in zip(x, y))
    return n, mx, my, sxx, syy, sxy


def deming_slope(sxx, syy, sxy, lam):
    if lam is None:
        return sxy / sxx
    d = syy - lam * sxx
    return (d + sqrt(d * d + 4 * lam * sxy * sxy)) / (2 * sxy)


def line(x, y, lam):
    n, mx, my, sxx, syy, sxy = moments(x, y)
    b = deming_slope(sxx, syy, sxy, lam)
    return my - b * mx, b


def weighted_line(x, y, lam):
    w = [1 / ((a + b) / 2) ** 2 for a, b in zip(x, y)]
    prev = None
    for _ in range(500):
        sw = sum(w)
        mx = sum(wi * a for wi, a in zip(w, x)) / sw
        my = sum(wi * b for wi, b in zip(w, y)) / sw
        sxx = sum(wi * (a - mx) ** 2 for wi, a in zip(w, x))
        syy = sum(wi * (b - my) ** 2 for wi, b in zip(w, y))
        sxy = sum(wi * (a - mx) * (b - my) for wi, a, b in zip(w, x, y))
        b = deming_slope(sxx, syy, sxy, lam)
        a = my - b * mx
        if prev is not None and abs(b - prev) <= mpf(10) ** -40 * abs(b):
            return a, b, w
        prev = b
        den = lam + b * b
        w = []
        for xi, yi in zip(x, y):
            d = yi - a - b * xi
            lev = (xi + b * d / den + yi - lam * d / den) / 2
            w.append(1 / lev ** 2)
    raise RuntimeError("weighted Deming did not converge")


def jackknife(x, y, at, fit):
    n = len(x)
    lines = [fit(x[:i] + x[i + 1:], y[:i] + y[i + 1:]) for i in range(n)]

    def se(v):
        m = sum(v) / n
        return sqrt(mpf(n - 1) / n * sum((t - m) ** 2 for t in v))

    return {
        "jk_se_a": se([l[0] for l in lines]),
        "jk_se_b": se([l[1] for l in lines]),
        "jk_pred_se": [se([l[0] + l[1] * x0 for l in lines]) for x0 in at],
        "loo_b": [l[1] for l in lines],
    }


def ols(x, y, at):
    n, mx, my, sxx, syy, sxy = moments(x, y)
    b = sxy / sxx
    a = my - b * mx
    ssr = sum((yi - a - b * xi) ** 2 for xi, yi in zip(x, y))
    s2 = ssr / (n - 2)
    vb = s2 / sxx
    va = s2 * (mpf(1) / n + mx * mx / sxx)
    cov = -mx * vb
    out = {"a": a, "b": b, "se_a": sqrt(va), "se_b": sqrt(vb), "resid_sd": sqrt(s2),
           "r2": 1 - ssr / syy,
           "pred_se": [sqrt(va + x0 * x0 * vb + 2 * x0 * cov) for x0 in at]}
    out.update(jackknife(x, y, at, lambda u, v: line(u, v, None)))
    return out


def deming(x, y, lam, at):
    n, mx, my, sxx, syy, sxy = moments(x, y)
    b = deming_slope(sxx, syy, sxy, lam)
    a = my - b * mx
    ssr = sum((yi - a - b * xi) ** 2 for xi, yi in zip(x, y))
    svv = ssr / (n - 2)
    suu = svv / (lam + b * b)
    suv = -b * suu
    sxt = sxx / (n - 1) - (n - 2) * suu / (n - 1)
    vb = (sxt * svv + suu * svv - suv * suv) / ((n - 1) * sxt * sxt)
    va = svv / n + mx * mx * vb
    cov = -mx * vb
    out = {"a": a, "b": b, "se_a": sqrt(va), "se_b": sqrt(vb), "resid_sd": sqrt(svv),
           "pred_se": [sqrt(va + x0 * x0 * vb + 2 * x0 * cov) for x0 in at]}
    out.update(jackknife(x, y, at, lambda u, v: line(u, v, lam)))
    return out


def weighted_deming(x, y, lam, at):
    a, b, w = weighted_line(x, y, lam)
    n = len(x)
    rel = sum(wi * (yi - a - b * xi) ** 2 for wi, xi, yi in zip(w, x, y))
    out = {"a": a, "b": b, "resid_sd": sqrt(rel / (n - 2))}
    out.update(jackknife(x, y, at, lambda u, v: weighted_line(u, v, lam)[:2]))
    return out


def floats(v):
    if isinstance(v, dict):
        return {k: floats(u) for k, u in v.items()}
    if isinstance(v, list):
        return [floats(u) for u in v]
    return float(v)


def main():
    req = json.load(sys.stdin)
    res = {}
    for c in req["cases"]:
        x = [mpf(v) for v in c["x"]]
        y = [mpf(v) for v in c["y"]]
        lam = mpf(c["lambda"])
        at = [mpf(v) for v in c["at"]]
        r = {"ols": ols(x, y, at), "deming": deming(x, y, lam, at)}
        if c.get("weighted"):
            r["weighted_deming"] = weighted_deming(x, y, lam, at)
        res[c["name"]] = floats(r)
    json.dump(res, sys.stdout)


if __name__ == "__main__":
    main()
