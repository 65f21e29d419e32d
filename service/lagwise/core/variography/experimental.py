"""Experimental variograms (and related statistics) by classes of distance and direction."""

from __future__ import annotations

import types
from dataclasses import dataclass, field, replace

import numpy as np

from ..data.declustering import Declustering, decluster
from ..data.raster import Raster, raster_outline, raster_summary
from ..data.samples import SampleSet
from ..data.spacing import typical_spacing
from ..data.summary import Summary, largest_separation, summarise
from ..deadline import check_deadline
from ..errors import FieldIssue, InvalidInput, LimitExceeded
from ..limits import Limits
from . import kernels as K
from .directions import OMNIDIRECTIONAL, DirectionClass, direction_table, validate_direction
from .fft import ROUNDING, check_statistic, rounding_bound, rounding_note, within_rounding
from .gridded import (
    BOUND_STATISTICS,
    DEFAULT_TOLERANCE,
    METHODS,
    NOT_COMPUTED,
    GridReport,
    GridVariogram,
    binned_nodes,
    grid_cell,
    grid_classes,
    grid_summary,
    lags_needed,
    raster_nodes,
    raster_spacing,
    refuse_unbounded,
)
from .lags import (
    AUTO_FINE_BINS,
    NO_EXTENT,
    LagRequest,
    merge_sparse,
    quantile_edges,
    spacing_edges,
    spacing_width,
    validate_lags,
)
from .pairs import (
    COLUMN_SWEEP,
    X_SWEEP,
    PreparedSamples,
    absolute_differences,
    accumulate,
    estimate_pairs_within,
    horizontal_table,
    layout,
    pass_visits,
    prepare,
    scatter_pairs,
)
from .statistics import ACCUMULATION_MODE, COVARIANCE_TYPE, STATISTICS, class_value
from .uncertainty import ClassUncertainty, UncertaintyPlan, class_uncertainties

DEFAULT_MIN_PAIRS = 30
DEFAULT_SCATTER_LIMIT = 2000


@dataclass(frozen=True)
class ScatterRequest:
    """Ask for the pairs of one class (an h-scattergram).

    Attributes
    ----------
    direction, klass : int
        0-based indexes of the direction and of its distance class.
    limit : int
        Most pairs to return; larger classes are thinned evenly.
    """

    direction: int
    klass: int
    limit: int = DEFAULT_SCATTER_LIMIT


@dataclass(frozen=True)
class ClassRow:
    """One distance class of one direction.

    Attributes
    ----------
    lower, upper : float
        Class bounds [lower, upper), coordinate units.
    mean_distance : float or None
        Mean separation of the class's pairs (None without pairs).
    pairs : int
        Number of pairs.
    value : float or None
        The statistic (None when undefined, with ``reason``).
    sparse : bool
        Fewer than ``min_pairs`` pairs.
    standard_error : float or None
        Standard error of ``value`` (delete-one-block jackknife,
        :mod:`lagwise.core.variography.uncertainty`); None with ``uncertainty_reason``.
    interval_95 : tuple of float or None
        95 % interval of the class's expected value.
    """

    lower: float
    upper: float
    mean_distance: float | None
    pairs: int
    value: float | None
    reason: str | None
    sparse: bool
    tail_mean: float | None = None
    head_mean: float | None = None
    tail_sd: float | None = None
    head_sd: float | None = None
    standard_error: float | None = None
    interval_95: tuple[float, float] | None = None
    uncertainty_reason: str | None = None
    error_bound: float | None = None
    pair_bound: int | None = None
    bound_exceeded: bool | None = None


@dataclass(frozen=True)
class DirectionResult:
    """The classes of one direction."""

    direction: DirectionClass
    classes: tuple[ClassRow, ...]


@dataclass(frozen=True)
class Scattergram:
    """Tail and head values of (a thinning of) one class's pairs, in value units."""

    direction: int
    klass: int
    pairs_in_class: int
    stride: int
    tail: np.ndarray
    head: np.ndarray


