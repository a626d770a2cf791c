"""The variational ("vb") and Student-t ("tmix") fitters through the daemon,
against reference libraries, and the Student-t outlier rule of Score.

Each test skips, saying why, when the daemon under test does not list the
fitter it needs (ListFitters); the EM suite never skips.
"""

from __future__ import annotations

import warnings
from typing import List

import numpy as np
import pytest
from scipy import optimize, stats

import mixd

from _reference import assert_close, mixture_reference, model_document, random_parameters
from conftest import TESTDATA


def _need(fitter_names: List[str], name: str) -> None:
    if name not in fitter_names:
        pytest.skip(f"the daemon under test does not offer the {name!r} fitter (ListFitters lists {fitter_names})")


# ------------------------------------------------------------------- vb


@pytest.mark.parametrize("served", ["plugin", "predictive"])
@pytest.mark.parametrize("iterations", [1, 25])
def test_vb_matches_scikit_learn(client: mixd.Client, fitter_names: List[str], served: str, iterations: int) -> None:
    """Variational Gaussian mixture on Old Faithful (testdata/faithful.csv),
    full covariances, Dirichlet weight prior with the fitter's default
    hyperparameters (data mean, unbiased data covariance, D degrees of
    freedom, mean strength 1, concentration 1/K) passed to scikit-learn
    explicitly, both started from the same hard labels (eruptions >= 3
    minutes) and run for the same number of iterations without
    regularisation. Reference: scikit-learn's BayesianGaussianMixture
    (Bishop 2006, section 10.2), made to start from those responsibilities.
    Served model: plug-in Gaussian (weights E[pi_k], means m_k, covariances
    W_k^-1 / nu_k) or the posterior predictive Student-t mixture (Bishop 2006,
    eqs. 10.81-10.82: dof nu_k + 1 - D, scale (1 + beta_k) / ((nu_k + 1 - D)
    beta_k) W_k^-1). Tolerance 1e-8 (relative)."""
    _need(fitter_names, "vb")
    skm = pytest.importorskip("sklearn.mixture")
    from sklearn.exceptions import ConvergenceWarning

    x = np.loadtxt(TESTDATA / "faithful.csv", delimiter=",", skiprows=1)
    n, d = x.shape
    k = 2
    labels = (x[:, 0] >= 3.0).astype(np.int32)
    m = client.fit(
        f"vb-faithful-{served}-{iterations}", x, fitter="vb", components=k, structure="full",
        start_labels=labels, max_iterations=iterations, tolerance=1e-300, ridge=0.0,
        options={"served_model": served},
    )
    rep = m.report
    assert rep is not None and rep.fitter == "vb" and rep.objective == "variational_bound"
    assert 1 <= rep.iterations <= iterations

    class FromLabels(skm.BayesianGaussianMixture):
        def _initialize_parameters(self, X, random_state, xp=None):  # type: ignore[override]
            resp = np.zeros((X.shape[0], self.n_components))
            resp[np.arange(X.shape[0]), labels] = 1.0
            self._initialize(X, resp)

    # Source: scikit-learn BayesianGaussianMixture with explicit priors.
    bgm = FromLabels(
        n_components=k, covariance_type="full", tol=0.0, reg_covar=0.0, max_iter=rep.iterations, n_init=1,
        weight_concentration_prior_type="dirichlet_distribution", weight_concentration_prior=1.0 / k,
        mean_precision_prior=1.0, mean_prior=x.mean(axis=0), degrees_of_freedom_prior=float(d),
        covariance_prior=np.cov(x, rowvar=False), random_state=0,
    )
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        bgm.fit(x)
    assert bgm.n_iter_ == rep.iterations

    tol = 1e-8
    assert_close(m.weights, bgm.weights_, tol, "expected weights")
    assert_close(m.means, bgm.means_, tol, "means")
    nu, beta = bgm.degrees_of_freedom_, bgm.mean_precision_
    winv = bgm.covariances_ * nu[:, None, None]  # scikit-learn's covariances_ are W_k^-1 / nu_k
    if served == "plugin":
        assert m.family == "gaussian"
        want = bgm.covariances_
    else:
        assert m.family == "student_t"
        dof = nu + 1 - d
        assert_close(m.degrees_of_freedom, dof, tol, "predictive degrees of freedom")
        want = winv * ((1 + beta) / (dof * beta))[:, None, None]
    diag = np.sqrt(np.einsum("kii->ki", want))
    assert_close(m.covariances, want, tol, "covariances", scale=diag[:, :, None] * diag[:, None, :])
    # scikit-learn's bound omits constant terms: the increments must agree.
    h = rep.history
    ref = np.asarray(bgm.lower_bounds_)
    assert h.shape == ref.shape
    assert_close(h - ref, np.full_like(h, h[0] - ref[0]), tol, "bound increments", scale=np.abs(h))


# ----------------------------------------------------------------- tmix


