"""Predict (conditional distribution of unobserved features) against
formulas computed here with numpy and scipy.

References:
- Gaussian conditional: for N(mu, S) split into unobserved u and observed
  o, x_u | x_o ~ N(mu_u + S_uo S_oo^-1 (x_o - mu_o), S_uu - S_uo S_oo^-1 S_ou),
  the Schur complement (Bishop, Pattern Recognition and Machine Learning,
  2006, section 2.3.1, equations 2.81 and 2.82).
- Student-t conditional: location by the same formula, scale
  (nu + d_o) / (nu + p_o) times the Schur complement, nu + p_o degrees of
  freedom, where d_o is the squared Mahalanobis distance of x_o and p_o the
  number of observed features (Roth, On the Multivariate t Distribution,
  2012, section 3; from memory).
- Mixture: weights are the posteriors under the marginals (scipy.stats, as
  in test_missing.py), mean by the law of total expectation and covariance
  by the law of total covariance (common practice).
"""

from __future__ import annotations

from typing import Optional, Tuple

import numpy as np
import pytest

import mixd

from _reference import assert_close, model_document, random_parameters
from test_missing import marginal_reference

TOL = 1e-10


def schur(x: np.ndarray, o: np.ndarray, mu: np.ndarray, s: np.ndarray) -> Tuple[np.ndarray, np.ndarray, float]:
    """The conditional mean (D,, observed values copied) and covariance
    (D, D, zero rows/columns for observed features) of N(mu, s) given the
    observed entries o of x, and the squared Mahalanobis distance of x_o."""
    u = ~o
    mean = x.copy()
    cov = np.zeros((x.size, x.size))
    if not o.any():
        mean[u] = mu[u]
        cov[np.ix_(u, u)] = s[np.ix_(u, u)]
        return mean, cov, 0.0
    s_oo = s[np.ix_(o, o)]
    s_uo = s[np.ix_(u, o)]
    r = x[o] - mu[o]
    mean[u] = mu[u] + s_uo @ np.linalg.solve(s_oo, r)
    cov[np.ix_(u, u)] = s[np.ix_(u, u)] - s_uo @ np.linalg.solve(s_oo, s_uo.T)
    return mean, cov, float(r @ np.linalg.solve(s_oo, r))


def mixture_conditional(
    x: np.ndarray, mask: np.ndarray, w: np.ndarray, mu: np.ndarray, cov: np.ndarray, dof: Optional[np.ndarray] = None
):
    """Reference (means, covariances, posteriors, component means, component
    scales, component dof) of the conditional mixture, row by row."""
    n, d = x.shape
    k = w.shape[0]
    _, _, post = marginal_reference(x, mask, w, mu, cov, dof)
    cm = np.empty((n, k, d))
    cs = np.empty((n, k, d, d))
    cdf = np.empty((n, k))
    means = np.empty((n, d))
    covs = np.empty((n, d, d))
    for i in range(n):
        o = mask[i]
        p = int(o.sum())
        ccov = np.empty((k, d, d))  # conditional covariance of each component
        for c in range(k):
            m, sc, delta = schur(x[i], o, mu[c], cov[c])
            cm[i, c] = m
            if dof is None:
                cs[i, c] = sc
                ccov[c] = sc
            else:
                nu = dof[c]
                cs[i, c] = (nu + delta) / (nu + p) * sc
                cdf[i, c] = nu + p
                ccov[c] = cs[i, c] * (nu + p) / (nu + p - 2)
        means[i] = post[i] @ cm[i]
        dev = cm[i] - means[i]
        covs[i] = np.einsum("k,kab->ab", post[i], ccov) + np.einsum("k,ka,kb->ab", post[i], dev, dev)
    return means, covs, post, cm, cs, (cdf if dof is not None else None)


def _masked(rng: np.random.Generator, mu: np.ndarray, n: int) -> Tuple[np.ndarray, np.ndarray]:
    k, d = mu.shape
    x = mu[rng.integers(0, k, size=n)] + rng.normal(scale=1.5, size=(n, d))
    mask = rng.random((n, d)) < 0.5
    mask[0] = True
    mask[1] = False
    x[~mask] = 0.0
    return x, mask


def test_one_gaussian_component_equals_the_schur_complement(client: mixd.Client) -> None:
    rng = np.random.default_rng(61)
    d = 5
    w, mu, cov = random_parameters(rng, 1, d, "full")
    m = client.import_model(model_document("predict-one", w, mu, cov))
    x, mask = _masked(rng, mu, 200)
    p = client.predict(m, x, mask, std=True, covariances=True, components=True, component_scales=True)
    assert p.model == m.name and p.version == m.version
    for i in range(x.shape[0]):
        # Source: Bishop 2006, section 2.3.1 (Schur complement), with numpy.
        mean, c, _ = schur(x[i], mask[i], mu[0], cov[0])
        assert_close(p.means[i], mean, TOL, f"row {i}: conditional mean")
        assert_close(p.covariances[i], c, TOL, f"row {i}: conditional covariance")
        assert_close(p.std[i], np.sqrt(np.diag(c)), TOL, f"row {i}: conditional standard deviation")
        assert_close(p.component_scales[i, 0], c, TOL, f"row {i}: component covariance")
    # Observed values come back exactly; zero spread for them.
    np.testing.assert_array_equal(p.means[mask], x[mask])
    assert (p.std[mask] == 0).all()
    np.testing.assert_array_equal(p.posteriors, np.ones((x.shape[0], 1)))
    np.testing.assert_array_equal(p.component_means[:, 0], p.means)
    assert p.degrees_of_freedom is None and p.draws is None
    # Source: scipy.stats on the marginal parameters.
    ld, _, _ = marginal_reference(x, mask, w, mu, cov)
    assert_close(p.log_density, ld, TOL, "log-density of the observed features")


