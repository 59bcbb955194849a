#!/usr/bin/python3
"""The notebook route, timed on the same data as `eivfit bench` (Debian
python3-scipy and python3-numpy): scipy.odr for York-type fits and its
bootstrap in a Python loop, numpy for Deming and a vectorised Deming
bootstrap.

Usage: ref_bench.py DIR. DIR holds little-endian float64 files written by
`eivfit bench`: big_{x,y,sx,sy}.bin (n = 10^6) and small_{x,y,sx,sy}.bin
(n = 100), big.csv (the same n = 10^6 points as CSV, x,y,sx,sy: its fit
is timed alone, after reading it, against eivfit's whole run), and idx.bin (int32, B x 100 pairs-bootstrap indices, the same
resamples eivfit draws are not needed: the cost is what is compared). Prints
JSON with the best of three wall times in seconds.
"""
import json
import os
import sys
import time

import numpy as np
from scipy import odr


def load(d, name):
    return [np.fromfile(os.path.join(d, f"{name}_{c}.bin"), dtype="<f8") for c in ("x", "y", "sx", "sy")]


def best(f, reps=3):
    t = []
    for _ in range(reps):
        t0 = time.perf_counter()
        f()
        t.append(time.perf_counter() - t0)
    return min(t)


def line(beta, x):
    return beta[0] + beta[1] * x


def jac_beta(beta, x):
    return np.vstack([np.ones_like(x), x])


def jac_x(beta, x):
    return np.full_like(x, beta[1])


MODEL = odr.Model(line, fjacb=jac_beta, fjacd=jac_x)


def odr_fit(x, y, sx, sy):
    o = odr.ODR(odr.RealData(x, y, sx=sx, sy=sy), MODEL, beta0=[0.0, 1.0])
    o.set_job(fit_type=0, deriv=3)
    return o.run().beta


def deming(x, y, lam):
    xc, yc = x - x.mean(), y - y.mean()
    sxx, syy, sxy = xc @ xc, yc @ yc, xc @ yc
    d = syy - lam * sxx
    b = (d + np.sqrt(d * d + 4 * lam * sxy * sxy)) / (2 * sxy)
    return y.mean() - b * x.mean(), b


def main():
    d = sys.argv[1]
    bx, by, bsx, bsy = load(d, "big")
    x, y, sx, sy = load(d, "small")
    idx = np.fromfile(os.path.join(d, "idx.bin"), dtype="<i4").reshape(-1, len(x))
    lam = float(np.mean(sy ** 2) / np.mean(sx ** 2))
    out = {}
    out["york_fit_1e6"] = best(lambda: odr_fit(bx, by, bsx, bsy), reps=1)
    out["deming_fit_1e6"] = best(lambda: deming(bx, by, lam))
    csv = os.path.join(d, "big.csv")
    if os.path.exists(csv):
        cx, cy, csx, csy = np.loadtxt(csv, delimiter=",", skiprows=1, unpack=True)
        # The end-to-end rows' reference: the best of three, so that an
        # interruption on a shared machine does not flatter eivfit's ratio.
        out["york_fit_csv_1e6"] = best(lambda: odr_fit(cx, cy, csx, csy), reps=3)

    def odr_boot():
        for row in idx:
            odr_fit(x[row], y[row], sx[row], sy[row])
    out["york_boot_1e4x100"] = best(odr_boot, reps=1)

    def deming_boot():
        X, Y = x[idx], y[idx]
        Xc = X - X.mean(axis=1, keepdims=True)
        Yc = Y - Y.mean(axis=1, keepdims=True)
        sxx, syy, sxy = (Xc * Xc).sum(1), (Yc * Yc).sum(1), (Xc * Yc).sum(1)
        dd = syy - lam * sxx
        b = (dd + np.sqrt(dd * dd + 4 * lam * sxy * sxy)) / (2 * sxy)
        np.percentile(b, [2.5, 97.5])
    out["deming_boot_1e4x100"] = best(deming_boot)
    out["versions"] = {"numpy": np.__version__, "scipy": __import__("scipy").__version__}
    json.dump(out, sys.stdout)


if __name__ == "__main__":
    main()
