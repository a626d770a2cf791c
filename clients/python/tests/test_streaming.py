"""The streaming path: a batch larger than one message (600 000 x 8 float64,
about 38 MB) is split into chunks, streamed over ScoreStream and
ClassifyStream, and reassembled in order; the results equal an in-process
numpy computation of the same mixture (Cholesky factor, triangular solve,
log-sum-exp: the textbook Gaussian log-density, common practice) to 1e-10.
"""

from __future__ import annotations

from typing import Any, Dict, Iterator

import numpy as np
import pytest

import mixd

from _reference import assert_close, model_document, random_parameters

N, D, K = 600_000, 8, 4


def numpy_mixture(x: np.ndarray, w: np.ndarray, mu: np.ndarray, cov: np.ndarray):
    """(log-density, component log-densities, posteriors) with numpy only."""
    n, d = x.shape
    comp = np.empty((n, mu.shape[0]))
    for k in range(mu.shape[0]):
        chol = np.linalg.cholesky(cov[k])
        z = np.linalg.solve(chol, (x - mu[k]).T)
        comp[:, k] = -0.5 * (z * z).sum(axis=0) - np.log(np.diag(chol)).sum() - 0.5 * d * np.log(2 * np.pi)
    joint = comp + np.log(w)
    top = joint.max(axis=1, keepdims=True)
    ld = (top + np.log(np.exp(joint - top).sum(axis=1, keepdims=True)))[:, 0]
    return ld, comp, np.exp(joint - ld[:, None])


class _Counting:
    """Wraps a stream-stream stub method, counting the messages sent."""

    def __init__(self, inner: Any) -> None:
        self.inner = inner
        self.calls = 0
        self.messages = 0

    def __call__(self, requests: Iterator[Any], **kw: Any) -> Any:
        self.calls += 1

        def counted() -> Iterator[Any]:
            for r in requests:
                self.messages += 1
                yield r

        return self.inner(counted(), **kw)


@pytest.fixture(scope="module")
def big() -> Dict[str, Any]:
    rng = np.random.default_rng(600)
    w, mu, cov = random_parameters(rng, K, D, "full", spread=3.0)
    x = mu[rng.integers(0, K, size=N)] + rng.normal(scale=1.7, size=(N, D))
    return {"w": w, "mu": mu, "cov": cov, "x": x, "ref": numpy_mixture(x, w, mu, cov)}


def test_stream_score_and_classify_equal_numpy(daemon: Any, big: Dict[str, Any]) -> None:
    with mixd.Client(daemon.address) as c:
        score_counter = _Counting(c.stub.ScoreStream)
        classify_counter = _Counting(c.stub.ClassifyStream)
        c.stub.ScoreStream = score_counter  # type: ignore[method-assign]
        c.stub.ClassifyStream = classify_counter  # type: ignore[method-assign]

        m = c.import_model(model_document("stream-model", big["w"], big["mu"], big["cov"]))
        ld, comp, post = big["ref"]
        # Fortran-ordered input exercises the copy to C order as well.
        x = np.asfortranarray(big["x"])

        s = c.score(m, x, component_log_densities=True)
        assert score_counter.calls == 1 and score_counter.messages > 5, vars(score_counter)
        assert_close(s.log_density, ld, 1e-10, "streamed log-density")
        assert_close(s.component_log_density, comp, 1e-10, "streamed component log-density")
        assert abs(s.log_likelihood - ld.sum()) <= 1e-10 * abs(ld.sum())

        s2 = c.score(m, x)  # without component outputs: no probe call
        assert score_counter.calls == 2
        np.testing.assert_array_equal(s2.log_density, s.log_density)

        cl = c.classify(m, x, posteriors=True, min_posterior=0.9)
        assert classify_counter.calls == 1 and classify_counter.messages > 5
        assert_close(cl.posteriors, post, 1e-10, "streamed posteriors")
        assert_close(cl.max_posterior, post.max(axis=1), 1e-10, "streamed max posterior")
        top2 = np.sort(post, axis=1)[:, -2:]
        clear = top2[:, 1] - top2[:, 0] > 1e-9
        np.testing.assert_array_equal(cl.component[clear], post.argmax(axis=1)[clear])
        far = np.abs(post.max(axis=1) - 0.9) > 1e-9
        np.testing.assert_array_equal(cl.confident[far], (post.max(axis=1) >= 0.9)[far])


def test_small_chunks_match_one_message(daemon: Any) -> None:
    """A client with tiny chunks streams what another sends in one message;
    the answers are identical."""
    rng = np.random.default_rng(8)
    w, mu, cov = random_parameters(rng, 3, 3, "diagonal")
    x = rng.normal(scale=3, size=(5000, 3))
    with mixd.Client(daemon.address) as one, mixd.Client(daemon.address, chunk_bytes=4096) as many:
        m = one.import_model(model_document("stream-small", w, mu, cov, structure="diagonal"))
        a = one.score(m, x, component_log_densities=True)
        b = many.score(m, x, component_log_densities=True)
        np.testing.assert_array_equal(a.log_density, b.log_density)
        np.testing.assert_array_equal(a.component_log_density, b.component_log_density)
        ca = one.classify(m, x, posteriors=True)
        cb = many.classify(m, x, posteriors=True)
        np.testing.assert_array_equal(ca.component, cb.component)
        np.testing.assert_array_equal(ca.posteriors, cb.posteriors)
        # Empty batches work on both paths.
        assert one.score(m, np.zeros((0, 3))).log_density.shape == (0,)
