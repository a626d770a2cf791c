"""The client's own behaviour against the real daemon: blocking and
job-based fits with progress and cancellation, model management, pandas
input, the Unix-socket transport, and TLS with a bearer token.

Data: water pumping stations (flow in l/s, motor current in A, vibration in
mm/s), drawn here from a seeded generator.
"""

from __future__ import annotations

import shutil
import subprocess
import threading
import time
from concurrent import futures
from pathlib import Path
from typing import Any, List

import grpc
import numpy as np
import pytest

import mixd
from mixd._proto import mixture_service_pb2 as svc
from mixd._proto import mixture_service_pb2_grpc as svc_grpc
from mixd._proto import types_pb2 as pb

from _reference import assert_close, mixture_reference, model_document, random_parameters

FEATURES = ["flow_lps", "motor_current_a", "vibration_mm_s"]


def pumps(n: int, seed: int) -> np.ndarray:
    """Seeded readings from two regimes: normal running and a worn impeller
    (lower flow, higher current and vibration)."""
    rng = np.random.default_rng(seed)
    worn = rng.random(n) < 0.3
    x = np.empty((n, 3))
    x[~worn] = rng.multivariate_normal([42.5, 18.2, 2.1], [[4, 1.2, 0.1], [1.2, 0.9, 0.05], [0.1, 0.05, 0.16]], size=(~worn).sum())
    x[worn] = rng.multivariate_normal([35.1, 21.7, 4.8], [[9, -1.5, 0.6], [-1.5, 1.6, 0.2], [0.6, 0.2, 0.81]], size=worn.sum())
    return x


def slow_data() -> np.ndarray:
    """Data on which EM with many components and no tolerance runs for a
    long time (overlapping clusters, many rows)."""
    rng = np.random.default_rng(77)
    return rng.normal(size=(200_000, 4)) + rng.integers(0, 3, size=(200_000, 1))


def test_fit_with_progress_and_dataframe(client: mixd.Client) -> None:
    pd = pytest.importorskip("pandas")
    df = pd.DataFrame(pumps(3000, 1), columns=FEATURES)
    events: List[mixd.FitProgress] = []
    m = client.fit("pumps-api", df, components=2, seed=7, restarts=2, on_progress=events.append)
    assert m.name == "models/pumps-api" and m.id == "pumps-api" and m.version >= 1
    assert m.feature_names == FEATURES
    assert m.dimension == 3 and m.components == 2 and m.family == "gaussian" and m.structure == "full"
    assert abs(m.weights.sum() - 1) < 1e-12
    r = m.report
    assert r is not None and r.fitter == "em" and r.training_rows == 3000 and r.seed == 7
    assert r.converged and r.objective == "log_likelihood"
    assert events, "no progress event arrived"
    assert all(np.isfinite(e.objective) for e in events)
    # The report's log-likelihood is that of the stored parameters
    # (source: scipy.stats.multivariate_normal + logsumexp).
    ld, _, _ = mixture_reference(df.to_numpy(), m.weights, m.means, m.covariances)
    assert abs(r.log_likelihood - ld.sum()) <= 1e-9 * abs(ld.sum())
    # Same data, settings and seed: the same model, bit for bit.
    again = client.fit("pumps-api", df, components=2, seed=7, restarts=2)
    assert again.version == m.version + 1
    np.testing.assert_array_equal(again.means, m.means)
    np.testing.assert_array_equal(again.covariances, m.covariances)


def test_fit_over_a_range_of_components(client: mixd.Client) -> None:
    """components_min / components_max fit every K in the range and keep
    the one of lowest BIC; the report's table lists each K once."""
    x = pumps(1500, 4)
    m = client.fit("pumps-range", x, components_min=1, components_max=3, criterion="bic", seed=2)
    r = m.report
    assert r is not None and [s.components for s in r.selection] == [1, 2, 3]
    # BIC = -2 log L + p ln n, lower is better (its definition); the kept
    # K is the table's minimum and its log-likelihood the report's.
    best = min(r.selection, key=lambda s: s.bic)
    assert m.components == best.components
    ld, _, _ = mixture_reference(x, m.weights, m.means, m.covariances)
    assert abs(best.log_likelihood - ld.sum()) <= 1e-9 * abs(ld.sum())


