#!/usr/bin/env python3
"""Reference values for the vb fitter's tied structure
(fitters/vb/reference_test.go, TestTiedBoundEqualsLabelledEvidence).

Data: three groups of 2-D rows generated here with numpy (seed below), far
apart (300 units between centres, spreads of about 1), with one covariance
shared by the groups. With groups that far apart the variational
responsibilities are exactly 0 or 1 in floating point, q(Z) is the labels,
and the variational distribution of the weights, means and the shared
precision is the exact conjugate posterior given those labels. The bound
then equals log p(X, Z) = log p(X | Z) + log p(Z):

- log p(Z) under the symmetric Dirichlet(alpha0) prior, with scipy.special.gammaln:
      gammaln(K alpha0) - gammaln(N + K alpha0) + sum_k [gammaln(N_k + alpha0) - gammaln(alpha0)]
- log p(X | Z) of the tied Normal-Wishart model (Lambda ~ Wishart(W0, nu0),
  mu_k | Lambda ~ N(m0, (beta0 Lambda)^-1), x | z=k ~ N(mu_k, Lambda^-1)) from
      log p(X|Z) = log p(X | Z, mu, Lambda) + log p(mu, Lambda) - log p(mu, Lambda | X, Z)
  at two different points (mu, Lambda) with scipy.stats densities; the two
  values must agree, which checks the posterior used in the last term
  (nu_N = nu0 + N; W_N^-1 = W0^-1 + sum_k [S_k + beta0 N_k / beta_k (xbar_k - m0)(xbar_k - m0)^T];
  m_k = (beta0 m0 + N_k xbar_k) / beta_k; beta_k = beta0 + N_k).

Every prior hyperparameter is passed to the Go fitter explicitly (options).
The Go test reads testdata/vb/tied_reference.json and never runs Python.
Regenerate:

    pip install -r testdata/requirements.txt
    python3 testdata/vb/make_tied_reference.py
"""

import json
import os
import platform
import sys

import numpy as np
import scipy
from scipy import special, stats

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "tied_reference.json")
SEED = 20261201


def main():
    rng = np.random.default_rng(SEED)
    shared = np.array([[1.0, 0.3], [0.3, 0.5]])
    centres = np.array([[0.0, 0.0], [300.0, 0.0], [0.0, 300.0]])
    sizes = [25, 20, 15]
    rows, labels = [], []
    for k, (c, n) in enumerate(zip(centres, sizes)):
        rows.append(rng.multivariate_normal(c, shared, size=n))
        labels += [k] * n
    x = np.vstack(rows)
    z = np.array(labels)
    n, d = x.shape
    k = len(sizes)

    alpha0, beta0, nu0 = 1.0, 1e-6, 3.0
    m0 = np.array([100.0, 100.0])
    s0 = np.array([[0.5, 0.1], [0.1, 0.4]])  # W0^-1

    nk = np.array([np.sum(z == j) for j in range(k)], dtype=float)
    xbar = np.array([x[z == j].mean(axis=0) for j in range(k)])
    betak = beta0 + nk
    mk = (beta0 * m0 + nk[:, None] * xbar) / betak[:, None]
    sn = s0.copy()
    for j in range(k):
        dx = x[z == j] - xbar[j]
        dm = (xbar[j] - m0)[:, None]
        sn += dx.T @ dx + beta0 * nk[j] / betak[j] * (dm @ dm.T)
    nun = nu0 + n
    w0, wn = np.linalg.inv(s0), np.linalg.inv(sn)

    def log_joint_given_labels(mu, lam):
        cov = np.linalg.inv(lam)
        v = stats.wishart(df=nu0, scale=w0).logpdf(lam) - stats.wishart(df=nun, scale=wn).logpdf(lam)
        for j in range(k):
            v += stats.multivariate_normal(mu[j], cov).logpdf(x[z == j]).sum()
            v += stats.multivariate_normal(m0, cov / beta0).logpdf(mu[j])
            v -= stats.multivariate_normal(mk[j], cov / betak[j]).logpdf(mu[j])
        return float(v)

    vals = [
        log_joint_given_labels(xbar, np.linalg.inv(shared)),
        log_joint_given_labels(mk + np.array([0.2, -0.1]), nun * wn),
    ]
    assert abs(vals[0] - vals[1]) < 1e-9 * abs(vals[0]), vals
    log_pz = float(special.gammaln(k * alpha0) - special.gammaln(n + k * alpha0)
                   + np.sum(special.gammaln(nk + alpha0) - special.gammaln(alpha0)))

    ref = {
        "generator": "testdata/vb/make_tied_reference.py",
        "versions": {"python": platform.python_version(), "numpy": np.__version__, "scipy": scipy.__version__},
        "seed": SEED,
        "rows": x.tolist(),
        "labels": z.tolist(),
        "options": {
            "concentration": repr(alpha0),
            "mean_strength": repr(beta0),
            "wishart_dof": repr(nu0),
            "prior_mean": ",".join(repr(float(v)) for v in m0),
            "wishart_inverse_scale": ",".join(repr(float(v)) for v in s0.reshape(-1)),
        },
        "log_p_x_given_z": vals[0],
        "log_p_z": log_pz,
        "log_p_x_and_z": vals[0] + log_pz,
        "dof": nun,
        "inverse_scale": sn.reshape(-1).tolist(),
        "means": mk.tolist(),
        "expected_weights": ((nk + alpha0) / (n + k * alpha0)).tolist(),
    }
    with open(OUT, "w") as f:
        json.dump(ref, f, indent=1)
        f.write("\n")
    print("wrote", OUT, file=sys.stderr)


if __name__ == "__main__":
    main()
