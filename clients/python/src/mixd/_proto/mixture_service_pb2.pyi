from mixd._proto import types_pb2 as _types_pb2
from google.protobuf.internal import containers as _containers
from google.protobuf import descriptor as _descriptor
from google.protobuf import message as _message
from collections.abc import Iterable as _Iterable, Mapping as _Mapping
from typing import ClassVar as _ClassVar, Optional as _Optional, Union as _Union

DESCRIPTOR: _descriptor.FileDescriptor

class FitRequest(_message.Message):
    __slots__ = ("spec", "chunk")
    SPEC_FIELD_NUMBER: _ClassVar[int]
    CHUNK_FIELD_NUMBER: _ClassVar[int]
    spec: _types_pb2.FitSpec
    chunk: _types_pb2.FitChunk
    def __init__(self, spec: _Optional[_Union[_types_pb2.FitSpec, _Mapping]] = ..., chunk: _Optional[_Union[_types_pb2.FitChunk, _Mapping]] = ...) -> None: ...

class FitResponse(_message.Message):
    __slots__ = ("job", "progress", "model")
    JOB_FIELD_NUMBER: _ClassVar[int]
    PROGRESS_FIELD_NUMBER: _ClassVar[int]
    MODEL_FIELD_NUMBER: _ClassVar[int]
    job: _types_pb2.FitJob
    progress: _types_pb2.FitProgress
    model: _types_pb2.Model
    def __init__(self, job: _Optional[_Union[_types_pb2.FitJob, _Mapping]] = ..., progress: _Optional[_Union[_types_pb2.FitProgress, _Mapping]] = ..., model: _Optional[_Union[_types_pb2.Model, _Mapping]] = ...) -> None: ...

class CreateFitJobRequest(_message.Message):
    __slots__ = ("spec", "chunk")
    SPEC_FIELD_NUMBER: _ClassVar[int]
    CHUNK_FIELD_NUMBER: _ClassVar[int]
    spec: _types_pb2.FitSpec
    chunk: _types_pb2.FitChunk
    def __init__(self, spec: _Optional[_Union[_types_pb2.FitSpec, _Mapping]] = ..., chunk: _Optional[_Union[_types_pb2.FitChunk, _Mapping]] = ...) -> None: ...

class CreateFitJobResponse(_message.Message):
    __slots__ = ("job",)
    JOB_FIELD_NUMBER: _ClassVar[int]
    job: _types_pb2.FitJob
    def __init__(self, job: _Optional[_Union[_types_pb2.FitJob, _Mapping]] = ...) -> None: ...

class GetFitJobRequest(_message.Message):
    __slots__ = ("name",)
    NAME_FIELD_NUMBER: _ClassVar[int]
    name: str
    def __init__(self, name: _Optional[str] = ...) -> None: ...

class GetFitJobResponse(_message.Message):
    __slots__ = ("job", "model")
    JOB_FIELD_NUMBER: _ClassVar[int]
    MODEL_FIELD_NUMBER: _ClassVar[int]
    job: _types_pb2.FitJob
    model: _types_pb2.Model
    def __init__(self, job: _Optional[_Union[_types_pb2.FitJob, _Mapping]] = ..., model: _Optional[_Union[_types_pb2.Model, _Mapping]] = ...) -> None: ...

class WatchFitJobRequest(_message.Message):
    __slots__ = ("name",)
    NAME_FIELD_NUMBER: _ClassVar[int]
    name: str
    def __init__(self, name: _Optional[str] = ...) -> None: ...

class WatchFitJobResponse(_message.Message):
    __slots__ = ("job", "progress", "model")
    JOB_FIELD_NUMBER: _ClassVar[int]
    PROGRESS_FIELD_NUMBER: _ClassVar[int]
    MODEL_FIELD_NUMBER: _ClassVar[int]
    job: _types_pb2.FitJob
    progress: _types_pb2.FitProgress
    model: _types_pb2.Model
    def __init__(self, job: _Optional[_Union[_types_pb2.FitJob, _Mapping]] = ..., progress: _Optional[_Union[_types_pb2.FitProgress, _Mapping]] = ..., model: _Optional[_Union[_types_pb2.Model, _Mapping]] = ...) -> None: ...

class CancelFitJobRequest(_message.Message):
    __slots__ = ("name",)
    NAME_FIELD_NUMBER: _ClassVar[int]
    name: str
    def __init__(self, name: _Optional[str] = ...) -> None: ...

