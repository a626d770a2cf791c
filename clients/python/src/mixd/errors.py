"""Exceptions raised by the mixd client.

Every failure of a call is raised as a :class:`MixdError` (or a subclass
chosen by its gRPC status code) carrying the code and the daemon's own
message, which names the field, row or limit at fault. Mistakes the client
can see before sending anything (a 1-D array, a NaN, an unknown covariance
structure) are raised as :class:`InvalidArgument` too, so a caller handles
one hierarchy.
"""

from __future__ import annotations

import time
from typing import Dict, Optional, Type

import grpc

__all__ = [
    "MixdError",
    "InvalidArgument",
    "NotFound",
    "AlreadyExists",
    "FailedPrecondition",
    "ResourceExhausted",
    "Unavailable",
    "Cancelled",
    "DeadlineExceeded",
    "Unimplemented",
    "DataLoss",
    "Unauthenticated",
    "PermissionDenied",
    "Internal",
    "error_for_code",
    "from_rpc_error",
]


class MixdError(Exception):
    """Base class of every error raised by the mixd client.

    Attributes:
        code: The gRPC status code of the failure.
        message: The daemon's message (or the client's, for errors found
            before anything was sent).
    """

    code: grpc.StatusCode
    message: str

    def __init__(self, code: grpc.StatusCode, message: str) -> None:
        super().__init__(f"{code.name}: {message}")
        self.code = code
        self.message = message


class InvalidArgument(MixdError, ValueError):
    """The request was malformed: a bad shape, a non-finite value, an unknown
    name, or parameters that do not validate. Nothing was changed."""


class NotFound(MixdError, LookupError):
    """The model, model version or fit job does not exist."""


class AlreadyExists(MixdError):
    """The resource to be created exists already."""


class FailedPrecondition(MixdError):
    """The request is valid but the system is not in a state to run it, for
    example cancelling a fit job that has already ended."""


class ResourceExhausted(MixdError):
    """A configured limit of the daemon was exceeded (rows per message,
    dimension, components, active jobs, message size)."""


class Unavailable(MixdError):
    """The daemon (or a fitter process) could not be reached or went away;
    retrying may succeed."""


class Cancelled(MixdError):
    """The call or fit job was cancelled."""


class DeadlineExceeded(MixdError):
    """The call's deadline passed before it finished."""


class Unimplemented(MixdError):
    """The daemon or the chosen fitter does not support what was asked, for
    example a covariance structure the fitter does not fit."""


class DataLoss(MixdError):
    """A stored model is corrupt and is not served."""


class Unauthenticated(MixdError):
    """The daemon rejected the call's credentials (missing or wrong token)."""


class PermissionDenied(MixdError):
    """The credentials are valid but do not allow this call."""


class Internal(MixdError):
    """An unexpected failure in the daemon (or any code without a more
    specific class)."""


_BY_CODE: Dict[grpc.StatusCode, Type[MixdError]] = {
    grpc.StatusCode.INVALID_ARGUMENT: InvalidArgument,
    grpc.StatusCode.OUT_OF_RANGE: InvalidArgument,
    grpc.StatusCode.NOT_FOUND: NotFound,
    grpc.StatusCode.ALREADY_EXISTS: AlreadyExists,
    grpc.StatusCode.FAILED_PRECONDITION: FailedPrecondition,
    grpc.StatusCode.RESOURCE_EXHAUSTED: ResourceExhausted,
    grpc.StatusCode.UNAVAILABLE: Unavailable,
    grpc.StatusCode.CANCELLED: Cancelled,
    grpc.StatusCode.DEADLINE_EXCEEDED: DeadlineExceeded,
    grpc.StatusCode.UNIMPLEMENTED: Unimplemented,
    grpc.StatusCode.DATA_LOSS: DataLoss,
    grpc.StatusCode.UNAUTHENTICATED: Unauthenticated,
    grpc.StatusCode.PERMISSION_DENIED: PermissionDenied,
}

_CODE_BY_NUMBER: Dict[int, grpc.StatusCode] = {c.value[0]: c for c in grpc.StatusCode}


def error_for_code(code: grpc.StatusCode, message: str) -> MixdError:
    """Returns the exception for a gRPC status code and message.

    Codes without a class of their own (UNKNOWN, INTERNAL, ABORTED) give
    :class:`Internal`; the exception's ``code`` is always the code given.
    """
    cls = _BY_CODE.get(code, Internal)
    return cls(code, message)


def _from_number(number: int, message: str) -> MixdError:
    """The exception for a numeric status code (as in FitJob.error_code)."""
    code = _CODE_BY_NUMBER.get(number, grpc.StatusCode.UNKNOWN)
    return error_for_code(code, message)


def from_rpc_error(
    err: grpc.RpcError, *, timeout: Optional[float] = None, started: Optional[float] = None
) -> MixdError:
    """Translates a grpc.RpcError raised by a call of the generated stub
    (see :attr:`mixd.Client.stub`) into the matching :class:`MixdError`.

    Give the call's ``timeout`` (seconds) and the ``time.monotonic()`` at
    which it ``started`` to report a call that ran out of time as
    :class:`DeadlineExceeded` even when it arrives as CANCELLED: a gRPC
    server ends a call at its deadline by resetting the stream, and when that
    reset reaches the client before the client's own timer fires (a busy
    client process), the channel reports CANCELLED.
    """
    code = err.code() if hasattr(err, "code") else None
    details = err.details() if hasattr(err, "details") else None
    if not isinstance(code, grpc.StatusCode):
        code = grpc.StatusCode.UNKNOWN
    if (
        code == grpc.StatusCode.CANCELLED
        and timeout is not None
        and started is not None
        and time.monotonic() - started >= timeout
    ):
        return error_for_code(
            grpc.StatusCode.DEADLINE_EXCEEDED,
            f"the call's deadline of {timeout:g} s passed (the daemon ended it: {details or err})",
        )
    return error_for_code(code, details or str(err))


def _invalid(message: str) -> InvalidArgument:
    """A client-side INVALID_ARGUMENT error."""
    return InvalidArgument(grpc.StatusCode.INVALID_ARGUMENT, message)