@dataclass(frozen=True)
class ExperimentalVariogram:
    """Result of :func:`experimental_variogram`.

    Attributes
    ----------
    directions : tuple of DirectionResult
    summary : Summary
    statistic : str
    min_pairs : int
    lag_method : str
        ``width``, ``edges``, ``equal_width`` or ``equal_pairs``.
    colocated_pairs : int
        Zero-distance pairs, which belong to no class.
    uncertainty : UncertaintyPlan or None
        Blocks and method of the class uncertainties (None when no pass ran).
    method : str
        ``exact`` (pair engine) or ``grid`` (FFT on a grid, :mod:`lagwise.core.variography.gridded`).
    grid : GridReport or None
        The grid, for the ``grid`` method.
    spacing : float or None
        Typical sample spacing (median nearest-neighbour distance, coordinate units)
        the ``equal_width`` classes were built from; None for other class requests.
    scattergram : Scattergram or None
    warnings : tuple of str
    """

    directions: tuple[DirectionResult, ...]
    summary: Summary
    statistic: str
    min_pairs: int
    lag_method: str
    colocated_pairs: int
    scattergram: Scattergram | None
    spacing: float | None = None
    uncertainty: UncertaintyPlan | None = None
    warnings: tuple[str, ...] = field(default=())
    method: str = "exact"
    grid: GridReport | None = None


def validate_options(samples, statistic, min_pairs, directions):
    """Check the statistic, min_pairs and direction classes; returns (resolved directions, warnings)."""
    if statistic not in STATISTICS:
        raise InvalidInput.at("/statistic", f"must be one of {', '.join(STATISTICS)}")
    if min_pairs < 1:
        raise InvalidInput.at("/min_pairs", "must be at least 1")
    if statistic == "pairwise_relative":
        bad = np.flatnonzero(samples.values <= 0)
        if bad.size:
            raise InvalidInput(
                [
                    FieldIssue(f"/samples/values/{samples.source_index[i]}", "pairwise_relative needs positive values")
                    for i in bad[:20]
                ]
            )
    return resolve_directions(directions, samples.dimension)


def resolve_directions(directions, dimension: int) -> tuple[list[DirectionClass], list[str]]:
    """Validate direction classes (default one omnidirectional class); returns (resolved, warnings)."""
    resolved, warnings = [], []
    for index, d in enumerate(directions or [OMNIDIRECTIONAL]):
        direction, notes = validate_direction(d, index, dimension)
        resolved.append(direction)
        warnings.extend(notes)
    return resolved, warnings


def _half_extent(samples: SampleSet, summary: Summary, direction: DirectionClass) -> float:
    if direction.tolerance >= 90.0:
        return 0.5 * summary.max_distance
    projection = samples.coords @ direction.unit_vector(samples.dimension)
    return 0.5 * float(np.ptp(projection))


def pair_passes(lags: LagRequest, statistic: str, scattergram: bool, fast: bool = True) -> list[str]:
    """The kernel of each pass over the pairs: the automatic classes' counts and the statistic's sums
    by :func:`~lagwise.core.variography.pairs.accumulate` (the column sweep when ``fast``, i.e.
    the layout's :attr:`~lagwise.core.variography.pairs.ClassLayout.fast`, else the sweep along x),
    the median's differences and the h-scattergram by ``collect_pairs`` (the sweep along x)."""
    explicit = lags.width is not None or lags.edges is not None
    summed = COLUMN_SWEEP if fast else X_SWEEP
    collected = (statistic == "semivariance_median") + int(scattergram)
    return [summed] * (1 + (0 if explicit else 1)) + [X_SWEEP] * collected


def summed_fast(directions: list[DirectionClass], lags: LagRequest) -> bool:
    """Whether :func:`~lagwise.core.variography.pairs.accumulate` will take the column sweep: horizontal
    classes and, for explicit edges, a lookup table that resolves them (automatic classes always do)."""
    explicit = validate_lags(lags)
    if explicit is not None:
        return layout(directions, [explicit] * len(directions)).fast
    return horizontal_table(direction_table(directions))


def _check_pairs(samples, prepared, radius, directions, passes, limits):
    limits.check_pairs(
        estimate_pairs_within(samples.coords, radius), directions, visits=pass_visits(prepared, radius, passes)
    )


