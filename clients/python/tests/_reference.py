"""Helpers shared by the cross-check tests: model documents, reference
densities computed with scipy, and seeded parameter sets.

Reference formulas come from scipy.stats (multivariate_normal,
multivariate_t) and scipy.special.logsumexp; nothing here calls the code
under test.
"""

from __future__ import annotations

from typing import Any, Dict, List, Optional, Tuple

import numpy as np
from scipy import stats
from scipy.special import logsumexp

STRUCTURES = ("full", "diagonal", "spherical", "tied")


def model_document(
    name: str,
    weights: np.ndarray,
    means: np.ndarray,
    covariances: np.ndarray,
    *,
    structure: str = "full",
    family: str = "gaussian",
    dof: Optional[np.ndarray] = None,
    feature_names: Optional[List[str]] = None,
) -> Dict[str, Any]:
    """A mixd model document (daemon/modeldoc/FORMAT.md, format version 1)."""
    k, d = np.shape(means)
    comps = []
    for i in range(k):
        c: Dict[str, Any] = {
            "weight": float(weights[i]),
            "mean": [float(v) for v in means[i]],
            "covariance": [[float(v) for v in row] for row in covariances[i]],
        }
        if family == "student_t":
            assert dof is not None
            c["degrees_of_freedom"] = float(dof[i])
        comps.append(c)
    doc: Dict[str, Any] = {
        "format": "mixd-model",
        "format_version": 1,
        "name": name,
        "dimension": int(d),
        "family": family,
        "covariance_structure": structure,
        "components": comps,
    }
    if feature_names:
        doc["feature_names"] = list(feature_names)
    return doc


def random_parameters(
    rng: np.random.Generator, k: int, d: int, structure: str, spread: float = 4.0
) -> Tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Seeded, well-conditioned weights, means and covariances whose
    matrices satisfy the structure exactly (diagonal: zero off-diagonal;
    spherical: equal diagonal; tied: identical matrices)."""
    w = rng.uniform(0.5, 1.5, size=k)
    w /= w.sum()
    # Make the weights sum to 1 to the last bit where possible.
    w[-1] = 1.0 - w[:-1].sum()
    mu = rng.normal(scale=spread, size=(k, d))

    def full() -> np.ndarray:
        a = rng.normal(size=(d, d))
        m = a @ a.T / d + np.diag(rng.uniform(0.3, 1.5, size=d))
        return (m + m.T) / 2

    if structure == "full":
        cov = np.stack([full() for _ in range(k)])
    elif structure == "diagonal":
        cov = np.stack([np.diag(rng.uniform(0.2, 2.0, size=d)) for _ in range(k)])
    elif structure == "spherical":
        cov = np.stack([rng.uniform(0.3, 2.0) * np.eye(d) for _ in range(k)])
    elif structure == "tied":
        shared = full()
        cov = np.stack([shared.copy() for _ in range(k)])
    else:
        raise ValueError(structure)
    return w, mu, cov


def component_logpdf(
    x: np.ndarray, means: np.ndarray, covs: np.ndarray, dof: Optional[np.ndarray] = None
) -> np.ndarray:
    """Per-component log-densities (N, K) by scipy.stats: multivariate_normal,
    or multivariate_t with shape matrix covs[k] and dof[k] degrees of freedom."""
    cols = []
    for k in range(means.shape[0]):
        if dof is None:
            cols.append(stats.multivariate_normal(mean=means[k], cov=covs[k]).logpdf(x))
        else:
            cols.append(stats.multivariate_t(loc=means[k], shape=covs[k], df=dof[k]).logpdf(x))
    return np.column_stack(cols).reshape(x.shape[0], means.shape[0])


def mixture_reference(
    x: np.ndarray, weights: np.ndarray, means: np.ndarray, covs: np.ndarray, dof: Optional[np.ndarray] = None
) -> Tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(log-density (N,), component log-densities (N, K), posteriors (N, K))
    of a mixture, by scipy.stats densities and scipy.special.logsumexp."""
    comp = component_logpdf(x, means, covs, dof)
    joint = comp + np.log(weights)[None, :]
    ld = logsumexp(joint, axis=1)
    post = np.exp(joint - ld[:, None])
    return ld, comp, post


def assert_close(got: np.ndarray, want: np.ndarray, tol: float, what: str, scale: Any = 1.0) -> None:
    """|got - want| <= tol * max(scale, |want|) elementwise, with a message
    naming the worst element."""
    got = np.asarray(got, dtype=np.float64)
    want = np.asarray(want, dtype=np.float64)
    assert got.shape == want.shape, f"{what}: shape {got.shape}, want {want.shape}"
    bound = tol * np.maximum(np.broadcast_to(np.asarray(scale, dtype=np.float64), want.shape), np.abs(want))
    err = np.abs(got - want)
    bad = err > bound
    if bad.any():
        i = np.unravel_index(int(np.argmax(err / np.where(bound > 0, bound, 1))), want.shape)
        raise AssertionError(
            f"{what}: {int(bad.sum())} of {want.size} values differ by more than {tol:g} (relative); "
            f"worst at {tuple(int(v) for v in i)}: got {got[i]!r}, want {want[i]!r}, |diff| {err[i]:.3g}"
        )
