"""EM fits through the daemon equal scikit-learn's GaussianMixture from the
same start, for all four covariance structures, on three open data sets:

- Fisher's iris data (Fisher, R. A. (1936), The use of multiple measurements
  in taxonomic problems, Annals of Eugenics 7:179-188), as shipped by
  scikit-learn (sklearn.datasets.load_iris);
- the wine recognition data (Forina, M. et al., PARVUS, via the UCI Machine
  Learning Repository, "Wine" data set), as shipped by scikit-learn
  (sklearn.datasets.load_wine);
- Old Faithful (Azzalini and Bowman, 1990; testdata/faithful.csv, provenance
  in testdata/faithful.md).

Both sides start from the same parameters (iris and wine: the class
proportions, class means and class covariances of the known labels, reduced
to each structure; Old Faithful: the start of fitters/em's reference test),
use no covariance regularisation, and run exactly the same number of EM
iterations: ours with a tight tolerance (1e-12 nats per row) and a cap of
2000, then scikit-learn with max_iter equal to the iterations ours ran and
tol=0, so that both have made the same number of M-steps from the same start.

Definitions checked to agree (scikit-learn 1.9 source and documentation):
"spherical" is one variance per component (covariances_ shape (K,)), "tied"
one full matrix shared by all components (shape (D, D)), "diag" a diagonal
matrix per component (shape (K, D)), "full" a full matrix per component.

Tolerances: weights 1e-6 absolute; means 1e-6 relative to
max(|mean|, the feature's standard deviation); covariance entries 1e-6
relative to sqrt(S_ii S_jj) of the reference; total log-likelihood 1e-8
absolute (the reference's is scikit-learn's score(X) times N, recomputed at
its final parameters).
"""

from __future__ import annotations

import warnings
from typing import Optional, Tuple

import numpy as np
import pytest

import mixd

from _reference import STRUCTURES
from conftest import TESTDATA

sklearn_datasets = pytest.importorskip("sklearn.datasets")
sklearn_mixture = pytest.importorskip("sklearn.mixture")
from sklearn.exceptions import ConvergenceWarning  # noqa: E402

# scikit-learn's names for our structures (used only here, in the reference).
SK_TYPE = {"full": "full", "diagonal": "diag", "spherical": "spherical", "tied": "tied"}

MAX_ITERATIONS = 2000
TOLERANCE = 1e-12


def _load(name: str) -> Tuple[np.ndarray, Optional[np.ndarray]]:
    """Rows and starting labels (None for Old Faithful)."""
    if name == "iris":
        b = sklearn_datasets.load_iris()
        return np.asarray(b.data, dtype=np.float64), np.asarray(b.target)
    if name == "wine":
        b = sklearn_datasets.load_wine()
        return np.asarray(b.data, dtype=np.float64), np.asarray(b.target)
    x = np.loadtxt(TESTDATA / "faithful.csv", delimiter=",", skiprows=1)
    assert x.shape == (272, 2)
    return x, None


