import datetime

from google.protobuf import duration_pb2 as _duration_pb2
from google.protobuf import timestamp_pb2 as _timestamp_pb2
from google.protobuf.internal import containers as _containers
from google.protobuf.internal import enum_type_wrapper as _enum_type_wrapper
from google.protobuf import descriptor as _descriptor
from google.protobuf import message as _message
from collections.abc import Iterable as _Iterable, Mapping as _Mapping
from typing import ClassVar as _ClassVar, Optional as _Optional, Union as _Union

DESCRIPTOR: _descriptor.FileDescriptor

class MatrixEncoding(int, metaclass=_enum_type_wrapper.EnumTypeWrapper):
    __slots__ = ()
    MATRIX_ENCODING_UNSPECIFIED: _ClassVar[MatrixEncoding]
    MATRIX_ENCODING_PACKED: _ClassVar[MatrixEncoding]
    MATRIX_ENCODING_LITTLE_ENDIAN: _ClassVar[MatrixEncoding]

class Family(int, metaclass=_enum_type_wrapper.EnumTypeWrapper):
    __slots__ = ()
    FAMILY_UNSPECIFIED: _ClassVar[Family]
    FAMILY_GAUSSIAN: _ClassVar[Family]
    FAMILY_STUDENT_T: _ClassVar[Family]

class CovarianceStructure(int, metaclass=_enum_type_wrapper.EnumTypeWrapper):
    __slots__ = ()
    COVARIANCE_STRUCTURE_UNSPECIFIED: _ClassVar[CovarianceStructure]
    COVARIANCE_STRUCTURE_FULL: _ClassVar[CovarianceStructure]
    COVARIANCE_STRUCTURE_DIAGONAL: _ClassVar[CovarianceStructure]
    COVARIANCE_STRUCTURE_SPHERICAL: _ClassVar[CovarianceStructure]
    COVARIANCE_STRUCTURE_TIED: _ClassVar[CovarianceStructure]

class Criterion(int, metaclass=_enum_type_wrapper.EnumTypeWrapper):
    __slots__ = ()
    CRITERION_UNSPECIFIED: _ClassVar[Criterion]
    CRITERION_BIC: _ClassVar[Criterion]
    CRITERION_AIC: _ClassVar[Criterion]

class FitJobState(int, metaclass=_enum_type_wrapper.EnumTypeWrapper):
    __slots__ = ()
    FIT_JOB_STATE_UNSPECIFIED: _ClassVar[FitJobState]
    FIT_JOB_STATE_RECEIVING: _ClassVar[FitJobState]
    FIT_JOB_STATE_QUEUED: _ClassVar[FitJobState]
    FIT_JOB_STATE_RUNNING: _ClassVar[FitJobState]
    FIT_JOB_STATE_SUCCEEDED: _ClassVar[FitJobState]
    FIT_JOB_STATE_FAILED: _ClassVar[FitJobState]
    FIT_JOB_STATE_CANCELLED: _ClassVar[FitJobState]
MATRIX_ENCODING_UNSPECIFIED: MatrixEncoding
MATRIX_ENCODING_PACKED: MatrixEncoding
MATRIX_ENCODING_LITTLE_ENDIAN: MatrixEncoding
FAMILY_UNSPECIFIED: Family
FAMILY_GAUSSIAN: Family
FAMILY_STUDENT_T: Family
COVARIANCE_STRUCTURE_UNSPECIFIED: CovarianceStructure
COVARIANCE_STRUCTURE_FULL: CovarianceStructure
COVARIANCE_STRUCTURE_DIAGONAL: CovarianceStructure
COVARIANCE_STRUCTURE_SPHERICAL: CovarianceStructure
COVARIANCE_STRUCTURE_TIED: CovarianceStructure
CRITERION_UNSPECIFIED: Criterion
CRITERION_BIC: Criterion
CRITERION_AIC: Criterion
FIT_JOB_STATE_UNSPECIFIED: FitJobState
FIT_JOB_STATE_RECEIVING: FitJobState
FIT_JOB_STATE_QUEUED: FitJobState
FIT_JOB_STATE_RUNNING: FitJobState
FIT_JOB_STATE_SUCCEEDED: FitJobState
FIT_JOB_STATE_FAILED: FitJobState
FIT_JOB_STATE_CANCELLED: FitJobState

