"""Bad input through the client raises the documented exceptions, with the
gRPC code and a message naming the field, row or limit; nothing is stored.
"""

from __future__ import annotations

import socket

import grpc
import numpy as np
import pytest

import mixd
from mixd._proto import mixture_service_pb2 as svc
from mixd._proto import types_pb2 as pb

from _reference import model_document, random_parameters


@pytest.fixture(scope="module")
def model(client: mixd.Client) -> mixd.Model:
    rng = np.random.default_rng(5)
    w, mu, cov = random_parameters(rng, 2, 4, "full")
    return client.import_model(model_document("errors-model", w, mu, cov))


def test_nan_row_is_rejected_by_the_client(client: mixd.Client, model: mixd.Model) -> None:
    x = np.zeros((10, 4))
    x[3, 1] = np.nan
    for call in (lambda: client.score(model, x), lambda: client.classify(model, x)):
        with pytest.raises(mixd.InvalidArgument) as e:
            call()
        assert e.value.code == grpc.StatusCode.INVALID_ARGUMENT
        assert "row 3, column 1" in e.value.message
        assert isinstance(e.value, ValueError) and isinstance(e.value, mixd.MixdError)
    x[3, 1] = np.inf
    with pytest.raises(mixd.InvalidArgument, match="row 3, column 1"):
        client.fit("errors-nan-fit", x, components=1)
    with pytest.raises(mixd.NotFound):
        client.get_model("errors-nan-fit")


def test_nan_row_is_rejected_by_the_daemon(client: mixd.Client, model: mixd.Model) -> None:
    """The daemon's own check, bypassing the client's: packed values with a NaN."""
    req = svc.ScoreRequest(model=model.name, rows=pb.Matrix(rows=2, cols=4, values=[0, 0, 0, 0, 0, 0, float("nan"), 0]))
    with pytest.raises(grpc.RpcError) as e:
        client.stub.Score(req, timeout=10)
    err = mixd.from_rpc_error(e.value)
    assert isinstance(err, mixd.InvalidArgument)
    assert "row 1, column 2" in err.message


def test_wrong_column_count(client: mixd.Client, model: mixd.Model) -> None:
    for cols in (3, 5):
        with pytest.raises(mixd.InvalidArgument) as e:
            client.score(model, np.zeros((2, cols)))
        assert "dimension 4" in e.value.message and f"cols is {cols}" in e.value.message
    with pytest.raises(mixd.InvalidArgument, match="dimension 4"):
        client.classify(model, np.zeros((2, 3)))
    with pytest.raises(mixd.InvalidArgument, match="2-D"):
        client.score(model, np.zeros(4))


def test_unknown_model(client: mixd.Client, model: mixd.Model) -> None:
    x = np.zeros((1, 4))
    calls = {
        "score": lambda: client.score("no-such-model", x),
        "classify": lambda: client.classify("no-such-model", x),
        "sample": lambda: client.sample("no-such-model", 10),
        "sample-stream": lambda: client.sample("no-such-model", 100_000),
        "get": lambda: client.get_model("no-such-model"),
        "versions": lambda: client.list_versions("no-such-model"),
        "export": lambda: client.export_model("no-such-model"),
        "delete": lambda: client.delete_model("no-such-model"),
        "version": lambda: client.score(model.name, x, version=99),
    }
    for what, call in calls.items():
        with pytest.raises(mixd.NotFound) as e:
            call()
        assert e.value.code == grpc.StatusCode.NOT_FOUND, what
        assert isinstance(e.value, LookupError)


def test_bad_document_changes_nothing(client: mixd.Client, model: mixd.Model) -> None:
    before = [(m.name, m.version) for m in client.list_versions(model)]
    doc = model_document("errors-model", np.array([0.7, 0.7]), model.means, model.covariances)
    with pytest.raises(mixd.InvalidArgument, match="weight"):
        client.import_model(doc)
    bad_cov = model.covariances.copy()
    bad_cov[1] = -np.eye(4)
    with pytest.raises(mixd.InvalidArgument, match="component 1"):
        client.import_model(model_document("errors-model", model.weights, model.means, bad_cov))
    with pytest.raises(mixd.InvalidArgument):
        client.import_model(b"{not json")
    assert [(m.name, m.version) for m in client.list_versions(model)] == before