@pytest.mark.parametrize("family", ["gaussian", "student_t"])
def test_mixture_conditional_matches_reference(client: mixd.Client, family: str) -> None:
    rng = np.random.default_rng(71 + (family == "student_t"))
    k, d = 3, 4
    w, mu, cov = random_parameters(rng, k, d, "full")
    dof = np.array([4.5, 9.0, 25.0]) if family == "student_t" else None
    m = client.import_model(model_document(f"predict-{family}", w, mu, cov, family=family, dof=dof))
    x, mask = _masked(rng, mu, 150)
    p = client.predict(m, x, mask, std=True, covariances=True, components=True, component_scales=True)
    means, covs, post, cm, cs, cdf = mixture_conditional(x, mask, w, mu, cov, dof)
    assert_close(p.posteriors, post, TOL, "conditional weights")
    assert_close(p.component_means, cm, TOL, "component conditional means")
    assert_close(p.component_scales, cs, TOL, "component conditional scales")
    assert_close(p.means, means, TOL, "conditional means")
    assert_close(p.covariances, covs, 1e-9, "conditional covariances")
    if family == "student_t":
        assert_close(p.degrees_of_freedom, cdf, 0.0, "conditional degrees of freedom")
    else:
        assert p.degrees_of_freedom is None


def test_draws_are_seeded_split_invariant_and_follow_the_conditional(daemon, client: mixd.Client) -> None:
    rng = np.random.default_rng(81)
    d = 3
    w, mu, cov = random_parameters(rng, 2, d, "full")
    m = client.import_model(model_document("predict-draws", w, mu, cov))
    x, mask = _masked(rng, mu, 120)
    p = client.predict(m, x, mask, draws=50, seed=9, covariances=True)
    assert p.draws.shape == (120, 50, d)
    # Observed values are copied into every draw.
    seen_everywhere = np.broadcast_to(mask[:, None, :], p.draws.shape)
    np.testing.assert_array_equal(p.draws[seen_everywhere], np.broadcast_to(x[:, None, :], p.draws.shape)[seen_everywhere])
    again = client.predict(m, x, mask, draws=50, seed=9)
    np.testing.assert_array_equal(again.draws, p.draws)
    other = client.predict(m, x, mask, draws=50, seed=10)
    assert not np.array_equal(other.draws, p.draws)
    # A client with 1 KiB messages splits the batch into many requests
    # (8 * (D + 1 + 50 D) bytes per row: one row each); the draws are the same.
    with mixd.Client(daemon.address, chunk_bytes=1024) as small:
        split = small.predict(m, x, mask, draws=50, seed=9)
    np.testing.assert_array_equal(split.draws, p.draws)
    np.testing.assert_array_equal(split.means, p.means)

    # Many draws of one row: their mean lies within 4 standard errors of the
    # conditional mean, per feature (central limit theorem, common practice).
    row = np.array([[mu[0, 0], 0.0, 0.0]])
    seen = np.array([[True, False, False]])
    big = client.predict(m, row, seen, draws=20000, seed=3, covariances=True)
    got = big.draws[0].mean(axis=0)
    se = np.sqrt(np.diag(big.covariances[0]) / 20000)
    assert (big.draws[0, :, 0] == row[0, 0]).all()
    assert (np.abs(got[1:] - big.means[0, 1:]) <= 4 * se[1:]).all(), (got, big.means[0], se)


def test_predict_errors(client: mixd.Client) -> None:
    rng = np.random.default_rng(91)
    w, mu, cov = random_parameters(rng, 2, 3, "full")
    m = client.import_model(model_document("predict-errors", w, mu, cov))
    x = np.zeros((2, 3))
    mask = np.ones((2, 3), dtype=bool)
    with pytest.raises(mixd.InvalidArgument, match="draws is -1"):
        client.predict(m, x, mask, draws=-1)
    with pytest.raises(mixd.InvalidArgument, match="dimension 3"):
        client.predict(m, np.zeros((2, 4)), np.ones((2, 4), dtype=bool))
    with pytest.raises(mixd.NotFound):
        client.predict("predict-no-such-model", x, mask)
    # Nothing observed and nothing unobserved both work: the first predicts
    # the model's mean, the second copies the row.
    none = client.predict(m, x, ~mask)
    # Source: law of total expectation, sum_k w_k mu_k (common practice).
    assert_close(none.means, np.tile(w @ mu, (2, 1)), TOL, "mean with nothing observed")
    allobs = client.predict(m, x + 1, None)
    np.testing.assert_array_equal(allobs.means, x + 1)
