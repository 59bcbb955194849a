#!/usr/bin/python3
"""The global minimum of York's objective over the slope, for eivfit's tests,
by brute force: a dense scan of the slope angle in double precision (numpy),
then every local minimum of the scan polished in 50-digit arithmetic (Debian
python3-mpmath).

S(b) = min over a of sum W_i (y_i - a - b x_i)^2, W_i = 1/(sy_i^2 + b^2 sx_i^2
- 2 b r_i sx_i sy_i) (York et al. 2004, Am. J. Phys. 72:367, Section II).
With b = tan(t) and every term multiplied through by cos(t)^2, S is a smooth
pi-periodic function of the line angle t, also at vertical lines.

Reads JSON from stdin: {"angles": M, "cases": [{"x": [...], "y": [...],
"sx": [...], "sy": [...], "r": [...] or null}]} and writes {"results":
[{"slope": b, "intercept": a, "chi2": S, "minima": [[b, S], ...]}]}, the
minima sorted by S, the first the global one.
"""
import json
import sys

import mpmath
import numpy as np

mpmath.mp.dps = 50


def profile_np(t, x, y, sx, sy, rho):
    """S at the angles t (a vector), in double precision."""
    c, s = np.cos(t)[:, None], np.sin(t)[:, None]
    d = c * c * sy * sy + s * s * sx * sx - 2 * c * s * rho
    with np.errstate(divide="ignore", invalid="ignore"):
        w = 1 / d
        e = c * y - s * x
        sw = w.sum(axis=1)
        k = (w * e).sum(axis=1) / sw
        out = (w * (e - k[:, None]) ** 2).sum(axis=1)
    out[~np.isfinite(out) | (d <= 0).any(axis=1)] = np.inf
    return out


def profile_mp(t, pts):
    """S at the angle t and the line's intercept, in 50 digits."""
    c, s = mpmath.cos(t), mpmath.sin(t)
    ws, es = [], []
    for x, y, sx, sy, rho in pts:
        ws.append(1 / (c * c * sy * sy + s * s * sx * sx - 2 * c * s * rho))
        es.append(c * y - s * x)
    sw = mpmath.fsum(ws)
    k = mpmath.fsum(w * e for w, e in zip(ws, es)) / sw
    return mpmath.fsum(w * (e - k) ** 2 for w, e in zip(ws, es)), k / c


def golden(lo, hi, pts):
    """Golden-section search for the minimum of S on [lo, hi] to 1e-22 in angle
    (S is located to about the square root of the working precision)."""
    g = (mpmath.sqrt(5) - 1) / 2
    a, b = mpmath.mpf(lo), mpmath.mpf(hi)
    m1, m2 = b - g * (b - a), a + g * (b - a)
    f1, f2 = profile_mp(m1, pts)[0], profile_mp(m2, pts)[0]
    while b - a > mpmath.mpf("1e-22"):
        if f1 < f2:
            b, m2, f2 = m2, m1, f1
            m1 = b - g * (b - a)
            f1 = profile_mp(m1, pts)[0]
        else:
            a, m1, f1 = m1, m2, f2
            m2 = a + g * (b - a)
            f2 = profile_mp(m2, pts)[0]
    return (a + b) / 2


def solve(case, m):
    x = np.asarray(case["x"], dtype=float)
    y = np.asarray(case["y"], dtype=float)
    sx = np.asarray(case["sx"], dtype=float)
    sy = np.asarray(case["sy"], dtype=float)
    r = np.asarray(case["r"] if case.get("r") is not None else np.zeros(len(x)), dtype=float)
    rho = r * sx * sy
    # Centre at the means: S is unchanged, the sums cancel less.
    xc, yc = x.mean(), y.mean()
    h = np.pi / m
    t = -np.pi / 2 + (np.arange(m) + 0.5) * h
    s = profile_np(t, x - xc, y - yc, sx, sy, rho)
    pts = [tuple(mpmath.mpf(float(v)) for v in p) for p in zip(x, y, sx, sy, rho)]
    mxc, myc = mpmath.mpf(float(xc)), mpmath.mpf(float(yc))
    ptsc = [(px - mxc, py - myc, a, b, c) for px, py, a, b, c in pts]
    minima = []
    for i in range(m):
        lo, hi = s[i - 1], s[(i + 1) % m]
        if not (s[i] <= lo and s[i] < hi):
            continue
        ti = golden(t[i] - h, t[i] + h, ptsc)
        si, _ = profile_mp(ti, ptsc)
        b = mpmath.tan(ti)
        # The intercept from the uncentred points.
        _, a = profile_mp(ti, pts)
        minima.append((si, b, a))
    minima.sort(key=lambda v: v[0])
    best = minima[0]
    return {
        "slope": float(best[1]),
        "intercept": float(best[2]),
        "chi2": float(best[0]),
        "minima": [[float(b), float(si)] for si, b, _ in minima],
    }


def main():
    req = json.load(sys.stdin)
    m = int(req.get("angles", 20000))
    json.dump({"results": [solve(c, m) for c in req["cases"]]}, sys.stdout)


if __name__ == "__main__":
    main()
