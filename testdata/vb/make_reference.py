#!/usr/bin/env python3
"""Reference values for the vb fitter's tests (fitters/vb/reference_test.go).

1. Variational Gaussian mixture on Old Faithful (testdata/faithful.csv), full
   covariances, Dirichlet weight prior, started from fixed per-row labels:
   scikit-learn's BayesianGaussianMixture is made to start from the same hard
   responsibilities by overriding its parameter initialisation (it then runs
   its own update from those responsibilities, exactly as the Go fitter does).
   No covariance regularisation (reg_covar=0) and tol=0, so it runs exactly
   max_iter iterations; every prior hyperparameter is passed explicitly, with
   the values the Go fitter uses by default (data mean, unbiased data
   covariance, D degrees of freedom, mean strength 1, concentration 1/K) or
   with the case's explicit options. For each case and iteration count the
   posterior parameters are recorded, plus scikit-learn's per-iteration bound,
   which omits constant terms (the Go test checks only that the difference
   between the two bounds is constant).

2. The exact log marginal likelihood (evidence) of the one-component
   conjugate model (Normal-Wishart for full covariances; independent
   Normal-Gamma per column for diagonal; one Normal-Gamma precision shared by
   all columns for spherical) on Old Faithful with the default priors,
   computed from the identity
       log p(X) = log p(X | mu, Lambda) + log p(mu, Lambda) - log p(mu, Lambda | X)
   at two different points (mu, Lambda) with scipy.stats densities. With
   K = 1 the variational bound is exact, so the Go fitter's bound must equal it.

The Go tests read testdata/vb/reference.json and never run Python. Regenerate:

    pip install -r testdata/requirements.txt
    python3 testdata/vb/make_reference.py
"""

import json
import os
import platform
import sys
import warnings

import numpy as np
import scipy
import sklearn
from scipy import stats
from sklearn.exceptions import ConvergenceWarning
from sklearn.mixture import BayesianGaussianMixture

HERE = os.path.dirname(os.path.abspath(__file__))
DATA = os.path.join(HERE, "..", "faithful.csv")
OUT = os.path.join(HERE, "reference.json")


class FromLabels(BayesianGaussianMixture):
    """Starts from hard responsibilities given by per-row labels."""

    def _initialize_parameters(self, X, random_state, xp=None):
        resp = np.zeros((X.shape[0], self.n_components), dtype=X.dtype)
        resp[np.arange(X.shape[0]), self.start_labels] = 1.0
        self._initialize(X, resp)


def labels_for(x, rule):
    if rule == "eruptions_split_3":
        return (x[:, 0] >= 3.0).astype(int)
    if rule == "waiting_thirds":
        return np.digitize(x[:, 1], [60.0, 77.0])
    if rule == "row_mod_4":
        return np.arange(x.shape[0]) % 4
    raise ValueError(rule)


def run_case(x, case, iters):
    k = case["components"]
    d = x.shape[1]
    opts = case["options"]
    alpha = float(opts.get("concentration", 1.0 / k))
    beta0 = float(opts.get("mean_strength", 1.0))
    m0 = np.array([float(v) for v in opts["prior_mean"].split(",")]) if "prior_mean" in opts else x.mean(axis=0)
    nu0 = float(opts.get("wishart_dof", d))
    if "wishart_inverse_scale" in opts:
        s0 = np.array([float(v) for v in opts["wishart_inverse_scale"].split(",")]).reshape(d, d)
    else:
        s0 = np.cov(x, rowvar=False)  # unbiased (n-1)
    labels = labels_for(x, case["labels"])
    out = {"name": case["name"], "components": k, "labels": case["labels"],
           "options": opts, "checkpoints": []}
    for t in iters:
        bgm = FromLabels(
            n_components=k,
            covariance_type="full",
            tol=0.0,
            reg_covar=0.0,
            max_iter=t,
            n_init=1,
            weight_concentration_prior_type="dirichlet_distribution",
            weight_concentration_prior=alpha,
            mean_precision_prior=beta0,
            mean_prior=m0,
            degrees_of_freedom_prior=nu0,
            covariance_prior=s0,
            random_state=0,
        )
        bgm.start_labels = labels
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            bgm.fit(x)
        assert bgm.n_iter_ == t, (bgm.n_iter_, t)
        nu = bgm.degrees_of_freedom_
        winv = bgm.covariances_ * nu[:, None, None]  # its covariances_ are W_k^-1 / nu_k
        out["checkpoints"].append({
            "iterations": t,
            "concentration": bgm.weight_concentration_.tolist(),
            "expected_weights": bgm.weights_.tolist(),
            "mean_strength": bgm.mean_precision_.tolist(),
            "means": bgm.means_.tolist(),
            "dof": nu.tolist(),
            "inverse_scale": [w.reshape(-1).tolist() for w in winv],
            "bounds_without_constants": [float(v) for v in bgm.lower_bounds_],
        })
    return out