class Matrix(_message.Message):
    __slots__ = ("rows", "cols", "values", "little_endian")
    ROWS_FIELD_NUMBER: _ClassVar[int]
    COLS_FIELD_NUMBER: _ClassVar[int]
    VALUES_FIELD_NUMBER: _ClassVar[int]
    LITTLE_ENDIAN_FIELD_NUMBER: _ClassVar[int]
    rows: int
    cols: int
    values: _containers.RepeatedScalarFieldContainer[float]
    little_endian: bytes
    def __init__(self, rows: _Optional[int] = ..., cols: _Optional[int] = ..., values: _Optional[_Iterable[float]] = ..., little_endian: _Optional[bytes] = ...) -> None: ...

class Labels(_message.Message):
    __slots__ = ("values", "little_endian")
    VALUES_FIELD_NUMBER: _ClassVar[int]
    LITTLE_ENDIAN_FIELD_NUMBER: _ClassVar[int]
    values: _containers.RepeatedScalarFieldContainer[int]
    little_endian: bytes
    def __init__(self, values: _Optional[_Iterable[int]] = ..., little_endian: _Optional[bytes] = ...) -> None: ...

class Component(_message.Message):
    __slots__ = ("weight", "mean", "covariance", "degrees_of_freedom")
    WEIGHT_FIELD_NUMBER: _ClassVar[int]
    MEAN_FIELD_NUMBER: _ClassVar[int]
    COVARIANCE_FIELD_NUMBER: _ClassVar[int]
    DEGREES_OF_FREEDOM_FIELD_NUMBER: _ClassVar[int]
    weight: float
    mean: _containers.RepeatedScalarFieldContainer[float]
    covariance: _containers.RepeatedScalarFieldContainer[float]
    degrees_of_freedom: float
    def __init__(self, weight: _Optional[float] = ..., mean: _Optional[_Iterable[float]] = ..., covariance: _Optional[_Iterable[float]] = ..., degrees_of_freedom: _Optional[float] = ...) -> None: ...

class Parameters(_message.Message):
    __slots__ = ("dimension", "feature_names", "family", "covariance_structure", "components")
    DIMENSION_FIELD_NUMBER: _ClassVar[int]
    FEATURE_NAMES_FIELD_NUMBER: _ClassVar[int]
    FAMILY_FIELD_NUMBER: _ClassVar[int]
    COVARIANCE_STRUCTURE_FIELD_NUMBER: _ClassVar[int]
    COMPONENTS_FIELD_NUMBER: _ClassVar[int]
    dimension: int
    feature_names: _containers.RepeatedScalarFieldContainer[str]
    family: Family
    covariance_structure: CovarianceStructure
    components: _containers.RepeatedCompositeFieldContainer[Component]
    def __init__(self, dimension: _Optional[int] = ..., feature_names: _Optional[_Iterable[str]] = ..., family: _Optional[_Union[Family, str]] = ..., covariance_structure: _Optional[_Union[CovarianceStructure, str]] = ..., components: _Optional[_Iterable[_Union[Component, _Mapping]]] = ...) -> None: ...

class SelectionRow(_message.Message):
    __slots__ = ("components", "log_likelihood", "bic", "aic", "converged", "iterations")
    COMPONENTS_FIELD_NUMBER: _ClassVar[int]
    LOG_LIKELIHOOD_FIELD_NUMBER: _ClassVar[int]
    BIC_FIELD_NUMBER: _ClassVar[int]
    AIC_FIELD_NUMBER: _ClassVar[int]
    CONVERGED_FIELD_NUMBER: _ClassVar[int]
    ITERATIONS_FIELD_NUMBER: _ClassVar[int]
    components: int
    log_likelihood: float
    bic: float
    aic: float
    converged: bool
    iterations: int
    def __init__(self, components: _Optional[int] = ..., log_likelihood: _Optional[float] = ..., bic: _Optional[float] = ..., aic: _Optional[float] = ..., converged: _Optional[bool] = ..., iterations: _Optional[int] = ...) -> None: ...

class DensityQuantiles(_message.Message):
    __slots__ = ("levels", "log_densities")
    LEVELS_FIELD_NUMBER: _ClassVar[int]
    LOG_DENSITIES_FIELD_NUMBER: _ClassVar[int]
    levels: _containers.RepeatedScalarFieldContainer[float]
    log_densities: _containers.RepeatedScalarFieldContainer[float]
    def __init__(self, levels: _Optional[_Iterable[float]] = ..., log_densities: _Optional[_Iterable[float]] = ...) -> None: ...

