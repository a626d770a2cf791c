"""Plain result and parameter types of the mixd client.

Everything the client returns is one of these small dataclasses holding
numpy arrays and Python scalars; none of them keeps a reference to the
gRPC messages it was made from.
"""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass, field
from typing import Any, Dict, List, Mapping, Optional

import grpc
import numpy as np

from ._proto import types_pb2 as pb
from .errors import MixdError, _from_number, _invalid

__all__ = [
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
    "ComponentMatch",
    "CompareResult",
]

#: Component families, as accepted and returned by the client.
FAMILIES = ("gaussian", "student_t")
#: Covariance structures: "full" (each component its own matrix), "diagonal"
#: (each its own diagonal matrix), "spherical" (each its own multiple of the
#: identity: one variance per component) and "tied" (one full matrix shared
#: by all components).
STRUCTURES = ("full", "diagonal", "spherical", "tied")
#: Criteria for choosing the number of components (lower is better).
CRITERIA = ("bic", "aic")
#: Life-cycle states of a fit job.
JOB_STATES = ("receiving", "queued", "running", "succeeded", "failed", "cancelled")

_FAMILY_TO_PB = {"gaussian": pb.FAMILY_GAUSSIAN, "student_t": pb.FAMILY_STUDENT_T}
_FAMILY_FROM_PB = {v: k for k, v in _FAMILY_TO_PB.items()}
_STRUCTURE_TO_PB = {
    "full": pb.COVARIANCE_STRUCTURE_FULL,
    "diagonal": pb.COVARIANCE_STRUCTURE_DIAGONAL,
    "spherical": pb.COVARIANCE_STRUCTURE_SPHERICAL,
    "tied": pb.COVARIANCE_STRUCTURE_TIED,
}
_STRUCTURE_FROM_PB = {v: k for k, v in _STRUCTURE_TO_PB.items()}
_CRITERION_TO_PB = {"bic": pb.CRITERION_BIC, "aic": pb.CRITERION_AIC}
_STATE_FROM_PB = {
    pb.FIT_JOB_STATE_RECEIVING: "receiving",
    pb.FIT_JOB_STATE_QUEUED: "queued",
    pb.FIT_JOB_STATE_RUNNING: "running",
    pb.FIT_JOB_STATE_SUCCEEDED: "succeeded",
    pb.FIT_JOB_STATE_FAILED: "failed",
    pb.FIT_JOB_STATE_CANCELLED: "cancelled",
}


def _choice(field_name: str, value: Optional[str], table: Mapping[str, Any]) -> Any:
    """Maps a string choice to its enum value (None or "" gives 0, unset)."""
    if value is None or value == "":
        return 0
    key = str(value).lower()
    if key not in table:
        raise _invalid(f"{field_name} is {value!r}; want one of {', '.join(table)}")
    return table[key]


def _timestamp(ts: Any, present: bool) -> Optional[_dt.datetime]:
    if not present:
        return None
    return ts.ToDatetime(tzinfo=_dt.timezone.utc)


