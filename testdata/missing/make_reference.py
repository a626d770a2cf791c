#!/usr/bin/env python3
"""Reference values for the marginal (missing-feature) evaluation and the
component matching of fitters/mixture.

Writes testdata/missing/reference.json. Run from the repository root:

    pip install -r testdata/requirements.txt
    python3 testdata/missing/make_reference.py

The Go tests read the JSON only; they never run Python.

Sources of the values:
  * marginal cases: for each row, the observed features o are those whose
    mask entry is 1. Each component's marginal is evaluated with
    scipy.stats.multivariate_normal(mean[o], cov[o, o]).logpdf (Gaussian) or
    scipy.stats.multivariate_t(loc[o], shape[o, o], df).logpdf (Student-t,
    same degrees of freedom) on the values x[o]; a row with no observed
    feature has component log-density 0. The mixture log-density and the
    posteriors combine them with scipy.special.logsumexp. The marginal
    parameters are formed here by plain numpy indexing, independently of the
    Go code.
  * conditional cases: one component (Gaussian or Student-t), a row x and a
    mask. The log-density of the conditional distribution of the unobserved
    features at x_u is evaluated as the joint log-density minus the marginal
    one, log f(x) - log f_o(x_o), both with scipy.stats.multivariate_normal /
    multivariate_t. The Go test evaluates its own conditional (location,
    scale, degrees of freedom) at x_u and compares: this checks the
    conditional parameters without restating their formulas here.
  * assignment cases: scipy.optimize.linear_sum_assignment on random cost
    matrices (square and rectangular): the column of every row (-1 when the
    row is unpaired) and the minimal total cost.
  * gaussian pairs: the closed-form Kullback-Leibler divergence between two
    Gaussians, 0.5 [tr(S2^-1 S1) + (m2-m1)' S2^-1 (m2-m1) - d + ln(|S2|/|S1|)]
    (Kullback 1959; Cover & Thomas 2006, problem 8.9 / common result), and the
    Bhattacharyya distance 1/8 (m1-m2)' S^-1 (m1-m2) + 1/2 ln(|S| / sqrt(|S1||S2|)),
    S = (S1+S2)/2 (Bhattacharyya 1943; Fukunaga 1990), both with numpy.linalg
    (solve, slogdet).
"""

import json
import os
import platform

import numpy as np
import scipy
from scipy import optimize, stats
from scipy.special import logsumexp

HERE = os.path.dirname(os.path.abspath(__file__))


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
        elif structure == "tied":
            cov = tied.copy()
        else:
            raise ValueError(structure)
        comps.append({"mean": mean, "cov": cov, "df": dfs[j] if dfs else 0.0})
    w = rng.uniform(0.5, 2.0, size=k)
    w = w / w.sum()
    for j in range(k):
        comps[j]["weight"] = float(w[j])
    comps[-1]["weight"] = float(1.0 - sum(c["weight"] for c in comps[:-1]))
    return comps


def make_rows(rng, comps, d, n):
    rows, masks = [], []
    for i in range(n):
        c = comps[i % len(comps)]
        l = np.linalg.cholesky(c["cov"])
        rows.append(c["mean"] + l @ rng.normal(size=d) * (1.0 if i % 5 else 4.0))
        if i == 0:
            m = np.ones(d, dtype=int)  # every feature observed
        elif i == 1:
            m = np.zeros(d, dtype=int)  # nothing observed
        else:
            m = (rng.uniform(size=d) < 0.6).astype(int)
        masks.append(m)
    # Rows sharing one pattern (the Go code caches factors per pattern).
    shared = np.array([1] * (d - 1) + [0])
    for _ in range(3):
        c = comps[0]
        rows.append(c["mean"] + np.linalg.cholesky(c["cov"]) @ rng.normal(size=d))
        masks.append(shared.copy())
    return np.array(rows), np.array(masks)


def component_logpdf(x, m, c, family):
    o = np.flatnonzero(m)
    if len(o) == 0:
        return 0.0
    mean = c["mean"][o]
    cov = c["cov"][np.ix_(o, o)]
    if family == "gaussian":
        return float(stats.multivariate_normal(mean=mean, cov=cov).logpdf(x[o]))
    return float(stats.multivariate_t(loc=mean, shape=cov, df=c["df"]).logpdf(x[o]))


CASES = [
    # name, family, structure, dim, k, dfs, rows
    ("gauss_full_d4_k3", "gaussian", "full", 4, 3, None, 14),
    ("gauss_diagonal_d3_k2", "gaussian", "diagonal", 3, 2, None, 10),
    ("gauss_tied_d5_k2", "gaussian", "tied", 5, 2, None, 14),
    ("t_full_d4_k2", "student_t", "full", 4, 2, [3.5, 12.0], 14),
    ("t_diagonal_d3_k3", "student_t", "diagonal", 3, 3, [0.8, 5.0, 40.0], 12),
    ("t_tied_d5_k2", "student_t", "tied", 5, 2, [2.5, 9.0], 14),
]


