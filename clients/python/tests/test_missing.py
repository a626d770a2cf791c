"""Score and Classify with unobserved features given by an explicit mask,
against scipy.stats on the marginal parameters.

Reference: the marginal of a Gaussian N(mu, S) over the observed features o
is N(mu_o, S_oo), and that of a Student-t with nu degrees of freedom is
Student-t(mu_o, S_oo, nu) (Kotz and Nadarajah, Multivariate t Distributions
and Their Applications, 2004; common result). Densities by
scipy.stats.multivariate_normal / multivariate_t on those marginal
parameters, mixed with scipy.special.logsumexp; agreement to 1e-10
(relative to max(1, |value|)).
"""

from __future__ import annotations

from typing import Optional, Tuple

import grpc
import numpy as np
import pytest
from scipy import stats
from scipy.special import logsumexp

import mixd
from mixd._proto import mixture_service_pb2 as svc
from mixd._proto import types_pb2 as pb

from _reference import assert_close, model_document, random_parameters
from conftest import TESTDATA

TOL = 1e-10


def marginal_reference(
    x: np.ndarray,
    mask: np.ndarray,
    w: np.ndarray,
    mu: np.ndarray,
    cov: np.ndarray,
    dof: Optional[np.ndarray] = None,
) -> Tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(log-density (N,), component log-densities (N, K), posteriors (N, K))
    of each row's observed features, row by row with scipy.stats on the
    marginal parameters (mu_o, S_oo). A row with nothing observed has
    log-density 0 and posteriors equal to the weights (the empty marginal
    has density 1: the API's documented convention)."""
    n, k = x.shape[0], w.shape[0]
    comp = np.zeros((n, k))
    for i in range(n):
        o = mask[i]
        if not o.any():
            continue
        for c in range(k):
            m, s = mu[c][o], cov[c][np.ix_(o, o)]
            if dof is None:
                comp[i, c] = stats.multivariate_normal(mean=m, cov=s).logpdf(x[i, o])
            else:
                comp[i, c] = stats.multivariate_t(loc=m, shape=s, df=dof[c]).logpdf(x[i, o])
    joint = comp + np.log(w)[None, :]
    ld = logsumexp(joint, axis=1)
    return ld, comp, np.exp(joint - ld[:, None])


def _masked_rows(rng: np.random.Generator, mu: np.ndarray, n: int) -> Tuple[np.ndarray, np.ndarray]:
    """Rows near the components with random masks: every pattern occurs,
    including all observed and nothing observed; unobserved values are 0."""
    k, d = mu.shape
    x = mu[rng.integers(0, k, size=n)] + rng.normal(scale=1.5, size=(n, d))
    mask = rng.random((n, d)) < 0.6
    mask[0] = True
    mask[1] = False
    mask[2] = [True] + [False] * (d - 1)
    x[~mask] = 0.0
    return x, mask


@pytest.mark.parametrize("family", ["gaussian", "student_t"])
def test_masked_score_and_classify_match_scipy_marginals(client: mixd.Client, family: str) -> None:
    rng = np.random.default_rng(20261211 + (family == "student_t"))
    k, d = 3, 4
    w, mu, cov = random_parameters(rng, k, d, "full")
    dof = np.array([3.5, 7.0, 30.0]) if family == "student_t" else None
    m = client.import_model(model_document(f"mask-{family}", w, mu, cov, family=family, dof=dof))
    x, mask = _masked_rows(rng, mu, 300)

    # Source: scipy.stats multivariate_normal / multivariate_t on (mu_o, S_oo).
    ld, comp, post = marginal_reference(x, mask, w, mu, cov, dof)
    s = client.score(m, x, observed=mask, component_log_densities=True)
    assert_close(s.log_density, ld, TOL, "marginal log-density")
    assert_close(s.component_log_density, comp, TOL, "marginal component log-density")
    assert s.log_density[1] == 0.0
    c = client.classify(m, x, observed=mask, posteriors=True)
    assert_close(c.posteriors, post, TOL, "marginal posteriors")
    top2 = np.sort(post, axis=1)[:, -2:]
    clear = top2[:, 1] - top2[:, 0] > 1e-9
    np.testing.assert_array_equal(c.component[clear], post.argmax(axis=1)[clear])

    # Fully observed rows give exactly the unmasked answers.
    full = mask.all(axis=1)
    plain = client.score(m, x[full])
    np.testing.assert_array_equal(s.log_density[full], plain.log_density)

    # A mask of 0/1 integers is the same mask; a DataFrame of flags too.
    s01 = client.score(m, x, observed=mask.astype(np.int8))
    np.testing.assert_array_equal(s01.log_density, s.log_density)
    pd = pytest.importorskip("pandas")
    sdf = client.score(m, pd.DataFrame(x), observed=pd.DataFrame(mask))
    np.testing.assert_array_equal(sdf.log_density, s.log_density)


def test_masked_batches_stream_in_chunks_with_their_mask_slices(daemon, client: mixd.Client) -> None:
    rng = np.random.default_rng(31)
    w, mu, cov = random_parameters(rng, 3, 4, "full")
    m = client.import_model(model_document("mask-stream", w, mu, cov))
    x, mask = _masked_rows(rng, mu, 500)
    one = client.score(m, x, observed=mask, component_log_densities=True)
    onec = client.classify(m, x, observed=mask, posteriors=True, min_posterior=0.9)
    # 1 KiB chunks: 28 rows of 4 values + 4 mask bytes per message (or fewer
    # when sized by the wider response), so the 500 rows go over the streams.
    with mixd.Client(daemon.address, chunk_bytes=1024) as small:
        s = small.score(m, x, observed=mask, component_log_densities=True)
        c = small.classify(m, x, observed=mask, posteriors=True, min_posterior=0.9)
    np.testing.assert_array_equal(s.log_density, one.log_density)
    np.testing.assert_array_equal(s.component_log_density, one.component_log_density)
    np.testing.assert_array_equal(c.posteriors, onec.posteriors)
    np.testing.assert_array_equal(c.confident, onec.confident)
    # Source: scipy.stats on the marginal parameters.
    ld, _, _ = marginal_reference(x, mask, w, mu, cov)
    assert_close(s.log_density, ld, TOL, "streamed marginal log-density")


def test_percentile_is_nan_for_rows_with_an_unobserved_feature(client: mixd.Client) -> None:
    x = np.loadtxt(TESTDATA / "pumps" / "stations.csv", delimiter=",", skiprows=1)[:800]
    m = client.fit("mask-percentile", x, components=3, seed=3)
    rows = x[:20].copy()
    mask = np.ones_like(rows, dtype=bool)
    mask[5:, 2] = False
    rows[~mask] = 0.0
    s = client.score(m, rows, observed=mask)
    assert s.percentile is not None
    assert np.isfinite(s.percentile[:5]).all()
    assert np.isnan(s.percentile[5:]).all()
    np.testing.assert_array_equal(s.percentile[:5], client.score(m, x[:5]).percentile)


def test_mask_from_nan_converts_nan_marked_data(client: mixd.Client) -> None:
    rng = np.random.default_rng(41)
    w, mu, cov = random_parameters(rng, 2, 3, "full")
    m = client.import_model(model_document("mask-nan", w, mu, cov))
    x = mu[rng.integers(0, 2, size=50)] + rng.normal(size=(50, 3))
    holes = rng.random(x.shape) < 0.3
    with_nan = np.where(holes, np.nan, x)
    values, observed = mixd.mask_from_nan(with_nan)
    np.testing.assert_array_equal(observed, ~holes)
    assert np.isfinite(values).all() and (values[holes] == 0).all()
    np.testing.assert_array_equal(values[~holes], x[~holes])
    ld, _, _ = marginal_reference(values, observed, w, mu, cov)
    # Source: scipy.stats on the marginal parameters.
    assert_close(client.score(m, values, observed=observed).log_density, ld, TOL, "log-density after mask_from_nan")
    pd = pytest.importorskip("pandas")
    df = pd.DataFrame(with_nan, columns=["flow_lps", "motor_current_a", "vibration_mm_s"])
    v2, o2 = mixd.mask_from_nan(df)
    np.testing.assert_array_equal(v2, values)
    np.testing.assert_array_equal(o2, observed)
    # NaN itself stays invalid input, named by row and column.
    first = np.argwhere(holes)[0]
    with pytest.raises(mixd.InvalidArgument, match=f"row {first[0]}, column {first[1]}"):
        client.score(m, df)


def test_bad_masks_are_invalid_argument(client: mixd.Client) -> None:
    rng = np.random.default_rng(51)
    w, mu, cov = random_parameters(rng, 2, 3, "full")
    m = client.import_model(model_document("mask-errors", w, mu, cov))
    x = np.zeros((4, 3))
    for bad, text in (
        (np.ones((4, 2), dtype=bool), "observed has shape (4, 2)"),
        (np.ones(12, dtype=bool), "observed has shape (12,)"),
        (np.full((4, 3), 2), "flag at row 0, column 0 is 2"),
        (np.ones((4, 3)), "must hold booleans"),
    ):
        for call in (
            lambda: client.score(m, x, observed=bad),
            lambda: client.classify(m, x, observed=bad),
            lambda: client.predict(m, x, bad),
        ):
            with pytest.raises(mixd.InvalidArgument) as e:
                call()
            assert text in e.value.message

    # The daemon's own check, bypassing the client's: a mask of the wrong length.
    rows = pb.Matrix(rows=4, cols=3, little_endian=x.tobytes())
    for method, req in (
        (client.stub.Score, svc.ScoreRequest(model=m.name, rows=rows, observed_mask=b"\x01\x00")),
        (client.stub.Classify, svc.ClassifyRequest(model=m.name, rows=rows, observed_mask=b"\x01" * 13)),
        (client.stub.Predict, svc.PredictRequest(model=m.name, rows=rows, observed_mask=b"\x01" * 11)),
    ):
        with pytest.raises(grpc.RpcError) as e:
            method(req, timeout=10)
        err = mixd.from_rpc_error(e.value)
        assert isinstance(err, mixd.InvalidArgument), err
        assert "observed_mask" in err.message and "rows*cols = 4*3 = 12" in err.message, err.message