@dataclass
class Parameters:
    """The plain parameters of a mixture of K components in D dimensions.

    Attributes:
        weights: Mixing weights, shape (K,), summing to 1.
        means: Component means (locations for Student-t), shape (K, D).
        covariances: Covariance matrices (scale matrices for Student-t),
            shape (K, D, D), always held in full whatever the structure.
        structure: Covariance structure, one of :data:`STRUCTURES`.
        family: Component family, one of :data:`FAMILIES`.
        degrees_of_freedom: Per-component degrees of freedom, shape (K,), for
            Student-t components; None for Gaussian ones.
        feature_names: Empty, or one unique name per column.
    """

    weights: np.ndarray
    means: np.ndarray
    covariances: np.ndarray
    structure: str = "full"
    family: str = "gaussian"
    degrees_of_freedom: Optional[np.ndarray] = None
    feature_names: List[str] = field(default_factory=list)

    @property
    def dimension(self) -> int:
        """Number of features per row (D)."""
        return int(np.shape(self.means)[1])

    @property
    def components(self) -> int:
        """Number of components (K)."""
        return int(np.shape(self.weights)[0])

    def to_proto(self) -> pb.Parameters:
        """Returns the parameters as a mixd.v1.Parameters message.

        Only shapes are checked here; the daemon validates the values (sums,
        symmetry, positive definiteness, structure) and names any fault.
        """
        w = np.asarray(self.weights, dtype=np.float64).reshape(-1)
        mu = np.asarray(self.means, dtype=np.float64)
        cov = np.asarray(self.covariances, dtype=np.float64)
        if mu.ndim != 2 or mu.shape[0] != w.shape[0]:
            raise _invalid(f"parameters.means has shape {mu.shape}; want (K, D) with K = {w.shape[0]} weights")
        k, d = mu.shape
        if cov.shape != (k, d, d):
            raise _invalid(f"parameters.covariances has shape {cov.shape}; want (K, D, D) = ({k}, {d}, {d})")
        msg = pb.Parameters(
            dimension=d,
            feature_names=list(self.feature_names or []),
            family=_choice("parameters.family", self.family, _FAMILY_TO_PB),
            covariance_structure=_choice("parameters.structure", self.structure, _STRUCTURE_TO_PB),
        )
        dof = None
        if self.degrees_of_freedom is not None:
            dof = np.asarray(self.degrees_of_freedom, dtype=np.float64).reshape(-1)
            if dof.shape[0] != k:
                raise _invalid(f"parameters.degrees_of_freedom has {dof.shape[0]} values; want one per component ({k})")
        for i in range(k):
            c = msg.components.add()
            c.weight = float(w[i])
            c.mean.extend(mu[i].tolist())
            c.covariance.extend(cov[i].reshape(-1).tolist())
            if dof is not None:
                c.degrees_of_freedom = float(dof[i])
        return msg

    @classmethod
    def from_proto(cls, msg: pb.Parameters) -> "Parameters":
        """Builds parameters from a mixd.v1.Parameters message."""
        d = int(msg.dimension)
        k = len(msg.components)
        w = np.fromiter((c.weight for c in msg.components), dtype=np.float64, count=k)
        mu = np.array([list(c.mean) for c in msg.components], dtype=np.float64).reshape(k, d)
        cov = np.array([list(c.covariance) for c in msg.components], dtype=np.float64).reshape(k, d, d)
        family = _FAMILY_FROM_PB.get(msg.family, "gaussian")
        dof = None
        if family == "student_t":
            dof = np.fromiter((c.degrees_of_freedom for c in msg.components), dtype=np.float64, count=k)
        return cls(
            weights=w,
            means=mu,
            covariances=cov,
            structure=_STRUCTURE_FROM_PB.get(msg.covariance_structure, "full"),
            family=family,
            degrees_of_freedom=dof,
            feature_names=list(msg.feature_names),
        )


@dataclass
class SelectionRow:
    """One line of the table of a fit over a range of component counts."""

    components: int
    log_likelihood: float
    bic: float
    aic: float
    converged: bool
    iterations: int


