#!/usr/bin/python3
"""Reference agreement statistics from statsmodels, scipy and numpy (Debian
python3-statsmodels, python3-scipy) for eivfit's agreement tests.

Reads JSON from stdin: {"cases": [{"subjects": [{"x": [...], "y": [...]}],
"x": [...], "y": [...], "reps": [[...]], "conf": 0.95, "z": 1.96}]} (keys
optional) and writes {"results": [{...}]} with, where the inputs are present:

  constant   replicate limits for a constant true value, Bland & Altman
             (1999, section 5.2): the within-subject variances of each method
             from statsmodels' one-way analysis of variance (anova_lm of
             value ~ C(subject), the residual mean square), the mean and
             variance of the subjects' differences of means from numpy, the
             intervals by MOVER with scipy's chi2 and t quantiles
             -> {mean, sd, sd_means, within_x, within_y, lower, upper,
                 lower_ci, upper_ci, mean_ci}
  paired     replicate limits for a changing true value, Bland & Altman
             (2007): MS_b and MS_w of d ~ C(subject) from anova_lm
             -> {mean, sd, within, between, lower, upper, lower_ci, upper_ci}
  regression Bland & Altman (1999, section 3.2) with statsmodels OLS:
             d ~ A and |residual| ~ A -> {b0, b1, b1_p, c0, c1, c1_p}
  ratio      numpy on ln y - ln x -> {mean, sd, lower, upper} back-transformed
  ccc        Lin (1989) written from the paper: moments with divisor n,
             the variance of atanh(rho_c) with n - 2 -> {ccc, lo, hi, rho, cb}
  repeat     pooled within SD with scipy chi2 interval -> {sw, lo, hi, df}
"""
import json
import math
import sys

import numpy as np
import pandas as pd
from scipy import stats
import statsmodels.api as sm
from statsmodels.formula.api import ols
from statsmodels.stats.anova import anova_lm


def chi2_ci(s2, df, conf):
    return (df * s2 / stats.chi2.ppf((1 + conf) / 2, df),
            df * s2 / stats.chi2.ppf((1 - conf) / 2, df))


def mover(comps, conf):
    v = sum(c * s2 for c, s2, _ in comps)
    dl = du = 0.0
    for c, s2, df in comps:
        lo, hi = chi2_ci(s2, df, conf)
        a, b = s2 - lo, hi - s2
        if c < 0:
            a, b = b, a
        dl += (c * a) ** 2
        du += (c * b) ** 2
    return v, max(0.0, v - math.sqrt(dl)), v + math.sqrt(du)


def limits(dbar, h, comps, z, conf):
    v, vlo, vhi = mover(comps, conf)
    sd, slo, shi = math.sqrt(v), math.sqrt(vlo), math.sqrt(vhi)
    lo, hi = dbar - z * sd, dbar + z * sd
    return {
        "sd": sd, "lower": lo, "upper": hi,
        "lower_ci": [lo - math.hypot(h, z * (shi - sd)), lo + math.hypot(h, z * (sd - slo))],
        "upper_ci": [hi - math.hypot(h, z * (sd - slo)), hi + math.hypot(h, z * (shi - sd))],
    }


def within_ms(groups):
    rows = [(i, v) for i, g in enumerate(groups) for v in g]
    df = pd.DataFrame(rows, columns=["subject", "value"])
    tab = anova_lm(ols("value ~ C(subject)", data=df).fit())
    return tab.loc["Residual", "mean_sq"], int(tab.loc["Residual", "df"])


def constant(c, conf, z):
    subs = c["subjects"]
    n = len(subs)
    d = np.array([np.mean(s["y"]) - np.mean(s["x"]) for s in subs])
    vd = d.var(ddof=1)
    comps = [(1.0, vd, n - 1)]
    out = {"sd_means": math.sqrt(vd)}
    for key in ("x", "y"):
        groups = [s[key] for s in subs]
        if any(len(g) > 1 for g in groups):
            ms, df = within_ms(groups)
            coef = 1 - np.mean([1 / len(g) for g in groups])
            comps.append((coef, ms, df))
            out["within_" + key] = math.sqrt(ms)
    h = stats.t.ppf((1 + conf) / 2, n - 1) * math.sqrt(vd / n)
    out.update(limits(d.mean(), h, comps, z, conf))
    out["mean"] = d.mean()
    out["mean_ci"] = [d.mean() - h, d.mean() + h]
    return out


