"""Score and Classify on fixed parameters against scipy.stats.

Reference: scipy.stats.multivariate_normal and scipy.stats.multivariate_t
log-densities, combined with scipy.special.logsumexp into mixture
log-densities and the posterior probabilities they imply (Bayes' rule,
common practice). Agreement is required to 1e-10 (relative to
max(1, |value|)).
"""

from __future__ import annotations

import numpy as np
import pytest

import mixd

from _reference import STRUCTURES, assert_close, mixture_reference, model_document, random_parameters

TOL = 1e-10


def _rows(rng: np.random.Generator, means: np.ndarray, n: int) -> np.ndarray:
    """Rows near every component plus far-away rows (deep tails, where a
    density computed without log-sum-exp would underflow)."""
    k, d = means.shape
    near = means[rng.integers(0, k, size=n)] + rng.normal(scale=1.5, size=(n, d))
    far = rng.normal(scale=25.0, size=(n // 4, d))
    return np.vstack([near, far])


@pytest.mark.parametrize("family", ["gaussian", "student_t"])
@pytest.mark.parametrize("structure", STRUCTURES)
def test_score_and_classify_match_scipy(client: mixd.Client, family: str, structure: str) -> None:
    rng = np.random.default_rng(20261201 + 10 * STRUCTURES.index(structure) + (1 if family == "student_t" else 0))
    k, d = 3, 4
    w, mu, cov = random_parameters(rng, k, d, structure)
    dof = np.array([3.5, 7.0, 30.0]) if family == "student_t" else None
    doc = model_document(f"ref-{family}-{structure}", w, mu, cov, structure=structure, family=family, dof=dof)
    m = client.import_model(doc)
    assert m.family == family and m.structure == structure
    # The stored parameters are exactly those sent.
    np.testing.assert_array_equal(m.weights, w)
    np.testing.assert_array_equal(m.means, mu)
    np.testing.assert_array_equal(m.covariances, cov)

    x = _rows(rng, mu, 400)
    # Source: scipy.stats.multivariate_normal / multivariate_t + logsumexp.
    ld, comp, post = mixture_reference(x, w, mu, cov, dof)

    s = client.score(m, x, component_log_densities=True)
    assert s.model == m.name and s.version == m.version
    assert_close(s.log_density, ld, TOL, "log-density")
    assert_close(s.component_log_density, comp, TOL, "component log-density")
    assert_close(np.array([s.log_likelihood]), np.array([ld.sum()]), TOL, "log-likelihood")
    # An imported model without a fit report has no training quantiles.
    assert s.percentile is None

    c = client.classify(m, x, posteriors=True)
    assert_close(c.posteriors, post, TOL, "posteriors", scale=1.0)
    assert_close(c.max_posterior, post.max(axis=1), TOL, "max posterior")
    # Labels: the most probable component; rows whose two best posteriors
    # are closer than the tolerance could go either way and are skipped.
    top2 = np.sort(post, axis=1)[:, -2:]
    clear = top2[:, 1] - top2[:, 0] > 1e-9
    np.testing.assert_array_equal(c.component[clear], post.argmax(axis=1)[clear])
    assert c.confident.all()

    # Same answers through the packed-free path for a single row and via a
    # pandas DataFrame (columns taken in order).
    pd = pytest.importorskip("pandas")
    df = pd.DataFrame(x[:7], columns=[f"f{j}" for j in range(d)])
    s1 = client.score(m, df)
    assert_close(s1.log_density, ld[:7], TOL, "log-density (DataFrame)")


def test_min_posterior_flags(client: mixd.Client) -> None:
    rng = np.random.default_rng(7)
    w, mu, cov = random_parameters(rng, 2, 2, "spherical", spread=1.0)
    m = client.import_model(model_document("ref-threshold", w, mu, cov, structure="spherical"))
    x = rng.normal(size=(300, 2)) * 2
    _, _, post = mixture_reference(x, w, mu, cov)
    c = client.classify(m, x, min_posterior=0.8)
    # Source: the posteriors from scipy.stats, thresholded as documented.
    want = post.max(axis=1) >= 0.8
    far = np.abs(post.max(axis=1) - 0.8) > 1e-9
    np.testing.assert_array_equal(c.confident[far], want[far])
    assert (~c.confident).any() and c.confident.any()


def test_fit_without_iterations_evaluates_start(client: mixd.Client) -> None:
    """A fit with max_iterations=-1 returns the start unchanged; its report's
    log-likelihood, training quantiles and the percentiles of new rows follow
    from scipy's log-densities (quantiles: numpy's default "linear" method;
    percentiles: linear interpolation between them, as documented in
    daemon/quantiles.go)."""
    rng = np.random.default_rng(11)
    for structure in STRUCTURES:
        w, mu, cov = random_parameters(rng, 3, 3, structure)
        x = _rows(rng, mu, 600)
        start = mixd.Parameters(weights=w, means=mu, covariances=cov, structure=structure)
        m = client.fit(f"start-{structure}", x, start=start, max_iterations=-1, ridge=0)
        np.testing.assert_array_equal(m.weights, w)
        np.testing.assert_array_equal(m.means, mu)
        np.testing.assert_array_equal(m.covariances, cov)
        assert m.report is not None and m.report.iterations == 0
        # Source: scipy.stats.multivariate_normal + logsumexp.
        ld, _, _ = mixture_reference(x, w, mu, cov)
        assert_close(np.array([m.report.log_likelihood]), np.array([ld.sum()]), TOL, f"{structure}: log-likelihood")
        levels = m.report.quantile_levels
        assert levels.size > 10 and levels[0] == 0 and levels[-1] == 1
        # Source: numpy.quantile, method "linear" (numpy's default).
        assert_close(m.report.quantile_log_densities, np.quantile(ld, levels), TOL, f"{structure}: training quantiles")

        y = _rows(rng, mu, 200)
        yld, _, _ = mixture_reference(y, w, mu, cov)
        s = client.score(m, y)
        assert s.percentile is not None
        q = m.report.quantile_log_densities
        # Source: numpy.interp over the stored quantiles (0 below, 100 above).
        want = 100 * np.interp(yld, q, levels)
        inside = (yld > q[0]) & (yld < q[-1])
        assert_close(s.percentile[inside], want[inside], 1e-9, f"{structure}: percentiles", scale=100.0)
        assert (s.percentile[yld < q[0]] == 0).all()
        assert (s.percentile[yld > q[-1]] == 100).all()


def test_score_matches_scikit_learn(client: mixd.Client) -> None:
    """The benchmark's reference (tests/sklearn_reference.py) agrees with the
    daemon on the benchmark's kind of model: full covariances, K = 8, D = 8."""
    from sklearn_reference import gaussian_mixture_log_density

    rng = np.random.default_rng(20261202)
    w, mu, cov = random_parameters(rng, 8, 8, "full")
    m = client.import_model(model_document("ref-sklearn", w, mu, cov))
    x = _rows(rng, mu, 2000)
    # Source: scikit-learn's GaussianMixture (reference library) with the
    # parameters set directly.
    want = gaussian_mixture_log_density(w, mu, cov)(x)
    assert_close(client.score(m, x).log_density, want, TOL, "log-density vs scikit-learn")
