#!/usr/bin/python3
"""Reference test statistics from scipy.stats and statsmodels (Debian
python3-scipy, python3-statsmodels) for eivfit's diagnostics tests.

Reads JSON from stdin: {"cases": [{"x": [...], "y": [...], "e": [...],
"level": [...], "above": [...], "below": [...]}]} (every key optional) and
writes {"results": [{...}]} with, where the inputs are present:
  shapiro        scipy.stats.shapiro(e)                 -> [W, p]
  kendall        scipy.stats.kendalltau(x, y)           -> [tau, p]  (method "auto")
  spearman       scipy.stats.spearmanr(x, y)            -> [rho, p]
  durbin_watson  statsmodels.stats.stattools.durbin_watson(e)
  breusch_pagan  statsmodels.stats.diagnostic.het_breuschpagan(e, [1, level]) -> [lm, p]
  runs           statsmodels.sandbox.stats.runs.runstest_1samp(e, cutoff=0, correction=False) -> [z, p]
  ks             scipy.stats.ks_2samp(above, below).statistic, and
                 scipy.stats.kstwobign.sf(sqrt(l*L/(l+L)) * D)
"""
import json
import math
import sys

import numpy as np
from scipy import stats
from statsmodels.sandbox.stats.runs import runstest_1samp
from statsmodels.stats.diagnostic import het_breuschpagan
from statsmodels.stats.stattools import durbin_watson


def one(c):
    out = {}
    if "e" in c:
        e = np.asarray(c["e"], dtype=float)
        w, p = stats.shapiro(e)
        out["shapiro"] = [float(w), float(p)]
        out["durbin_watson"] = float(durbin_watson(e))
        z, p = runstest_1samp(e, cutoff=0, correction=False)
        out["runs"] = [float(z), float(p)]
        if "level" in c:
            lev = np.asarray(c["level"], dtype=float)
            lm, lmp, _, _ = het_breuschpagan(e, np.column_stack([np.ones_like(lev), lev]))
            out["breusch_pagan"] = [float(lm), float(lmp)]
    if "x" in c and "y" in c:
        x = np.asarray(c["x"], dtype=float)
        y = np.asarray(c["y"], dtype=float)
        t, p = stats.kendalltau(x, y)
        out["kendall"] = [float(t), float(p)]
        r, p = stats.spearmanr(x, y)
        out["spearman"] = [float(r), float(p)]
    if "above" in c and "below" in c:
        a = np.asarray(c["above"], dtype=float)
        b = np.asarray(c["below"], dtype=float)
        d = stats.ks_2samp(a, b).statistic
        en = len(a) * len(b) / (len(a) + len(b))
        out["ks"] = [float(d), float(stats.kstwobign.sf(math.sqrt(en) * d))]
    return out


def main():
    req = json.load(sys.stdin)
    json.dump({"results": [one(c) for c in req["cases"]]}, sys.stdout)


if __name__ == "__main__":
    main()
