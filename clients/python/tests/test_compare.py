"""CompareModels against closed forms computed here with numpy.

References:
- KL divergence between two Gaussians,
  KL(N0 || N1) = 1/2 [tr(S1^-1 S0) + (m1 - m0)' S1^-1 (m1 - m0) - d + ln(det S1 / det S0)]
  (common closed form; the same as gonum's distmv.Normal.KullbackLeibler).
  The daemon's Monte Carlo estimate must lie within 3 of its standard errors.
- Bhattacharyya distance between two Gaussians,
  D_B = 1/8 (m1 - m0)' S^-1 (m1 - m0) + 1/2 ln(det S / sqrt(det S0 det S1)),
  S = (S0 + S1) / 2 (common closed form); the matching minimises the total
  distance, checked here by trying every assignment.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest

import mixd

from _reference import model_document, random_parameters


def kl_gauss(m0: np.ndarray, s0: np.ndarray, m1: np.ndarray, s1: np.ndarray) -> float:
    d = m0.size
    diff = m1 - m0
    _, ld0 = np.linalg.slogdet(s0)
    _, ld1 = np.linalg.slogdet(s1)
    return 0.5 * (np.trace(np.linalg.solve(s1, s0)) + diff @ np.linalg.solve(s1, diff) - d + ld1 - ld0)


def bhattacharyya(m0: np.ndarray, s0: np.ndarray, m1: np.ndarray, s1: np.ndarray) -> float:
    s = (s0 + s1) / 2
    diff = m1 - m0
    _, ld = np.linalg.slogdet(s)
    _, ld0 = np.linalg.slogdet(s0)
    _, ld1 = np.linalg.slogdet(s1)
    return diff @ np.linalg.solve(s, diff) / 8 + 0.5 * (ld - 0.5 * (ld0 + ld1))


def test_a_model_against_itself_is_zero_within_its_error(client: mixd.Client) -> None:
    rng = np.random.default_rng(101)
    w, mu, cov = random_parameters(rng, 3, 3, "full")
    m = client.import_model(model_document("compare-self", w, mu, cov))
    r = client.compare_models(m, m, samples=5000, seed=1)
    assert r.model == m.name and r.other_model == m.name
    assert r.version == m.version and r.other_version == m.version and r.samples == 5000
    assert abs(r.kl_forward) <= 3 * r.kl_forward_standard_error
    assert abs(r.kl_backward) <= 3 * r.kl_backward_standard_error
    assert [(x.component, x.other_component) for x in r.matches] == [(0, 0), (1, 1), (2, 2)]
    for x in r.matches:
        assert abs(x.distance) <= 1e-12 and x.weight == x.other_weight == w[x.component]
    assert r.unmatched_components == [] and r.unmatched_other_components == []
    assert r.component_distance == "bhattacharyya"


def test_two_gaussians_agree_with_the_closed_form(client: mixd.Client) -> None:
    rng = np.random.default_rng(111)
    d = 3
    _, mu0, cov0 = random_parameters(rng, 1, d, "full")
    _, mu1, cov1 = random_parameters(rng, 1, d, "full", spread=1.0)
    one = np.array([1.0])
    # Two versions of one model, compared by version (other_model "").
    p = client.import_model(model_document("compare-gauss", one, mu0, cov0))
    q = client.import_model(model_document("compare-gauss", one, mu1, cov1))
    r = client.compare_models("compare-gauss", version=p.version, other_version=q.version, samples=40000, seed=7)
    assert (r.version, r.other_version) == (p.version, q.version)
    # Source: closed-form Gaussian KL (see the module docstring), numpy.
    fwd = kl_gauss(mu0[0], cov0[0], mu1[0], cov1[0])
    bwd = kl_gauss(mu1[0], cov1[0], mu0[0], cov0[0])
    assert fwd > 0.5 and bwd > 0.5  # the test compares clearly different models
    assert abs(r.kl_forward - fwd) <= 3 * r.kl_forward_standard_error, (r.kl_forward, fwd, r.kl_forward_standard_error)
    assert abs(r.kl_backward - bwd) <= 3 * r.kl_backward_standard_error, (r.kl_backward, bwd, r.kl_backward_standard_error)
    assert 0 < r.kl_forward_standard_error < 0.1 * fwd
    # Source: closed-form Bhattacharyya distance, numpy.
    assert len(r.matches) == 1
    assert r.matches[0].distance == pytest.approx(bhattacharyya(mu0[0], cov0[0], mu1[0], cov1[0]), rel=1e-10)

    # Seeded: the same call gives the same numbers; the newest of both is q.
    again = client.compare_models(p, q, samples=40000, seed=7)
    assert (again.kl_forward, again.kl_backward) == (r.kl_forward, r.kl_backward)
    newest = client.compare_models("compare-gauss")
    assert newest.kl_forward == 0 and newest.version == newest.other_version == q.version


def test_matching_minimises_the_total_bhattacharyya_distance(client: mixd.Client) -> None:
    rng = np.random.default_rng(121)
    w0, mu0, cov0 = random_parameters(rng, 3, 2, "full")
    w1, mu1, cov1 = random_parameters(rng, 2, 2, "full")
    a = client.import_model(model_document("compare-k3", w0, mu0, cov0))
    b = client.import_model(model_document("compare-k2", w1, mu1, cov1))
    r = client.compare_models(a, b, samples=2000, seed=3)
    dist = np.array([[bhattacharyya(mu0[i], cov0[i], mu1[j], cov1[j]) for j in range(2)] for i in range(3)])
    # Source: every assignment of q's two components to two of p's three.
    best = min(itertools.permutations(range(3), 2), key=lambda rows: dist[rows[0], 0] + dist[rows[1], 1])
    want = sorted((best[j], j) for j in range(2))
    assert [(x.component, x.other_component) for x in r.matches] == want
    for x in r.matches:
        assert x.distance == pytest.approx(dist[x.component, x.other_component], rel=1e-10)
        assert x.weight == w0[x.component] and x.other_weight == w1[x.other_component]
    assert r.unmatched_components == [next(i for i in range(3) if i not in best)]
    assert r.unmatched_other_components == []


def test_compare_errors(client: mixd.Client) -> None:
    rng = np.random.default_rng(131)
    w, mu, cov = random_parameters(rng, 1, 2, "full")
    client.import_model(model_document("compare-d2", w, mu, cov))
    w3, mu3, cov3 = random_parameters(rng, 1, 3, "full")
    client.import_model(model_document("compare-d3", w3, mu3, cov3))
    with pytest.raises(mixd.InvalidArgument, match="dimension"):
        client.compare_models("compare-d2", "compare-d3")
    with pytest.raises(mixd.InvalidArgument, match="samples is 1"):
        client.compare_models("compare-d2", samples=1)
    with pytest.raises(mixd.InvalidArgument, match="samples is -5"):
        client.compare_models("compare-d2", samples=-5)
    with pytest.raises(mixd.NotFound):
        client.compare_models("compare-d2", "compare-no-such-model")
    with pytest.raises(mixd.NotFound):
        client.compare_models("compare-d2", other_version=99)
