"""Variogram maps: a statistic on a grid of separation vectors (hx, hy).

Cell (i, j), i and j in [-cells, cells], collects horizontal separations with
hx in [(i - 1/2) s, (i + 1/2) s) and hy in [(j - 1/2) s, (j + 1/2) s), s the cell
size; every pair counts twice, as h (tail -> head) and as -h (head -> tail), so the
map is symmetric through the origin for the symmetric statistics. For 3-D samples
the vertical separation is ignored. Rows of the output run by hy, columns by hx.

Omitted cell size and count follow the rule of the automatic distance classes
(:mod:`lagwise.core.variography.lags`): the map reaches half the largest separation
R, and the cell side is the typical sample spacing, enlarged where needed so that a
cell holds about ``min_pairs`` pairs on average (n samples over a hull of area A put
about n^2 s^2 / A ordered pairs in a cell of side s, so s >= sqrt(min_pairs A) / n)
and so that at most ``AUTO_MAX_MAP_CELLS`` cells lie on each side of the origin.
Given only the cell size, the count reaches R; given only the count, the size does.

Methods (``method``), as for experimental variograms
(:mod:`lagwise.core.variography.gridded`): ``exact`` enumerates the pairs
(:func:`variogram_map`); ``grid`` bins 2-D samples on a fine grid and sums every lag
vector by FFT, with an error bound per cell (:mod:`lagwise.core.variography.binned_maps`);
``auto`` takes ``exact`` unless its pair work would exceed ``LAGWISE_MAX_PAIRS`` and the
grid method applies (2-D samples, a statistic it bounds), then ``grid``. A raster's map
(:func:`raster_map`) is computed on the raster's own grid, exact for its pairs (its bound: the transforms' rounding estimate).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numba
import numpy as np
from scipy.spatial import ConvexHull, QhullError

from ..data.declustering import Declustering, decluster
from ..data.raster import Raster, raster_summary
from ..data.samples import MAX_SPREAD, SampleSet
from ..data.spacing import typical_spacing
from ..data.summary import Summary, summarise
from ..errors import FieldIssue, InvalidInput, LimitExceeded
from ..limits import Limits
from . import kernels as K
from .binned_maps import (
    binned_map,
    cell_values,
    grid_shape,
    map_grid_cell,
    refuse_for_grid,
    without_rounding,
)
from .bounds import BOUND_STATISTICS
from .fft import (
    check_budget,
    check_statistic,
    lag_sums,
    map_floors,
    map_table,
    padded_shape,
    rounding_bound,
    rounding_note,
    square_rounding,
    transform_count,
)
from .gridded import DEFAULT_TOLERANCE, METHODS, GridReport, grid_summary, raster_nodes
from .pairs import X_SWEEP, estimate_pairs_within, in_chunks, prepare, sweep_visits
from .statistics import ACCUMULATION_MODE, STATISTICS

AUTO_MAX_MAP_CELLS = 40
DEFAULT_MAP_MIN_PAIRS = 30


@dataclass(frozen=True)
class VariogramMap:
    """Result of :func:`variogram_map`.

    Attributes
    ----------
    hx, hy : ndarray, shape (2 * cells + 1,)
        Cell centres, coordinate units.
    values : list of list of float or None
        values[row][column] for row = hy index and column = hx index; None where
        a cell has no pairs or the statistic is undefined.
    pairs : ndarray of int, shape (2 * cells + 1, 2 * cells + 1)
        Pairs per cell (each pair counted as h and as -h).
    spacing : float or None
        Typical sample spacing, when the cell size or count was chosen automatically.
    min_pairs : int
        Average pairs per cell the automatic rule aimed for.
    method : str
        ``exact`` (pair enumeration) or ``grid`` (FFT on a grid: binned samples or a raster).
    grid : GridReport or None
        The grid, for the ``grid`` method.
    error_bound : ndarray, shape (2 * cells + 1, 2 * cells + 1), or None
        ``grid`` method: bound on |value - exact value| / |value| per cell (NaN where
        undefined; 0 for a raster's own grid); None for ``exact``.
    pair_bound : ndarray of int, same shape, or None
        ``grid`` method: largest difference of a cell's pairs from the exact count.
    bound_exceeded : ndarray of bool, same shape, or None
        ``grid`` method: cells whose bound exceeds the tolerance or is undefined
        (:mod:`lagwise.core.variography.binned_maps`).
    """

    hx: np.ndarray
    hy: np.ndarray
    values: list
    pairs: np.ndarray
    statistic: str
    cell_size: float
    cells: int
    summary: Summary
    warnings: tuple[str, ...] = field(default=())
    spacing: float | None = None
    min_pairs: int = DEFAULT_MAP_MIN_PAIRS
    method: str = "exact"
    grid: GridReport | None = None
    error_bound: np.ndarray | None = None
    pair_bound: np.ndarray | None = None
    bound_exceeded: np.ndarray | None = None


def _hull_area(points: np.ndarray) -> float:
    """Area of the convex hull of 2-D points (the bounding box for flat sets), squared units."""
    try:
        return float(ConvexHull(points).volume)
    except (QhullError, ValueError):
        return float(np.prod(np.ptp(points, axis=0)))


def automatic_cells(
    samples: SampleSet, summary: Summary, cell_size: float | None, cells: int | None, min_pairs: int, top: int
) -> tuple[float, int, float]:
    """Cell size and count for omitted values (see the module docstring); returns (size, cells, spacing)."""
    horizontal = samples.coords[:, :2]
    spacing = typical_spacing(horizontal)
    reach = 0.5 * summary.max_distance
    if cell_size is None and cells is not None:
        return reach / (cells + 0.5), cells, spacing
    if cell_size is None:
        area = _hull_area(horizontal)
        dense_enough = math.sqrt(min_pairs * area) / samples.size if area > 0 else 0.0
        cell_size = max(spacing, dense_enough, reach / (min(AUTO_MAX_MAP_CELLS, top) + 0.5))
    if cells is None:
        cells = int(min(top, max(1, round(reach / cell_size - 0.5))))
    return float(cell_size), int(cells), spacing


def _validate(samples, cell_size, cells, statistic, limits):
    issues = []
    if samples.dimension < 2:
        issues.append(FieldIssue("/samples/y", "a variogram map needs 2-D or 3-D samples"))
    if not (cell_size > 0 and math.isfinite(cell_size)):
        issues.append(FieldIssue("/cell_size", "must be a positive distance"))
    elif cell_size * (cells + 0.5) > MAX_SPREAD:
        issues.append(FieldIssue("/cell_size", f"the map would reach beyond {MAX_SPREAD:g}, whose squares overflow"))
    top = (limits.max_map_cells - 1) // 2
    if not 1 <= cells <= top:
        issues.append(FieldIssue("/cells", f"must be a whole number from 1 to {top} (LAGWISE_MAX_MAP_CELLS)"))
    if statistic not in STATISTICS:
        issues.append(FieldIssue("/statistic", f"must be one of {', '.join(STATISTICS)}"))
    elif statistic == "pairwise_relative":
        issues.extend(
            FieldIssue(f"/samples/values/{samples.source_index[i]}", "pairwise_relative needs positive values")
            for i in np.flatnonzero(samples.values <= 0)[:20]
        )
    if issues:
        raise InvalidInput(issues)


def variogram_map(
    samples: SampleSet,
    *,
    cell_size: float | None = None,
    cells: int | None = None,
    statistic: str = "semivariance",
    min_pairs: int = DEFAULT_MAP_MIN_PAIRS,
    limits: Limits = Limits(),
    declustering: Declustering | None = None,
    method: str = "exact",
    tolerance: float = DEFAULT_TOLERANCE,
) -> VariogramMap:
    """Compute a variogram map (see the module conventions).

    Parameters
    ----------
    samples : SampleSet
        Validated 2-D or 3-D samples.
    cell_size : float, optional
        Side of a square cell, coordinate units (default: the automatic rule of the
        module docstring).
    cells : int, optional
        Cells on each side of the origin (the map has 2 * cells + 1 per side;
        default: enough to reach half the largest separation).
    statistic : str
        One of :data:`lagwise.core.variography.statistics.STATISTICS`.
    min_pairs : int
        Average pairs per cell the automatic cell size aims for (default 30).
    limits : Limits
        Cost limits, checked before the pair passes or the transforms.
    declustering : Declustering, optional
        Declustering weights found earlier (e.g. from the original values when the
        samples carry transformed ones); default: found from the samples' values
        (the ``grid`` method reports a summary without declustering).
    method : {"exact", "grid", "auto"}
        Pair enumeration, FFT on binned samples, or chosen from the cost (module docstring).
    tolerance : float
        Relative error bound above which a cell of the ``grid`` method is flagged.

    Raises
    ------
    InvalidInput, LimitExceeded
    """
    limits.check_samples(samples.size)
    if method not in METHODS:
        raise InvalidInput.at("/method", f"must be one of {', '.join(METHODS)}")
    if min_pairs < 1:
        raise InvalidInput.at("/min_pairs", "must be at least 1")
    if method == "grid":
        refuse_for_grid(samples, statistic, tolerance)
    may_grid = method == "grid" or (method == "auto" and samples.dimension == 2 and statistic in BOUND_STATISTICS)
    if may_grid:
        summary = grid_summary(samples)
    else:
        declustering = declustering or decluster(samples.coords, samples.values)
        summary = summarise(samples.coords, samples.values, declustering)
    spacing = None
    if samples.dimension >= 2 and (cell_size is None or cells is None):
        top = (limits.max_map_cells - 1) // 2
        cell_size, cells, spacing = automatic_cells(samples, summary, cell_size, cells, min_pairs, top)
        if not cell_size > 0:
            raise InvalidInput.at("/cell_size", "the samples have no horizontal extent; give a cell size")
    _validate(
        samples, cell_size if cell_size is not None else 1.0, cells if cells is not None else 1, statistic, limits
    )
    assert cell_size is not None and cells is not None  # resolved above, or _validate refused 1-D samples
    if method == "auto":
        method = "grid" if may_grid and not _exact_fits(samples, cell_size, cells, statistic, limits) else "exact"
    if method == "grid":
        return _grid_map(samples, summary, cell_size, cells, statistic, min_pairs, limits, tolerance, spacing)
    if may_grid:  # auto chose the pair engine: its summary carries the declustered moments
        declustering = declustering or decluster(samples.coords, samples.values)
        summary = summarise(samples.coords, samples.values, declustering)
    assert declustering is not None
    return _exact_map(samples, summary, declustering, cell_size, cells, statistic, min_pairs, limits, spacing)


def _pair_work(samples: SampleSet, sorted_x: np.ndarray, cell_size: float, cells: int, statistic: str, limits):
    """Refuse an exact map whose pair work exceeds ``LAGWISE_MAX_PAIRS``; returns the sweep's visits per sample."""
    reach = (cells + 0.5) * cell_size
    visits = sweep_visits(sorted_x, reach)
    limits.check_pairs(
        estimate_pairs_within(samples.coords[:, :2], reach * math.sqrt(2.0)),
        2,
        "/cells",
        visits=[(X_SWEEP, int(visits.sum()))] * (2 if statistic == "semivariance_median" else 1),
    )
    return visits


def exact_map_work(samples: SampleSet, cell_size: float, cells: int, statistic: str) -> int:
    """Pair work of an exact map (``LAGWISE_MAX_PAIRS`` units, :meth:`~lagwise.core.limits.Limits.check_pairs`):
    per pass, the sweep along x to (cells + 1/2) x cell_size plus the pairs within the map's corner
    distance twice (the map kernel adds every pair as h and as -h); the median takes a second pass."""
    reach = (cells + 0.5) * cell_size
    visited = int(sweep_visits(np.sort(samples.coords[:, 0]), reach).sum())
    within = estimate_pairs_within(samples.coords[:, :2], reach * math.sqrt(2.0))
    return (2 if statistic == "semivariance_median" else 1) * (visited + 2 * within)


@dataclass(frozen=True)
class MapWork:
    """What a variogram map of scattered samples will compute, known before any work (:func:`map_work`).

    Attributes
    ----------
    method : str
        ``exact`` or ``grid``, as :func:`variogram_map` would choose for the method asked for.
    pairs : int
        The exact map's pair work (:func:`exact_map_work`), 0 for the grid method.
    transforms : int
        The grid method's real 2-D FFTs (forward and inverse, :func:`~lagwise.core.variography.fft.lag_sums`).
    points : int
        Points of each transform (the padded grid's rows x columns), 0 for the exact method.
    """

    method: str
    pairs: int
    transforms: int = 0
    points: int = 0


def map_work(samples: SampleSet, *, statistic: str, min_pairs: int, method: str, limits: Limits) -> MapWork | None:
    """The work of :func:`variogram_map` with automatic cells (as an analysis asks for it), or None
    when the map would be refused (its own checks name the field then)."""
    if samples.dimension < 2 or (method == "grid" and (samples.dimension != 2 or statistic not in BOUND_STATISTICS)):
        return None
    summary = grid_summary(samples)
    top = (limits.max_map_cells - 1) // 2
    cell_size, cells, _ = automatic_cells(samples, summary, None, None, min_pairs, top)
    if not cell_size > 0:
        return None
    pairs = exact_map_work(samples, cell_size, cells, statistic)
    gridded = samples.dimension == 2 and statistic in BOUND_STATISTICS
    if method == "exact" or (method == "auto" and (not gridded or pairs <= limits.max_pairs)):
        return MapWork("exact", pairs)
    try:
        cell = map_grid_cell(summary, cell_size, cells, limits)
    except (InvalidInput, LimitExceeded):
        return None
    extent = [hi - lo for lo, hi in summary.extent.values()]
    shape, reach = grid_shape(extent, cell, (cells + 0.5) * cell_size)
    rows, columns = padded_shape(shape, reach)
    return MapWork("grid", 0, transform_count(statistic != "semivariance"), rows * columns)


def _exact_fits(samples: SampleSet, cell_size: float, cells: int, statistic: str, limits: Limits) -> bool:
    """``auto``: whether the exact map's pair work stays within ``LAGWISE_MAX_PAIRS``."""
    try:
        _pair_work(samples, np.sort(samples.coords[:, 0]), cell_size, cells, statistic, limits)
    except LimitExceeded:
        return False
    return True


def _square_cells(flat, cell_size: float, cells: int) -> dict:
    """Cell centres (coordinate units) and rows of a square map of ``2 * cells + 1`` cells a side, from
    its values in row order (rows by hy)."""
    width = 2 * cells + 1
    centres = cell_size * np.arange(-cells, cells + 1, dtype=np.float64)
    return {
        "hx": centres,
        "hy": centres.copy(),
        "values": [flat[r * width : (r + 1) * width] for r in range(width)],
        "cell_size": float(cell_size),
        "cells": int(cells),
    }


def _grid_map(samples, summary, cell_size, cells, statistic, min_pairs, limits, tolerance, spacing) -> VariogramMap:
    found = binned_map(
        samples, summary, cell_size=cell_size, cells=cells, statistic=statistic, limits=limits, tolerance=tolerance
    )
    warnings = list(samples.warnings)
    if found.rounded:
        warnings.append(rounding_note(found.rounded, "map cells"))
    if found.report.flagged:
        warnings.append(
            f"{found.report.flagged} map cells have a grid error bound above {tolerance:g} (relative); "
            "see error_bound per cell, or use method 'exact'"
        )
    return VariogramMap(
        **_square_cells(found.values, cell_size, cells),
        pairs=found.pairs,
        statistic=statistic,
        summary=summary,
        warnings=tuple(warnings),
        spacing=spacing,
        min_pairs=int(min_pairs),
        method="grid",
        grid=found.report,
        error_bound=found.error_bound,
        pair_bound=found.pair_bound,
        bound_exceeded=found.bound_exceeded,
    )


def _exact_map(samples, summary, declustering, cell_size, cells, statistic, min_pairs, limits, spacing) -> VariogramMap:
    prepared = prepare(samples.coords, samples.values)
    visits = _pair_work(samples, prepared.points[:, 0], cell_size, cells, statistic, limits)
    mode = ACCUMULATION_MODE[statistic]
    table = np.zeros(((2 * cells + 1) ** 2, K.ACCUMULATORS))

    def run(first: int, last: int) -> None:
        table[:] += K.accumulate_map(
            prepared.points,
            prepared.values,
            prepared.mean,
            cell_size,
            cells,
            mode,
            numba.get_num_threads(),
            first,
            last,
        )

    in_chunks(visits, run)
    width = 2 * cells + 1
    counts = table[:, K.COUNT].astype(np.int64)
    medians = _cell_medians(statistic, prepared, cell_size, cells, counts, visits, limits)
    flat = cell_values(statistic, table, prepared.mean, prepared.scale, medians)
    warnings = list(samples.warnings)
    if declustering.warning:
        warnings.append(declustering.warning)
    if samples.dimension == 3:
        warnings.append("3-D samples: the map uses horizontal separations and ignores the vertical one")
    return VariogramMap(
        **_square_cells(flat, cell_size, cells),
        pairs=counts.reshape(width, width),
        statistic=statistic,
        summary=summary,
        warnings=tuple(warnings),
        spacing=spacing,
        min_pairs=int(min_pairs),
    )


def _cell_medians(statistic, prepared, cell_size, cells, counts, visits, limits) -> np.ndarray:
    medians = np.full(counts.shape, np.nan)
    if statistic != "semivariance_median":
        return medians
    limits.check_median_pairs(int(counts.sum()))
    starts = np.concatenate([[0], np.cumsum(counts)[:-1]]).astype(np.int64)
    out = np.empty(int(counts.sum()))
    offsets, ends = starts.copy(), starts + counts
    in_chunks(
        visits,
        lambda first, last: K.collect_map_differences(
            prepared.points, prepared.values, cell_size, cells, offsets, ends, out, first, last
        ),
    )
    for b, (s, c) in enumerate(zip(starts, counts, strict=False)):
        if c:
            medians[b] = float(np.median(out[s : s + c]))
    return medians


def _or_nan(bound: float | None) -> float:
    return np.nan if bound is None else bound


def raster_map(
    raster: Raster,
    *,
    cell_size: float | None = None,
    cells: int | None = None,
    statistic: str = "semivariance",
    min_pairs: int = DEFAULT_MAP_MIN_PAIRS,
    limits: Limits = Limits(),
) -> VariogramMap:
    """Variogram map of a raster by FFT (:mod:`lagwise.core.variography.fft`), exact for its own pairs.

    Same conventions as :func:`variogram_map`; omitted, the cell side is the raster's
    smaller node spacing (enlarged to at most ``AUTO_MAX_MAP_CELLS`` cells a side) and
    the map reaches half the largest separation.
    """
    check_statistic(statistic)
    if min_pairs < 1:
        raise InvalidInput.at("/min_pairs", "must be at least 1")
    summary = raster_summary(raster)
    top = (limits.max_map_cells - 1) // 2
    reach = 0.5 * summary.max_distance
    if cell_size is None and cells is not None:
        cell_size = reach / (cells + 0.5)
    if cell_size is None:
        cell_size = max(min(raster.spacing), reach / (min(AUTO_MAX_MAP_CELLS, top) + 0.5))
    if cells is None:
        cells = int(min(top, max(1, round(reach / cell_size - 0.5))))
    issues = []
    if not (cell_size > 0 and math.isfinite(cell_size)) or cell_size * (cells + 0.5) > MAX_SPREAD:
        issues.append(FieldIssue("/cell_size", f"must be a positive distance; the map must reach below {MAX_SPREAD:g}"))
    if not 1 <= cells <= top:
        issues.append(FieldIssue("/cells", f"must be a whole number from 1 to {top} (LAGWISE_MAX_MAP_CELLS)"))
    if issues:
        raise InvalidInput(issues)
    grid = raster_nodes(raster)
    ny, nx = raster.grid.shape
    extent = (cells + 0.5) * cell_size
    lag_reach = (
        min(int(math.ceil(extent / raster.spacing[0])), nx - 1),
        min(int(math.ceil(extent / raster.spacing[1])), ny - 1),
    )
    first_moments = statistic != "semivariance"
    memory = check_budget((ny, nx), lag_reach, limits, "/cells", first_moments, node_arrays=0)
    sums = lag_sums(grid.nodes, lag_reach, first_moments=first_moments)
    table = map_table(sums, cell_size, cells)
    width = 2 * cells + 1
    flat, rounded = cell_values(statistic, table, grid.nodes.mean, grid.nodes.scale), 0
    floors = np.full(width * width, np.inf)
    if not first_moments:
        noise = square_rounding(grid.norms, grid.nodes.shape, lag_reach)
        floors = map_floors(sums, cell_size, cells, noise)
        flat, rounded = without_rounding(flat, floors)
    del sums
    bounds = np.array([_or_nan(rounding_bound(v, f)) for v, f in zip(flat, floors, strict=True)])
    py, px = padded_shape((ny, nx), lag_reach)
    report = GridReport(
        source="raster",
        origin=raster.origin,
        spacing=raster.spacing,
        shape=(nx, ny),
        padded=(px, py),
        reach=lag_reach,
        memory_bytes=memory,
        scope="map",
    )
    return VariogramMap(
        **_square_cells(flat, cell_size, cells),
        pairs=table[:, K.COUNT].astype(np.int64).reshape(width, width),
        statistic=statistic,
        summary=summary,
        warnings=raster.warnings + ((rounding_note(rounded, "map cells"),) if rounded else ()),
        min_pairs=int(min_pairs),
        method="grid",
        grid=report,
        error_bound=bounds.reshape(width, width),
        pair_bound=np.zeros((width, width), dtype=np.int64),
        bound_exceeded=np.zeros((width, width), dtype=bool),
    )