def _resolve_edges(samples, summary, prepared, lags, directions, min_pairs, limits, passes):
    """Edges per direction and the typical spacing they were built from (None for explicit classes)."""
    explicit = validate_lags(lags)
    if explicit is not None:
        return [explicit] * len(directions), None
    largest = [_half_extent(samples, summary, d) for d in directions]
    if min(largest) <= NO_EXTENT * summary.max_distance:
        raise InvalidInput.at("/directions", "the samples have no extent along a requested direction")
    _check_pairs(samples, prepared, max(largest), len(directions), passes, limits)
    if lags.method == "equal_pairs":
        fine = layout(directions, [np.linspace(0.0, top, AUTO_FINE_BINS + 1) for top in largest])
        table, _ = accumulate(prepared, fine, K.MODE_COUNT)
        return [quantile_edges(top, table[k, :, K.COUNT], min_pairs) for k, top in enumerate(largest)], None
    spacing = typical_spacing(samples.coords)
    candidates = [spacing_edges(top, spacing_width(top, spacing)) for top in largest]
    table, _ = accumulate(prepared, layout(directions, candidates), K.MODE_COUNT)
    edges = [merge_sparse(e, table[k, : len(e) - 1, K.COUNT], min_pairs) for k, e in enumerate(candidates)]
    return edges, spacing


def _scattergram(request, prepared, classes, counts, limits) -> Scattergram:
    if not 0 <= request.direction < counts.shape[0]:
        raise InvalidInput.at("/pairs_for_class/direction", f"must be from 0 to {counts.shape[0] - 1}")
    if not 0 <= request.klass < classes.counts[request.direction]:
        top = classes.counts[request.direction] - 1
        raise InvalidInput.at("/pairs_for_class/class", f"must be from 0 to {top}")
    if not 1 <= request.limit <= limits.max_scatter_pairs:
        raise InvalidInput.at("/pairs_for_class/limit", f"must be from 1 to {limits.max_scatter_pairs}")
    total = int(counts[request.direction, request.klass])
    bin_index = request.direction * classes.kmax + request.klass
    tail, head, stride = scatter_pairs(prepared, classes, bin_index, max(total, 1), request.limit)
    return Scattergram(request.direction, request.klass, total, stride, tail, head)


def experimental_variogram(
    samples: SampleSet,
    *,
    lags: LagRequest = LagRequest(),
    directions: list[DirectionClass] | None = None,
    statistic: str = "semivariance",
    min_pairs: int = DEFAULT_MIN_PAIRS,
    pairs_for_class: ScatterRequest | None = None,
    limits: Limits = Limits(),
    declustering: Declustering | None = None,
    method: str = "exact",
    tolerance: float = DEFAULT_TOLERANCE,
) -> ExperimentalVariogram:
    """Compute an experimental variogram (or covariance-type statistic) per direction class.

    Parameters
    ----------
    samples : SampleSet
        Validated samples.
    lags : LagRequest
        Distance classes (see :mod:`lagwise.core.variography.lags`); default ``auto`` equal width.
    directions : list of DirectionClass, optional
        Direction classes; default one omnidirectional class.
    statistic : str
        One of :data:`lagwise.core.variography.statistics.STATISTICS`.
    min_pairs : int
        Classes with fewer pairs are flagged ``sparse`` (default 30, common practice).
    pairs_for_class : ScatterRequest, optional
        Also return the pairs of one class.
    limits : Limits
        Cost limits, checked before the pair passes.
    declustering : Declustering, optional
        Declustering weights found earlier (e.g. from the original values when the
        samples carry transformed ones); default: found from the samples' values.

    method : {"exact", "grid", "auto"}
        Pair engine, FFT on binned samples, or chosen from the cost
        (:mod:`lagwise.core.variography.gridded`).
    tolerance : float
        Relative error bound above which a class of the ``grid`` method is flagged.

    Raises
    ------
    InvalidInput, LimitExceeded
    """
    if method not in METHODS:
        raise InvalidInput.at("/method", f"must be one of {', '.join(METHODS)}")
    limits.check_samples(samples.size)
    resolved, warnings = validate_options(samples, statistic, min_pairs, directions)
    if method == "auto":
        method = choose_method(samples, lags, resolved, statistic, limits, pairs_for_class is not None)
    if method == "grid":
        if pairs_for_class is not None:
            raise InvalidInput.at("/pairs_for_class", "h-scattergrams need method 'exact'")
        return _binned_variogram(samples, lags, resolved, statistic, min_pairs, limits, tolerance, warnings)
    if declustering is None:
        declustering = decluster(samples.coords, samples.values)
    summary = summarise(samples.coords, samples.values, declustering)
    prepared = prepare(samples.coords, samples.values)
    scatter = pairs_for_class is not None
    passes = pair_passes(lags, statistic, scatter, summed_fast(resolved, lags))
    edges, spacing = _resolve_edges(samples, summary, prepared, lags, resolved, min_pairs, limits, passes)
    packed = layout(resolved, edges)
    passes = pair_passes(lags, statistic, scatter, packed.fast)
    _check_pairs(samples, prepared, packed.search_radius, len(resolved), passes, limits)
    classes = Classes(resolved, edges, spacing, tuple(warnings))
    return on_classes(
        samples, classes, statistic, min_pairs, lags, limits, declustering, pairs_for_class, (summary, prepared)
    )