class CancelFitJobResponse(_message.Message):
    __slots__ = ("job",)
    JOB_FIELD_NUMBER: _ClassVar[int]
    job: _types_pb2.FitJob
    def __init__(self, job: _Optional[_Union[_types_pb2.FitJob, _Mapping]] = ...) -> None: ...

class ListFitJobsRequest(_message.Message):
    __slots__ = ("page_size", "page_token")
    PAGE_SIZE_FIELD_NUMBER: _ClassVar[int]
    PAGE_TOKEN_FIELD_NUMBER: _ClassVar[int]
    page_size: int
    page_token: str
    def __init__(self, page_size: _Optional[int] = ..., page_token: _Optional[str] = ...) -> None: ...

class ListFitJobsResponse(_message.Message):
    __slots__ = ("jobs", "next_page_token")
    JOBS_FIELD_NUMBER: _ClassVar[int]
    NEXT_PAGE_TOKEN_FIELD_NUMBER: _ClassVar[int]
    jobs: _containers.RepeatedCompositeFieldContainer[_types_pb2.FitJob]
    next_page_token: str
    def __init__(self, jobs: _Optional[_Iterable[_Union[_types_pb2.FitJob, _Mapping]]] = ..., next_page_token: _Optional[str] = ...) -> None: ...

class ScoreRequest(_message.Message):
    __slots__ = ("model", "version", "rows", "include_component_log_densities", "response_encoding", "outlier_level", "observed_mask")
    MODEL_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    ROWS_FIELD_NUMBER: _ClassVar[int]
    INCLUDE_COMPONENT_LOG_DENSITIES_FIELD_NUMBER: _ClassVar[int]
    RESPONSE_ENCODING_FIELD_NUMBER: _ClassVar[int]
    OUTLIER_LEVEL_FIELD_NUMBER: _ClassVar[int]
    OBSERVED_MASK_FIELD_NUMBER: _ClassVar[int]
    model: str
    version: int
    rows: _types_pb2.Matrix
    include_component_log_densities: bool
    response_encoding: _types_pb2.MatrixEncoding
    outlier_level: float
    observed_mask: bytes
    def __init__(self, model: _Optional[str] = ..., version: _Optional[int] = ..., rows: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., include_component_log_densities: _Optional[bool] = ..., response_encoding: _Optional[_Union[_types_pb2.MatrixEncoding, str]] = ..., outlier_level: _Optional[float] = ..., observed_mask: _Optional[bytes] = ...) -> None: ...

class ScoreResponse(_message.Message):
    __slots__ = ("model", "version", "log_densities", "percentiles", "component_log_densities", "log_likelihood", "outlier_statistics", "outliers")
    MODEL_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    LOG_DENSITIES_FIELD_NUMBER: _ClassVar[int]
    PERCENTILES_FIELD_NUMBER: _ClassVar[int]
    COMPONENT_LOG_DENSITIES_FIELD_NUMBER: _ClassVar[int]
    LOG_LIKELIHOOD_FIELD_NUMBER: _ClassVar[int]
    OUTLIER_STATISTICS_FIELD_NUMBER: _ClassVar[int]
    OUTLIERS_FIELD_NUMBER: _ClassVar[int]
    model: str
    version: int
    log_densities: _types_pb2.Matrix
    percentiles: _types_pb2.Matrix
    component_log_densities: _types_pb2.Matrix
    log_likelihood: float
    outlier_statistics: _types_pb2.Matrix
    outliers: _containers.RepeatedScalarFieldContainer[bool]
    def __init__(self, model: _Optional[str] = ..., version: _Optional[int] = ..., log_densities: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., percentiles: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., component_log_densities: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., log_likelihood: _Optional[float] = ..., outlier_statistics: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., outliers: _Optional[_Iterable[bool]] = ...) -> None: ...