class FitReport(_message.Message):
    __slots__ = ("fitter", "fitter_version", "settings", "seed", "iterations", "converged", "objective", "log_likelihood", "bound", "bic", "aic", "elapsed", "training_rows", "history", "selection", "flagged_rows", "notes", "training_quantiles", "outlier_level", "effective_components")
    class SettingsEntry(_message.Message):
        __slots__ = ("key", "value")
        KEY_FIELD_NUMBER: _ClassVar[int]
        VALUE_FIELD_NUMBER: _ClassVar[int]
        key: str
        value: str
        def __init__(self, key: _Optional[str] = ..., value: _Optional[str] = ...) -> None: ...
    FITTER_FIELD_NUMBER: _ClassVar[int]
    FITTER_VERSION_FIELD_NUMBER: _ClassVar[int]
    SETTINGS_FIELD_NUMBER: _ClassVar[int]
    SEED_FIELD_NUMBER: _ClassVar[int]
    ITERATIONS_FIELD_NUMBER: _ClassVar[int]
    CONVERGED_FIELD_NUMBER: _ClassVar[int]
    OBJECTIVE_FIELD_NUMBER: _ClassVar[int]
    LOG_LIKELIHOOD_FIELD_NUMBER: _ClassVar[int]
    BOUND_FIELD_NUMBER: _ClassVar[int]
    BIC_FIELD_NUMBER: _ClassVar[int]
    AIC_FIELD_NUMBER: _ClassVar[int]
    ELAPSED_FIELD_NUMBER: _ClassVar[int]
    TRAINING_ROWS_FIELD_NUMBER: _ClassVar[int]
    HISTORY_FIELD_NUMBER: _ClassVar[int]
    SELECTION_FIELD_NUMBER: _ClassVar[int]
    FLAGGED_ROWS_FIELD_NUMBER: _ClassVar[int]
    NOTES_FIELD_NUMBER: _ClassVar[int]
    TRAINING_QUANTILES_FIELD_NUMBER: _ClassVar[int]
    OUTLIER_LEVEL_FIELD_NUMBER: _ClassVar[int]
    EFFECTIVE_COMPONENTS_FIELD_NUMBER: _ClassVar[int]
    fitter: str
    fitter_version: str
    settings: _containers.ScalarMap[str, str]
    seed: int
    iterations: int
    converged: bool
    objective: str
    log_likelihood: float
    bound: float
    bic: float
    aic: float
    elapsed: _duration_pb2.Duration
    training_rows: int
    history: _containers.RepeatedScalarFieldContainer[float]
    selection: _containers.RepeatedCompositeFieldContainer[SelectionRow]
    flagged_rows: int
    notes: _containers.RepeatedScalarFieldContainer[str]
    training_quantiles: DensityQuantiles
    outlier_level: float
    effective_components: int
    def __init__(self, fitter: _Optional[str] = ..., fitter_version: _Optional[str] = ..., settings: _Optional[_Mapping[str, str]] = ..., seed: _Optional[int] = ..., iterations: _Optional[int] = ..., converged: _Optional[bool] = ..., objective: _Optional[str] = ..., log_likelihood: _Optional[float] = ..., bound: _Optional[float] = ..., bic: _Optional[float] = ..., aic: _Optional[float] = ..., elapsed: _Optional[_Union[datetime.timedelta, _duration_pb2.Duration, _Mapping]] = ..., training_rows: _Optional[int] = ..., history: _Optional[_Iterable[float]] = ..., selection: _Optional[_Iterable[_Union[SelectionRow, _Mapping]]] = ..., flagged_rows: _Optional[int] = ..., notes: _Optional[_Iterable[str]] = ..., training_quantiles: _Optional[_Union[DensityQuantiles, _Mapping]] = ..., outlier_level: _Optional[float] = ..., effective_components: _Optional[int] = ...) -> None: ...

class Model(_message.Message):
    __slots__ = ("name", "version", "create_time", "parameters", "report")
    NAME_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    CREATE_TIME_FIELD_NUMBER: _ClassVar[int]
    PARAMETERS_FIELD_NUMBER: _ClassVar[int]
    REPORT_FIELD_NUMBER: _ClassVar[int]
    name: str
    version: int
    create_time: _timestamp_pb2.Timestamp
    parameters: Parameters
    report: FitReport
    def __init__(self, name: _Optional[str] = ..., version: _Optional[int] = ..., create_time: _Optional[_Union[datetime.datetime, _timestamp_pb2.Timestamp, _Mapping]] = ..., parameters: _Optional[_Union[Parameters, _Mapping]] = ..., report: _Optional[_Union[FitReport, _Mapping]] = ...) -> None: ...