@dataclass(frozen=True)
class Classes:
    """Resolved direction and distance classes of a request.

    Attributes
    ----------
    directions : list of DirectionClass
    edges : list of ndarray
        Class edges per direction (coordinate units).
    spacing : float or None
        Typical spacing the ``equal_width`` classes were built from, else None.
    notes : tuple of str
        Warnings of the direction checks.
    """

    directions: list[DirectionClass]
    edges: list[np.ndarray]
    spacing: float | None
    notes: tuple[str, ...] = ()


def on_classes(
    samples: SampleSet,
    classes: Classes,
    statistic: str,
    min_pairs: int,
    lags: LagRequest,
    limits: Limits,
    declustering: Declustering,
    pairs_for_class: ScatterRequest | None = None,
    found: tuple[Summary, PreparedSamples] | None = None,
) -> ExperimentalVariogram:
    """The pair engine's variogram of ``samples`` on classes resolved and checked beforehand
    (the part of :func:`experimental_variogram` after its checks): the class sums, the median's
    differences, the class uncertainties and the h-scattergram. ``found``: the samples' summary
    and kernel layout when already at hand."""
    if found is None:
        found = summarise(samples.coords, samples.values, declustering), prepare(samples.coords, samples.values)
    summary, prepared = found
    resolved, edges = classes.directions, classes.edges
    packed = layout(resolved, edges)
    check_deadline()
    table, colocated = accumulate(prepared, packed, ACCUMULATION_MODE[statistic])
    check_deadline()
    counts = table[:, :, K.COUNT]
    medians = _class_medians(statistic, prepared, packed, counts, limits)
    uncertain, plan = class_uncertainties(statistic, prepared, packed, samples.coords, int(counts.sum()))
    check_deadline()
    results = direction_results(statistic, table, edges, medians, min_pairs, prepared, uncertain, resolved)
    scatter = None if pairs_for_class is None else _scattergram(pairs_for_class, prepared, packed, counts, limits)
    notes = [*samples.warnings, *classes.notes, *_class_warnings(results, min_pairs, summary)]
    if declustering.warning:
        notes.append(declustering.warning)
    return assembled(results, summary, statistic, min_pairs, lags, colocated, classes.spacing, plan, notes, scatter)


def direction_results(statistic, table, edges, medians, min_pairs, prepared, uncertain, resolved):
    """The classes of every direction: ``table`` (ndir, kmax, ACCUMULATORS), ``edges`` and
    ``medians`` per direction, ``uncertain[k][c]`` the uncertainty of class c of direction k."""
    return tuple(
        DirectionResult(d, _rows(statistic, table[k], edges[k], medians[k], min_pairs, prepared, uncertain[k]))
        for k, d in enumerate(resolved)
    )


def assembled(
    results, summary, statistic, min_pairs, lags, colocated, spacing, plan, warnings, scatter=None
) -> ExperimentalVariogram:
    """An :class:`ExperimentalVariogram` of the pair engine from its parts (see its attributes)."""
    return ExperimentalVariogram(
        directions=results,
        summary=summary,
        statistic=statistic,
        min_pairs=min_pairs,
        lag_method=lags.method,
        colocated_pairs=colocated,
        spacing=spacing,
        uncertainty=plan,
        scattergram=scatter,
        warnings=tuple(warnings),
    )