def test_tmix_one_component_matches_scipy_t_fit(client: mixd.Client, fitter_names: List[str]) -> None:
    """One Student-t component in one dimension is the univariate t
    distribution: the fit must reach the maximum-likelihood estimate that
    scipy.stats.t.fit finds (with a tight Powell optimizer). The
    likelihood is flat in nu, so the log-likelihood is compared to 1e-6
    (absolute) and the parameters to 1e-3 (relative for nu and the scale,
    absolute for the location). Data: seeded pump vibration velocities
    (mm/s) with heavy-tailed noise."""
    _need(fitter_names, "tmix")
    rng = np.random.default_rng(20261201)
    data = 2.5 + 0.4 * rng.standard_t(4.0, size=400)

    def tight(func, x0, args=(), disp=0):  # type: ignore[no-untyped-def]
        # Powell's method with tight tolerances: the same optimum as a tight
        # Nelder-Mead run (checked to 1e-8) in a fraction of the time.
        with np.errstate(invalid="ignore"):
            r = optimize.minimize(func, x0, args=args, method="Powell", options={"xtol": 1e-12, "ftol": 1e-15, "maxiter": 20000})
        return r.x

    # Source: scipy.stats.t.fit (with the optimizer above) and scipy.stats.t.logpdf.
    df, loc, scale = stats.t.fit(data, optimizer=tight)
    ref_ll = float(np.sum(stats.t.logpdf(data, df, loc, scale)))

    m = client.fit("tmix-univariate", data.reshape(-1, 1), fitter="tmix", components=1, ridge=0.0,
                   tolerance=1e-13, max_iterations=100_000)
    assert m.family == "student_t" and m.report is not None and m.report.converged
    assert abs(m.report.log_likelihood - ref_ll) <= 1e-6, (m.report.log_likelihood, ref_ll)
    assert abs(m.degrees_of_freedom[0] / df - 1) <= 1e-3
    assert abs(m.means[0, 0] - loc) <= 1e-3
    assert abs(np.sqrt(m.covariances[0, 0, 0]) / scale - 1) <= 1e-3


def test_tmix_start_evaluation_matches_scipy(client: mixd.Client, fitter_names: List[str]) -> None:
    """max_iterations=-1 returns a Student-t start unchanged (per-component
    degrees of freedom), with the log-likelihood of scipy.stats.multivariate_t
    (to 1e-10)."""
    _need(fitter_names, "tmix")
    rng = np.random.default_rng(44)
    w, mu, cov = random_parameters(rng, 2, 3, "full")
    dof = np.array([4.5, 15.0])
    x = mu[rng.integers(0, 2, size=500)] + rng.standard_t(5.0, size=(500, 3))
    start = mixd.Parameters(w, mu, cov, structure="full", family="student_t", degrees_of_freedom=dof)
    m = client.fit("tmix-start", x, fitter="tmix", start=start, max_iterations=-1, ridge=0.0,
                   options={"dof_sharing": "per_component"})
    np.testing.assert_array_equal(m.means, mu)
    np.testing.assert_array_equal(m.covariances, cov)
    np.testing.assert_array_equal(m.degrees_of_freedom, dof)
    # Source: scipy.stats.multivariate_t + logsumexp.
    ld, _, _ = mixture_reference(x, w, mu, cov, dof)
    assert_close(np.array([m.report.log_likelihood]), np.array([ld.sum()]), 1e-10, "log-likelihood")


def test_student_t_outlier_rule(client: mixd.Client) -> None:
    """Score's outlier statistic of a Student-t model is the squared
    Mahalanobis distance to the row's most probable component over D, and a
    row is flagged where the F(D, nu) distribution function of it exceeds the
    level (API documentation). Reference: scipy.stats.f.cdf, numpy.linalg."""
    rng = np.random.default_rng(61)
    w, mu, cov = random_parameters(rng, 2, 3, "full")
    dof = np.array([3.5, 12.0])
    m = client.import_model(model_document("outlier-t", w, mu, cov, family="student_t", dof=dof))
    x = np.vstack([mu[rng.integers(0, 2, size=300)] + rng.normal(size=(300, 3)), rng.normal(scale=30, size=(30, 3))])
    s = client.score(m, x, outlier_level=0.99)
    if s.outlier_statistic is None:
        pytest.skip("the daemon under test does not yet return ScoreResponse.outlier_statistics for Student-t models")
    _, comp, post = mixture_reference(x, w, mu, cov, dof)
    label = post.argmax(axis=1)
    dev = x - mu[label]
    maha = np.array([dev[i] @ np.linalg.solve(cov[label[i]], dev[i]) for i in range(x.shape[0])])
    stat = maha / 3
    assert_close(s.outlier_statistic, stat, 1e-10, "outlier statistic")
    cdf = stats.f.cdf(stat, 3, dof[label])
    clear = np.abs(cdf - 0.99) > 1e-9
    np.testing.assert_array_equal(s.outlier[clear], (cdf > 0.99)[clear])
    assert s.outlier.any() and not s.outlier.all()