@dataclass
class FitReport:
    """How a model was fitted.

    Attributes:
        fitter: Name of the fitter ("em", "vb", "tmix", or a plugin's).
        fitter_version: Its version.
        settings: Effective settings, defaults filled in, by name.
        seed: Seed of the fit.
        iterations: Iterations of the kept run.
        converged: Whether the kept run met its tolerance.
        objective: What ``history`` holds: "log_likelihood" or
            "variational_bound".
        log_likelihood: Final total log-likelihood of the training rows.
        bound: Final variational bound (variational fitters; else 0).
        bic: Bayesian information criterion (lower is better).
        aic: Akaike information criterion (lower is better).
        elapsed: Wall time of the fit in seconds.
        training_rows: Number of training rows.
        history: The objective after each iteration.
        selection: Table of a fit over a range of component counts.
        flagged_rows: Training rows flagged as outliers (Student-t fitters).
        notes: Remarks of the fitter.
        quantile_levels: Probability levels of the training log-density
            quantiles (empty when none were recorded).
        quantile_log_densities: The training log-density at each level.
        outlier_level: Tail probability level of the outlier rule
            (Student-t models).
        effective_components: Components with enough expected rows
            (variational fitters; 0 when not reported).
    """

    fitter: str
    fitter_version: str
    settings: Dict[str, str]
    seed: int
    iterations: int
    converged: bool
    objective: str
    log_likelihood: float
    bound: float
    bic: float
    aic: float
    elapsed: float
    training_rows: int
    history: np.ndarray
    selection: List[SelectionRow]
    flagged_rows: int
    notes: List[str]
    quantile_levels: np.ndarray
    quantile_log_densities: np.ndarray
    outlier_level: float
    effective_components: int

    @classmethod
    def from_proto(cls, r: pb.FitReport) -> "FitReport":
        """Builds a report from a mixd.v1.FitReport message."""
        return cls(
            fitter=r.fitter,
            fitter_version=r.fitter_version,
            settings=dict(r.settings),
            seed=int(r.seed),
            iterations=int(r.iterations),
            converged=bool(r.converged),
            objective=r.objective,
            log_likelihood=float(r.log_likelihood),
            bound=float(r.bound),
            bic=float(r.bic),
            aic=float(r.aic),
            elapsed=r.elapsed.ToTimedelta().total_seconds() if r.HasField("elapsed") else 0.0,
            training_rows=int(r.training_rows),
            history=np.array(r.history, dtype=np.float64),
            selection=[
                SelectionRow(int(s.components), s.log_likelihood, s.bic, s.aic, bool(s.converged), int(s.iterations))
                for s in r.selection
            ],
            flagged_rows=int(r.flagged_rows),
            notes=list(r.notes),
            quantile_levels=np.array(r.training_quantiles.levels, dtype=np.float64),
            quantile_log_densities=np.array(r.training_quantiles.log_densities, dtype=np.float64),
            outlier_level=float(r.outlier_level),
            effective_components=int(r.effective_components),
        )


@dataclass
class Model:
    """One immutable version of a stored mixture model.

    Attributes:
        name: Resource name, "models/{id}".
        version: Version number, from 1.
        create_time: When this version was written (UTC), if known.
        parameters: The mixture's parameters.
        report: How it was fitted; None for imported models without one.
    """

    name: str
    version: int
    create_time: Optional[_dt.datetime]
    parameters: Parameters
    report: Optional[FitReport]

    @property
    def id(self) -> str:
        """The model id: the name without its "models/" prefix."""
        return self.name[len("models/"):] if self.name.startswith("models/") else self.name

    @property
    def dimension(self) -> int:
        """Number of features per row."""
        return self.parameters.dimension

    @property
    def components(self) -> int:
        """Number of components."""
        return self.parameters.components

    @property
    def family(self) -> str:
        """Component family, one of :data:`FAMILIES`."""
        return self.parameters.family

    @property
    def structure(self) -> str:
        """Covariance structure, one of :data:`STRUCTURES`."""
        return self.parameters.structure

    @property
    def weights(self) -> np.ndarray:
        """Mixing weights, shape (K,)."""
        return self.parameters.weights

    @property
    def means(self) -> np.ndarray:
        """Component means, shape (K, D)."""
        return self.parameters.means

    @property
    def covariances(self) -> np.ndarray:
        """Covariance (or Student-t scale) matrices, shape (K, D, D)."""
        return self.parameters.covariances

    @property
    def degrees_of_freedom(self) -> Optional[np.ndarray]:
        """Student-t degrees of freedom, shape (K,), or None."""
        return self.parameters.degrees_of_freedom

    @property
    def feature_names(self) -> List[str]:
        """Feature names (may be empty)."""
        return self.parameters.feature_names

    @classmethod
    def from_proto(cls, m: pb.Model) -> "Model":
        """Builds a model from a mixd.v1.Model message."""
        return cls(
            name=m.name,
            version=int(m.version),
            create_time=_timestamp(m.create_time, m.HasField("create_time")),
            parameters=Parameters.from_proto(m.parameters),
            report=FitReport.from_proto(m.report) if m.HasField("report") else None,
        )