class ScoreStreamRequest(_message.Message):
    __slots__ = ("model", "version", "rows", "include_component_log_densities", "response_encoding", "outlier_level", "observed_mask")
    MODEL_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    ROWS_FIELD_NUMBER: _ClassVar[int]
    INCLUDE_COMPONENT_LOG_DENSITIES_FIELD_NUMBER: _ClassVar[int]
    RESPONSE_ENCODING_FIELD_NUMBER: _ClassVar[int]
    OUTLIER_LEVEL_FIELD_NUMBER: _ClassVar[int]
    OBSERVED_MASK_FIELD_NUMBER: _ClassVar[int]
    model: str
    version: int
    rows: _types_pb2.Matrix
    include_component_log_densities: bool
    response_encoding: _types_pb2.MatrixEncoding
    outlier_level: float
    observed_mask: bytes
    def __init__(self, model: _Optional[str] = ..., version: _Optional[int] = ..., rows: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., include_component_log_densities: _Optional[bool] = ..., response_encoding: _Optional[_Union[_types_pb2.MatrixEncoding, str]] = ..., outlier_level: _Optional[float] = ..., observed_mask: _Optional[bytes] = ...) -> None: ...

class ScoreStreamResponse(_message.Message):
    __slots__ = ("model", "version", "log_densities", "percentiles", "component_log_densities", "log_likelihood", "outlier_statistics", "outliers")
    MODEL_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    LOG_DENSITIES_FIELD_NUMBER: _ClassVar[int]
    PERCENTILES_FIELD_NUMBER: _ClassVar[int]
    COMPONENT_LOG_DENSITIES_FIELD_NUMBER: _ClassVar[int]
    LOG_LIKELIHOOD_FIELD_NUMBER: _ClassVar[int]
    OUTLIER_STATISTICS_FIELD_NUMBER: _ClassVar[int]
    OUTLIERS_FIELD_NUMBER: _ClassVar[int]
    model: str
    version: int
    log_densities: _types_pb2.Matrix
    percentiles: _types_pb2.Matrix
    component_log_densities: _types_pb2.Matrix
    log_likelihood: float
    outlier_statistics: _types_pb2.Matrix
    outliers: _containers.RepeatedScalarFieldContainer[bool]
    def __init__(self, model: _Optional[str] = ..., version: _Optional[int] = ..., log_densities: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., percentiles: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., component_log_densities: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., log_likelihood: _Optional[float] = ..., outlier_statistics: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., outliers: _Optional[_Iterable[bool]] = ...) -> None: ...

class ClassifyRequest(_message.Message):
    __slots__ = ("model", "version", "rows", "min_posterior", "include_posteriors", "response_encoding", "observed_mask")
    MODEL_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    ROWS_FIELD_NUMBER: _ClassVar[int]
    MIN_POSTERIOR_FIELD_NUMBER: _ClassVar[int]
    INCLUDE_POSTERIORS_FIELD_NUMBER: _ClassVar[int]
    RESPONSE_ENCODING_FIELD_NUMBER: _ClassVar[int]
    OBSERVED_MASK_FIELD_NUMBER: _ClassVar[int]
    model: str
    version: int
    rows: _types_pb2.Matrix
    min_posterior: float
    include_posteriors: bool
    response_encoding: _types_pb2.MatrixEncoding
    observed_mask: bytes
    def __init__(self, model: _Optional[str] = ..., version: _Optional[int] = ..., rows: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., min_posterior: _Optional[float] = ..., include_posteriors: _Optional[bool] = ..., response_encoding: _Optional[_Union[_types_pb2.MatrixEncoding, str]] = ..., observed_mask: _Optional[bytes] = ...) -> None: ...

class ClassifyResponse(_message.Message):
    __slots__ = ("model", "version", "components", "max_posteriors", "posteriors", "confident")
    MODEL_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    COMPONENTS_FIELD_NUMBER: _ClassVar[int]
    MAX_POSTERIORS_FIELD_NUMBER: _ClassVar[int]
    POSTERIORS_FIELD_NUMBER: _ClassVar[int]
    CONFIDENT_FIELD_NUMBER: _ClassVar[int]
    model: str
    version: int
    components: _types_pb2.Labels
    max_posteriors: _types_pb2.Matrix
    posteriors: _types_pb2.Matrix
    confident: _containers.RepeatedScalarFieldContainer[bool]
    def __init__(self, model: _Optional[str] = ..., version: _Optional[int] = ..., components: _Optional[_Union[_types_pb2.Labels, _Mapping]] = ..., max_posteriors: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., posteriors: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., confident: _Optional[_Iterable[bool]] = ...) -> None: ...