class FitterOption(_message.Message):
    __slots__ = ("name", "description", "default_value")
    NAME_FIELD_NUMBER: _ClassVar[int]
    DESCRIPTION_FIELD_NUMBER: _ClassVar[int]
    DEFAULT_VALUE_FIELD_NUMBER: _ClassVar[int]
    name: str
    description: str
    default_value: str
    def __init__(self, name: _Optional[str] = ..., description: _Optional[str] = ..., default_value: _Optional[str] = ...) -> None: ...

class FitterInfo(_message.Message):
    __slots__ = ("name", "version", "description", "families", "covariance_structures", "options", "source", "sha256")
    NAME_FIELD_NUMBER: _ClassVar[int]
    VERSION_FIELD_NUMBER: _ClassVar[int]
    DESCRIPTION_FIELD_NUMBER: _ClassVar[int]
    FAMILIES_FIELD_NUMBER: _ClassVar[int]
    COVARIANCE_STRUCTURES_FIELD_NUMBER: _ClassVar[int]
    OPTIONS_FIELD_NUMBER: _ClassVar[int]
    SOURCE_FIELD_NUMBER: _ClassVar[int]
    SHA256_FIELD_NUMBER: _ClassVar[int]
    name: str
    version: str
    description: str
    families: _containers.RepeatedScalarFieldContainer[Family]
    covariance_structures: _containers.RepeatedScalarFieldContainer[CovarianceStructure]
    options: _containers.RepeatedCompositeFieldContainer[FitterOption]
    source: str
    sha256: str
    def __init__(self, name: _Optional[str] = ..., version: _Optional[str] = ..., description: _Optional[str] = ..., families: _Optional[_Iterable[_Union[Family, str]]] = ..., covariance_structures: _Optional[_Iterable[_Union[CovarianceStructure, str]]] = ..., options: _Optional[_Iterable[_Union[FitterOption, _Mapping]]] = ..., source: _Optional[str] = ..., sha256: _Optional[str] = ...) -> None: ...

class FitSpec(_message.Message):
    __slots__ = ("model", "fitter", "components", "components_min", "components_max", "criterion", "family", "covariance_structure", "seed", "max_iterations", "tolerance", "restarts", "ridge", "feature_names", "options", "start_parameters", "expected_rows")
    class OptionsEntry(_message.Message):
        __slots__ = ("key", "value")
        KEY_FIELD_NUMBER: _ClassVar[int]
        VALUE_FIELD_NUMBER: _ClassVar[int]
        key: str
        value: str
        def __init__(self, key: _Optional[str] = ..., value: _Optional[str] = ...) -> None: ...
    MODEL_FIELD_NUMBER: _ClassVar[int]
    FITTER_FIELD_NUMBER: _ClassVar[int]
    COMPONENTS_FIELD_NUMBER: _ClassVar[int]
    COMPONENTS_MIN_FIELD_NUMBER: _ClassVar[int]
    COMPONENTS_MAX_FIELD_NUMBER: _ClassVar[int]
    CRITERION_FIELD_NUMBER: _ClassVar[int]
    FAMILY_FIELD_NUMBER: _ClassVar[int]
    COVARIANCE_STRUCTURE_FIELD_NUMBER: _ClassVar[int]
    SEED_FIELD_NUMBER: _ClassVar[int]
    MAX_ITERATIONS_FIELD_NUMBER: _ClassVar[int]
    TOLERANCE_FIELD_NUMBER: _ClassVar[int]
    RESTARTS_FIELD_NUMBER: _ClassVar[int]
    RIDGE_FIELD_NUMBER: _ClassVar[int]
    FEATURE_NAMES_FIELD_NUMBER: _ClassVar[int]
    OPTIONS_FIELD_NUMBER: _ClassVar[int]
    START_PARAMETERS_FIELD_NUMBER: _ClassVar[int]
    EXPECTED_ROWS_FIELD_NUMBER: _ClassVar[int]
    model: str
    fitter: str
    components: int
    components_min: int
    components_max: int
    criterion: Criterion
    family: Family
    covariance_structure: CovarianceStructure
    seed: int
    max_iterations: int
    tolerance: float
    restarts: int
    ridge: float
    feature_names: _containers.RepeatedScalarFieldContainer[str]
    options: _containers.ScalarMap[str, str]
    start_parameters: Parameters
    expected_rows: int
    def __init__(self, model: _Optional[str] = ..., fitter: _Optional[str] = ..., components: _Optional[int] = ..., components_min: _Optional[int] = ..., components_max: _Optional[int] = ..., criterion: _Optional[_Union[Criterion, str]] = ..., family: _Optional[_Union[Family, str]] = ..., covariance_structure: _Optional[_Union[CovarianceStructure, str]] = ..., seed: _Optional[int] = ..., max_iterations: _Optional[int] = ..., tolerance: _Optional[float] = ..., restarts: _Optional[int] = ..., ridge: _Optional[float] = ..., feature_names: _Optional[_Iterable[str]] = ..., options: _Optional[_Mapping[str, str]] = ..., start_parameters: _Optional[_Union[Parameters, _Mapping]] = ..., expected_rows: _Optional[int] = ...) -> None: ...

