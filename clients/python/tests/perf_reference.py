"""scikit-learn reference computations for the benchmark
``bench/perf_ratios.py`` (which puts this directory on ``sys.path`` to
import it), next to ``sklearn_reference.py``: scikit-learn's own parameter,
attribute and method names stay in the tests' reference code.

Nothing here is a test; pytest collects only ``test_*.py`` files.
"""

from __future__ import annotations

import warnings
from typing import Callable, Tuple

import numpy as np

Params = Tuple[np.ndarray, np.ndarray, np.ndarray]


def gaussian_mixture_evaluators(
    weights: np.ndarray, means: np.ndarray, covariances: np.ndarray
) -> Tuple[Callable[[np.ndarray], np.ndarray], Callable[[np.ndarray], np.ndarray]]:
    """Returns two functions of rows (N, D): their log-densities (N,) and
    their posterior probabilities (N, K) under the full-covariance Gaussian
    mixture with these parameters, computed by scikit-learn's
    GaussianMixture with its documented fitted attributes set directly (no
    fit), so that the functions do only the evaluation."""
    from sklearn.mixture import GaussianMixture

    w = np.asarray(weights, dtype=np.float64)
    mu = np.asarray(means, dtype=np.float64)
    cov = np.asarray(covariances, dtype=np.float64).reshape(mu.shape[0], mu.shape[1], mu.shape[1])
    gm = GaussianMixture(n_components=w.shape[0], covariance_type="full")
    gm.weights_ = w
    gm.means_ = mu
    gm.covariances_ = cov
    gm.precisions_cholesky_ = np.stack([np.linalg.inv(np.linalg.cholesky(c)).T for c in cov])
    return gm.score_samples, gm.predict_proba


def gaussian_mixture_em(x: np.ndarray, start: Params, iterations: int, ridge: float) -> Params:
    """Runs scikit-learn's EM for a full-covariance Gaussian mixture from the
    given start (weights, means, covariances) for exactly `iterations`
    iterations (tolerance 0, one initialisation, `ridge` added to the
    covariance diagonals) and returns the final weights, means and
    covariances."""
    from sklearn.exceptions import ConvergenceWarning
    from sklearn.mixture import GaussianMixture

    w, mu, cov = start
    gm = GaussianMixture(
        n_components=len(w), covariance_type="full", max_iter=iterations, tol=0.0, reg_covar=ridge, n_init=1,
        weights_init=w, means_init=mu, precisions_init=np.linalg.inv(cov),
    )
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        gm.fit(x)
    if gm.n_iter_ != iterations:
        raise RuntimeError(f"reference EM ran {gm.n_iter_} iterations, not {iterations}")
    return gm.weights_, gm.means_, gm.covariances_