class ClassifyStreamRequest(_message.Message):
    __slots__ = ("model", "version", "rows", "min_posterior", "include_posteriors", "response_encoding", "observed_mask")
    MODEL_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    ROWS_FIELD_NUMBER: _ClassVar[int]
    MIN_POSTERIOR_FIELD_NUMBER: _ClassVar[int]
    INCLUDE_POSTERIORS_FIELD_NUMBER: _ClassVar[int]
    RESPONSE_ENCODING_FIELD_NUMBER: _ClassVar[int]
    OBSERVED_MASK_FIELD_NUMBER: _ClassVar[int]
    model: str
    version: int
    rows: _types_pb2.Matrix
    min_posterior: float
    include_posteriors: bool
    response_encoding: _types_pb2.MatrixEncoding
    observed_mask: bytes
    def __init__(self, model: _Optional[str] = ..., version: _Optional[int] = ..., rows: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., min_posterior: _Optional[float] = ..., include_posteriors: _Optional[bool] = ..., response_encoding: _Optional[_Union[_types_pb2.MatrixEncoding, str]] = ..., observed_mask: _Optional[bytes] = ...) -> None: ...

class ClassifyStreamResponse(_message.Message):
    __slots__ = ("model", "version", "components", "max_posteriors", "posteriors", "confident")
    MODEL_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    COMPONENTS_FIELD_NUMBER: _ClassVar[int]
    MAX_POSTERIORS_FIELD_NUMBER: _ClassVar[int]
    POSTERIORS_FIELD_NUMBER: _ClassVar[int]
    CONFIDENT_FIELD_NUMBER: _ClassVar[int]
    model: str
    version: int
    components: _types_pb2.Labels
    max_posteriors: _types_pb2.Matrix
    posteriors: _types_pb2.Matrix
    confident: _containers.RepeatedScalarFieldContainer[bool]
    def __init__(self, model: _Optional[str] = ..., version: _Optional[int] = ..., components: _Optional[_Union[_types_pb2.Labels, _Mapping]] = ..., max_posteriors: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., posteriors: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., confident: _Optional[_Iterable[bool]] = ...) -> None: ...

class SampleRequest(_message.Message):
    __slots__ = ("model", "version", "count", "seed", "response_encoding")
    MODEL_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    COUNT_FIELD_NUMBER: _ClassVar[int]
    SEED_FIELD_NUMBER: _ClassVar[int]
    RESPONSE_ENCODING_FIELD_NUMBER: _ClassVar[int]
    model: str
    version: int
    count: int
    seed: int
    response_encoding: _types_pb2.MatrixEncoding
    def __init__(self, model: _Optional[str] = ..., version: _Optional[int] = ..., count: _Optional[int] = ..., seed: _Optional[int] = ..., response_encoding: _Optional[_Union[_types_pb2.MatrixEncoding, str]] = ...) -> None: ...

class SampleResponse(_message.Message):
    __slots__ = ("model", "version", "rows", "components")
    MODEL_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    ROWS_FIELD_NUMBER: _ClassVar[int]
    COMPONENTS_FIELD_NUMBER: _ClassVar[int]
    model: str
    version: int
    rows: _types_pb2.Matrix
    components: _types_pb2.Labels
    def __init__(self, model: _Optional[str] = ..., version: _Optional[int] = ..., rows: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., components: _Optional[_Union[_types_pb2.Labels, _Mapping]] = ...) -> None: ...

class SampleStreamRequest(_message.Message):
    __slots__ = ("model", "version", "count", "seed", "response_encoding", "chunk_rows")
    MODEL_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    COUNT_FIELD_NUMBER: _ClassVar[int]
    SEED_FIELD_NUMBER: _ClassVar[int]
    RESPONSE_ENCODING_FIELD_NUMBER: _ClassVar[int]
    CHUNK_ROWS_FIELD_NUMBER: _ClassVar[int]
    model: str
    version: int
    count: int
    seed: int
    response_encoding: _types_pb2.MatrixEncoding
    chunk_rows: int
    def __init__(self, model: _Optional[str] = ..., version: _Optional[int] = ..., count: _Optional[int] = ..., seed: _Optional[int] = ..., response_encoding: _Optional[_Union[_types_pb2.MatrixEncoding, str]] = ..., chunk_rows: _Optional[int] = ...) -> None: ...

class SampleStreamResponse(_message.Message):
    __slots__ = ("model", "version", "rows", "components")
    MODEL_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    ROWS_FIELD_NUMBER: _ClassVar[int]
    COMPONENTS_FIELD_NUMBER: _ClassVar[int]
    model: str
    version: int
    rows: _types_pb2.Matrix
    components: _types_pb2.Labels
    def __init__(self, model: _Optional[str] = ..., version: _Optional[int] = ..., rows: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., components: _Optional[_Union[_types_pb2.Labels, _Mapping]] = ...) -> None: ...

