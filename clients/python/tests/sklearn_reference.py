"""scikit-learn reference computations shared by the test suite and by the
benchmark ``bench/score_vs_reference.py`` (which puts this directory on
``sys.path`` to import it).

scikit-learn's own parameter, attribute and method names stay in this
module, inside the tests, and out of the client and its tools.
"""

from __future__ import annotations

from typing import Callable

import numpy as np


def gaussian_mixture_log_density(
    weights: np.ndarray, means: np.ndarray, covariances: np.ndarray
) -> Callable[[np.ndarray], np.ndarray]:
    """Returns a function mapping rows (N, D) to their log-densities (N,)
    under the full-covariance Gaussian mixture with these parameters,
    computed by scikit-learn's GaussianMixture.

    The parameters are set directly as its documented fitted attributes (no
    fit), including the Cholesky factors of the precision matrices it
    evaluates with, so the function does only the evaluation: the
    benchmark times exactly that.
    """
    from sklearn.mixture import GaussianMixture

    w = np.asarray(weights, dtype=np.float64)
    mu = np.asarray(means, dtype=np.float64)
    cov = np.asarray(covariances, dtype=np.float64)
    gm = GaussianMixture(n_components=w.shape[0], covariance_type="full")
    gm.weights_ = w
    gm.means_ = mu
    gm.covariances_ = cov
    gm.precisions_cholesky_ = np.stack([np.linalg.inv(np.linalg.cholesky(c)).T for c in cov])
    return gm.score_samples
