"""mixd: the Python client of the mixd mixture-model daemon.

Fit Gaussian and Student-t mixture models; score, classify and sample rows
with them (also rows with unobserved features, given by an explicit mask);
predict unobserved features from observed ones; and compare two models for
drift, over gRPC with numpy arrays in and out::

    import numpy as np, mixd
    x = np.loadtxt("testdata/pumps/stations.csv", delimiter=",", skiprows=1)
    with mixd.Client() as c:  # $MIXD_ADDR, else 127.0.0.1:7313
        m = c.fit("pumps-py", x, components=4, seed=7)
        print(c.score(m, x[:3]).percentile, c.classify(m, x[:3]).component)

Public names: :class:`Client`; the result and parameter dataclasses
(:class:`Model`, :class:`Parameters`, :class:`FitReport`,
:class:`ScoreResult`, :class:`ClassifyResult`, :class:`SampleResult`,
:class:`PredictResult`, :class:`CompareResult`, :class:`ComponentMatch`,
:class:`FitJob`, :class:`FitProgress`, :class:`FitterInfo`);
:func:`mask_from_nan`, which turns NaN-marked missing values into values and
an explicit mask; the exception hierarchy rooted at :class:`MixdError`.
"""

from .client import (
    DEFAULT_CHUNK_BYTES,
    DEFAULT_MAX_RECEIVE_BYTES,
    DEFAULT_TARGET,
    DEFAULT_TIMEOUT,
    Client,
    JobRef,
    ModelRef,
)
from ._matrix import mask_from_nan
from .errors import (
    AlreadyExists,
    Cancelled,
    DataLoss,
    DeadlineExceeded,
    FailedPrecondition,
    Internal,
    InvalidArgument,
    MixdError,
    NotFound,
    PermissionDenied,
    ResourceExhausted,
    Unauthenticated,
    Unavailable,
    Unimplemented,
    error_for_code,
    from_rpc_error,
)
from .types import (
    CRITERIA,
    FAMILIES,
    JOB_STATES,
    STRUCTURES,
    ClassifyResult,
    CompareResult,
    ComponentMatch,
    FitJob,
    FitProgress,
    FitReport,
    FitterInfo,
    FitterOption,
    Model,
    Parameters,
    PredictResult,
    SampleResult,
    ScoreResult,
    SelectionRow,
)

#: Version of this client package.
__version__ = "0.1.0"

__all__ = [
    "Client",
    "ModelRef",
    "JobRef",
    "DEFAULT_TARGET",
    "DEFAULT_TIMEOUT",
    "DEFAULT_CHUNK_BYTES",
    "DEFAULT_MAX_RECEIVE_BYTES",
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
    "FAMILIES",
    "STRUCTURES",
    "CRITERIA",
    "JOB_STATES",
    "Parameters",
    "SelectionRow",
    "FitReport",
    "Model",
    "FitProgress",
    "FitJob",
    "FitterOption",
    "FitterInfo",
    "ScoreResult",
    "ClassifyResult",
    "SampleResult",
    "PredictResult",
    "CompareResult",
    "ComponentMatch",
    "mask_from_nan",
    "__version__",
]