class PredictRequest(_message.Message):
    __slots__ = ("model", "version", "rows", "observed_mask", "include_standard_deviations", "include_covariances", "include_components", "include_component_scales", "draws", "seed", "first_row", "response_encoding")
    MODEL_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    ROWS_FIELD_NUMBER: _ClassVar[int]
    OBSERVED_MASK_FIELD_NUMBER: _ClassVar[int]
    INCLUDE_STANDARD_DEVIATIONS_FIELD_NUMBER: _ClassVar[int]
    INCLUDE_COVARIANCES_FIELD_NUMBER: _ClassVar[int]
    INCLUDE_COMPONENTS_FIELD_NUMBER: _ClassVar[int]
    INCLUDE_COMPONENT_SCALES_FIELD_NUMBER: _ClassVar[int]
    DRAWS_FIELD_NUMBER: _ClassVar[int]
    SEED_FIELD_NUMBER: _ClassVar[int]
    FIRST_ROW_FIELD_NUMBER: _ClassVar[int]
    RESPONSE_ENCODING_FIELD_NUMBER: _ClassVar[int]
    model: str
    version: int
    rows: _types_pb2.Matrix
    observed_mask: bytes
    include_standard_deviations: bool
    include_covariances: bool
    include_components: bool
    include_component_scales: bool
    draws: int
    seed: int
    first_row: int
    response_encoding: _types_pb2.MatrixEncoding
    def __init__(self, model: _Optional[str] = ..., version: _Optional[int] = ..., rows: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., observed_mask: _Optional[bytes] = ..., include_standard_deviations: _Optional[bool] = ..., include_covariances: _Optional[bool] = ..., include_components: _Optional[bool] = ..., include_component_scales: _Optional[bool] = ..., draws: _Optional[int] = ..., seed: _Optional[int] = ..., first_row: _Optional[int] = ..., response_encoding: _Optional[_Union[_types_pb2.MatrixEncoding, str]] = ...) -> None: ...

class PredictResponse(_message.Message):
    __slots__ = ("model", "version", "means", "standard_deviations", "covariances", "log_densities", "posteriors", "component_means", "component_degrees_of_freedom", "component_scales", "draws")
    MODEL_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    MEANS_FIELD_NUMBER: _ClassVar[int]
    STANDARD_DEVIATIONS_FIELD_NUMBER: _ClassVar[int]
    COVARIANCES_FIELD_NUMBER: _ClassVar[int]
    LOG_DENSITIES_FIELD_NUMBER: _ClassVar[int]
    POSTERIORS_FIELD_NUMBER: _ClassVar[int]
    COMPONENT_MEANS_FIELD_NUMBER: _ClassVar[int]
    COMPONENT_DEGREES_OF_FREEDOM_FIELD_NUMBER: _ClassVar[int]
    COMPONENT_SCALES_FIELD_NUMBER: _ClassVar[int]
    DRAWS_FIELD_NUMBER: _ClassVar[int]
    model: str
    version: int
    means: _types_pb2.Matrix
    standard_deviations: _types_pb2.Matrix
    covariances: _types_pb2.Matrix
    log_densities: _types_pb2.Matrix
    posteriors: _types_pb2.Matrix
    component_means: _types_pb2.Matrix
    component_degrees_of_freedom: _types_pb2.Matrix
    component_scales: _types_pb2.Matrix
    draws: _types_pb2.Matrix
    def __init__(self, model: _Optional[str] = ..., version: _Optional[int] = ..., means: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., standard_deviations: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., covariances: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., log_densities: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., posteriors: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., component_means: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., component_degrees_of_freedom: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., component_scales: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ..., draws: _Optional[_Union[_types_pb2.Matrix, _Mapping]] = ...) -> None: ...

class CompareModelsRequest(_message.Message):
    __slots__ = ("model", "version", "other_model", "other_version", "samples", "seed")
    MODEL_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    OTHER_MODEL_FIELD_NUMBER: _ClassVar[int]
    OTHER_VERSION_FIELD_NUMBER: _ClassVar[int]
    SAMPLES_FIELD_NUMBER: _ClassVar[int]
    SEED_FIELD_NUMBER: _ClassVar[int]
    model: str
    version: int
    other_model: str
    other_version: int
    samples: int
    seed: int
    def __init__(self, model: _Optional[str] = ..., version: _Optional[int] = ..., other_model: _Optional[str] = ..., other_version: _Optional[int] = ..., samples: _Optional[int] = ..., seed: _Optional[int] = ...) -> None: ...

