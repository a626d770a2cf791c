"""The mixd client: a connection to one daemon and a method per operation."""

from __future__ import annotations

import json
import os
import threading
import time
from typing import (
    Any,
    Callable,
    Iterator,
    List,
    Mapping,
    Optional,
    Sequence,
    Tuple,
    TypeVar,
    Union,
)

import grpc
import numpy as np

from . import _matrix
from ._proto import mixture_service_pb2 as svc
from ._proto import mixture_service_pb2_grpc as svc_grpc
from ._proto import types_pb2 as pb
from .errors import from_rpc_error, _invalid, error_for_code
from .types import (
    _CRITERION_TO_PB,
    _FAMILY_TO_PB,
    _STRUCTURE_TO_PB,
    ClassifyResult,
    CompareResult,
    FitJob,
    FitProgress,
    FitterInfo,
    Model,
    Parameters,
    PredictResult,
    SampleResult,
    ScoreResult,
    _choice,
)

__all__ = [
    "Client",
    "DEFAULT_TARGET",
    "DEFAULT_TIMEOUT",
    "DEFAULT_CHUNK_BYTES",
    "DEFAULT_MAX_RECEIVE_BYTES",
    "ModelRef",
    "JobRef",
]

#: Address used when neither the target argument nor MIXD_ADDR gives one.
DEFAULT_TARGET = "127.0.0.1:7313"
#: Deadline in seconds of unary calls when none is given. Fits, watches and
#: streamed batches get no default deadline (they can legitimately run long).
DEFAULT_TIMEOUT = 30.0
#: Largest amount of matrix data, in bytes, sent (and, as far as the client
#: can tell, asked for) in one message. Batches above it are split into
#: chunks of this size and streamed. It keeps every message well under gRPC's
#: customary 4 MiB limit.
DEFAULT_CHUNK_BYTES = (4 << 20) - (64 << 10)
#: Largest response message the client accepts.
DEFAULT_MAX_RECEIVE_BYTES = 1 << 30

# Rows scored or classified by the probe that learns K before a streamed
# batch that asks for per-component outputs.
_PROBE_ROWS = 64
# Sample counts up to this many rows use the unary Sample call.
_UNARY_SAMPLE_ROWS = 4096

_LE = pb.MATRIX_ENCODING_LITTLE_ENDIAN

#: A model given by id ("pumps"), resource name ("models/pumps") or a
#: :class:`~mixd.types.Model` (whose version is then used unless one is given).
ModelRef = Union[str, Model]
#: A fit job given by resource name ("fitJobs/...") or a :class:`~mixd.types.FitJob`.
JobRef = Union[str, FitJob]

_T = TypeVar("_T")


def _model_ref(model: ModelRef, version: Optional[int]) -> Tuple[str, int]:
    if isinstance(model, Model):
        return model.name, int(model.version if version is None else version)
    if not isinstance(model, str) or not model:
        raise _invalid(f"model must be a non-empty model id or a Model, not {model!r}")
    return model, int(version or 0)


def _mask_bytes(mask: Optional[np.ndarray], lo: int, hi: int) -> bytes:
    """The observed_mask bytes of rows [lo, hi); empty (all observed) without a mask."""
    if mask is None:
        return b""
    return mask[lo:hi].tobytes()


def _seed(seed: int) -> int:
    seed = int(seed)
    if not 0 <= seed < 1 << 64:
        raise _invalid(f"seed is {seed}; want an unsigned 64-bit integer")
    return seed


def _job_name(job: JobRef) -> str:
    if isinstance(job, FitJob):
        return job.name
    if not isinstance(job, str) or not job:
        raise _invalid(f"job must be a fit job name or a FitJob, not {job!r}")
    return job


def _normalise_target(target: str) -> str:
    """host:port stays; "unix:/p" stays; a bare path becomes "unix:path"."""
    if target.startswith(("unix:", "unix-abstract:", "dns:", "ipv4:", "ipv6:")):
        return target
    if "/" in target:
        return "unix:" + target
    return target


def _read_pem(value: Union[bytes, str, "os.PathLike[str]", None]) -> Optional[bytes]:
    if value is None or isinstance(value, bytes):
        return value
    text = os.fspath(value)
    if "-----BEGIN" in text:
        return text.encode()
    with open(text, "rb") as f:
        return f.read()


