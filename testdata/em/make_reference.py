#!/usr/bin/env python3
"""Reference values for the em fitter's Old Faithful tests.

Fits two-component Gaussian mixtures to testdata/faithful.csv with
scikit-learn's GaussianMixture from a fixed start (weights 1/2, means (2, 55)
and (4.5, 80), both covariances equal to the unbiased sample covariance S),
with no covariance regularisation and a very tight tolerance, for each of the
four covariance structures: full and tied start from S, diagonal from the
diagonal of S, spherical from the mean of S's diagonal. Writes the starts, the
fitted parameters (covariances as full matrices), the total log-likelihood and
the library versions to testdata/em/faithful_reference.json.

The Go test (fitters/em, TestFaithfulMatchesReference) reads that JSON; it
never runs Python. Regenerate with:

    pip install -r testdata/requirements.txt
    python3 testdata/em/make_reference.py
"""

import json
import os
import platform
import sys

import numpy as np
import scipy
import sklearn
from sklearn.mixture import GaussianMixture

HERE = os.path.dirname(os.path.abspath(__file__))
DATA = os.path.join(HERE, "..", "faithful.csv")
OUT = os.path.join(HERE, "faithful_reference.json")


def fit(x, structure, sample_cov):
    k, d = 2, x.shape[1]
    weights = np.array([0.5, 0.5])
    means = np.array([[2.0, 55.0], [4.5, 80.0]])
    if structure == "full":
        covs = np.array([sample_cov, sample_cov])
        precisions = np.array([np.linalg.inv(c) for c in covs])
    elif structure == "tied":
        covs = np.array([sample_cov, sample_cov])
        precisions = np.linalg.inv(sample_cov)
    elif structure == "diag":
        v = np.diag(sample_cov)
        covs = np.array([np.diag(v), np.diag(v)])
        precisions = np.array([1 / v, 1 / v])
    elif structure == "spherical":
        v = float(np.mean(np.diag(sample_cov)))
        covs = np.array([v * np.eye(d), v * np.eye(d)])
        precisions = np.array([1 / v, 1 / v])
    gm = GaussianMixture(
        n_components=k,
        covariance_type=structure,
        tol=1e-14,
        reg_covar=0.0,
        max_iter=100000,
        n_init=1,
        weights_init=weights,
        means_init=means,
        precisions_init=precisions,
        random_state=0,
    )
    gm.fit(x)
    if not gm.converged_:
        sys.exit(f"scikit-learn did not converge ({structure})")
    fitted = gm.covariances_
    if structure == "tied":
        fitted = np.array([fitted, fitted])
    elif structure == "diag":
        fitted = np.array([np.diag(v) for v in fitted])
    elif structure == "spherical":
        fitted = np.array([v * np.eye(d) for v in fitted])
    name = {"diag": "diagonal"}.get(structure, structure)
    return {
        "structure": name,
        "start": {
            "weights": weights.tolist(),
            "means": means.tolist(),
            "covariances": covs.tolist(),
        },
        "result": {
            "iterations": int(gm.n_iter_),
            "log_likelihood": float(gm.score(x) * x.shape[0]),
            "weights": gm.weights_.tolist(),
            "means": gm.means_.tolist(),
            "covariances": fitted.tolist(),
        },
    }


def main():
    x = np.loadtxt(DATA, delimiter=",", skiprows=1)
    assert x.shape == (272, 2), x.shape
    sample_cov = np.cov(x, rowvar=False)  # unbiased (n-1) sample covariance

    ref = {
        "source": "scikit-learn GaussianMixture, no regularisation, tol 1e-14",
        "versions": {
            "python": platform.python_version(),
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "scikit-learn": sklearn.__version__,
        },
        "data": "testdata/faithful.csv",
        "fits": [fit(x, s, sample_cov) for s in ("full", "diag", "spherical", "tied")],
    }
    with open(OUT, "w") as f:
        json.dump(ref, f, indent=2, sort_keys=True)
        f.write("\n")
    for r in ref["fits"]:
        print(r["structure"], r["result"]["iterations"], r["result"]["log_likelihood"])


if __name__ == "__main__":
    main()
