"""Cokriging predictions and cross-validation of the primary, compared with kriging the primary alone.

Every run also kriges the primary from its own values with its direct model (the
joint model's diagonal entries, :meth:`JointModel.direct`), the same kriging type and
neighbourhood, so the result shows what the secondary variables bought: per target,
the kriging variance without them; in summary, the mean variance with and without
them and the relative reduction 1 - mean(with) / mean(without).

Cross-validation leaves out primary values only: secondary values measured at a
left-out sample stay in its system (they would be known at a prediction point too).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..data.declustering import decluster
from ..data.identifiers import pick_ids
from ..data.samples import DuplicateReport, SampleSet
from ..deadline import check_deadline
from ..errors import InvalidInput, LimitExceeded
from ..limits import Limits
from ..modelling.coregionalisation import JointModel
from .cokriging import Cokriger, CokrigingPrediction, CokrigingSpec, VariableColumns, validate_cokriging
from .cost import UNIQUE_LOO_COPIES, UNIQUE_PREDICTION_COPIES, check_kriging, prediction_flops
from .cross_validation import CrossValidation, Scheme, cross_validate, summarise, validate_scheme
from .neighbourhood import Neighbourhood
from .prediction import Grid, _check_reach, _project, validate_grid
from .systems import Kriger, KrigingSpec


@dataclass(frozen=True)
class VarianceComparison:
    """Kriging variances of the primary with and without the secondary variables.

    Attributes
    ----------
    primary_only : ndarray
        Per target (or left-out sample): the variance of kriging the primary alone.
    mean_with, mean_without : float or None
        Mean variance over the targets both runs estimated (value units squared).
    reduction : float or None
        1 - mean_with / mean_without: the share of the variance the secondaries removed.
    """

    primary_only: np.ndarray
    mean_with: float | None
    mean_without: float | None
    reduction: float | None

    def as_dict(self) -> dict:
        return {
            "mean_variance": self.mean_with,
            "mean_variance_primary_only": self.mean_without,
            "variance_reduction": self.reduction,
        }


def compare(with_secondaries: np.ndarray, primary_only: np.ndarray) -> VarianceComparison:
    """Summarise variances over the targets estimated both ways."""
    both = np.isfinite(with_secondaries) & np.isfinite(primary_only)
    if not both.any():
        return VarianceComparison(primary_only, None, None, None)
    mean_with = float(np.mean(with_secondaries[both]))
    mean_without = float(np.mean(primary_only[both]))
    reduction = 1.0 - mean_with / mean_without if mean_without > 0 else None
    return VarianceComparison(primary_only, mean_with, mean_without, reduction)


def primary_samples(columns: VariableColumns, primary: str) -> SampleSet:
    """The samples where the primary is measured, as a one-variable sample set."""
    rows = np.flatnonzero(np.isfinite(columns.column(primary)))
    return SampleSet(
        coords=columns.coords[rows],
        values=columns.column(primary)[rows],
        ids=pick_ids(columns.ids, rows),
        source_index=rows,
        coordinates="planar",
        input_hash="",
        duplicates=DuplicateReport("average", 0, 0),
    )


def primary_spec(spec: CokrigingSpec) -> KrigingSpec:
    """The one-variable kriging of the primary matching a cokriging specification."""
    mean = (spec.means or {}).get(spec.primary) if spec.type == "simple" else None
    return KrigingSpec(type=spec.type, mean=mean, nugget_as=spec.nugget_as)


def _check_cost(
    columns: VariableColumns,
    model: JointModel,
    m: int,
    hood: Neighbourhood,
    spec: CokrigingSpec,
    limits: Limits,
    *,
    leave_one_out: bool,
    what: str,
) -> None:
    """Refuse cokriging above ``LAGWISE_MAX_KRIGING_FLOPS`` or the dense-matrix memory budget."""
    counts = [int(np.isfinite(columns.column(v)).sum()) for v in model.variables]
    n = sum(counts)
    c = len(counts) if spec.type == "ordinary" else 0
    limits.check_samples(columns.coords.shape[0])
    if hood.unique:
        s = n + c
        flops = float(s**3) if leave_one_out else s**3 / 3 + 2.0 * m * s * s
    else:
        width = sum(min(hood.max_points or 0, k) for k in counts)
        flops = prediction_flops(n, m, Neighbourhood(max_points=width), c)
    flops += prediction_flops(counts[model.index(spec.primary)], m, hood, 1 if spec.type == "ordinary" else 0)
    check_kriging(
        limits,
        n,
        m,
        hood,
        c,
        flops=flops,
        unique_copies=UNIQUE_LOO_COPIES if leave_one_out else UNIQUE_PREDICTION_COPIES,
        what=what,
    )


def default_means(columns: VariableColumns, names: tuple[str, ...]) -> dict:
    """Each variable's mean over its measured values, declustered when sampling is clustered
    (cell declustering, :mod:`lagwise.core.data.declustering`), as for one variable."""
    out = {}
    for name in names:
        rows = np.flatnonzero(np.isfinite(columns.column(name)))
        values = columns.column(name)[rows]
        out[name] = float(decluster(columns.coords[rows], values).mean_of(values))
    return out


@dataclass(frozen=True)
class CokrigingResult:
    """Cokriging of the primary at targets and the comparison with kriging it alone."""

    prediction: CokrigingPrediction
    comparison: VarianceComparison
    secondaries: tuple[str, ...]
    targets: np.ndarray | None = None
    grid: Grid | None = None


def cokrige(
    columns: VariableColumns,
    model: JointModel,
    spec: CokrigingSpec,
    neighbourhood: Neighbourhood,
    targets: np.ndarray,
    *,
    limits: Limits = Limits(),
    workers: int = 1,
) -> CokrigingResult:
    """Cokriging estimates and variances of the primary at ``targets`` (m, d), working coordinates.

    Raises
    ------
    InvalidInput
        Bad options, joint model or samples; LimitExceeded above the cost limits.
    """
    ordered = validate_cokriging(spec, model, columns)
    _check_cost(columns, ordered, targets.shape[0], neighbourhood, spec, limits, leave_one_out=False, what="cokriging")
    cokriger = Cokriger(
        columns,
        model,
        spec,
        neighbourhood,
        max_unique=limits.max_unique_samples,
        memory_budget=limits.memory_budget_bytes,
    )
    prediction = cokriger.predict(targets, workers=workers)
    check_deadline()
    alone = Kriger(
        primary_samples(columns, spec.primary),
        ordered.direct(0),
        primary_spec(spec),
        neighbourhood,
        max_unique=limits.max_unique_samples,
        memory_budget=limits.memory_budget_bytes,
    ).predict(targets, workers=workers)
    return CokrigingResult(prediction, compare(prediction.variance, alone.variance), ordered.variables[1:])


@dataclass(frozen=True)
class CokrigingCrossValidation:
    """Cross-validation of the primary by cokriging, and by kriging it alone."""

    result: CrossValidation
    primary_only: CrossValidation
    comparison: VarianceComparison
    secondaries: tuple[str, ...]


def cross_validate_cokriging(
    columns: VariableColumns,
    model: JointModel,
    spec: CokrigingSpec,
    neighbourhood: Neighbourhood = Neighbourhood(),
    scheme: Scheme = Scheme(),
    *,
    outlier_threshold: float = 2.5,
    limits: Limits = Limits(),
    workers: int = 1,
) -> CokrigingCrossValidation:
    """Leave-one-out or k-fold cross-validation of the primary by cokriging.

    Per-sample results are in the order of the samples where the primary is measured.
    Error standard deviations include the primary's nugget whatever its role (an
    observation is compared), as for one variable.
    """
    ordered = validate_cokriging(spec, model, columns)
    rows = np.flatnonzero(np.isfinite(columns.column(spec.primary)))
    n = len(rows)
    validate_scheme(scheme, n, outlier_threshold)
    loo = scheme.type == "leave_one_out"
    _check_cost(columns, ordered, n, neighbourhood, spec, limits, leave_one_out=loo, what="cross-validation")
    observed = columns.column(spec.primary)[rows]
    noise = float(ordered.nugget[0, 0]) if spec.nugget_as == "measurement_error" else 0.0
    options = {"max_unique": limits.max_unique_samples, "memory_budget": limits.memory_budget_bytes}
    estimate, sd = np.full(n, np.nan), np.full(n, np.nan)
    reasons: dict = {}
    if loo:
        cokriger = Cokriger(columns, model, spec, neighbourhood, **options)
        if neighbourhood.unique:
            estimate, sd = cokriger.leave_one_out_unique()
            method = "leave-one-out cokriging, closed form (Dubrule 1983)"
        else:
            found = cokriger.predict(columns.coords[rows], exclude=np.arange(n), workers=workers)
            estimate, sd, reasons = found.estimate, np.sqrt(found.variance + noise), found.reasons
            method = "leave-one-out cokriging, moving neighbourhood"
    else:
        primary = columns.names.index(spec.primary)
        for fold in np.array_split(np.random.default_rng(scheme.seed).permutation(n), scheme.folds):
            check_deadline()
            values = columns.values.copy()
            values[rows[fold], primary] = np.nan
            cokriger = Cokriger(replace(columns, values=values), model, spec, neighbourhood, **options)
            found = cokriger.predict(columns.coords[rows[fold]], workers=workers)
            estimate[fold], sd[fold] = found.estimate, np.sqrt(found.variance + noise)
            reasons.update({int(fold[t]): why for t, why in found.reasons.items()})
        method = f"{scheme.folds}-fold cokriging (seed {scheme.seed})"
    result = summarise(observed, estimate, sd, outlier_threshold, reasons, method)
    alone = cross_validate(
        primary_samples(columns, spec.primary),
        ordered.direct(0),
        primary_spec(spec),
        neighbourhood,
        scheme,
        outlier_threshold=outlier_threshold,
        limits=limits,
        workers=workers,
    )
    comparison = compare(sd**2 - noise, alone.standard_deviation**2 - noise)
    return CokrigingCrossValidation(result, alone, comparison, ordered.variables[1:])


def cokrige_points(
    samples,
    model: JointModel,
    spec: CokrigingSpec,
    neighbourhood: Neighbourhood,
    *,
    targets: np.ndarray | None = None,
    grid: Grid | None = None,
    limits: Limits = Limits(),
    workers: int = 1,
) -> CokrigingResult:
    """Cokriging at ``targets`` (m, d) or on ``grid``, in the samples' input coordinates (degrees
    for geographic samples). ``samples`` is a multi-variable sample set (coords, names, values,
    ids, projection)."""
    if (targets is None) == (grid is None):
        raise InvalidInput.at("/targets", "give either targets or grid")
    if grid is not None:
        validate_grid(grid, samples.dimension)
        m = grid.size
    else:
        given = np.asarray(targets, dtype=np.float64)
        if given.ndim != 2 or given.shape[1] != samples.dimension or given.shape[0] == 0:
            raise InvalidInput.at("/targets", f"give at least one target with {samples.dimension} coordinates")
        m = given.shape[0]
    if m > limits.max_targets:
        raise LimitExceeded(
            "LAGWISE_MAX_TARGETS",
            limits.max_targets,
            m,
            "Predict on a coarser grid or in several requests.",
            "/grid" if grid is not None else "/targets",
        )
    points = grid.points() if grid is not None else given
    projected = _project(samples, points)
    _check_reach(samples, projected, grid is not None)
    columns = VariableColumns(samples.coords, tuple(samples.names), samples.values, samples.ids)
    result = cokrige(columns, model, spec, neighbourhood, projected, limits=limits, workers=workers)
    return replace(result, targets=points, grid=grid)
