#!/usr/bin/env python3
"""Reference values for the Go package fitters/mixture.

Writes testdata/mixture/reference.json. Run from the repository root:

    pip install -r testdata/requirements.txt
    python3 testdata/mixture/make_reference.py

The Go tests read the JSON only; they never run Python.

Sources of the values:
  * scipy.stats.multivariate_normal.logpdf and scipy.stats.multivariate_t.logpdf
    give the component log-densities; mixture log-densities and posteriors are
    combined with scipy.special.logsumexp.
  * scipy.spatial.distance.mahalanobis (squared) gives the distances.
  * For Student-t components with very large degrees of freedom (>= 1e6) scipy's
    formula gammaln((v+p)/2) - gammaln(v/2) - ... and log(1 + d/v) lose digits
    to cancellation, so those cases use an independent 50-digit mpmath
    evaluation of the same closed form instead (field "source": "mpmath").
    Every other case is also evaluated with mpmath and the script stops if the
    two disagree by more than 1e-11, so each value is cross-checked.
  * student_t_normalizer: log Gamma((v+p)/2) - log Gamma(v/2) - (p/2) log(v pi)
    at 50 digits with mpmath, for checking the asymptotic series in Go.
"""

import json
import os
import platform
import sys

import mpmath
import numpy as np
import scipy
from scipy import stats
from scipy.spatial import distance
from scipy.special import logsumexp

mpmath.mp.dps = 50
HERE = os.path.dirname(os.path.abspath(__file__))
LARGE_DF = 1e6


def spd(rng, d, scale=1.0):
    a = rng.normal(size=(d, d))
    s = a @ a.T / d + 0.3 * np.eye(d)
    s = s * scale
    return (s + s.T) / 2  # exactly symmetric in float64


def make_components(rng, structure, d, k, dfs):
    comps = []
    tied = spd(rng, d)
    for j in range(k):
        mean = rng.normal(scale=3.0, size=d)
        if structure == "full":
            cov = spd(rng, d, scale=0.5 + j)
        elif structure == "diagonal":
            cov = np.diag(rng.uniform(0.2, 3.0, size=d))
        elif structure == "spherical":
            cov = np.eye(d) * rng.uniform(0.2, 3.0)
        elif structure == "tied":
            cov = tied.copy()
        else:
            raise ValueError(structure)
        comps.append({"mean": mean, "cov": cov, "df": dfs[j] if dfs else 0.0})
    w = rng.uniform(0.5, 2.0, size=k)
    w = w / w.sum()
    for j in range(k):
        comps[j]["weight"] = float(w[j])
    # Make the weights sum to 1 to the last bit where possible.
    comps[-1]["weight"] = float(1.0 - sum(c["weight"] for c in comps[:-1]))
    return comps


def make_rows(rng, comps, d):
    rows = []
    for c in comps:
        rows.append(c["mean"].copy())  # exactly at the mean
        l = np.linalg.cholesky(c["cov"])
        for _ in range(3):
            rows.append(c["mean"] + l @ rng.normal(size=d))
        rows.append(c["mean"] + l @ (rng.normal(size=d) * 6.0))  # far tail
    rows.append(np.full(d, 25.0))  # far from everything
    rows.append(np.zeros(d))
    return np.array(rows)


def mp_component_logpdf(x, c, family):
    d = len(x)
    cov = mpmath.matrix([[mpmath.mpf(float(v)) for v in row] for row in c["cov"]])
    dev = mpmath.matrix([mpmath.mpf(float(x[i])) - mpmath.mpf(float(c["mean"][i])) for i in range(d)])
    sol = mpmath.lu_solve(cov, dev)
    maha = sum(dev[i] * sol[i] for i in range(d))
    logdet = mpmath.log(mpmath.det(cov))
    if family == "gaussian":
        val = -mpmath.mpf(d) / 2 * mpmath.log(2 * mpmath.pi) - logdet / 2 - maha / 2
    else:
        v = mpmath.mpf(float(c["df"]))
        val = (mpmath.loggamma((v + d) / 2) - mpmath.loggamma(v / 2)
               - mpmath.mpf(d) / 2 * mpmath.log(v * mpmath.pi) - logdet / 2
               - (v + d) / 2 * mpmath.log1p(maha / v))
    return val, maha


def scipy_component_logpdf(x, c, family):
    if family == "gaussian":
        return float(stats.multivariate_normal(mean=c["mean"], cov=c["cov"]).logpdf(x))
    return float(stats.multivariate_t(loc=c["mean"], shape=c["cov"], df=c["df"]).logpdf(x))


