"""Reference values from scipy for the bbmx fit tests.

Reads a JSON request from argv[1] and writes the answers to argv[2]. Run with
Debian's /usr/bin/python3 and python3-scipy. Each key of the request is one
check; the Go test compares the answers with its own results.
"""
import json
import sys

import numpy as np
from scipy import stats


def main():
    with open(sys.argv[1]) as f:
        req = json.load(f)
    out = {}

    x = np.array(req["gumbel"])
    loc, scale = stats.gumbel_r.fit(x)
    out["gumbel"] = [loc, scale, float(stats.gumbel_r.logpdf(x, loc, scale).sum())]

    ks = []
    for c in req["ks1"]:
        s = np.array(c["x"])
        if c["law"] == "norm":
            r = stats.kstest(s, "norm", args=(c["a"], c["b"]), method=c["method"])
        else:
            r = stats.kstest(s, "gumbel_r", args=(c["a"], c["b"]), method=c["method"])
        ks.append([r.statistic, r.pvalue])
    out["ks1"] = ks

    out["kstwo"] = [float(stats.kstwo.sf(d, n)) for n, d in req["kstwo"]]
    out["kstwobign"] = [float(stats.kstwobign.sf(t)) for t in req["kstwobign"]]

    ks2 = []
    for c in req["ks2"]:
        r = stats.ks_2samp(np.array(c["x"]), np.array(c["y"]), method="exact")
        ks2.append([r.statistic, r.pvalue])
    out["ks2"] = ks2

    r = stats.linregress(np.array(req["line"]["x"]), np.array(req["line"]["y"]))
    out["line"] = [r.slope, r.intercept, r.stderr, r.intercept_stderr, r.rvalue]

    ray = []
    for u in req["rayleigh"]:
        u = np.array(u)
        n, d = u.shape
        stat = d * n * np.sum(u.mean(axis=0) ** 2)
        ray.append([stat, float(stats.chi2.sf(stat, d))])
    out["rayleigh"] = ray

    out["sign"] = [stats.binomtest(k, n).pvalue for k, n in req["sign"]]

    m = np.array(req["moments"])
    out["moments"] = [m.mean(), m.std(ddof=1), float(stats.skew(m, bias=True))]
    out["quantile"] = [float(np.quantile(m, p)) for p in req["quantile"]]

    lin = req["linear"]
    t, y, sg = np.array(lin["t"]), np.array(lin["y"]), np.array(lin["sigma"])
    a = np.column_stack([t, np.log(t), np.ones_like(t)]) / sg[:, None]
    coef = np.linalg.lstsq(a, y / sg, rcond=None)[0]
    cov = np.linalg.inv(a.T @ a)
    chi2 = float(np.sum(((a @ coef) - y / sg) ** 2))
    out["linear"] = list(coef) + list(np.sqrt(np.diag(cov))) + [chi2]

    with open(sys.argv[2], "w") as f:
        json.dump(out, f)


if __name__ == "__main__":
    main()
