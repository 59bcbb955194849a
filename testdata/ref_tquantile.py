#!/usr/bin/python3
"""Two-sided quantiles of Student's t for eivfit's coverage factors:
t with P(|T_nu| <= t) = p, i.e. the (1 + p)/2 quantile.

Two independent references (Debian python3-scipy and python3-mpmath):
  "scipy":  scipy.stats.t.ppf((1 + p)/2, nu), with (1 + p)/2 formed as
            1 - (1 - p)/2 and, to keep the upper tail's digits, computed as
            -scipy.stats.t.ppf((1 - p)/2, nu) (the lower tail, by symmetry);
  "mpmath": the root in 40-digit arithmetic of
            I_{nu/(nu + t^2)}(nu/2, 1/2) = 1 - p (the two-sided tail,
            regularized incomplete beta), started from scipy's value.

Reads JSON from stdin: {"points": [[p, nu], ...]}
Writes {"scipy": [t, ...], "mpmath": [t, ...]}.
"""
import json
import sys

import mpmath as mp
from scipy import stats

mp.mp.dps = 40


def mp_quantile(p, nu, start):
    p, nu = mp.mpf(p), mp.mpf(nu)
    q = 1 - p
    half = mp.mpf(1) / 2

    def tail(t):
        return mp.betainc(nu / 2, half, 0, nu / (nu + t * t), regularized=True) - q

    return mp.findroot(tail, mp.mpf(start), tol=mp.mpf(10) ** -35)


def main():
    req = json.load(sys.stdin)
    sc, mv = [], []
    for p, nu in req["points"]:
        s = float(-stats.t.ppf((1 - p) / 2, nu))
        sc.append(s)
        mv.append(float(mp_quantile(p, nu, s)))
    json.dump({"scipy": sc, "mpmath": mv}, sys.stdout)


if __name__ == "__main__":
    main()