@dataclass
class FitProgress:
    """A progress event of a running fit.

    Attributes:
        components: Number of components being fitted.
        restart: Restart index, from 0.
        iteration: Iteration number.
        objective: Log-likelihood (or variational bound) after it.
        elapsed: Seconds since the fit started.
    """

    components: int
    restart: int
    iteration: int
    objective: float
    elapsed: float

    @classmethod
    def from_proto(cls, p: pb.FitProgress) -> "FitProgress":
        """Builds a progress event from a mixd.v1.FitProgress message."""
        return cls(
            components=int(p.components),
            restart=int(p.restart),
            iteration=int(p.iteration),
            objective=float(p.objective),
            elapsed=p.elapsed.ToTimedelta().total_seconds() if p.HasField("elapsed") else 0.0,
        )


@dataclass
class FitJob:
    """A fit running, or finished, in the daemon.

    Attributes:
        name: Resource name, "fitJobs/{id}".
        model: Target model, "models/{id}".
        fitter: Fitter name.
        state: One of :data:`JOB_STATES`.
        model_version: Version written, once succeeded (else 0).
        progress: Latest progress event, if any.
        error_code: gRPC status code of a failure, None otherwise.
        error_message: Failure message ("" otherwise).
        rows: Training rows received.
        create_time: Creation time (UTC).
        end_time: End time (UTC), once finished.
    """

    name: str
    model: str
    fitter: str
    state: str
    model_version: int
    progress: Optional[FitProgress]
    error_code: Optional[grpc.StatusCode]
    error_message: str
    rows: int
    create_time: Optional[_dt.datetime]
    end_time: Optional[_dt.datetime]

    @property
    def done(self) -> bool:
        """Whether the job has ended (succeeded, failed or cancelled)."""
        return self.state in ("succeeded", "failed", "cancelled")

    def error(self) -> Optional[MixdError]:
        """The exception describing a failed or cancelled job, else None."""
        if self.state == "cancelled":
            return _from_number(grpc.StatusCode.CANCELLED.value[0], self.error_message or "the fit job was cancelled")
        if self.state == "failed":
            num = self.error_code.value[0] if self.error_code is not None else grpc.StatusCode.UNKNOWN.value[0]
            return _from_number(num, self.error_message or "the fit job failed")
        return None

    @classmethod
    def from_proto(cls, j: pb.FitJob) -> "FitJob":
        """Builds a job from a mixd.v1.FitJob message."""
        code = None
        if j.error_code:
            code = next((c for c in grpc.StatusCode if c.value[0] == j.error_code), grpc.StatusCode.UNKNOWN)
        return cls(
            name=j.name,
            model=j.model,
            fitter=j.fitter,
            state=_STATE_FROM_PB.get(j.state, "unspecified"),
            model_version=int(j.model_version),
            progress=FitProgress.from_proto(j.progress) if j.HasField("progress") else None,
            error_code=code,
            error_message=j.error_message,
            rows=int(j.rows),
            create_time=_timestamp(j.create_time, j.HasField("create_time")),
            end_time=_timestamp(j.end_time, j.HasField("end_time")),
        )


@dataclass
class FitterOption:
    """A method-specific option of a fitter."""

    name: str
    description: str
    default_value: str


@dataclass
class FitterInfo:
    """An available fitter.

    Attributes:
        name: Name used to choose it in a fit.
        version: Its version.
        description: One-line description.
        families: Families it fits.
        structures: Covariance structures it fits.
        options: Its method-specific options.
        source: "built-in" or the executable's path.
        sha256: SHA-256 of the executable (external fitters).
    """

    name: str
    version: str
    description: str
    families: List[str]
    structures: List[str]
    options: List[FitterOption]
    source: str
    sha256: str

    @classmethod
    def from_proto(cls, f: pb.FitterInfo) -> "FitterInfo":
        """Builds fitter information from a mixd.v1.FitterInfo message."""
        return cls(
            name=f.name,
            version=f.version,
            description=f.description,
            families=[_FAMILY_FROM_PB[v] for v in f.families if v in _FAMILY_FROM_PB],
            structures=[_STRUCTURE_FROM_PB[v] for v in f.covariance_structures if v in _STRUCTURE_FROM_PB],
            options=[FitterOption(o.name, o.description, o.default_value) for o in f.options],
            source=f.source,
            sha256=f.sha256,
        )