def evidence_full(x, m0, beta0, nu0, s0):
    n, d = x.shape
    xbar = x.mean(axis=0)
    sc = (x - xbar).T @ (x - xbar)
    bn = beta0 + n
    mn = (beta0 * m0 + n * xbar) / bn
    nun = nu0 + n
    dm = (xbar - m0)[:, None]
    sn = s0 + sc + beta0 * n / bn * (dm @ dm.T)
    w0, wn = np.linalg.inv(s0), np.linalg.inv(sn)
    vals = []
    for mu, lam in [(xbar, np.linalg.inv(np.cov(x, rowvar=False))),
                    (mn + np.array([0.1, -1.0]), nu0 * w0)]:
        cov = np.linalg.inv(lam)
        v = (stats.multivariate_normal(mu, cov).logpdf(x).sum()
             + stats.multivariate_normal(m0, cov / beta0).logpdf(mu)
             + stats.wishart(df=nu0, scale=w0).logpdf(lam)
             - stats.multivariate_normal(mn, cov / bn).logpdf(mu)
             - stats.wishart(df=nun, scale=wn).logpdf(lam))
        vals.append(float(v))
    assert abs(vals[0] - vals[1]) < 1e-9 * abs(vals[0]), vals
    return vals[0]


def evidence_gamma_block(xs, m0, beta0, a0, b0):
    """Columns xs (n x g) share one precision lambda ~ Gamma(a0, rate b0);
    mu | lambda ~ N(m0, (beta0 lambda)^-1 I), x | mu, lambda ~ N(mu, lambda^-1 I)."""
    n, g = xs.shape
    xbar = xs.mean(axis=0)
    bn = beta0 + n
    mn = (beta0 * m0 + n * xbar) / bn
    an = a0 + 0.5 * n * g
    bnr = b0 + 0.5 * (((xs - xbar) ** 2).sum() + beta0 * n / bn * ((xbar - m0) ** 2).sum())
    vals = []
    for mu, lam in [(xbar, 1.0 / xs.var(axis=0).mean()), (mn + 0.3, 2.0 * a0 / b0)]:
        sd = 1.0 / np.sqrt(lam)
        v = (stats.norm(mu, sd).logpdf(xs).sum()
             + stats.norm(m0, sd / np.sqrt(beta0)).logpdf(mu).sum()
             + stats.gamma(a0, scale=1.0 / b0).logpdf(lam)
             - stats.norm(mn, sd / np.sqrt(bn)).logpdf(mu).sum()
             - stats.gamma(an, scale=1.0 / bnr).logpdf(lam))
        vals.append(float(v))
    assert abs(vals[0] - vals[1]) < 1e-9 * abs(vals[0]), vals
    return vals[0]


def main():
    x = np.loadtxt(DATA, delimiter=",", skiprows=1)
    assert x.shape == (272, 2), x.shape
    d = x.shape[1]

    cases = [
        {"name": "two_default_priors", "components": 2, "labels": "eruptions_split_3", "options": {}},
        {"name": "three_small_concentration", "components": 3, "labels": "waiting_thirds",
         "options": {"concentration": "0.01"}},
        {"name": "four_explicit_priors", "components": 4, "labels": "row_mod_4",
         "options": {"concentration": "0.5", "mean_strength": "0.25", "prior_mean": "3,70",
                     "wishart_dof": "4.5", "wishart_inverse_scale": "2,0.5,0.5,150"}},
    ]
    iters = [1, 5, 25, 100]
    ref = {
        "generator": "testdata/vb/make_reference.py",
        "versions": {
            "python": platform.python_version(),
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "scikit-learn": sklearn.__version__,
        },
        "data": "testdata/faithful.csv",
        "sklearn_cases": [run_case(x, c, iters) for c in cases],
    }

    m0 = x.mean(axis=0)
    cov = np.cov(x, rowvar=False)
    var = np.diag(cov)
    beta0, nu0 = 1.0, float(d)
    ref["evidence_k1"] = {
        "full": evidence_full(x, m0, beta0, nu0, cov),
        "diagonal": float(sum(evidence_gamma_block(x[:, [j]], m0[[j]], beta0, nu0 / 2, var[j] / 2)
                              for j in range(d))),
        "spherical": evidence_gamma_block(x, m0, beta0, d * nu0 / 2, d * var.mean() / 2),
    }
    with open(OUT, "w") as f:
        json.dump(ref, f, indent=1)
        f.write("\n")
    print("wrote", OUT, file=sys.stderr)


if __name__ == "__main__":
    main()
