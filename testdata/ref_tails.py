#!/usr/bin/python3
"""Far-tail reference probabilities in 50-digit arithmetic (Debian
python3-mpmath) for eivfit's p-value functions, and scipy's
kstwobign.sf (Debian python3-scipy) for the Kolmogorov tail.

Reads JSON from stdin:
  {"normal_sf": [z, ...],           P(Z > z), standard normal
   "normal_cdf": [z, ...],          P(Z <= z)
   "t_two_sided": [[t, nu], ...],   P(|T_nu| >= |t|)
   "chi2_sf": [[x, k], ...],        P(chi2_k > x)
   "f_sf": [[f, d1, d2], ...],      P(F_{d1,d2} > f)
   "kolmogorov_sf": [t, ...]}       P(K > t), scipy.stats.kstwobign.sf
and writes the same keys with one float each (0.0 where the value is below
the smallest double, as a double would hold it).
"""
import json
import sys

import mpmath as mp
from scipy import stats

mp.mp.dps = 50


def fl(v):
    return float(v)


def main():
    req = json.load(sys.stdin)
    half = mp.mpf(1) / 2
    out = {
        "normal_sf": [fl(mp.erfc(mp.mpf(z) / mp.sqrt(2)) / 2) for z in req.get("normal_sf", [])],
        "normal_cdf": [fl(mp.erfc(-mp.mpf(z) / mp.sqrt(2)) / 2) for z in req.get("normal_cdf", [])],
        "t_two_sided": [
            fl(mp.betainc(mp.mpf(nu) / 2, half, 0, mp.mpf(nu) / (mp.mpf(nu) + mp.mpf(t) ** 2), regularized=True))
            for t, nu in req.get("t_two_sided", [])
        ],
        "chi2_sf": [
            fl(mp.gammainc(mp.mpf(k) / 2, mp.mpf(x) / 2, mp.inf, regularized=True)) for x, k in req.get("chi2_sf", [])
        ],
        "f_sf": [
            fl(mp.betainc(mp.mpf(d2) / 2, mp.mpf(d1) / 2, 0, mp.mpf(d2) / (mp.mpf(d2) + mp.mpf(d1) * mp.mpf(f)),
                          regularized=True))
            for f, d1, d2 in req.get("f_sf", [])
        ],
        "kolmogorov_sf": [float(stats.kstwobign.sf(t)) for t in req.get("kolmogorov_sf", [])],
    }
    json.dump(out, sys.stdout)


if __name__ == "__main__":
    main()