CASES = [
    # name, family, structure, dim, k, dfs
    ("gauss_full_d1_k1", "gaussian", "full", 1, 1, None),
    ("gauss_full_d2_k2", "gaussian", "full", 2, 2, None),
    ("gauss_full_d3_k3", "gaussian", "full", 3, 3, None),
    ("gauss_full_d5_k2", "gaussian", "full", 5, 2, None),
    ("gauss_diagonal_d3_k2", "gaussian", "diagonal", 3, 2, None),
    ("gauss_spherical_d2_k3", "gaussian", "spherical", 2, 3, None),
    ("gauss_tied_d3_k3", "gaussian", "tied", 3, 3, None),
    ("gauss_tied_d5_k2", "gaussian", "tied", 5, 2, None),
    ("t_full_d1_k1_df0.5", "student_t", "full", 1, 1, [0.5]),
    ("t_full_d2_k2", "student_t", "full", 2, 2, [3.0, 7.5]),
    ("t_diagonal_d3_k3_mixed", "student_t", "diagonal", 3, 3, [0.5, 1e8, 4.0]),
    ("t_full_d5_k2_df1e12", "student_t", "full", 5, 2, [1e12, 30.0]),
    ("t_spherical_d2_k2_threshold", "student_t", "spherical", 2, 2, [32.0, 31.9]),
    ("t_tied_d3_k2_df1e8", "student_t", "tied", 3, 2, [1e8, 2.0]),
    ("t_full_d3_k3_df1e12", "student_t", "full", 3, 3, [1e12, 1e12, 1e8]),
]


def build_case(rng, name, family, structure, d, k, dfs):
    comps = make_components(rng, structure, d, k, dfs)
    rows = make_rows(rng, comps, d)
    n = len(rows)
    big = family == "student_t" and max(dfs) >= LARGE_DF
    comp_lp = np.zeros((n, k))
    maha = np.zeros((n, k))
    for j, c in enumerate(comps):
        vi = np.linalg.inv(c["cov"])
        for i in range(n):
            mp_val, mp_maha = mp_component_logpdf(rows[i], c, family)
            sp = scipy_component_logpdf(rows[i], c, family)
            use_mp = family == "student_t" and c["df"] >= LARGE_DF
            if not use_mp and abs(sp - float(mp_val)) > 1e-11 * max(1.0, abs(sp)):
                sys.exit(f"{name}: scipy {sp!r} and mpmath {float(mp_val)!r} disagree (row {i}, comp {j})")
            comp_lp[i, j] = float(mp_val) if use_mp else sp
            md = distance.mahalanobis(rows[i], c["mean"], vi) ** 2
            if abs(md - float(mp_maha)) > 1e-9 * max(1.0, md):
                sys.exit(f"{name}: mahalanobis disagree {md} {float(mp_maha)}")
            maha[i, j] = md
    logw = np.log([c["weight"] for c in comps])
    joint = comp_lp + logw
    log_dens = logsumexp(joint, axis=1)
    log_post = joint - log_dens[:, None]
    return {
        "name": name,
        "family": family,
        "structure": structure,
        "dim": d,
        "source": "mpmath (scipy loses digits for df >= 1e6) and scipy" if big else "scipy",
        "components": [
            {"weight": c["weight"], "mean": c["mean"].tolist(),
             "cov": c["cov"].ravel().tolist(), "df": float(c["df"])}
            for c in comps
        ],
        "x": rows.ravel().tolist(),
        "component_log_density": comp_lp.ravel().tolist(),
        "mahalanobis": maha.ravel().tolist(),
        "log_density": log_dens.tolist(),
        "log_posterior": log_post.ravel().tolist(),
        "posterior": np.exp(log_post).ravel().tolist(),
    }


def normalizer_table():
    out = []
    dfs = [0.5, 1.0, 2.5, 10.0, 31.999, 32.0, 32.001, 100.0, 1e3, 1e4, 1e6,
           1e8, 1e10, 1e12, 1e15]
    for d in [1, 2, 5, 32]:
        for v in dfs:
            mv = mpmath.mpf(v)
            val = (mpmath.loggamma((mv + d) / 2) - mpmath.loggamma(mv / 2)
                   - mpmath.mpf(d) / 2 * mpmath.log(mv * mpmath.pi))
            out.append({"df": v, "dim": d, "value": float(val)})
    return out


def main():
    rng = np.random.default_rng(20240611)
    doc = {
        "generator": "testdata/mixture/make_reference.py",
        "versions": {
            "python": platform.python_version(),
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "mpmath": mpmath.__version__,
        },
        "tolerance_note": "Go compares with |got-want| <= 1e-10*max(1,|want|)",
        "cases": [build_case(rng, *c) for c in CASES],
        "student_t_normalizer": normalizer_table(),
    }
    path = os.path.join(HERE, "reference.json")
    with open(path, "w") as f:
        json.dump(doc, f, indent=1)
        f.write("\n")
    print("wrote", path)


if __name__ == "__main__":
    main()