def paired(c, conf, z):
    subs = c["subjects"]
    n = len(subs)
    rows = [(i, yy - xx) for i, s in enumerate(subs) for xx, yy in zip(s["x"], s["y"])]
    df = pd.DataFrame(rows, columns=["subject", "d"])
    tab = anova_lm(ols("d ~ C(subject)", data=df).fit())
    msb, msw = tab.loc["C(subject)", "mean_sq"], tab.loc["Residual", "mean_sq"]
    m = np.array([len(s["x"]) for s in subs], dtype=float)
    N = m.sum()
    lam = (N * N - (m * m).sum()) / ((n - 1) * N)
    vb = (msb - msw) / lam
    comps = [(1 / lam, msb, n - 1), (1 - 1 / lam, msw, int(N - n))]
    if vb < 0:
        vb, comps = 0.0, [(1.0, msw, int(N - n))]
    dbar = df["d"].mean()
    se = math.sqrt((vb * (m * m).sum() + msw * N) / N ** 2)
    h = stats.t.ppf((1 + conf) / 2, n - 1) * se
    out = limits(dbar, h, comps, z, conf)
    out.update({"mean": dbar, "within": math.sqrt(msw), "between": math.sqrt(vb)})
    return out


def regression(c):
    x, y = np.asarray(c["x"], float), np.asarray(c["y"], float)
    d, a = y - x, (x + y) / 2
    X = sm.add_constant(a)
    f = sm.OLS(d, X).fit()
    g = sm.OLS(np.abs(f.resid), X).fit()
    return {"b0": f.params[0], "b1": f.params[1], "b1_p": f.pvalues[1],
            "c0": g.params[0], "c1": g.params[1], "c1_p": g.pvalues[1]}


def ratio(c, z):
    d = np.log(np.asarray(c["y"], float)) - np.log(np.asarray(c["x"], float))
    m, s = d.mean(), d.std(ddof=1)
    return {"mean": math.exp(m), "sd": s, "lower": math.exp(m - z * s), "upper": math.exp(m + z * s)}


def ccc(c, conf):
    x, y = np.asarray(c["x"], float), np.asarray(c["y"], float)
    n = len(x)
    mx, my = x.mean(), y.mean()
    sxx, syy = ((x - mx) ** 2).mean(), ((y - my) ** 2).mean()
    sxy = ((x - mx) * (y - my)).mean()
    rc = 2 * sxy / (sxx + syy + (mx - my) ** 2)
    r = stats.pearsonr(x, y)[0]
    u = (mx - my) / math.sqrt(math.sqrt(sxx * syy))
    vz = ((1 - r * r) * rc * rc / ((1 - rc * rc) * r * r)
          + 2 * rc ** 3 * (1 - rc) * u * u / (r * (1 - rc * rc) ** 2)
          - rc ** 4 * u ** 4 / (2 * r * r * (1 - rc * rc) ** 2)) / (n - 2)
    h = stats.norm.ppf((1 + conf) / 2) * math.sqrt(vz)
    zc = math.atanh(rc)
    return {"ccc": rc, "lo": math.tanh(zc - h), "hi": math.tanh(zc + h), "rho": r, "cb": rc / r}


def repeat(c, conf):
    groups = [g for g in c["reps"] if len(g) > 1]
    ms, df = within_ms(groups)
    lo, hi = chi2_ci(ms, df, conf)
    return {"sw": math.sqrt(ms), "lo": math.sqrt(lo), "hi": math.sqrt(hi), "df": df}


def one(c):
    conf, z = c.get("conf", 0.95), c.get("z", 1.96)
    out = {}
    if "subjects" in c:
        out["constant"] = constant(c, conf, z)
        if all(len(s["x"]) == len(s["y"]) for s in c["subjects"]):
            out["paired"] = paired(c, conf, z)
    if "x" in c and "y" in c:
        out["regression"] = regression(c)
        out["ccc"] = ccc(c, conf)
        if min(c["x"]) > 0 and min(c["y"]) > 0:
            out["ratio"] = ratio(c, z)
    if "reps" in c:
        out["repeat"] = repeat(c, conf)
    return out


def main():
    req = json.load(sys.stdin)
    json.dump({"results": [one(c) for c in req["cases"]]}, sys.stdout)


if __name__ == "__main__":
    main()
