"""Variogram maps of scattered samples by the grid method: binned samples, FFT lag sums, a bound per cell.

The samples are binned on square grid cells of side c
(:func:`lagwise.core.variography.gridded.binned_nodes`: each cell keeps its sample
count, value sum and sum of squares), the pair sums of every lag vector of cells come
from the FFT (:mod:`lagwise.core.variography.fft`), and each ordered lag vector s goes
to the map cell of its offset s c, floor(s c / S + 1/2) along each axis (S the map's
cell size), as :func:`~lagwise.core.variography.fft.map_table` does for rasters. Pairs
within one grid cell are left out.

Grid cell
---------
c = S / m with m odd, from :data:`CELLS_PER_MAP_CELL` down by 2, the first that gives a
grid of at most :data:`~lagwise.core.variography.gridded.MAX_GRID_SIDE` cells a side whose
transforms fit ``LAGWISE_MEMORY_BUDGET_BYTES`` (c = S, m = 1, the last); refused when that
does not fit either (``LAGWISE_MEMORY_BUDGET_BYTES``) or when the finest allowed grid is
coarser than the map (``/cell_size``). An odd m puts every map cell edge,
(I + 1/2) S = (I m + (m - 1) / 2 + 1/2) c, half a grid cell from the two nearest columns
(rows) of lag vectors: the pairs those lag vectors put across the edge are the ones whose
offsets within their cells differ by more than c / 2, for samples spread evenly within their
cells, a quarter of a column against a half when the edge lies on a column (bounds.py,
"Map cells"), and the columns a whole cell or more from an edge
hold no pair of another map cell.

Each map cell states a relative error bound and a pair-count bound
(:func:`lagwise.core.variography.bounds.map_bounds`, derivation in that module's
docstring, "Map cells"); a cell is flagged when its bound exceeds the tolerance or
is undefined (value 0 or no value), except where both maps are certainly empty
(no pairs on the grid and a pair-count bound of 0).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..data.samples import SampleSet
from ..data.summary import Summary
from ..deadline import check_deadline
from ..errors import InvalidInput
from ..limits import Limits
from . import kernels as K
from .bounds import map_bounds
from .fft import (
    check_budget,
    fft_bytes,
    lag_sums,
    map_floors,
    map_table,
    padded_shape,
    square_rounding,
    within_rounding,
)
from .gridded import MAX_GRID_SIDE, GridReport, binned_nodes, refuse_unbounded
from .statistics import class_value

CELLS_PER_MAP_CELL = 31


def cell_values(statistic: str, table: np.ndarray, mean: float, scale: float, medians=None) -> list:
    """Values of every map cell from its accumulator row (None where undefined), in table order."""
    return [
        class_value(statistic, table[b], mean, scale, None if medians is None else medians[b]).value
        for b in range(table.shape[0])
    ]


def without_rounding(values: list, floors: np.ndarray) -> tuple[list, int]:
    """``values`` with None for each semivariance not above its cell's rounding floor
    (:func:`~lagwise.core.variography.fft.map_floors`; a floor of 0 is exact), and how many."""
    kept = [None if within_rounding(v, f) else v for v, f in zip(values, floors, strict=True)]
    return kept, sum(1 for a, b in zip(values, kept, strict=True) if a is not b)


@dataclass(frozen=True)
class BinnedMap:
    """A variogram map by the grid method, before it becomes a :class:`~lagwise.core.variography.maps.VariogramMap`.

    Attributes
    ----------
    values : list of float or None
        Cell values in table order (row by hy, then column by hx).
    pairs : ndarray of int, shape (W, W)
        Pairs per cell on the grid (each pair as h and as -h), W = 2 cells + 1.
    error_bound : ndarray, shape (W, W)
        Relative bound of each value, NaN where undefined.
    pair_bound : ndarray of int, shape (W, W)
        Largest difference of a cell's pair count from the exact map's.
    bound_exceeded : ndarray of bool, shape (W, W)
        Flagged cells (module docstring).
    report : GridReport
        The grid, for the audit trail.
    """

    values: list
    pairs: np.ndarray
    error_bound: np.ndarray
    pair_bound: np.ndarray
    bound_exceeded: np.ndarray
    report: GridReport
    rounded: int = 0


def grid_shape(extent: list[float], cell: float, radius: float) -> tuple[tuple[int, int], tuple[int, int]]:
    """(rows, columns) of the binned grid of cell side ``cell`` over ``extent`` (x, y) and the lag
    reach (x, y) in cells of a map reaching ``radius``."""
    shape = (int(extent[1] // cell) + 1, int(extent[0] // cell) + 1)
    reach = (min(int(math.ceil(radius / cell)), shape[1] - 1), min(int(math.ceil(radius / cell)), shape[0] - 1))
    return shape, reach


def map_grid_cell(summary: Summary, cell_size: float, cells: int, limits: Limits) -> float:
    """Grid cell side c for a map of ``cells`` cells of side ``cell_size`` a side of the origin (module docstring).

    Raises
    ------
    InvalidInput
        When even a grid of :data:`MAX_GRID_SIDE` cells a side is coarser than the map's cells.
    LimitExceeded
        When a grid no coarser than the map's cells does not fit ``LAGWISE_MEMORY_BUDGET_BYTES``.
    """
    extent = [hi - lo for lo, hi in summary.extent.values()]
    finest = max(extent) / (MAX_GRID_SIDE - 1)
    if finest > cell_size:
        raise InvalidInput.at(
            "/cell_size",
            f"the grid method bins the samples' whole extent on at most {MAX_GRID_SIDE} cells a side, which are "
            f"larger than the map's cells ({finest:.4g} > {cell_size:.4g}); use method 'exact' or larger cells",
        )
    sides = [cell_size / m for m in range(CELLS_PER_MAP_CELL, 1, -2) if cell_size / m >= finest] or [finest]
    radius = (cells + 0.5) * cell_size
    for cell in sides:
        shape, reach = grid_shape(extent, cell, radius)
        if fft_bytes(shape, reach) <= limits.memory_budget_bytes:
            return cell
    shape, reach = grid_shape(extent, cell_size, radius)
    check_budget(shape, reach, limits, "/cells")
    return cell_size


def refuse_for_grid(samples: SampleSet, statistic: str, tolerance: float) -> None:
    """What the grid method needs: 2-D samples, a statistic whose error it bounds, a tolerance in (0, 1)."""
    if samples.dimension != 2:
        raise InvalidInput.at("/method", "the grid method needs 2-D samples")
    refuse_unbounded(statistic)
    if not 0.0 < tolerance < 1.0:
        raise InvalidInput.at("/tolerance", "must lie strictly between 0 and 1 (a relative error)")


def binned_map(
    samples: SampleSet,
    summary: Summary,
    *,
    cell_size: float,
    cells: int,
    statistic: str,
    limits: Limits,
    tolerance: float,
) -> BinnedMap:
    """The map of ``samples`` by the grid method (module docstring).

    Parameters
    ----------
    samples : SampleSet
        Validated 2-D samples.
    summary : Summary
        Their summary (extent, mean, value range; :func:`lagwise.core.variography.gridded.grid_summary`).
    cell_size : float
        Map cell side, coordinate units.
    cells : int
        Map cells on each side of the origin.
    statistic : str
        ``semivariance`` or ``covariance_noncentered`` (:data:`lagwise.core.variography.bounds.BOUND_STATISTICS`).
    limits : Limits
        ``LAGWISE_MEMORY_BUDGET_BYTES`` bounds the grid.
    tolerance : float
        Relative bound above which a cell is flagged.
    """
    refuse_for_grid(samples, statistic, tolerance)
    cell = map_grid_cell(summary, cell_size, cells, limits)
    check_deadline()
    grid = binned_nodes(samples.coords, samples.values, cell, summary)
    ny, nx = grid.nodes.shape
    radius = (cells + 0.5) * cell_size
    reach = (min(int(math.ceil(radius / cell)), nx - 1), min(int(math.ceil(radius / cell)), ny - 1))
    memory = check_budget((ny, nx), reach, limits, "/cells")
    sums = lag_sums(grid.nodes, reach, first_moments=statistic != "semivariance")
    check_deadline()
    table = map_table(sums, cell_size, cells)
    width = 2 * cells + 1
    mean, scale = grid.nodes.mean, grid.nodes.scale
    values, rounded = cell_values(statistic, table, mean, scale), 0
    if statistic == "semivariance":
        noise = square_rounding(grid.norms, grid.nodes.shape, reach)
        values, rounded = without_rounding(values, map_floors(sums, cell_size, cells, noise))
    grid_values = np.array([np.nan if v is None else v for v in values]).reshape(width, width)
    if statistic == "semivariance":
        numerator = sums.square / 2.0
        within = (grid.within[0], grid.within[1])
    else:
        numerator = sums.product + mean * (sums.tail + sums.head) + mean * mean * sums.count
        within = (grid.within[0], grid.within[2])
    bound, pair_bound = map_bounds(
        sums.count, numerator, reach, within, cell, grid.spread, cell_size, cells, grid_values
    )
    del sums, numerator
    check_deadline()
    pairs = table[:, K.COUNT].astype(np.int64).reshape(width, width)
    both_empty = (pairs == 0) & (pair_bound == 0)
    exceeded = ~(bound <= tolerance) & ~both_empty
    py, px = padded_shape((ny, nx), reach)
    report = GridReport(
        source="binned",
        origin=grid.origin,
        spacing=(cell, cell),
        shape=(nx, ny),
        padded=(px, py),
        reach=reach,
        memory_bytes=memory,
        tolerance=tolerance,
        within_cell_pairs=int(grid.within[0]),
        flagged=int(exceeded.sum()),
        scope="map",
    )
    return BinnedMap(values, pairs, bound, np.rint(pair_bound).astype(np.int64), exceeded, report, rounded)