def test_bad_fit_specs(client: mixd.Client) -> None:
    x = np.random.default_rng(2).normal(size=(50, 2))
    with pytest.raises(mixd.InvalidArgument, match="em"):  # lists the available fitters
        client.fit("errors-fit", x, components=2, fitter="no-such-fitter")
    with pytest.raises(mixd.InvalidArgument, match="components"):
        client.fit("errors-fit", x)
    with pytest.raises(mixd.InvalidArgument, match="ridge"):
        client.fit("errors-fit", x, components=2, ridge=-1.0)
    with pytest.raises(mixd.InvalidArgument, match="structure"):
        client.fit("errors-fit", x, components=2, structure="banded")
    with pytest.raises(mixd.InvalidArgument, match="feature_names"):
        client.fit("errors-fit", x, components=2, feature_names=["flow", "flow"])
    with pytest.raises(mixd.NotFound):
        client.get_model("errors-fit")


def test_limits_and_transport(client: mixd.Client, model: mixd.Model) -> None:
    # Above the daemon's --max-sample-count (default 100 000 000 rows).
    with pytest.raises(mixd.ResourceExhausted, match="max-sample-count"):
        client.sample(model, 200_000_000)
    with pytest.raises(mixd.InvalidArgument, match="min_posterior"):
        client.classify(model, np.zeros((1, 4)), min_posterior=1.5)
    # A fit that would run for minutes, with a deadline of half a second:
    # the call ends with DEADLINE_EXCEEDED and nothing is stored.
    rng = np.random.default_rng(77)
    slow = rng.normal(size=(100_000, 4)) + rng.integers(0, 3, size=(100_000, 1))
    with pytest.raises(mixd.DeadlineExceeded):
        client.fit("errors-deadline", slow, components=8, tolerance=1e-300, max_iterations=100_000, timeout=0.5)
    with pytest.raises(mixd.NotFound):
        client.get_model("errors-deadline")
    # Nothing listens on a port we just closed.
    s = socket.socket()
    s.bind(("127.0.0.1", 0))
    port = s.getsockname()[1]
    s.close()
    with mixd.Client(f"127.0.0.1:{port}", timeout=5) as dead:
        with pytest.raises(mixd.Unavailable):
            dead.list_fitters()


def test_jobs_errors(client: mixd.Client) -> None:
    with pytest.raises(mixd.NotFound):
        client.get_job("fitJobs/no-such-job")
    with pytest.raises(mixd.NotFound):
        client.cancel_job("fitJobs/no-such-job")
    x = np.random.default_rng(4).normal(size=(100, 2))
    job = client.start_fit("errors-job", x, components=1)
    client.watch(job)
    with pytest.raises(mixd.FailedPrecondition, match="already ended"):
        client.cancel_job(job)


class _FakeRpcError(grpc.RpcError):
    """A grpc.RpcError with a fixed status, as a call would raise it."""

    def __init__(self, code: grpc.StatusCode, details: str) -> None:
        super().__init__(details)
        self._code, self._details = code, details

    def code(self) -> grpc.StatusCode:
        return self._code

    def details(self) -> str:
        return self._details


def test_reset_at_the_deadline_is_deadline_exceeded() -> None:
    # A gRPC server ends a call at its deadline by resetting the stream; when
    # the reset arrives before the client's own timer fires, the channel says
    # CANCELLED. Past the call's deadline the client reports DEADLINE_EXCEEDED.
    import time

    from mixd.errors import from_rpc_error

    reset = _FakeRpcError(grpc.StatusCode.CANCELLED, "Stream removed (RST_STREAM (Received RST_STREAM with error code 8))")
    late = from_rpc_error(reset, timeout=0.5, started=time.monotonic() - 0.6)
    assert isinstance(late, mixd.DeadlineExceeded) and "deadline of 0.5 s" in str(late)
    # Before the deadline, or with no deadline, a cancellation stays one.
    assert isinstance(from_rpc_error(reset, timeout=10, started=time.monotonic()), mixd.Cancelled)
    assert isinstance(from_rpc_error(reset), mixd.Cancelled)
    other = _FakeRpcError(grpc.StatusCode.UNAVAILABLE, "gone")
    assert isinstance(from_rpc_error(other, timeout=0.5, started=time.monotonic() - 9), mixd.Unavailable)