class FitChunk(_message.Message):
    __slots__ = ("data", "row_weights", "start_labels")
    DATA_FIELD_NUMBER: _ClassVar[int]
    ROW_WEIGHTS_FIELD_NUMBER: _ClassVar[int]
    START_LABELS_FIELD_NUMBER: _ClassVar[int]
    data: Matrix
    row_weights: Matrix
    start_labels: Labels
    def __init__(self, data: _Optional[_Union[Matrix, _Mapping]] = ..., row_weights: _Optional[_Union[Matrix, _Mapping]] = ..., start_labels: _Optional[_Union[Labels, _Mapping]] = ...) -> None: ...

class FitProgress(_message.Message):
    __slots__ = ("components", "restart", "iteration", "objective", "elapsed")
    COMPONENTS_FIELD_NUMBER: _ClassVar[int]
    RESTART_FIELD_NUMBER: _ClassVar[int]
    ITERATION_FIELD_NUMBER: _ClassVar[int]
    OBJECTIVE_FIELD_NUMBER: _ClassVar[int]
    ELAPSED_FIELD_NUMBER: _ClassVar[int]
    components: int
    restart: int
    iteration: int
    objective: float
    elapsed: _duration_pb2.Duration
    def __init__(self, components: _Optional[int] = ..., restart: _Optional[int] = ..., iteration: _Optional[int] = ..., objective: _Optional[float] = ..., elapsed: _Optional[_Union[datetime.timedelta, _duration_pb2.Duration, _Mapping]] = ...) -> None: ...

class FitJob(_message.Message):
    __slots__ = ("name", "model", "fitter", "state", "model_version", "progress", "error_code", "error_message", "rows", "create_time", "end_time")
    NAME_FIELD_NUMBER: _ClassVar[int]
    MODEL_FIELD_NUMBER: _ClassVar[int]
    FITTER_FIELD_NUMBER: _ClassVar[int]
    STATE_FIELD_NUMBER: _ClassVar[int]
    MODEL_VERSION_FIELD_NUMBER: _ClassVar[int]
    PROGRESS_FIELD_NUMBER: _ClassVar[int]
    ERROR_CODE_FIELD_NUMBER: _ClassVar[int]
    ERROR_MESSAGE_FIELD_NUMBER: _ClassVar[int]
    ROWS_FIELD_NUMBER: _ClassVar[int]
    CREATE_TIME_FIELD_NUMBER: _ClassVar[int]
    END_TIME_FIELD_NUMBER: _ClassVar[int]
    name: str
    model: str
    fitter: str
    state: FitJobState
    model_version: int
    progress: FitProgress
    error_code: int
    error_message: str
    rows: int
    create_time: _timestamp_pb2.Timestamp
    end_time: _timestamp_pb2.Timestamp
    def __init__(self, name: _Optional[str] = ..., model: _Optional[str] = ..., fitter: _Optional[str] = ..., state: _Optional[_Union[FitJobState, str]] = ..., model_version: _Optional[int] = ..., progress: _Optional[_Union[FitProgress, _Mapping]] = ..., error_code: _Optional[int] = ..., error_message: _Optional[str] = ..., rows: _Optional[int] = ..., create_time: _Optional[_Union[datetime.datetime, _timestamp_pb2.Timestamp, _Mapping]] = ..., end_time: _Optional[_Union[datetime.datetime, _timestamp_pb2.Timestamp, _Mapping]] = ...) -> None: ...