class CompareModelsResponse(_message.Message):
    __slots__ = ("model", "version", "other_model", "other_version", "samples", "kl_forward", "kl_forward_standard_error", "kl_backward", "kl_backward_standard_error", "matches", "unmatched_components", "unmatched_other_components", "component_distance")
    MODEL_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    OTHER_MODEL_FIELD_NUMBER: _ClassVar[int]
    OTHER_VERSION_FIELD_NUMBER: _ClassVar[int]
    SAMPLES_FIELD_NUMBER: _ClassVar[int]
    KL_FORWARD_FIELD_NUMBER: _ClassVar[int]
    KL_FORWARD_STANDARD_ERROR_FIELD_NUMBER: _ClassVar[int]
    KL_BACKWARD_FIELD_NUMBER: _ClassVar[int]
    KL_BACKWARD_STANDARD_ERROR_FIELD_NUMBER: _ClassVar[int]
    MATCHES_FIELD_NUMBER: _ClassVar[int]
    UNMATCHED_COMPONENTS_FIELD_NUMBER: _ClassVar[int]
    UNMATCHED_OTHER_COMPONENTS_FIELD_NUMBER: _ClassVar[int]
    COMPONENT_DISTANCE_FIELD_NUMBER: _ClassVar[int]
    model: str
    version: int
    other_model: str
    other_version: int
    samples: int
    kl_forward: float
    kl_forward_standard_error: float
    kl_backward: float
    kl_backward_standard_error: float
    matches: _containers.RepeatedCompositeFieldContainer[ComponentMatch]
    unmatched_components: _containers.RepeatedScalarFieldContainer[int]
    unmatched_other_components: _containers.RepeatedScalarFieldContainer[int]
    component_distance: str
    def __init__(self, model: _Optional[str] = ..., version: _Optional[int] = ..., other_model: _Optional[str] = ..., other_version: _Optional[int] = ..., samples: _Optional[int] = ..., kl_forward: _Optional[float] = ..., kl_forward_standard_error: _Optional[float] = ..., kl_backward: _Optional[float] = ..., kl_backward_standard_error: _Optional[float] = ..., matches: _Optional[_Iterable[_Union[ComponentMatch, _Mapping]]] = ..., unmatched_components: _Optional[_Iterable[int]] = ..., unmatched_other_components: _Optional[_Iterable[int]] = ..., component_distance: _Optional[str] = ...) -> None: ...

class ComponentMatch(_message.Message):
    __slots__ = ("component", "other_component", "distance", "weight", "other_weight")
    COMPONENT_FIELD_NUMBER: _ClassVar[int]
    OTHER_COMPONENT_FIELD_NUMBER: _ClassVar[int]
    DISTANCE_FIELD_NUMBER: _ClassVar[int]
    WEIGHT_FIELD_NUMBER: _ClassVar[int]
    OTHER_WEIGHT_FIELD_NUMBER: _ClassVar[int]
    component: int
    other_component: int
    distance: float
    weight: float
    other_weight: float
    def __init__(self, component: _Optional[int] = ..., other_component: _Optional[int] = ..., distance: _Optional[float] = ..., weight: _Optional[float] = ..., other_weight: _Optional[float] = ...) -> None: ...

class GetModelRequest(_message.Message):
    __slots__ = ("name", "version")
    NAME_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    name: str
    version: int
    def __init__(self, name: _Optional[str] = ..., version: _Optional[int] = ...) -> None: ...

class GetModelResponse(_message.Message):
    __slots__ = ("model",)
    MODEL_FIELD_NUMBER: _ClassVar[int]
    model: _types_pb2.Model
    def __init__(self, model: _Optional[_Union[_types_pb2.Model, _Mapping]] = ...) -> None: ...

class ListModelsRequest(_message.Message):
    __slots__ = ("page_size", "page_token")
    PAGE_SIZE_FIELD_NUMBER: _ClassVar[int]
    PAGE_TOKEN_FIELD_NUMBER: _ClassVar[int]
    page_size: int
    page_token: str
    def __init__(self, page_size: _Optional[int] = ..., page_token: _Optional[str] = ...) -> None: ...