def _start(x: np.ndarray, labels: Optional[np.ndarray], structure: str) -> Tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Weights, means and (K, D, D) covariances of the start."""
    n, d = x.shape
    if labels is None:
        # fitters/em reference start: weights 1/2, means (2, 55), (4.5, 80),
        # covariances the unbiased sample covariance.
        w = np.array([0.5, 0.5])
        mu = np.array([[2.0, 55.0], [4.5, 80.0]])
        s = np.cov(x, rowvar=False)
        covs = np.stack([s, s])
    else:
        ks = np.unique(labels)
        w = np.array([np.mean(labels == k) for k in ks])
        mu = np.stack([x[labels == k].mean(axis=0) for k in ks])
        covs = np.stack([np.cov(x[labels == k], rowvar=False, bias=True) for k in ks])
        if structure == "tied":
            pooled = sum(np.sum(labels == k) * covs[i] for i, k in enumerate(ks)) / n
            covs = np.stack([pooled for _ in ks])
    if structure == "diagonal":
        covs = np.stack([np.diag(np.diag(c)) for c in covs])
    elif structure == "spherical":
        covs = np.stack([np.mean(np.diag(c)) * np.eye(d) for c in covs])
    covs = (covs + np.transpose(covs, (0, 2, 1))) / 2
    w = w / w.sum()
    return w, mu, covs


def _sk_precisions(covs: np.ndarray, structure: str) -> np.ndarray:
    if structure == "full":
        return np.stack([np.linalg.inv(c) for c in covs])
    if structure == "tied":
        return np.linalg.inv(covs[0])
    if structure == "diagonal":
        return np.stack([1.0 / np.diag(c) for c in covs])
    return np.array([1.0 / c[0, 0] for c in covs])


def _sk_covariances(cov: np.ndarray, structure: str, k: int, d: int) -> np.ndarray:
    """scikit-learn's covariances_ as (K, D, D)."""
    if structure == "full":
        return cov
    if structure == "tied":
        return np.stack([cov for _ in range(k)])
    if structure == "diagonal":
        return np.stack([np.diag(v) for v in cov])
    return np.stack([v * np.eye(d) for v in cov])


CASES = [(ds, st) for ds in ("iris", "wine", "faithful") for st in STRUCTURES]


@pytest.mark.parametrize("dataset,structure", CASES, ids=[f"{a}-{b}" for a, b in CASES])
def test_em_matches_scikit_learn(client: mixd.Client, dataset: str, structure: str) -> None:
    x, labels = _load(dataset)
    n, d = x.shape
    w0, mu0, cov0 = _start(x, labels, structure)
    k = w0.shape[0]

    start = mixd.Parameters(weights=w0, means=mu0, covariances=cov0, structure=structure)
    m = client.fit(
        f"em-{dataset}-{structure}",
        x,
        fitter="em",
        start=start,
        ridge=0.0,
        tolerance=TOLERANCE,
        max_iterations=MAX_ITERATIONS,
        seed=1,
    )
    rep = m.report
    assert rep is not None and rep.fitter == "em"
    assert not rep.notes, f"unexpected notes (collapse?): {rep.notes}"
    assert rep.iterations >= 1

    # Source: scikit-learn GaussianMixture (reference library), same start,
    # no regularisation, exactly the same number of iterations.
    gm = sklearn_mixture.GaussianMixture(
        n_components=k,
        covariance_type=SK_TYPE[structure],
        tol=0.0,
        reg_covar=0.0,
        max_iter=rep.iterations,
        n_init=1,
        init_params="random_from_data",
        weights_init=w0,
        means_init=mu0,
        precisions_init=_sk_precisions(cov0, structure),
        random_state=0,
    )
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        gm.fit(x)
    assert gm.n_iter_ == rep.iterations

    sd = x.std(axis=0)
    np.testing.assert_allclose(m.weights, gm.weights_, rtol=0, atol=1e-6, err_msg="weights")
    mean_scale = np.maximum(np.abs(gm.means_), sd[None, :])
    err = np.abs(m.means - gm.means_) / mean_scale
    assert err.max() <= 1e-6, f"means differ by {err.max():.3g} (relative); ours {m.means}, sklearn {gm.means_}"
    ref_cov = _sk_covariances(gm.covariances_, structure, k, d)
    diag = np.sqrt(np.einsum("kii->ki", ref_cov))
    cov_scale = diag[:, :, None] * diag[:, None, :]
    err = np.abs(m.covariances - ref_cov) / cov_scale
    assert err.max() <= 1e-6, f"covariances differ by {err.max():.3g} (relative)"
    # Our structure's exact form is kept.
    if structure == "tied":
        assert all(np.array_equal(m.covariances[0], c) for c in m.covariances)
    ref_ll = float(gm.score(x)) * n
    assert abs(rep.log_likelihood - ref_ll) <= 1e-8, (
        f"log-likelihood {rep.log_likelihood!r}, sklearn {ref_ll!r} (diff {rep.log_likelihood - ref_ll:.3g}) "
        f"after {rep.iterations} iterations (converged: {rep.converged})"
    )

