"""Variogram maps: a statistic on a grid of separation vectors (hx, hy).

Cell (i, j), i and j in [-cells, cells], collects horizontal separations with
hx in [(i - 1/2) s, (i + 1/2) s) and hy in [(j - 1/2) s, (j + 1/2) s), s the cell
size; every pair counts twice, as h (tail -> head) and as -h (head -> tail), so the
map is symmetric through the origin for the symmetric statistics. For 3-D samples
the vertical separation is ignored. Rows of the output run by hy, columns by hx.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numba
import numpy as np

from ..data.samples import SampleSet
from ..data.summary import Summary, summarise
from ..errors import FieldIssue, InvalidInput
from ..limits import Limits
from . import kernels as K
from .pairs import estimate_pairs_within, prepare
from .statistics import ACCUMULATION_MODE, STATISTICS, class_value


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


def _validate(samples, cell_size, cells, statistic, limits):
    issues = []
    if samples.dimension < 2:
        issues.append(FieldIssue("/samples/y", "a variogram map needs 2-D or 3-D samples"))
    if not (cell_size > 0 and math.isfinite(cell_size)):
        issues.append(FieldIssue("/cell_size", "must be a positive distance"))
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
    cell_size: float,
    cells: int,
    statistic: str = "semivariance",
    limits: Limits = Limits(),
) -> VariogramMap:
    """Compute a variogram map (see the module conventions).

    Parameters
    ----------
    samples : SampleSet
        Validated 2-D or 3-D samples.
    cell_size : float
        Side of a square cell, coordinate units.
    cells : int
        Cells on each side of the origin (the map has 2 * cells + 1 per side).
    statistic : str
        One of :data:`lagwise.core.variography.statistics.STATISTICS`.
    limits : Limits
        Cost limits, checked before the pair passes.
    """
    limits.check_samples(samples.size)
    _validate(samples, cell_size, cells, statistic, limits)
    reach = (cells + 0.5) * cell_size
    limits.check_pairs(estimate_pairs_within(samples.coords[:, :2], reach * math.sqrt(2.0)), 2, "/cells")
    prepared = prepare(samples.coords, samples.values)
    mode = ACCUMULATION_MODE[statistic]
    table = K.accumulate_map(
        prepared.points, prepared.values, prepared.mean, cell_size, cells, mode, numba.get_num_threads()
    )
    width = 2 * cells + 1
    counts = table[:, K.COUNT].astype(np.int64)
    medians = _cell_medians(statistic, prepared, cell_size, cells, counts, limits)
    flat = [
        class_value(statistic, table[b], prepared.mean, prepared.scale, medians[b]).value for b in range(width * width)
    ]
    centres = cell_size * np.arange(-cells, cells + 1, dtype=np.float64)
    warnings = list(samples.warnings)
    if samples.dimension == 3:
        warnings.append("3-D samples: the map uses horizontal separations and ignores the vertical one")
    return VariogramMap(
        hx=centres,
        hy=centres.copy(),
        values=[flat[r * width : (r + 1) * width] for r in range(width)],
        pairs=counts.reshape(width, width),
        statistic=statistic,
        cell_size=float(cell_size),
        cells=int(cells),
        summary=summarise(samples.coords, samples.values),
        warnings=tuple(warnings),
    )


def _cell_medians(statistic, prepared, cell_size, cells, counts, limits) -> np.ndarray:
    medians = np.full(counts.shape, np.nan)
    if statistic != "semivariance_median":
        return medians
    limits.check_median_pairs(int(counts.sum()))
    starts = np.concatenate([[0], np.cumsum(counts)[:-1]]).astype(np.int64)
    out = np.empty(int(counts.sum()))
    K.collect_map_differences(prepared.points, prepared.values, cell_size, cells, starts.copy(), starts + counts, out)
    for b, (s, c) in enumerate(zip(starts, counts, strict=False)):
        if c:
            medians[b] = float(np.median(out[s : s + c]))
    return medians