def _class_medians(statistic, prepared: PreparedSamples, classes, counts, limits) -> np.ndarray:
    medians = np.full(counts.shape, np.nan)
    if statistic != "semivariance_median":
        return medians
    limits.check_median_pairs(int(counts.sum()))
    for b, diffs in enumerate(absolute_differences(prepared, classes, counts)):
        if diffs.size:
            medians.flat[b] = float(np.median(diffs))
    return medians


def _rows(
    statistic, table, edges, medians, min_pairs, prepared, uncertain: list[ClassUncertainty]
) -> tuple[ClassRow, ...]:
    rows = []
    for c in range(len(edges) - 1):
        row = table[c]
        n = int(row[K.COUNT])
        v = class_value(statistic, row, prepared.mean, prepared.scale, medians[c])
        rows.append(
            ClassRow(
                lower=float(edges[c]),
                upper=float(edges[c + 1]),
                mean_distance=float(row[K.DISTANCE] / n) if n else None,
                pairs=n,
                value=v.value,
                reason=v.reason,
                sparse=n < min_pairs,
                tail_mean=v.tail_mean if statistic in COVARIANCE_TYPE else None,
                head_mean=v.head_mean if statistic in COVARIANCE_TYPE else None,
                tail_sd=v.tail_sd if statistic in COVARIANCE_TYPE else None,
                head_sd=v.head_sd if statistic in COVARIANCE_TYPE else None,
                standard_error=uncertain[c].standard_error if v.value is not None else None,
                interval_95=uncertain[c].interval_95 if v.value is not None else None,
                uncertainty_reason=uncertain[c].reason if v.value is not None else v.reason,
            )
        )
    return tuple(rows)


def _class_warnings(results, min_pairs, summary) -> list[str]:
    warnings = []
    for k, result in enumerate(results):
        sparse = sum(row.sparse for row in result.classes)
        if sparse:
            warnings.append(
                f"direction {k}: {sparse} of {len(result.classes)} classes hold fewer than {min_pairs} pairs"
            )
    if summary.variance == 0.0:
        warnings.append("all values are equal: semivariances are 0 and correlations are undefined")
    return warnings


def choose_method(
    samples: SampleSet, lags: LagRequest, directions, statistic: str, limits: Limits, scatter: bool
) -> str:
    """``auto``: ``exact`` unless its pair work would exceed ``LAGWISE_MAX_PAIRS`` and the grid method applies
    (2-D samples, a statistic the grid method bounds, no h-scattergram)."""
    if samples.dimension != 2 or statistic not in BOUND_STATISTICS or scatter:
        return "exact"
    explicit = validate_lags(lags)
    radius = float(explicit[-1]) if explicit is not None else 0.5 * largest_separation(samples.coords)
    prepared = prepare(samples.coords, samples.values)
    try:
        passes = pair_passes(lags, statistic, False, summed_fast(directions, lags))
        _check_pairs(samples, prepared, radius, len(directions), passes, limits)
    except LimitExceeded:
        return "grid"
    return "exact"


def _binned_variogram(samples, lags, resolved, statistic, min_pairs, limits, tolerance, warnings):
    if samples.dimension != 2:
        raise InvalidInput.at("/method", "the grid method needs 2-D samples")
    check_statistic(statistic)
    refuse_unbounded(statistic)
    if not 0.0 < tolerance < 1.0:
        raise InvalidInput.at("/tolerance", "must lie in (0, 1) (a relative error)")
    summary = grid_summary(samples)
    explicit, largest = lags_needed(lags, samples.coords, summary, resolved)
    spacing = None if explicit is not None or lags.method == "equal_pairs" else typical_spacing(samples.coords)
    cell = grid_cell(summary, explicit, largest, lags, spacing or 0.0, limits)
    check_deadline()
    grid = binned_nodes(samples.coords, samples.values, cell, summary)
    computed = grid_classes(
        grid,
        lags=lags,
        directions=resolved,
        statistic=statistic,
        min_pairs=min_pairs,
        limits=limits,
        spacing=spacing,
        tolerance=tolerance,
        explicit=explicit,
        largest=largest,
    )
    notes = list(samples.warnings) + warnings
    if computed.report.flagged:
        notes.append(
            f"{computed.report.flagged} classes have a grid error bound above {tolerance:g} (relative); "
            "see error_bound per class, or use method 'exact'"
        )
    return _from_grid(computed, summary, resolved, statistic, min_pairs, lags, spacing, notes)