def test_fit_cancelled_by_event(client: mixd.Client) -> None:
    cancel = threading.Event()
    seen: List[mixd.FitProgress] = []

    def progress(p: mixd.FitProgress) -> None:
        seen.append(p)
        cancel.set()

    with pytest.raises(mixd.Cancelled):
        client.fit(
            "cancel-event", slow_data(), components=8, tolerance=1e-300, max_iterations=100_000,
            on_progress=progress, cancel=cancel, seed=1,
        )
    assert seen
    with pytest.raises(mixd.NotFound):
        client.get_model("cancel-event")
    # The daemon recorded the job as cancelled.
    jobs = [j for j in client.list_jobs() if j.model == "models/cancel-event"]
    assert len(jobs) == 1
    assert _wait_done(client, jobs[0]).state == "cancelled"


def _wait_done(client: mixd.Client, job: mixd.FitJob, seconds: float = 60) -> mixd.FitJob:
    """Polls a job until it has ended (fitters check for cancellation every
    iteration, but a loaded machine can delay that)."""
    deadline = time.monotonic() + seconds
    while not job.done and time.monotonic() < deadline:
        time.sleep(0.1)
        job = client.get_job(job)
    return job


def test_fit_cancelled_by_raising_callback(client: mixd.Client) -> None:
    class Stop(Exception):
        pass

    def progress(p: mixd.FitProgress) -> None:
        raise Stop()

    with pytest.raises(Stop):
        client.fit("cancel-raise", slow_data(), components=8, tolerance=1e-300, max_iterations=100_000, on_progress=progress)
    with pytest.raises(mixd.NotFound):
        client.get_model("cancel-raise")


def test_job_based_fit(client: mixd.Client) -> None:
    x = pumps(2000, 2)
    job = client.start_fit("pumps-job", x, components=2, seed=3, feature_names=FEATURES)
    assert job.name.startswith("fitJobs/") and job.model == "models/pumps-job"
    assert job.state in ("queued", "running", "succeeded")
    m = client.watch(job)
    assert m.name == "models/pumps-job" and m.feature_names == FEATURES
    done = client.get_job(job.name)
    assert done.state == "succeeded" and done.done and done.model_version == m.version
    assert done.rows == 2000 and done.error() is None
    assert any(j.name == job.name for j in client.list_jobs())
    # Watching a finished job returns its model again.
    assert client.watch(job).version == m.version


def test_job_cancelled(client: mixd.Client) -> None:
    job = client.start_fit("cancel-job", slow_data(), components=8, tolerance=1e-300, max_iterations=100_000)
    got = client.cancel_job(job)
    assert got.name == job.name
    got = _wait_done(client, got)
    assert got.state == "cancelled", got
    assert isinstance(got.error(), mixd.Cancelled)
    with pytest.raises(mixd.Cancelled):
        client.watch(job)
    with pytest.raises(mixd.FailedPrecondition):
        client.cancel_job(job)


def test_model_management(client: mixd.Client) -> None:
    rng = np.random.default_rng(12)
    w, mu, cov = random_parameters(rng, 2, 3, "tied")
    doc = model_document("manage", w, mu, cov, structure="tied", feature_names=FEATURES)
    v1 = client.import_model(doc)
    v2 = client.import_model(doc)
    assert (v1.version, v2.version) == (1, 2)
    assert [m.version for m in client.list_versions("manage")] == [1, 2]
    assert "models/manage" in [m.name for m in client.list_models()]
    assert client.get_model("manage").version == 2
    assert client.get_model("models/manage", version=1).version == 1
    exported = client.export_model(v1)
    copy = client.import_model(exported, name="manage-copy")
    assert copy.name == "models/manage-copy"
    np.testing.assert_array_equal(copy.covariances, v1.covariances)
    assert copy.feature_names == FEATURES and copy.structure == "tied"
    # Scoring a pinned version through a Model.
    s = client.score(v1, mu)
    assert s.version == 1
    assert client.delete_model(v1) == 1
    with pytest.raises(mixd.NotFound):
        client.get_model("manage", version=1)
    assert client.delete_model("manage") == 1
    assert client.delete_model("manage-copy") == 1
    with pytest.raises(mixd.NotFound):
        client.get_model("manage")