def build_case(rng, name, family, structure, d, k, dfs, n):
    comps = make_components(rng, structure, d, k, dfs)
    rows, masks = make_rows(rng, comps, d, n)
    comp_lp = np.array([[component_logpdf(rows[i], masks[i], c, family) for c in comps] for i in range(len(rows))])
    joint = comp_lp + np.log([c["weight"] for c in comps])
    log_dens = logsumexp(joint, axis=1)
    log_post = joint - log_dens[:, None]
    return {
        "name": name,
        "family": family,
        "structure": structure,
        "dim": d,
        "components": [
            {"weight": c["weight"], "mean": c["mean"].tolist(),
             "cov": c["cov"].ravel().tolist(), "df": float(c["df"])}
            for c in comps
        ],
        "x": rows.ravel().tolist(),
        "observed": masks.ravel().tolist(),
        "component_log_density": comp_lp.ravel().tolist(),
        "log_density": log_dens.tolist(),
        "posterior": np.exp(log_post).ravel().tolist(),
    }


COND_CASES = [
    # name, family, dim, df
    ("cond_gauss_d4", "gaussian", 4, 0.0),
    ("cond_t_d4_df3", "student_t", 4, 3.0),
    ("cond_t_d5_df0.7", "student_t", 5, 0.7),
]


def logpdf(family, x, mean, cov, df):
    if family == "gaussian":
        return float(stats.multivariate_normal(mean=mean, cov=cov).logpdf(x))
    return float(stats.multivariate_t(loc=mean, shape=cov, df=df).logpdf(x))


def conditional_cases(rng):
    out = []
    for name, family, d, df in COND_CASES:
        mean = rng.normal(scale=2.0, size=d)
        cov = spd(rng, d)
        rows = []
        for _ in range(4):
            x = mean + np.linalg.cholesky(cov) @ rng.normal(size=d) * 2.0
            m = (rng.uniform(size=d) < 0.5).astype(int)
            if m.sum() == 0:
                m[0] = 1
            if m.sum() == d:
                m[-1] = 0
            o = np.flatnonzero(m)
            lf = logpdf(family, x, mean, cov, df)
            lm = logpdf(family, x[o], mean[o], cov[np.ix_(o, o)], df)
            rows.append({"x": x.tolist(), "observed": m.tolist(), "log_conditional": lf - lm})
        out.append({"name": name, "family": family, "dim": d, "df": df,
                    "mean": mean.tolist(), "cov": cov.ravel().tolist(), "rows": rows})
    return out


def gaussian_pairs(rng):
    out = []
    for d in [1, 2, 3]:
        m1, m2 = rng.normal(size=d), rng.normal(size=d)
        s1, s2 = spd(rng, d), spd(rng, d, scale=1.5)
        diff = m2 - m1

        def kl(ma, sa, mb, sb):
            dm = mb - ma
            return float(0.5 * (np.trace(np.linalg.solve(sb, sa)) + dm @ np.linalg.solve(sb, dm) - d
                                + np.linalg.slogdet(sb)[1] - np.linalg.slogdet(sa)[1]))

        s = (s1 + s2) / 2
        bd = (diff @ np.linalg.solve(s, diff)) / 8 + 0.5 * (
            np.linalg.slogdet(s)[1] - 0.5 * (np.linalg.slogdet(s1)[1] + np.linalg.slogdet(s2)[1]))
        out.append({"dim": d, "mean1": m1.tolist(), "cov1": s1.ravel().tolist(),
                    "mean2": m2.tolist(), "cov2": s2.ravel().tolist(),
                    "kl_12": kl(m1, s1, m2, s2), "kl_21": kl(m2, s2, m1, s1),
                    "bhattacharyya": float(bd)})
    return out


def assignment_cases(rng):
    out = []
    for rows, cols in [(1, 1), (3, 3), (5, 5), (4, 6), (6, 4), (8, 8), (2, 7)]:
        cost = rng.uniform(0.0, 10.0, size=(rows, cols))
        r, c = optimize.linear_sum_assignment(cost)
        col = [-1] * rows
        for a, b in zip(r, c):
            col[int(a)] = int(b)
        out.append({
            "rows": rows, "cols": cols,
            "cost": cost.ravel().tolist(),
            "column_of_row": col,
            "total": float(cost[r, c].sum()),
        })
    return out


def main():
    rng = np.random.default_rng(20260611)
    doc = {
        "generator": "testdata/missing/make_reference.py",
        "versions": {
            "python": platform.python_version(),
            "numpy": np.__version__,
            "scipy": scipy.__version__,
        },
        "tolerance_note": "Go compares with |got-want| <= 1e-10*max(1,|want|)",
        "cases": [build_case(rng, *c) for c in CASES],
        "assignment": assignment_cases(rng),
        "conditional": conditional_cases(rng),
        "gaussian_pairs": gaussian_pairs(rng),
    }
    path = os.path.join(HERE, "reference.json")
    with open(path, "w") as f:
        json.dump(doc, f, indent=1)
        f.write("\n")
    print("wrote", path)


if __name__ == "__main__":
    main()