def raster_variogram(
    raster: Raster,
    *,
    lags: LagRequest = LagRequest(),
    directions: list[DirectionClass] | None = None,
    statistic: str = "semivariance",
    min_pairs: int = DEFAULT_MIN_PAIRS,
    limits: Limits = Limits(),
) -> ExperimentalVariogram:
    """Experimental variogram of a raster by FFT, exact for the raster's own pairs
    (:mod:`lagwise.core.variography.gridded`).

    Raises
    ------
    InvalidInput
        For a statistic the FFT sums cannot give (:data:`lagwise.core.variography.fft.FFT_STATISTICS`).
    LimitExceeded
        When the transforms would exceed ``LAGWISE_MEMORY_BUDGET_BYTES``.
    """
    check_statistic(statistic)
    if min_pairs < 1:
        raise InvalidInput.at("/min_pairs", "must be at least 1")
    resolved, warnings = resolve_directions(directions, 2)
    summary = raster_summary(raster)
    explicit, largest = lags_needed(lags, raster_outline(raster), summary, resolved)
    spacing = None if explicit is not None or lags.method == "equal_pairs" else raster_spacing(raster)
    computed = grid_classes(
        raster_nodes(raster),
        lags=lags,
        directions=resolved,
        statistic=statistic,
        min_pairs=min_pairs,
        limits=limits,
        spacing=spacing,
        tolerance=None,
        explicit=explicit,
        largest=largest,
    )
    notes = list(raster.warnings) + warnings
    return _from_grid(computed, summary, resolved, statistic, min_pairs, lags, spacing, notes)


def _from_grid(computed: GridVariogram, summary, resolved, statistic, min_pairs, lags, spacing, notes):
    moments = types.SimpleNamespace(mean=computed.mean, scale=computed.scale)
    results = []
    for k, d in enumerate(resolved):
        e = computed.edges[k]
        blank = [ClassUncertainty(None, None, NOT_COMPUTED)] * (len(e) - 1)
        rows = _rows(statistic, computed.table[k], e, np.full(len(e) - 1, np.nan), min_pairs, moments, blank)
        rows = tuple(_with_bound(row, computed, k, c) for c, row in enumerate(rows))
        results.append(DirectionResult(d, rows))
    rounded = sum(1 for r in results for row in r.classes if (row.reason or "").startswith(ROUNDING))
    if rounded:
        notes.append(rounding_note(rounded, "classes"))
    notes.extend(_class_warnings(results, min_pairs, summary))
    return ExperimentalVariogram(
        directions=tuple(results),
        summary=summary,
        statistic=statistic,
        min_pairs=min_pairs,
        lag_method=lags.method,
        colocated_pairs=computed.report.within_cell_pairs,
        spacing=spacing,
        uncertainty=None,
        scattergram=None,
        warnings=tuple(notes),
        method="grid",
        grid=computed.report,
    )


def _with_bound(row: ClassRow, computed: GridVariogram, k: int, c: int) -> ClassRow:
    floor = None if computed.floors is None else float(computed.floors[k, c])
    if floor is not None and within_rounding(row.value, floor):
        reason = f"{ROUNDING} (about {floor:.3g}); use method 'exact' on the cells as points"
        row = replace(row, value=None, reason=reason, uncertainty_reason=reason)
        return replace(row, error_bound=None, pair_bound=0, bound_exceeded=False)
    row = replace(row, uncertainty_reason=NOT_COMPUTED if row.value is not None else row.uncertainty_reason)
    if computed.bounds is None or computed.pair_bounds is None:
        return replace(row, error_bound=rounding_bound(row.value, floor), pair_bound=0, bound_exceeded=False)
    bound = float(computed.bounds[k, c])
    tolerance = computed.report.tolerance or 0.0
    finite = bool(np.isfinite(bound))
    if row.pairs == 0 and computed.pair_bounds[k, c] > 0:
        row = replace(
            row,
            reason=f"no pairs on the grid, but up to {int(computed.pair_bounds[k, c])} pairs of samples may lie in "
            "this class (pairs sharing a grid cell or near a class edge); use method 'exact'",
        )
    return replace(
        row,
        error_bound=bound if finite else None,
        pair_bound=int(computed.pair_bounds[k, c]),
        bound_exceeded=not (finite and bound <= tolerance),
    )