@dataclass
class ScoreResult:
    """Scores of N rows under one model version.

    Rows scored with an ``observed`` mask get the log-density of their
    observed features under the marginal mixture (exact for Gaussian and
    Student-t components); a row with nothing observed gets 0.

    Attributes:
        model: Resource name of the model that scored.
        version: Its version.
        log_density: Mixture log-density of each row, shape (N,).
        percentile: Percentile in [0, 100] of each row's log-density among
            the training rows' log-densities, shape (N,); None for a model
            without training quantiles (an imported model without a fit
            report). NaN for rows scored with an unobserved feature: a
            marginal log-density is not comparable with the training rows'
            full ones. A low percentile says only that the model finds the row
            rare compared with its training data; it is not by itself a
            judgement that the equipment behind the row is faulty.
        component_log_density: Log-density of each row under each component
            (without its weight), shape (N, K), when asked for; else None.
        log_likelihood: Sum of the log-densities.
        outlier_statistic: Student-t models: each row's squared Mahalanobis
            distance to its most probable component divided by the dimension,
            shape (N,), when the daemon reports it; else None.
        outlier: Student-t models: whether the statistic's F(D, nu)
            distribution function exceeds the outlier level, shape (N,), when
            reported; else None. The same caveat as for ``percentile`` applies.
    """

    model: str
    version: int
    log_density: np.ndarray
    percentile: Optional[np.ndarray]
    component_log_density: Optional[np.ndarray]
    log_likelihood: float
    outlier_statistic: Optional[np.ndarray]
    outlier: Optional[np.ndarray]


@dataclass
class ClassifyResult:
    """Component assignments of N rows.

    Rows classified with an ``observed`` mask get the posteriors given their
    observed features only.

    Attributes:
        model: Resource name of the model that classified.
        version: Its version.
        component: Most probable component of each row (ties go to the lower
            index), int32, shape (N,).
        max_posterior: That component's posterior probability, shape (N,).
        posteriors: All posterior probabilities, shape (N, K), when asked
            for; else None.
        confident: False where the largest posterior is below the
            ``min_posterior`` asked for, shape (N,).
    """

    model: str
    version: int
    component: np.ndarray
    max_posterior: np.ndarray
    posteriors: Optional[np.ndarray]
    confident: np.ndarray


@dataclass
class SampleResult:
    """Rows drawn from a model.

    Attributes:
        model: Resource name of the model sampled.
        version: Its version.
        rows: The rows, shape (count, D).
        component: The component each row was drawn from, int32, shape (count,).
    """

    model: str
    version: int
    rows: np.ndarray
    component: np.ndarray



@dataclass
class PredictResult:
    """The conditional distribution of each row's unobserved features given
    its observed ones, for N rows of D features under a model of K
    components.

    The conditional distribution of a mixture is again a mixture: its
    weights are the components' posteriors given the observed features, its
    components are the components' conditionals (Gaussian: the Schur
    complement formulas; Student-t: Student-t with nu + (observed count)
    degrees of freedom).

    What it means and does not mean: ``means`` is the model's expected value
    of the missing readings given the observed ones, and ``std`` /
    ``covariances`` its uncertainty *under the model*. It is an estimate,
    not a measurement: when the observed values are unusual for the model
    (look at ``log_density``) or the model is wrong, the prediction can be
    far off while its spread looks small. A predicted value must not stand
    in for a measurement in decisions about the safety of equipment; those
    belong to the operator's own procedures.

    Attributes:
        model: Resource name of the model used.
        version: Its version (the same for every chunk of a large batch).
        means: Each row with its unobserved features replaced by their
            conditional mean, shape (N, D); observed values are copied.
        log_density: Log-density of each row's observed features under the
            marginal mixture, shape (N,) (0 for a row with nothing observed).
        std: Conditional standard deviations, shape (N, D), 0 for observed
            features; None unless asked for.
        covariances: Conditional covariance matrices (law of total
            covariance over the components), shape (N, D, D), zero rows and
            columns for observed features; None unless asked for.
        posteriors: Conditional component weights, shape (N, K); None unless
            ``components`` was asked for.
        component_means: Each component's conditional mean with observed
            values copied, shape (N, K, D); None unless ``components``.
        degrees_of_freedom: Student-t models: each component's conditional
            degrees of freedom, shape (N, K); None for Gaussian models or
            unless ``components``.
        component_scales: Each component's conditional covariance (Gaussian)
            or scale (Student-t) matrix, shape (N, K, D, D); None unless
            asked for.
        draws: Completed rows drawn from each row's conditional distribution
            (multiple imputation), shape (N, draws, D), observed values
            copied; None when no draws were asked for. Row i's draws depend
            only on the model version, the seed and i, not on how the batch
            was split.
    """

    model: str
    version: int
    means: np.ndarray
    log_density: np.ndarray
    std: Optional[np.ndarray] = None
    covariances: Optional[np.ndarray] = None
    posteriors: Optional[np.ndarray] = None
    component_means: Optional[np.ndarray] = None
    degrees_of_freedom: Optional[np.ndarray] = None
    component_scales: Optional[np.ndarray] = None
    draws: Optional[np.ndarray] = None