def _option_text(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        return repr(v)
    return str(v)


class _Canceller:
    """Cancels a call when a threading.Event is set, until stopped."""

    def __init__(self, call: Any, event: Optional[threading.Event]) -> None:
        self._call = call
        self._event = event
        self._stop = threading.Event()
        self.fired = False
        self._thread: Optional[threading.Thread] = None
        if event is not None:
            self._thread = threading.Thread(target=self._run, name="mixd-cancel", daemon=True)
            self._thread.start()

    def _run(self) -> None:
        assert self._event is not None
        while not self._stop.is_set():
            if self._event.wait(0.05):
                self.fired = True
                self._call.cancel()
                return

    def stop(self) -> None:
        self._stop.set()
        if self._thread is not None:
            self._thread.join()


class Client:
    """A connection to one mixd daemon.

    Args:
        target: "host:port" for TCP, or "unix:/path/to/socket" (a bare path
            containing "/" is taken as a Unix socket too). None means the
            environment variable MIXD_ADDR, else "127.0.0.1:7313" (the
            daemon's default), as for the mixctl command.
        token: Bearer token sent as "authorization: Bearer <token>" metadata
            on every call, when the daemon asks for one. Over a plain-text
            connection the token travels unencrypted: use TLS for anything
            but loopback addresses and Unix sockets.
        tls: Use TLS (implied by ``root_certificates``), verifying the daemon
            against the system's root certificates unless
            ``root_certificates`` is given.
        root_certificates: PEM root certificates (bytes, PEM text, or a path
            to a PEM file) to verify the daemon's certificate with.
        timeout: Default deadline in seconds of unary calls (None: none).
            Fits, watches and streamed batches get no default deadline.
        chunk_bytes: Largest amount of matrix data per message; bigger
            batches are split and streamed.
        max_receive_bytes: Largest response message accepted.
        channel_options: Extra gRPC channel options.

    The client is safe to share between threads. Use it as a context manager,
    or call :meth:`close` when done.
    """

    def __init__(
        self,
        target: Optional[str] = None,
        *,
        token: Optional[str] = None,
        tls: bool = False,
        root_certificates: Union[bytes, str, "os.PathLike[str]", None] = None,
        timeout: Optional[float] = DEFAULT_TIMEOUT,
        chunk_bytes: int = DEFAULT_CHUNK_BYTES,
        max_receive_bytes: int = DEFAULT_MAX_RECEIVE_BYTES,
        channel_options: Optional[Sequence[Tuple[str, Any]]] = None,
    ) -> None:
        if target is None:
            target = os.environ.get("MIXD_ADDR") or DEFAULT_TARGET
        self._target = _normalise_target(target)
        self._timeout = timeout
        self._chunk_bytes = max(int(chunk_bytes), 1024)
        options: List[Tuple[str, Any]] = [
            ("grpc.max_receive_message_length", int(max_receive_bytes)),
            ("grpc.max_send_message_length", -1),
        ]
        options.extend(channel_options or [])
        roots = _read_pem(root_certificates)
        if tls or roots is not None:
            creds = grpc.ssl_channel_credentials(root_certificates=roots)
            self._channel = grpc.secure_channel(self._target, creds, options=options)
        else:
            self._channel = grpc.insecure_channel(self._target, options=options)
        self._metadata: Tuple[Tuple[str, str], ...] = ()
        if token:
            self._metadata = (("authorization", f"Bearer {token}"),)
        self._stub = svc_grpc.MixtureServiceStub(self._channel)

    # ----------------------------------------------------------------- basics

    @property
    def target(self) -> str:
        """The gRPC target this client connects to."""
        return self._target

    @property
    def stub(self) -> svc_grpc.MixtureServiceStub:
        """The generated gRPC stub of this connection, for calls the client
        does not wrap. Its errors are plain grpc.RpcError; translate them with
        :func:`mixd.errors.from_rpc_error`. Pass :attr:`metadata` with each
        call when the client has a token."""
        return self._stub

    @property
    def metadata(self) -> Tuple[Tuple[str, str], ...]:
        """Call metadata the client sends (the bearer token, if any)."""
        return self._metadata

    def close(self) -> None:
        """Closes the connection. Calls in flight are cancelled."""
        self._channel.close()

    def __enter__(self) -> "Client":
        return self

    def __exit__(self, *exc: Any) -> None:
        self.close()

    def _deadline(self, timeout: Optional[float], streaming: bool = False) -> Optional[float]:
        if timeout is not None:
            return timeout
        return None if streaming else self._timeout

    def _unary(self, method: Callable[..., _T], request: Any, timeout: Optional[float]) -> _T:
        dl, t0 = self._deadline(timeout), time.monotonic()
        try:
            return method(request, timeout=dl, metadata=self._metadata)
        except grpc.RpcError as e:
            raise from_rpc_error(e, timeout=dl, started=t0) from None

    def _rows_per_chunk(self, bytes_per_row: int) -> int:
        return max(1, self._chunk_bytes // max(1, bytes_per_row))

    # ------------------------------------------------------------------ score

    def score(
        self,
        model: ModelRef,
        rows: Any,
        *,
        version: Optional[int] = None,
        component_log_densities: bool = False,
        outlier_level: float = 0.0,
        observed: Any = None,
        timeout: Optional[float] = None,
    ) -> ScoreResult:
        """Scores rows under a model: log-density, training percentile and,
        when asked for, per-component log-densities.

        Args:
            model: Model id, "models/{id}", or a Model.
            rows: An (N, D) array of float64-convertible values (any layout;
                a pandas DataFrame is taken column by column in order).
            version: Model version; None or 0 means the newest (or the
                Model's own version when a Model is given).
            component_log_densities: Also return each component's
                log-density (without its weight), shape (N, K).
            outlier_level: Student-t models: tail probability level of the
                outlier rule; 0 means the level stored with the model.
            observed: Which values are observed: a bool array of the rows'
                shape (N, D), True = observed; None means all. Rows are then
                scored under the marginal mixture of their observed features
                (exact for Gaussian and Student-t components), and rows with
                an unobserved feature get a NaN percentile. Values at
                unobserved positions are ignored but must still be finite
                (put 0 there; :func:`mixd.mask_from_nan` converts NaN-marked
                data).
            timeout: Deadline in seconds (default: the client's for a single
                message; none for a streamed batch).

        Batches larger than one message are streamed in chunks over
        ScoreStream (each chunk with its slice of the mask); the result is
        the same as one call would give, all chunks scored by the same model
        version.

        Raises:
            InvalidArgument: rows are not 2-D, hold a non-finite value, or
                have a column count other than the model's dimension; the
                mask has another shape than the rows or holds non-booleans.
            NotFound: the model or version does not exist.
        """
        name, ver = _model_ref(model, version)
        x, _ = _matrix.as_rows(rows)
        n, d = x.shape
        mask = None if observed is None else _matrix.as_mask(observed, (n, d))
        # Request bytes per row: the values and, with a mask, one byte each.
        width = 8 * d + (d if mask is not None else 0)
        out = _ScoreAssembler(n)
        done = 0
        k: Optional[int] = None
        if component_log_densities and n > self._rows_per_chunk(max(width, 8 * (3 + 256))):
            # Learn K (and pin the version) with a small unary call before
            # choosing the chunk size of the stream.
            m = min(n, _PROBE_ROWS)
            resp = self._score_unary(name, ver, x, mask, 0, m, True, outlier_level, timeout)
            out.add(resp, 0)
            name, ver, done = resp.model, resp.version, m
            k = int(resp.component_log_densities.cols)
        # Response columns per row: log-density, percentile, outlier
        # statistic and flag, plus the component log-densities.
        cols = 3 + (k if k is not None else (256 if component_log_densities else 0))
        per = self._rows_per_chunk(max(width, 8 * cols))
        if n - done <= per:
            resp = self._score_unary(name, ver, x, mask, done, n, component_log_densities, outlier_level, timeout)
            out.add(resp, done)
        else:
            settings = dict(
                model=name,
                version=ver,
                include_component_log_densities=component_log_densities,
                response_encoding=_LE,
                outlier_level=outlier_level,
            )
            self._stream_chunks(
                self._stub.ScoreStream, svc.ScoreStreamRequest, settings, x, mask, done, per, timeout, out
            )
        return out.result()

    def _score_unary(
        self,
        name: str,
        ver: int,
        x: np.ndarray,
        mask: Optional[np.ndarray],
        lo: int,
        hi: int,
        comps: bool,
        level: float,
        timeout: Optional[float],
    ) -> svc.ScoreResponse:
        req = svc.ScoreRequest(
            model=name,
            version=ver,
            rows=_matrix.encode(x[lo:hi]),
            include_component_log_densities=comps,
            response_encoding=_LE,
            outlier_level=level,
            observed_mask=_mask_bytes(mask, lo, hi),
        )
        return self._unary(self._stub.Score, req, timeout)

    def _stream_chunks(
        self,
        method: Callable[..., Any],
        message: Callable[..., Any],
        settings: Mapping[str, Any],
        x: np.ndarray,
        mask: Optional[np.ndarray],
        start: int,
        per: int,
        timeout: Optional[float],
        out: Any,
    ) -> None:
        """Streams rows start.. of x in chunks of per rows over a
        bidirectional method and hands each response, in order, to out.

        Every chunk carries its rows and its slice of the mask (the mask is
        read from every message); the first also carries settings.
        """

        def requests() -> Iterator[Any]:
            for lo in range(start, x.shape[0], per):
                m = _matrix.encode(x[lo : lo + per])
                om = _mask_bytes(mask, lo, lo + per)
                if lo == start:
                    yield message(rows=m, observed_mask=om, **settings)
                else:
                    yield message(rows=m, observed_mask=om)

        dl, t0 = self._deadline(timeout, True), time.monotonic()
        call = method(requests(), timeout=dl, metadata=self._metadata)
        self._drain(call, out, start, dl, t0)

    def _drain(self, call: Any, out: Any, start: int, timeout: Optional[float], started: float) -> None:
        offset = start
        try:
            for resp in call:
                offset += out.add(resp, offset)
        except grpc.RpcError as e:
            raise from_rpc_error(e, timeout=timeout, started=started) from None
        except BaseException:
            call.cancel()
            raise
        if offset != out.n:
            raise error_for_code(
                grpc.StatusCode.INTERNAL, f"the daemon answered {offset - start} rows of {out.n - start} sent"
            )

    # --------------------------------------------------------------- classify

    def classify(
        self,
        model: ModelRef,
        rows: Any,
        *,
        version: Optional[int] = None,
        min_posterior: float = 0.0,
        posteriors: bool = False,
        observed: Any = None,
        timeout: Optional[float] = None,
    ) -> ClassifyResult:
        """Assigns rows to their most probable component.

        Args:
            model: Model id, "models/{id}", or a Model.
            rows: An (N, D) array (or DataFrame), as for :meth:`score`.
            version: Model version; None or 0 means the newest.
            min_posterior: Rows whose largest posterior is below this are
                marked not confident; 0 disables the check.
            posteriors: Also return all posterior probabilities, (N, K).
            observed: Which values are observed, as for :meth:`score`; the
                posteriors are then those given the observed features only.
            timeout: Deadline in seconds, as for :meth:`score`.

        Large batches are streamed over ClassifyStream as for :meth:`score`.

        Raises:
            InvalidArgument: bad rows (see :meth:`score`) or a
                min_posterior outside [0, 1].
            NotFound: the model or version does not exist.
        """
        name, ver = _model_ref(model, version)
        x, _ = _matrix.as_rows(rows)
        n, d = x.shape
        mask = None if observed is None else _matrix.as_mask(observed, (n, d))
        width = 8 * d + (d if mask is not None else 0)
        out = _ClassifyAssembler(n, min_posterior)
        done = 0
        k: Optional[int] = None
        if posteriors and n > self._rows_per_chunk(max(width, 8 * (2 + 256))):
            m = min(n, _PROBE_ROWS)
            resp = self._classify_unary(name, ver, x, mask, 0, m, min_posterior, True, timeout)
            out.add(resp, 0)
            name, ver, done = resp.model, resp.version, m
            k = int(resp.posteriors.cols)
        cols = 2 + (k if k is not None else (256 if posteriors else 0))
        per = self._rows_per_chunk(max(width, 8 * cols))
        if n - done <= per:
            resp = self._classify_unary(name, ver, x, mask, done, n, min_posterior, posteriors, timeout)
            out.add(resp, done)
        else:
            settings = dict(
                model=name,
                version=ver,
                min_posterior=min_posterior,
                include_posteriors=posteriors,
                response_encoding=_LE,
            )
            self._stream_chunks(
                self._stub.ClassifyStream, svc.ClassifyStreamRequest, settings, x, mask, done, per, timeout, out
            )
        return out.result()

    def _classify_unary(
        self,
        name: str,
        ver: int,
        x: np.ndarray,
        mask: Optional[np.ndarray],
        lo: int,
        hi: int,
        min_post: float,
        post: bool,
        timeout: Optional[float],
    ) -> svc.ClassifyResponse:
        req = svc.ClassifyRequest(
            model=name,
            version=ver,
            rows=_matrix.encode(x[lo:hi]),
            min_posterior=min_post,
            include_posteriors=post,
            response_encoding=_LE,
            observed_mask=_mask_bytes(mask, lo, hi),
        )
        return self._unary(self._stub.Classify, req, timeout)

    # ----------------------------------------------------------------- sample

    def sample(
        self,
        model: ModelRef,
        count: int,
        *,
        seed: int = 0,
        version: Optional[int] = None,
        timeout: Optional[float] = None,
    ) -> SampleResult:
        """Draws rows from a model.

        The same model version, count and seed always give the same rows.
        Counts above a few thousand rows are streamed over SampleStream (its
        rows equal those of one Sample call with the same seed).

        Args:
            model: Model id, "models/{id}", or a Model.
            count: Number of rows to draw.
            seed: Seed of the draw (an unsigned 64-bit integer).
            version: Model version; None or 0 means the newest.
            timeout: Deadline in seconds (default: the client's for a small
                count; none for a streamed one).

        Raises:
            InvalidArgument: a negative count.
            NotFound: the model or version does not exist.
            ResourceExhausted: count above the daemon's limit.
        """
        name, ver = _model_ref(model, version)
        count = int(count)
        if count < 0:
            raise _invalid(f"count is {count}, must not be negative")
        seed = _seed(seed)
        if count <= _UNARY_SAMPLE_ROWS:
            resp = self._unary(
                self._stub.Sample,
                svc.SampleRequest(model=name, version=ver, count=count, seed=seed, response_encoding=_LE),
                timeout,
            )
            rows = _matrix.decode(resp.rows, "rows")
            comp = np.empty(count, dtype=np.int32)
            _matrix.decode_labels_into(resp.components, comp, "components")
            return SampleResult(resp.model, int(resp.version), rows, comp)
        req = svc.SampleStreamRequest(model=name, version=ver, count=count, seed=seed, response_encoding=_LE)
        dl, t0 = self._deadline(timeout, True), time.monotonic()
        call = self._stub.SampleStream(req, timeout=dl, metadata=self._metadata)
        rows_out: Optional[np.ndarray] = None
        comp = np.empty(count, dtype=np.int32)
        offset = 0
        got_name, got_ver = name, ver
        try:
            for resp in call:
                m = int(resp.rows.rows)
                if rows_out is None:
                    rows_out = np.empty((count, int(resp.rows.cols)), dtype=np.float64)
                    got_name, got_ver = resp.model, int(resp.version)
                if offset + m > count:
                    raise error_for_code(grpc.StatusCode.INTERNAL, f"the daemon sent more than {count} rows")
                _matrix.decode_into(resp.rows, rows_out[offset : offset + m], "rows")
                _matrix.decode_labels_into(resp.components, comp[offset : offset + m], "components")
                offset += m
        except grpc.RpcError as e:
            raise from_rpc_error(e, timeout=dl, started=t0) from None
        except BaseException:
            call.cancel()
            raise
        if rows_out is None or offset != count:
            raise error_for_code(grpc.StatusCode.INTERNAL, f"the daemon sent {offset} of {count} rows")
        return SampleResult(got_name, got_ver, rows_out, comp)

    # ---------------------------------------------------------------- predict

    def predict(
        self,
        model: ModelRef,
        rows: Any,
        observed: Any,
        *,
        std: bool = False,
        covariances: bool = False,
        components: bool = False,
        component_scales: bool = False,
        draws: int = 0,
        seed: int = 0,
        version: Optional[int] = None,
        timeout: Optional[float] = None,
    ) -> PredictResult:
        """Predicts each row's unobserved features from its observed ones:
        the conditional distribution of the unobserved features under the
        model (conditional prediction), optionally with seeded draws from it
        (multiple imputation).

        Args:
            model: Model id, "models/{id}", or a Model.
            rows: An (N, D) array (or DataFrame), as for :meth:`score`;
                values at unobserved positions are ignored but must be
                finite (put 0 there; see :func:`mixd.mask_from_nan`).
            observed: Bool array of the rows' shape, True = observed; the
                False positions are predicted. None means every value is
                observed (nothing to predict; the rows come back as means).
            std: Also return the conditional standard deviations (N, D).
            covariances: Also return the conditional covariance matrices
                (N, D, D).
            components: Also return the conditional component weights
                (posteriors, (N, K)), the components' conditional means
                (N, K, D) and, for Student-t models, their degrees of
                freedom (N, K).
            component_scales: Also return the components' conditional
                covariance (Gaussian) or scale (Student-t) matrices
                (N, K, D, D).
            draws: Completed rows to draw per row from its conditional
                distribution, (N, draws, D); 0 draws none.
            seed: Seed of the draws (unsigned 64-bit). Row i's draws depend
                only on the model version, the seed and i.
            version: Model version; None or 0 means the newest (or the
                Model's own version when a Model is given).
            timeout: Deadline in seconds of each request (default: the
                client's).

        The model version is resolved once (GetModel) and large batches are
        split into several Predict requests, sized by the width of the
        response (each request passes the index of its first row, so the
        draws equal those of one request).

        Raises:
            InvalidArgument: bad rows or mask (see :meth:`score`), negative
                draws or a seed outside 0 .. 2**64-1.
            NotFound: the model or version does not exist.
            FailedPrecondition: a conditional mean or covariance asked for
                does not exist (a Student-t component with too few degrees
                of freedom).
            ResourceExhausted: rows x draws above the daemon's limit.
        """
        name, ver = _model_ref(model, version)
        x, _ = _matrix.as_rows(rows)
        n, d = x.shape
        mask = None if observed is None else _matrix.as_mask(observed, (n, d))
        draws = int(draws)
        if draws < 0:
            raise _invalid(f"draws is {draws}, must not be negative")
        seed = _seed(seed)
        # Resolve the version once, so every request uses the same one, and
        # learn K to size the requests by their responses.
        m = self.get_model(name, version=ver, timeout=timeout)
        name, ver, k = m.name, m.version, m.components
        robust = m.family == "student_t"
        per = d + 1 + draws * d  # means, log-density, draws
        if std:
            per += d
        if covariances:
            per += d * d
        if components:
            per += 2 * k + k * d
        if component_scales:
            per += k * d * d
        step = self._rows_per_chunk(max(8 * per, 8 * d + (d if mask is not None else 0)))

        out = PredictResult(
            model=name,
            version=ver,
            means=np.empty((n, d)),
            log_density=np.empty(n),
            std=np.empty((n, d)) if std else None,
            covariances=np.empty((n, d, d)) if covariances else None,
            posteriors=np.empty((n, k)) if components else None,
            component_means=np.empty((n, k, d)) if components else None,
            degrees_of_freedom=np.empty((n, k)) if components and robust else None,
            component_scales=np.empty((n, k, d, d)) if component_scales else None,
            draws=np.empty((n, draws, d)) if draws > 0 else None,
        )
        for lo in range(0, max(n, 1), step):
            hi = min(n, lo + step)
            req = svc.PredictRequest(
                model=name,
                version=ver,
                rows=_matrix.encode(x[lo:hi]),
                observed_mask=_mask_bytes(mask, lo, hi),
                include_standard_deviations=std,
                include_covariances=covariances,
                include_components=components,
                include_component_scales=component_scales,
                draws=draws,
                seed=seed,
                first_row=lo,
                response_encoding=_LE,
            )
            resp = self._unary(self._stub.Predict, req, timeout)
            if resp.version != ver:
                raise error_for_code(
                    grpc.StatusCode.INTERNAL, f"the daemon answered with version {resp.version}, asked for {ver}"
                )
            sl = slice(lo, hi)
            _matrix.decode_into(resp.means, out.means[sl], "means")
            _matrix.decode_into(resp.log_densities, out.log_density[sl], "log_densities")
            for want, msg, field in (
                (out.std, resp.standard_deviations, "standard_deviations"),
                (out.covariances, resp.covariances, "covariances"),
                (out.posteriors, resp.posteriors, "posteriors"),
                (out.component_means, resp.component_means, "component_means"),
                (out.degrees_of_freedom, resp.component_degrees_of_freedom, "component_degrees_of_freedom"),
                (out.component_scales, resp.component_scales, "component_scales"),
                (out.draws, resp.draws, "draws"),
            ):
                if want is not None:
                    _matrix.decode_into(msg, want[sl], field)
        return out

    # ---------------------------------------------------------------- compare

    def compare_models(
        self,
        model: ModelRef,
        other_model: ModelRef = "",
        *,
        version: Optional[int] = None,
        other_version: Optional[int] = None,
        samples: int = 0,
        seed: int = 0,
        timeout: Optional[float] = None,
    ) -> CompareResult:
        """Compares two models, or two versions of one model, over the same
        features: Monte Carlo estimates of the Kullback-Leibler divergence in
        both directions with standard errors, and a matching of their
        components by Bhattacharyya distance (for drift checks).

        Read :class:`~mixd.types.CompareResult` for what the numbers do and
        do not mean.

        Args:
            model: The first model, p: id, "models/{id}" or a Model.
            other_model: The second model, q; "" means the same model as
                ``model`` (to compare two of its versions).
            version: Version of p; None or 0 means the newest (or the
                Model's own version).
            other_version: Version of q, likewise.
            samples: Draws per direction (at least 2); 0 lets the daemon
                choose (20000).
            seed: Seed of the draws: the same versions, samples and seed
                give the same result.
            timeout: Deadline in seconds (default: the client's).

        Raises:
            InvalidArgument: the models have different dimensions or feature
                names, or samples is 1 or negative.
            NotFound: a model or version does not exist.
            ResourceExhausted: samples above the daemon's limit.
        """
        name, ver = _model_ref(model, version)
        if isinstance(other_model, str) and other_model == "":
            other_name, other_ver = "", int(other_version or 0)
        else:
            other_name, other_ver = _model_ref(other_model, other_version)
        samples = int(samples)
        if samples < 0:
            raise _invalid(f"samples is {samples}, must not be negative (0 lets the daemon choose)")
        req = svc.CompareModelsRequest(
            model=name,
            version=ver,
            other_model=other_name,
            other_version=other_ver,
            samples=samples,
            seed=_seed(seed),
        )
        return CompareResult.from_proto(self._unary(self._stub.CompareModels, req, timeout))

    # -------------------------------------------------------------------- fit

    def _fit_parts(
        self,
        model: str,
        rows: Any,
        components: int,
        fitter: str,
        structure: Optional[str],
        family: Optional[str],
        seed: int,
        max_iterations: int,
        tolerance: float,
        restarts: int,
        ridge: Optional[float],
        components_min: int,
        components_max: int,
        criterion: Optional[str],
        feature_names: Optional[Sequence[str]],
        options: Optional[Mapping[str, Any]],
        start: Union[Parameters, Model, None],
        row_weights: Any,
        start_labels: Any,
    ) -> Tuple[pb.FitSpec, Iterator[pb.FitChunk]]:
        if not isinstance(model, str) or not model:
            raise _invalid(f"model must be a non-empty model id, not {model!r}")
        x, names = _matrix.as_rows(rows)
        n, d = x.shape
        if feature_names is None:
            feature_names = names
        start_params: Optional[Parameters] = start.parameters if isinstance(start, Model) else start
        if start_params is not None:
            # The start fixes K, the structure and the family unless given.
            if not components and not components_max:
                components = start_params.components
            if structure is None:
                structure = start_params.structure
            if family is None:
                family = start_params.family
        spec = pb.FitSpec(
            model=model,
            fitter=fitter or "",
            components=int(components),
            components_min=int(components_min),
            components_max=int(components_max),
            criterion=_choice("criterion", criterion, _CRITERION_TO_PB),
            family=_choice("family", family, _FAMILY_TO_PB),
            covariance_structure=_choice("structure", structure, _STRUCTURE_TO_PB),
            seed=int(seed),
            max_iterations=int(max_iterations),
            tolerance=float(tolerance),
            restarts=int(restarts),
            feature_names=list(feature_names or []),
            options={str(k): _option_text(v) for k, v in (options or {}).items()},
            expected_rows=n,
        )
        if ridge is not None:
            spec.ridge = float(ridge)
        if start_params is not None:
            spec.start_parameters.CopyFrom(start_params.to_proto())
        w: Optional[np.ndarray] = None
        if row_weights is not None:
            w = np.ascontiguousarray(row_weights, dtype="<f8").reshape(-1)
            if w.shape[0] != n:
                raise _invalid(f"row_weights has {w.shape[0]} values; want one per row ({n})")
            if not np.isfinite(w).all():
                raise _invalid(f"row_weights: weight of row {int(np.flatnonzero(~np.isfinite(w))[0])} is not finite")
        labels = None
        if start_labels is not None:
            labels = np.asarray(start_labels)
            if labels.shape != (n,):
                raise _invalid(f"start_labels has shape {labels.shape}; want one label per row ({n},)")
            if n and not np.issubdtype(labels.dtype, np.integer):
                raise _invalid(f"start_labels must hold integer component indices, not {labels.dtype}")
        per = self._rows_per_chunk(8 * d + (8 if w is not None else 0) + (4 if labels is not None else 0))

        def chunks() -> Iterator[pb.FitChunk]:
            # Encoded lazily, one chunk at a time, as gRPC sends them.
            for lo in range(0, max(n, 1), per):
                hi = min(n, lo + per)
                c = pb.FitChunk(data=_matrix.encode(x[lo:hi]))
                if w is not None:
                    c.row_weights.CopyFrom(_matrix.encode(w[lo:hi].reshape(-1, 1)))
                if labels is not None:
                    c.start_labels.CopyFrom(_matrix.encode_labels(labels[lo:hi], hi - lo, "start_labels"))
                yield c

        return spec, chunks()

    def fit(
        self,
        model: str,
        rows: Any,
        *,
        components: int = 0,
        fitter: str = "",
        structure: Optional[str] = None,
        family: Optional[str] = None,
        seed: int = 0,
        max_iterations: int = 0,
        tolerance: float = 0.0,
        restarts: int = 0,
        ridge: Optional[float] = None,
        components_min: int = 0,
        components_max: int = 0,
        criterion: Optional[str] = None,
        feature_names: Optional[Sequence[str]] = None,
        options: Optional[Mapping[str, Any]] = None,
        start: Union[Parameters, Model, None] = None,
        row_weights: Any = None,
        start_labels: Any = None,
        on_progress: Optional[Callable[[FitProgress], None]] = None,
        cancel: Optional[threading.Event] = None,
        timeout: Optional[float] = None,
    ) -> Model:
        """Fits a mixture to rows and stores it as a new version of a model;
        blocks until the fit ends.

        Args:
            model: Model id to store under ("pumps" or "models/pumps").
            rows: Training rows, an (N, D) array or a pandas DataFrame (whose
                column names become the feature names).
            components: Number of components K (not needed with ``start``
                or a range).
            fitter: Fitter name ("em", "vb", "tmix", or a plugin); "" is "em".
            structure: "full", "diagonal", "spherical" or "tied"; None lets
                the fitter choose (full, or the start's structure).
            family: "gaussian" or "student_t"; None lets the fitter choose.
            seed: Seed of every random choice; the same data, settings and
                seed give the same model.
            max_iterations: Iteration cap per run; 0 is the fitter's default;
                -1 evaluates the start without iterating.
            tolerance: Convergence tolerance; 0 is the fitter's default.
            restarts: Independent starts; 0 is the fitter's default.
            ridge: Added to covariance diagonals; None is the fitter's
                default, 0 is none.
            components_min: Lower end of a range of K (with components_max).
            components_max: Fit every K in the range and keep the best by
                ``criterion``; 0 means no range.
            criterion: "bic" (default) or "aic".
            feature_names: Names of the columns (default: a DataFrame's).
            options: Method-specific fitter options (values become strings).
            start: Starting parameters (a Parameters or a Model).
            row_weights: Optional non-negative weight per row, shape (N,).
            start_labels: Optional starting component per row, shape (N,).
            on_progress: Called with each progress event (iteration and
                objective); an exception raised in it cancels the fit and
                propagates.
            cancel: When this event is set, the fit is cancelled and
                :class:`~mixd.errors.Cancelled` is raised.
            timeout: Deadline in seconds for the whole fit (default: none).

        Returns:
            The stored model version.

        Raises:
            InvalidArgument: bad rows, spec or start parameters (the message
                names the field or row).
            Unimplemented: the fitter does not fit that family or structure.
            Cancelled: the fit was cancelled.
            Unavailable: the fitter process crashed (retryable).
        """
        spec, chunks = self._fit_parts(
            model, rows, components, fitter, structure, family, seed, max_iterations, tolerance, restarts,
            ridge, components_min, components_max, criterion, feature_names, options, start, row_weights,
            start_labels,
        )

        def requests() -> Iterator[svc.FitRequest]:
            for i, c in enumerate(chunks):
                yield svc.FitRequest(spec=spec, chunk=c) if i == 0 else svc.FitRequest(chunk=c)

        dl, t0 = self._deadline(timeout, True), time.monotonic()
        call = self._stub.Fit(requests(), timeout=dl, metadata=self._metadata)
        return self._follow(call, on_progress, cancel, dl, t0)

    def _follow(
        self,
        call: Any,
        on_progress: Optional[Callable[[FitProgress], None]],
        cancel: Optional[threading.Event],
        timeout: Optional[float],
        started: float,
    ) -> Model:
        """Reads a Fit or WatchFitJob event stream until the model arrives."""
        canceller = _Canceller(call, cancel)
        job: Optional[FitJob] = None
        result: Optional[Model] = None
        try:
            for ev in call:
                kind = ev.WhichOneof("event")
                if kind == "job":
                    job = FitJob.from_proto(ev.job)
                elif kind == "progress" and on_progress is not None:
                    on_progress(FitProgress.from_proto(ev.progress))
                elif kind == "model":
                    result = Model.from_proto(ev.model)
        except grpc.RpcError as e:
            if canceller.fired:
                raise error_for_code(grpc.StatusCode.CANCELLED, "the call was cancelled by the caller (cancel event set)") from None
            raise from_rpc_error(e, timeout=timeout, started=started) from None
        except BaseException:
            call.cancel()
            raise
        finally:
            canceller.stop()
        if result is not None:
            return result
        if job is not None:
            err = job.error()
            if err is not None:
                raise err
        raise error_for_code(grpc.StatusCode.INTERNAL, "the event stream ended without a model")

    def start_fit(
        self,
        model: str,
        rows: Any,
        *,
        components: int = 0,
        fitter: str = "",
        structure: Optional[str] = None,
        family: Optional[str] = None,
        seed: int = 0,
        max_iterations: int = 0,
        tolerance: float = 0.0,
        restarts: int = 0,
        ridge: Optional[float] = None,
        components_min: int = 0,
        components_max: int = 0,
        criterion: Optional[str] = None,
        feature_names: Optional[Sequence[str]] = None,
        options: Optional[Mapping[str, Any]] = None,
        start: Union[Parameters, Model, None] = None,
        row_weights: Any = None,
        start_labels: Any = None,
        timeout: Optional[float] = None,
    ) -> FitJob:
        """Uploads rows and starts a fit job that runs whether or not anybody
        watches it; returns at once with the job.

        The arguments are those of :meth:`fit`. Follow the job with
        :meth:`watch`, :meth:`get_job`, and stop it with :meth:`cancel_job`.
        ``timeout`` bounds the upload only (default: none).
        """
        spec, chunks = self._fit_parts(
            model, rows, components, fitter, structure, family, seed, max_iterations, tolerance, restarts,
            ridge, components_min, components_max, criterion, feature_names, options, start, row_weights,
            start_labels,
        )

        def requests() -> Iterator[svc.CreateFitJobRequest]:
            for i, c in enumerate(chunks):
                yield svc.CreateFitJobRequest(spec=spec, chunk=c) if i == 0 else svc.CreateFitJobRequest(chunk=c)

        dl, t0 = self._deadline(timeout, True), time.monotonic()
        try:
            resp = self._stub.CreateFitJob(requests(), timeout=dl, metadata=self._metadata)
        except grpc.RpcError as e:
            raise from_rpc_error(e, timeout=dl, started=t0) from None
        return FitJob.from_proto(resp.job)

    def watch(
        self,
        job: JobRef,
        *,
        on_progress: Optional[Callable[[FitProgress], None]] = None,
        cancel: Optional[threading.Event] = None,
        timeout: Optional[float] = None,
    ) -> Model:
        """Follows a fit job until it ends and returns its model.

        Setting ``cancel`` stops watching (raising Cancelled) but does not
        cancel the job; use :meth:`cancel_job` for that.

        Raises:
            NotFound: no such job.
            The job's own error (e.g. InvalidArgument, Cancelled) when it
            failed or was cancelled.
        """
        req = svc.WatchFitJobRequest(name=_job_name(job))
        dl, t0 = self._deadline(timeout, True), time.monotonic()
        call = self._stub.WatchFitJob(req, timeout=dl, metadata=self._metadata)
        return self._follow(call, on_progress, cancel, dl, t0)

    def get_job(self, job: JobRef, *, timeout: Optional[float] = None) -> FitJob:
        """Returns the current state of a fit job.

        Raises:
            NotFound: no such job (or it is too old to be remembered).
        """
        resp = self._unary(self._stub.GetFitJob, svc.GetFitJobRequest(name=_job_name(job)), timeout)
        return FitJob.from_proto(resp.job)

    def cancel_job(self, job: JobRef, *, timeout: Optional[float] = None) -> FitJob:
        """Cancels a fit job that is receiving, queued or running, and
        returns it (normally in state "cancelled").

        Raises:
            NotFound: no such job.
            FailedPrecondition: the job has already ended.
        """
        resp = self._unary(self._stub.CancelFitJob, svc.CancelFitJobRequest(name=_job_name(job)), timeout)
        return FitJob.from_proto(resp.job)

    def list_jobs(self, *, timeout: Optional[float] = None) -> List[FitJob]:
        """Lists the fit jobs the daemon remembers, newest first."""
        out: List[FitJob] = []
        token = ""
        while True:
            resp = self._unary(self._stub.ListFitJobs, svc.ListFitJobsRequest(page_token=token), timeout)
            out.extend(FitJob.from_proto(j) for j in resp.jobs)
            token = resp.next_page_token
            if not token:
                return out

    # ----------------------------------------------------------------- models

    def get_model(self, model: ModelRef, *, version: Optional[int] = None, timeout: Optional[float] = None) -> Model:
        """Returns one version of a model (None or 0: the newest).

        Raises:
            NotFound: the model or version does not exist.
        """
        name, ver = _model_ref(model, version)
        resp = self._unary(self._stub.GetModel, svc.GetModelRequest(name=name, version=ver), timeout)
        return Model.from_proto(resp.model)

    def list_models(self, *, timeout: Optional[float] = None) -> List[Model]:
        """Lists the newest version of every model, by name (all pages)."""
        out: List[Model] = []
        token = ""
        while True:
            resp = self._unary(self._stub.ListModels, svc.ListModelsRequest(page_token=token), timeout)
            out.extend(Model.from_proto(m) for m in resp.models)
            token = resp.next_page_token
            if not token:
                return out

    def list_versions(self, model: ModelRef, *, timeout: Optional[float] = None) -> List[Model]:
        """Lists every version of a model, oldest first (all pages).

        Raises:
            NotFound: the model does not exist.
        """
        name, _ = _model_ref(model, None)
        out: List[Model] = []
        token = ""
        while True:
            resp = self._unary(
                self._stub.ListModelVersions, svc.ListModelVersionsRequest(name=name, page_token=token), timeout
            )
            out.extend(Model.from_proto(m) for m in resp.models)
            token = resp.next_page_token
            if not token:
                return out

    def delete_model(self, model: ModelRef, *, version: Optional[int] = None, timeout: Optional[float] = None) -> int:
        """Deletes one version of a model, or every version when version is
        None or 0 (a Model given here deletes only its own version). Returns
        the number of versions deleted.

        Raises:
            NotFound: the model or version does not exist.
        """
        name, ver = _model_ref(model, version)
        resp = self._unary(self._stub.DeleteModel, svc.DeleteModelRequest(name=name, version=ver), timeout)
        return int(resp.deleted_versions)

    def export_model(self, model: ModelRef, *, version: Optional[int] = None, timeout: Optional[float] = None) -> bytes:
        """Returns a model version as a model document (UTF-8 JSON bytes;
        see daemon/modeldoc/FORMAT.md for the format).

        Raises:
            NotFound: the model or version does not exist.
        """
        name, ver = _model_ref(model, version)
        resp = self._unary(self._stub.ExportModel, svc.ExportModelRequest(name=name, version=ver), timeout)
        return bytes(resp.document)

    def import_model(
        self,
        document: Union[bytes, str, Mapping[str, Any]],
        *,
        name: Optional[str] = None,
        timeout: Optional[float] = None,
    ) -> Model:
        """Validates a model document and stores it as a new version.

        Args:
            document: The document as bytes, text, or a dict (serialised to
                JSON here).
            name: Store under this model id instead of the document's.

        Raises:
            InvalidArgument: the document does not validate (the message
                names the field). Nothing is stored.
        """
        if isinstance(document, Mapping):
            data = json.dumps(document).encode()
        elif isinstance(document, str):
            data = document.encode()
        else:
            data = bytes(document)
        resp = self._unary(
            self._stub.ImportModel, svc.ImportModelRequest(document=data, name=name or ""), timeout
        )
        return Model.from_proto(resp.model)

    # ---------------------------------------------------------------- fitters

    def list_fitters(self, *, timeout: Optional[float] = None) -> List[FitterInfo]:
        """Lists the fitters the daemon offers, by name."""
        resp = self._unary(self._stub.ListFitters, svc.ListFittersRequest(), timeout)
        return [FitterInfo.from_proto(f) for f in resp.fitters]

    def reload_fitters(self, *, timeout: Optional[float] = None) -> Tuple[List[FitterInfo], List[str]]:
        """Makes the daemon rescan its plugin directory; returns the fitters
        and the problems with executables that could not be loaded."""
        resp = self._unary(self._stub.ReloadFitters, svc.ReloadFittersRequest(), timeout)
        return [FitterInfo.from_proto(f) for f in resp.fitters], list(resp.problems)


class _ScoreAssembler:
    """Collects score responses (unary or streamed) into preallocated arrays."""

    def __init__(self, n: int) -> None:
        self.n = n
        self.model = ""
        self.version = 0
        self.log_density = np.empty(n, dtype=np.float64)
        self.percentile: Optional[np.ndarray] = None
        self.components: Optional[np.ndarray] = None
        self.outlier_statistic: Optional[np.ndarray] = None
        self.outlier: Optional[np.ndarray] = None
        self.log_likelihood = 0.0
        self._first = True

    def add(self, r: Any, offset: int) -> int:
        m = int(r.log_densities.rows)
        if offset + m > self.n:
            raise error_for_code(grpc.StatusCode.INTERNAL, f"the daemon answered more than the {self.n} rows sent")
        if self._first:
            self.model, self.version = r.model, int(r.version)
            if r.HasField("percentiles"):
                self.percentile = np.empty(self.n, dtype=np.float64)
            if r.HasField("component_log_densities"):
                self.components = np.empty((self.n, int(r.component_log_densities.cols)), dtype=np.float64)
            if r.HasField("outlier_statistics"):
                self.outlier_statistic = np.empty(self.n, dtype=np.float64)
                self.outlier = np.zeros(self.n, dtype=bool)
            self._first = False
        sl = slice(offset, offset + m)
        _matrix.decode_into(r.log_densities, self.log_density[sl], "log_densities")
        if self.percentile is not None:
            _matrix.decode_into(r.percentiles, self.percentile[sl], "percentiles")
        if self.components is not None:
            _matrix.decode_into(r.component_log_densities, self.components[sl], "component_log_densities")
        if self.outlier_statistic is not None:
            _matrix.decode_into(r.outlier_statistics, self.outlier_statistic[sl], "outlier_statistics")
        if self.outlier is not None and m:
            if len(r.outliers) != m:
                raise error_for_code(grpc.StatusCode.INTERNAL, f"the daemon sent {len(r.outliers)} outlier flags for {m} rows")
            self.outlier[sl] = _matrix.bools(r.outliers, m)
        self.log_likelihood += float(r.log_likelihood)
        return m

    def result(self) -> ScoreResult:
        return ScoreResult(
            model=self.model,
            version=self.version,
            log_density=self.log_density,
            percentile=self.percentile,
            component_log_density=self.components,
            log_likelihood=self.log_likelihood,
            outlier_statistic=self.outlier_statistic,
            outlier=self.outlier,
        )


class _ClassifyAssembler:
    """Collects classify responses into preallocated arrays."""

    def __init__(self, n: int, min_posterior: float) -> None:
        self.n = n
        self.min_posterior = min_posterior
        self.model = ""
        self.version = 0
        self.component = np.empty(n, dtype=np.int32)
        self.max_posterior = np.empty(n, dtype=np.float64)
        self.posteriors: Optional[np.ndarray] = None
        self.confident = np.ones(n, dtype=bool)
        self._first = True

    def add(self, r: Any, offset: int) -> int:
        m = int(r.max_posteriors.rows)
        if offset + m > self.n:
            raise error_for_code(grpc.StatusCode.INTERNAL, f"the daemon answered more than the {self.n} rows sent")
        if self._first:
            self.model, self.version = r.model, int(r.version)
            if r.HasField("posteriors"):
                self.posteriors = np.empty((self.n, int(r.posteriors.cols)), dtype=np.float64)
            self._first = False
        sl = slice(offset, offset + m)
        _matrix.decode_labels_into(r.components, self.component[sl], "components")
        _matrix.decode_into(r.max_posteriors, self.max_posterior[sl], "max_posteriors")
        if self.posteriors is not None:
            _matrix.decode_into(r.posteriors, self.posteriors[sl], "posteriors")
        if m and self.min_posterior > 0:
            if len(r.confident) != m:
                raise error_for_code(grpc.StatusCode.INTERNAL, f"the daemon sent {len(r.confident)} confidence flags for {m} rows")
            self.confident[sl] = _matrix.bools(r.confident, m)
        return m

    def result(self) -> ClassifyResult:
        return ClassifyResult(
            model=self.model,
            version=self.version,
            component=self.component,
            max_posterior=self.max_posterior,
            posteriors=self.posteriors,
            confident=self.confident,
        )