class ListModelsResponse(_message.Message):
    __slots__ = ("models", "next_page_token")
    MODELS_FIELD_NUMBER: _ClassVar[int]
    NEXT_PAGE_TOKEN_FIELD_NUMBER: _ClassVar[int]
    models: _containers.RepeatedCompositeFieldContainer[_types_pb2.Model]
    next_page_token: str
    def __init__(self, models: _Optional[_Iterable[_Union[_types_pb2.Model, _Mapping]]] = ..., next_page_token: _Optional[str] = ...) -> None: ...

class ListModelVersionsRequest(_message.Message):
    __slots__ = ("name", "page_size", "page_token")
    NAME_FIELD_NUMBER: _ClassVar[int]
    PAGE_SIZE_FIELD_NUMBER: _ClassVar[int]
    PAGE_TOKEN_FIELD_NUMBER: _ClassVar[int]
    name: str
    page_size: int
    page_token: str
    def __init__(self, name: _Optional[str] = ..., page_size: _Optional[int] = ..., page_token: _Optional[str] = ...) -> None: ...

class ListModelVersionsResponse(_message.Message):
    __slots__ = ("models", "next_page_token")
    MODELS_FIELD_NUMBER: _ClassVar[int]
    NEXT_PAGE_TOKEN_FIELD_NUMBER: _ClassVar[int]
    models: _containers.RepeatedCompositeFieldContainer[_types_pb2.Model]
    next_page_token: str
    def __init__(self, models: _Optional[_Iterable[_Union[_types_pb2.Model, _Mapping]]] = ..., next_page_token: _Optional[str] = ...) -> None: ...

class DeleteModelRequest(_message.Message):
    __slots__ = ("name", "version")
    NAME_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    name: str
    version: int
    def __init__(self, name: _Optional[str] = ..., version: _Optional[int] = ...) -> None: ...

class DeleteModelResponse(_message.Message):
    __slots__ = ("deleted_versions",)
    DELETED_VERSIONS_FIELD_NUMBER: _ClassVar[int]
    deleted_versions: int
    def __init__(self, deleted_versions: _Optional[int] = ...) -> None: ...

class ExportModelRequest(_message.Message):
    __slots__ = ("name", "version")
    NAME_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    name: str
    version: int
    def __init__(self, name: _Optional[str] = ..., version: _Optional[int] = ...) -> None: ...

class ExportModelResponse(_message.Message):
    __slots__ = ("document",)
    DOCUMENT_FIELD_NUMBER: _ClassVar[int]
    document: bytes
    def __init__(self, document: _Optional[bytes] = ...) -> None: ...

class ImportModelRequest(_message.Message):
    __slots__ = ("document", "name")
    DOCUMENT_FIELD_NUMBER: _ClassVar[int]
    NAME_FIELD_NUMBER: _ClassVar[int]
    document: bytes
    name: str
    def __init__(self, document: _Optional[bytes] = ..., name: _Optional[str] = ...) -> None: ...

class ImportModelResponse(_message.Message):
    __slots__ = ("model",)
    MODEL_FIELD_NUMBER: _ClassVar[int]
    model: _types_pb2.Model
    def __init__(self, model: _Optional[_Union[_types_pb2.Model, _Mapping]] = ...) -> None: ...

class ListFittersRequest(_message.Message):
    __slots__ = ()
    def __init__(self) -> None: ...

class ListFittersResponse(_message.Message):
    __slots__ = ("fitters",)
    FITTERS_FIELD_NUMBER: _ClassVar[int]
    fitters: _containers.RepeatedCompositeFieldContainer[_types_pb2.FitterInfo]
    def __init__(self, fitters: _Optional[_Iterable[_Union[_types_pb2.FitterInfo, _Mapping]]] = ...) -> None: ...

class ReloadFittersRequest(_message.Message):
    __slots__ = ()
    def __init__(self) -> None: ...

class ReloadFittersResponse(_message.Message):
    __slots__ = ("fitters", "problems")
    FITTERS_FIELD_NUMBER: _ClassVar[int]
    PROBLEMS_FIELD_NUMBER: _ClassVar[int]
    fitters: _containers.RepeatedCompositeFieldContainer[_types_pb2.FitterInfo]
    problems: _containers.RepeatedScalarFieldContainer[str]
    def __init__(self, fitters: _Optional[_Iterable[_Union[_types_pb2.FitterInfo, _Mapping]]] = ..., problems: _Optional[_Iterable[str]] = ...) -> None: ...
