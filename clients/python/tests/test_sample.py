"""Sample: a large seeded sample agrees with the model within sampling error.

For each component k with n_k drawn rows, the checks are, each within
Z = 5 standard errors (a false alarm has probability about 6e-7 per check
under the normal approximation; common practice):

- the count n_k against n w_k, standard error sqrt(n w_k (1 - w_k))
  (binomial);
- each mean coordinate against mu_k, standard error sqrt(V_jj / n_k), V the
  component's covariance (central limit theorem);
- each covariance entry against V_ij, standard error sd(z_i z_j) / sqrt(n_k)
  with z the centred rows, estimated from the sample itself (the general
  asymptotic standard error of a sample moment; valid for Student-t
  components with more than 4 degrees of freedom, whose fourth moments
  exist).

For Student-t components V = nu / (nu - 2) times the scale matrix (the
covariance of the multivariate t distribution, nu > 2; see
daemon/modeldoc/FORMAT.md and any text on the multivariate t).
"""

from __future__ import annotations

import numpy as np
import pytest

import mixd

from _reference import model_document, random_parameters

Z = 5.0
N = 200_000


def _check_sample(m: mixd.Model, s: mixd.SampleResult, n: int) -> None:
    w, mu, cov = m.weights, m.means, m.covariances
    k, d = mu.shape
    assert s.rows.shape == (n, d) and s.component.shape == (n,)
    assert np.isfinite(s.rows).all()
    assert s.component.min() >= 0 and s.component.max() < k
    counts = np.bincount(s.component, minlength=k)
    se = np.sqrt(n * w * (1 - w))
    assert (np.abs(counts - n * w) <= Z * se).all(), f"counts {counts}, expected {n * w} (se {se})"
    for c in range(k):
        x = s.rows[s.component == c]
        nk = x.shape[0]
        v = cov[c]
        if m.family == "student_t":
            nu = m.degrees_of_freedom[c]
            v = v * nu / (nu - 2)
        mean_se = np.sqrt(np.diag(v) / nk)
        dm = np.abs(x.mean(axis=0) - mu[c])
        assert (dm <= Z * mean_se).all(), f"component {c}: mean off by {dm / mean_se} standard errors"
        z = x - x.mean(axis=0)
        prods = z[:, :, None] * z[:, None, :]
        sample_cov = prods.mean(axis=0)
        cov_se = prods.std(axis=0) / np.sqrt(nk)
        dc = np.abs(sample_cov - v)
        assert (dc <= Z * cov_se).all(), f"component {c}: covariance off by up to {(dc / cov_se).max():.2f} standard errors"


@pytest.mark.parametrize("structure", ["full", "diagonal", "spherical", "tied"])
def test_gaussian_sample_moments(client: mixd.Client, structure: str) -> None:
    rng = np.random.default_rng(31 + len(structure))
    w, mu, cov = random_parameters(rng, 3, 3, structure)
    m = client.import_model(model_document(f"sample-{structure}", w, mu, cov, structure=structure))
    s = client.sample(m, N, seed=20261201)
    assert s.model == m.name and s.version == m.version
    _check_sample(m, s, N)


def test_student_t_sample_moments(client: mixd.Client) -> None:
    rng = np.random.default_rng(97)
    w, mu, cov = random_parameters(rng, 2, 3, "full")
    dof = np.array([9.0, 25.0])  # > 4: fourth moments exist
    m = client.import_model(model_document("sample-t", w, mu, cov, family="student_t", dof=dof))
    s = client.sample(m, N, seed=5)
    _check_sample(m, s, N)


def test_sample_is_seeded_and_stream_equals_unary(client: mixd.Client) -> None:
    rng = np.random.default_rng(3)
    w, mu, cov = random_parameters(rng, 2, 2, "full")
    m = client.import_model(model_document("sample-seeded", w, mu, cov))
    a = client.sample(m, 3000, seed=42)  # one unary Sample call
    b = client.sample(m, 3000, seed=42)
    np.testing.assert_array_equal(a.rows, b.rows)
    np.testing.assert_array_equal(a.component, b.component)
    c = client.sample(m, 3000, seed=43)
    assert not np.array_equal(a.rows, c.rows)
    # A large count goes over SampleStream; its first rows equal a unary
    # Sample with the same seed (documented in the API).
    big = client.sample(m, 150_000, seed=42)
    np.testing.assert_array_equal(big.rows[:3000], a.rows)
    np.testing.assert_array_equal(big.component[:3000], a.component)
    assert client.sample(m, 0, seed=1).rows.shape == (0, 2)