def test_list_fitters(client: mixd.Client) -> None:
    fitters = {f.name: f for f in client.list_fitters()}
    assert "em" in fitters
    em = fitters["em"]
    assert em.source == "built-in" and em.version
    assert "gaussian" in em.families
    assert set(em.structures) == {"full", "diagonal", "spherical", "tied"}


def test_unix_socket(unix_daemon: Any) -> None:
    assert unix_daemon.address.startswith("unix:")
    rng = np.random.default_rng(21)
    w, mu, cov = random_parameters(rng, 2, 2, "full")
    with mixd.Client(unix_daemon.address) as c:
        assert "em" in [f.name for f in c.list_fitters()]
        m = c.import_model(model_document("over-unix", w, mu, cov))
        x = rng.normal(size=(100, 2))
        ld, _, _ = mixture_reference(x, w, mu, cov)
        # Source: scipy.stats.multivariate_normal + logsumexp.
        assert_close(c.score(m, x).log_density, ld, 1e-10, "log-density over a Unix socket")
    # A bare path is taken as a Unix socket too.
    with mixd.Client(unix_daemon.address[len("unix:"):]) as c:
        assert c.get_model("over-unix").version == 1


# --- TLS and bearer token -------------------------------------------------
# The daemon itself does not terminate TLS yet, so the client's TLS and token
# handling is checked against a small in-process gRPC server built from the
# same generated stubs, with a throw-away self-signed certificate.


class _TokenServer(svc_grpc.MixtureServiceServicer):
    def __init__(self) -> None:
        self.seen: List[str] = []

    def ListFitters(self, request: Any, context: grpc.ServicerContext) -> Any:
        md = dict(context.invocation_metadata())
        auth = md.get("authorization", "")
        self.seen.append(auth)
        if auth != "Bearer s3cret":
            context.abort(grpc.StatusCode.UNAUTHENTICATED, "missing or wrong bearer token")
        return svc.ListFittersResponse(fitters=[pb.FitterInfo(name="tls-checked", source="built-in")])


def test_tls_and_token(tmp_path: Path) -> None:
    openssl = shutil.which("openssl")
    if openssl is None:
        pytest.skip("openssl is not installed: cannot make a test certificate for the TLS check")
    key, crt = tmp_path / "key.pem", tmp_path / "crt.pem"
    subprocess.run(
        [openssl, "req", "-x509", "-newkey", "rsa:2048", "-nodes", "-keyout", str(key), "-out", str(crt),
         "-days", "1", "-subj", "/CN=localhost", "-addext", "subjectAltName=DNS:localhost,IP:127.0.0.1"],
        check=True, capture_output=True,
    )
    impl = _TokenServer()
    server = grpc.server(futures.ThreadPoolExecutor(max_workers=2))
    svc_grpc.add_MixtureServiceServicer_to_server(impl, server)
    creds = grpc.ssl_server_credentials([(key.read_bytes(), crt.read_bytes())])
    port = server.add_secure_port("127.0.0.1:0", creds)
    server.start()
    try:
        with mixd.Client(f"127.0.0.1:{port}", root_certificates=str(crt), token="s3cret", timeout=10) as c:
            assert [f.name for f in c.list_fitters()] == ["tls-checked"]
        assert impl.seen[-1] == "Bearer s3cret"
        with mixd.Client(f"127.0.0.1:{port}", root_certificates=crt.read_bytes(), timeout=10) as c:
            with pytest.raises(mixd.Unauthenticated, match="bearer token"):
                c.list_fitters()
        # A plain-text client cannot talk to the TLS server.
        with mixd.Client(f"127.0.0.1:{port}", token="s3cret", timeout=5) as c:
            with pytest.raises(mixd.Unavailable):
                c.list_fitters()
    finally:
        server.stop(None)
