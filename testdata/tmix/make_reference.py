#!/usr/bin/env python3
"""Reference values for the Student-t mixture fitter (fitters/tmix) and the
shared outlier rule (fitters/mixture/outlier.go).

Run from the repository root:

    python3 testdata/tmix/make_reference.py

It writes testdata/tmix/reference.json, which the Go tests read; `go test`
never runs Python. The library versions used are recorded in the output.
Pinned versions: testdata/requirements.txt.

Contents:
  f_cdf        F(p, nu) distribution function values: scipy.stats.f.cdf and
               40-digit mpmath values of the regularised incomplete beta
               function I_x(p/2, nu/2), x = p s / (p s + nu) (scipy's own value
               loses accuracy for very large nu, so the Go test compares
               against mpmath there).
  chi2_cdf     chi-square distribution function values, scipy.stats.chi2.cdf.
  outliers     two fixed two-component models (Student-t and Gaussian) and
               rows; per row the most probable component (largest
               log w_k + log f_k from scipy.stats.multivariate_t /
               multivariate_normal), the squared Mahalanobis distance delta to
               it (numpy.linalg.solve), stat = delta / p, the distribution
               function value (scipy.stats.f.cdf(stat, p, nu) or
               scipy.stats.chi2.cdf(delta, p)) and the flag at the level.
  t_fit        seeded one-dimensional data (our scenario: pump vibration
               velocity, mm/s, heavy-tailed) and scipy.stats.t.fit's maximum
               likelihood estimates (df, loc, scale) with a tight Nelder-Mead
               optimiser, plus the log-likelihood sum(scipy.stats.t.logpdf).
"""

import json
import os
import platform
import sys

import mpmath
import numpy as np
import scipy
from scipy import optimize, stats

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "reference.json")


def f_cdf_table():
    mpmath.mp.dps = 40
    rows = []
    for p in (1, 2, 3, 8, 50):
        for nu in (0.5, 1.0, 2.5, 7.0, 30.0, 1e3, 9e4, 2e5, 1e6, 1e8, 1e12):
            for q in (0.001, 0.1, 0.5, 0.9, 0.999, 0.999999):
                s = float(stats.f.ppf(q, p, nu))
                if not np.isfinite(s):
                    continue
                x = mpmath.mpf(p) * mpmath.mpf(s) / (mpmath.mpf(p) * mpmath.mpf(s) + mpmath.mpf(nu))
                exact = mpmath.betainc(mpmath.mpf(p) / 2, mpmath.mpf(nu) / 2, 0, x, regularized=True)
                rows.append({
                    "p": p, "df": nu, "s": s,
                    "scipy": float(stats.f.cdf(s, p, nu)),
                    "exact": float(exact),
                })
    return rows


def chi2_cdf_table():
    rows = []
    for p in (1, 2, 3, 8, 50):
        for q in (0.001, 0.1, 0.5, 0.9, 0.999, 0.999999):
            y = float(stats.chi2.ppf(q, p))
            rows.append({"p": p, "s": y / p, "scipy": float(stats.chi2.cdf(y, p))})
    return rows


def outlier_case(family, level, rng):
    # Our scenario: pumping station records (flow m3/h, motor current A).
    p = 2
    weights = [0.35, 0.65]
    means = [[120.0, 14.0], [310.0, 31.5]]
    covs = [
        [[400.0, 30.0], [30.0, 4.0]],
        [[900.0, -45.0], [-45.0, 6.25]],
    ]
    dfs = [3.5, 12.0] if family == "student_t" else [0.0, 0.0]
    rows = []
    for k in range(2):
        z = rng.multivariate_normal(means[k], covs[k], size=12)
        rows.extend(z.tolist())
    # Rows far from both components, and one between them.
    rows.extend([
        [120.0, 40.0], [500.0, 10.0], [215.0, 22.0], [310.0, 45.0],
        [40.0, 14.0], [1.0e4, 300.0], [300.0, 31.0], [121.0, 14.2],
    ])
    x = np.array(rows)
    comp = np.empty((len(x), 2))
    delta = np.empty((len(x), 2))
    for k in range(2):
        mu, cov = np.array(means[k]), np.array(covs[k])
        if family == "student_t":
            dist = stats.multivariate_t(loc=mu, shape=cov, df=dfs[k])
        else:
            dist = stats.multivariate_normal(mean=mu, cov=cov)
        comp[:, k] = np.log(weights[k]) + dist.logpdf(x)
        dev = x - mu
        delta[:, k] = np.einsum("ij,ij->i", dev, np.linalg.solve(cov, dev.T).T)
    label = np.argmax(comp, axis=1)
    d = delta[np.arange(len(x)), label]
    stat = d / p
    if family == "student_t":
        cdf = np.array([stats.f.cdf(s, p, dfs[k]) for s, k in zip(stat, label)])
    else:
        cdf = stats.chi2.cdf(d, p)
    return {
        "family": family,
        "level": level,
        "dim": p,
        "weights": weights,
        "means": means,
        "covs": [sum(c, []) for c in covs],
        "dfs": dfs,
        "rows": x.tolist(),
        "labels": label.tolist(),
        "stat": stat.tolist(),
        "cdf": cdf.tolist(),
        "flags": (cdf > level).tolist(),
    }


def t_fit_case():
    rng = np.random.default_rng(20240611)
    n = 400
    true = {"df": 4.0, "loc": 2.5, "scale": 0.4}
    data = true["loc"] + true["scale"] * rng.standard_t(true["df"], size=n)

    def tight(func, x0, args=(), disp=0):
        return optimize.fmin(func, x0, args=args, xtol=1e-12, ftol=1e-14,
                             maxiter=200000, maxfun=200000, disp=0)

    df, loc, scale = stats.t.fit(data, optimizer=tight)
    ll = float(np.sum(stats.t.logpdf(data, df, loc, scale)))
    return {
        "what": "pump vibration velocity (mm/s), seeded draws from a t distribution",
        "generator": {"numpy_default_rng_seed": 20240611, "n": n, **true},
        "data": data.tolist(),
        "df": float(df), "loc": float(loc), "scale": float(scale),
        "log_likelihood": ll,
    }


def main():
    rng = np.random.default_rng(7313)
    ref = {
        "generated_by": "testdata/tmix/make_reference.py",
        "versions": {
            "python": platform.python_version(),
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "mpmath": mpmath.__version__,
        },
        "f_cdf": f_cdf_table(),
        "chi2_cdf": chi2_cdf_table(),
        "outliers": [
            outlier_case("student_t", 0.99, rng),
            outlier_case("gaussian", 0.99, rng),
        ],
        "t_fit": t_fit_case(),
    }
    with open(OUT, "w") as fh:
        json.dump(ref, fh, indent=1)
        fh.write("\n")
    print("wrote", OUT, file=sys.stderr)


if __name__ == "__main__":
    main()