@dataclass
class ComponentMatch:
    """One pair of matched components of two models.

    Attributes:
        component: Component index in the first model (p).
        other_component: Component index in the other model (q).
        distance: Distance between the two (see
            :attr:`CompareResult.component_distance`).
        weight: The component's weight in p.
        other_weight: The partner's weight in q.
    """

    component: int
    other_component: int
    distance: float
    weight: float
    other_weight: float


@dataclass
class CompareResult:
    """A comparison of two model versions p and q over the same features.

    The Kullback-Leibler divergence KL(p||q) = E_p[log p(X) - log q(X)] is
    estimated by Monte Carlo from ``samples`` seeded draws of p, and KL(q||p)
    from draws of q; both are in nats and come with their standard errors.

    What the numbers mean: 0 says the two models spread probability over the
    feature space in the same way; larger values say more differently. The
    two directions differ in general (KL is not symmetric): KL(p||q) is
    large where p puts probability that q does not expect. What they do not
    mean: a divergence says *that* the models differ, not *why* (a shifted
    regime, a new component, a fitting artefact), not which model is
    right, and not whether the difference matters for a given use. There is
    no universal threshold: derive alert levels from your own history of
    comparisons. Being estimates, values near 0 may come out slightly
    negative; read every value with its standard error, and remember that
    differences in far tails that few draws reach are estimated poorly.
    Decisions about equipment safety belong to the operator's own
    procedures.

    Attributes:
        model: Resource name of p.
        version: Version of p.
        other_model: Resource name of q.
        other_version: Version of q.
        samples: Draws per direction.
        kl_forward: Estimate of KL(p||q), from draws of p.
        kl_forward_standard_error: Its standard error.
        kl_backward: Estimate of KL(q||p), from draws of q.
        kl_backward_standard_error: Its standard error.
        matches: Pairs of matched components (min(Kp, Kq) of them, ordered
            by p's component) minimising the total distance.
        unmatched_components: Components of p without a partner.
        unmatched_other_components: Components of q without a partner.
        component_distance: The distance used for the matching:
            "bhattacharyya" (Student-t components through their
            moment-matched Gaussians).
    """

    model: str
    version: int
    other_model: str
    other_version: int
    samples: int
    kl_forward: float
    kl_forward_standard_error: float
    kl_backward: float
    kl_backward_standard_error: float
    matches: List[ComponentMatch]
    unmatched_components: List[int]
    unmatched_other_components: List[int]
    component_distance: str

    @classmethod
    def from_proto(cls, r: Any) -> "CompareResult":
        """Builds a comparison from a mixd.v1.CompareModelsResponse message."""
        return cls(
            model=r.model,
            version=int(r.version),
            other_model=r.other_model,
            other_version=int(r.other_version),
            samples=int(r.samples),
            kl_forward=float(r.kl_forward),
            kl_forward_standard_error=float(r.kl_forward_standard_error),
            kl_backward=float(r.kl_backward),
            kl_backward_standard_error=float(r.kl_backward_standard_error),
            matches=[
                ComponentMatch(int(m.component), int(m.other_component), float(m.distance), float(m.weight), float(m.other_weight))
                for m in r.matches
            ],
            unmatched_components=[int(c) for c in r.unmatched_components],
            unmatched_other_components=[int(c) for c in r.unmatched_other_components],
            component_distance=r.component_distance,
        )
