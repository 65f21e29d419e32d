"""Experimental variograms and variogram maps on grids, by FFT: rasters (exact for their
own pairs) and scattered samples binned on a fine grid (the ``grid`` method).

Methods (``method``)
--------------------
* ``exact``: the pair engine (:mod:`lagwise.core.variography.pairs`) on points.
* ``grid``: scattered samples are binned on square cells (each cell keeps its
  sample count, value sum and sum of squares, so the FFT sums over two cells are
  the exact sums over their pairs of samples) and every lag vector of cells is
  classified by the cells' offset (:mod:`lagwise.core.variography.fft`). The cell
  side is the narrowest class width over :data:`CELLS_PER_CLASS` (at most the
  extent over :data:`MIN_GRID_SIDE`), enlarged until
  the grid has at most :data:`MAX_GRID_SIDE` cells a side and the transforms fit
  ``LAGWISE_MEMORY_BUDGET_BYTES``. Each class states an error bound
  (:mod:`lagwise.core.variography.bounds`); classes whose bound exceeds the
  tolerance are flagged. For a raster the grid is the raster itself and the
  result is exact for its pairs (its bound: the transforms' rounding estimate, :func:`~lagwise.core.variography.fft.square_rounding`).
* ``auto``: rasters use their own grid; scattered samples use ``exact`` unless its
  pair work would exceed ``LAGWISE_MAX_PAIRS`` and the statistic is one the grid
  method bounds, then ``grid``.

Automatic distance classes follow :mod:`lagwise.core.variography.lags`, counting
pairs from the FFT sums; a raster's typical spacing is its smaller node spacing.
The class standard errors of the exact path (jackknife over blocks of samples) are
not computed here.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..data.raster import Raster
from ..data.samples import SampleSet
from ..data.spacing import typical_spacing
from ..data.summary import Summary, largest_separation
from ..deadline import check_deadline
from ..errors import InvalidInput
from ..limits import Limits
from . import kernels as K
from .binning import bin_on_cells, extent_and_mean, offset_range
from .bounds import BOUND_STATISTICS, relative_bounds
from .directions import DirectionClass
from .fft import (
    LagSums,
    NodeSums,
    RasterNodes,
    check_budget,
    class_table,
    classify_lags,
    fft_bytes,
    half_plane,
    lag_sums,
    padded_shape,
    rounding_floors,
    square_rounding,
)
from .lags import (
    AUTO_FINE_BINS,
    AUTO_MAX_CLASSES,
    NO_EXTENT,
    LagRequest,
    merge_sparse,
    quantile_edges,
    spacing_edges,
    spacing_width,
    validate_lags,
)
from .statistics import class_value

METHODS = ("exact", "grid", "auto")
CELLS_PER_CLASS = 32
MAX_GRID_SIDE = 4096
# Cells a side of the samples' extent at least: classes wider than the extent do not coarsen the grid
# (a grid of one cell would put every pair in it and leave them all out).
MIN_GRID_SIDE = 256
DEFAULT_TOLERANCE = 0.01
NOT_COMPUTED = "class standard errors are not computed on grids (FFT path)"


@dataclass(frozen=True)
class GridReport:
    """How a variogram was computed on a grid (for the audit trail).

    Attributes
    ----------
    source : str
        ``raster`` (the raster's own nodes) or ``binned`` (scattered samples binned on cells).
    origin, spacing : tuple of float
        Node (0, 0) and node spacing (dx, dy), coordinate units.
    shape, padded : tuple of int
        Nodes (nx, ny) and the transforms' size (columns, rows).
    reach : tuple of int
        Largest lag vector (nodes along x, y).
    memory_bytes : int
        Estimated working memory of the transforms.
    tolerance : float or None
        Relative error above which a class is flagged (binned grids).
    within_cell_pairs : int
        Pairs of samples in one cell, left out by the grid method.
    flagged : int
        Classes (or map cells) whose bound exceeds ``tolerance``.
    scope : str
        ``classes`` (an experimental variogram) or ``map`` (a variogram map's cells).
    """

    source: str
    origin: tuple[float, float]
    spacing: tuple[float, float]
    shape: tuple[int, int]
    padded: tuple[int, int]
    reach: tuple[int, int]
    memory_bytes: int
    tolerance: float | None = None
    within_cell_pairs: int = 0
    flagged: int = 0
    scope: str = "classes"

    def as_dict(self) -> dict:
        """Plain dictionary for serialisation."""
        out = {
            "source": self.source,
            "origin": list(self.origin),
            "spacing": list(self.spacing),
            "shape": list(self.shape),
            "transform_shape": list(self.padded),
            "reach_nodes": list(self.reach),
            "memory_bytes": self.memory_bytes,
            "algorithm": "masked FFT cross-correlations of counts, value sums and squares (Marcotte 1996)",
        }
        if self.source == "binned" and self.scope == "map":
            out.update(
                tolerance=self.tolerance,
                within_cell_pairs=self.within_cell_pairs,
                flagged_cells=self.flagged,
                bound_rule="pairs the grid puts in another map cell than the exact path lie in lag vectors whose "
                "rectangle of the samples' measured offset spread within grid cells crosses a map cell edge; "
                "error_bound is the widest change of the cell value over every share of those lag vectors' pairs, "
                "each share at its lag vector's mean; pair_bound is the number of those pairs (a strict bound on the "
                "count)",
            )
        elif self.source == "binned":
            out.update(
                tolerance=self.tolerance,
                within_cell_pairs=self.within_cell_pairs,
                flagged_classes=self.flagged,
                bound_rule="pairs the grid classifies otherwise than the exact path lie in lag vectors whose disk "
                "of radius one cell diagonal crosses a class edge; error_bound is the widest change of the class "
                "value over every share of those lag vectors' pairs, each share at its lag vector's mean; "
                "pair_bound is the number of those pairs (a strict bound on the count)",
            )
        return out


@dataclass(frozen=True)
class _Grid:
    """Node sums plus where the grid lies."""

    nodes: NodeSums | RasterNodes
    origin: tuple[float, float]
    source: str
    within: tuple[float, float, float]  # within-cell pairs, their sum of Delta^2 / 2, their sum of z_a z_b
    spread: tuple[float, float] = (0.0, 0.0)  # largest |u_head - u_tail| along x, y (binned grids; coordinate units)
    norms: tuple[float, float, float] = (0.0, 0.0, 0.0)  # sum C^2, S^2, Q^2 or bounds (fft.square_rounding)


def raster_nodes(raster: Raster) -> _Grid:
    """A raster's cells as nodes (counts 1/0, centred values and squares, formed as the transforms read them)."""
    mean, variance, minimum, maximum = raster.moments
    nodes = RasterNodes(raster.grid, raster.present, raster.spacing, mean, max(abs(minimum), abs(maximum)))
    # sum S^2 = n variance; sum S^4 <= max S^2 sum S^2 (no pass over the cells, no array).
    squares = raster.size * variance
    largest = max(maximum - mean, mean - minimum)
    return _Grid(nodes, raster.origin, "raster", (0.0, 0.0, 0.0), norms=(raster.size, squares, largest**2 * squares))


def offset_spread(
    coords: np.ndarray, low: tuple[float, float], cell: float, shape: tuple[int, int]
) -> tuple[float, float]:
    """Largest difference |u_head - u_tail| of two samples' offsets within their cells along x and y.

    Each offset u is measured from its cell's lower-left corner
    (:func:`~lagwise.core.variography.binning.offset_range`); the difference of two lies within
    (largest - smallest offset), widened by the rounding of the offsets and of the exact path's
    separations (64 units in the last place of the grid's extent from 0, and 1e-9 of a cell).
    At most about one cell; much less when the samples sit near their cells' corners (a
    raster's nodes on a grid that divides its spacing: the margin alone).
    """
    ny, nx = shape
    ux_lo, ux_hi, uy_lo, uy_hi = offset_range(coords, low[0], low[1], cell, nx, ny)
    extent = max(nx, ny) * cell + max(abs(low[0]), abs(low[1]))
    margin = 1e-9 * cell + 64.0 * float(np.finfo(np.float64).eps) * extent
    return float(ux_hi - ux_lo) + margin, float(uy_hi - uy_lo) + margin


def binned_nodes(coords: np.ndarray, values: np.ndarray, cell: float, summary: Summary) -> _Grid:
    """Bin 2-D samples on square cells of side ``cell`` from the lower-left corner of ``summary.extent``."""
    (x_lo, x_hi), (y_lo, y_hi) = summary.extent["x"], summary.extent["y"]
    low, mean = (x_lo, y_lo), summary.mean
    nx = int((x_hi - x_lo) // cell) + 1
    ny = int((y_hi - y_lo) // cell) + 1
    coords = np.ascontiguousarray(coords)
    count, total, squares = bin_on_cells(coords, np.ascontiguousarray(values), low[0], low[1], cell, nx, ny, mean)
    spread = offset_spread(coords, low, cell, (ny, nx))
    pairs = float(np.sum(count * (count - 1.0)) / 2.0)
    half_square = float(np.sum(count * squares - total * total)) / 2.0
    # sum over a < b in a cell of z_a z_b, z = centred + mean.
    raw = float(np.sum((total * total - squares) / 2.0 + mean * (count - 1.0) * total) + mean * mean * pairs)
    nodes = NodeSums(
        count.reshape(ny, nx),
        total.reshape(ny, nx),
        squares.reshape(ny, nx),
        (cell, cell),
        mean,
        max(abs(summary.minimum), abs(summary.maximum)),
    )
    norms = (float(np.dot(count, count)), float(np.dot(total, total)), float(np.dot(squares, squares)))
    return _Grid(nodes, (float(low[0]), float(low[1])), "binned", (pairs, half_square, raw), spread, norms)


def _reach(grid: _Grid, radius: float) -> tuple[int, int]:
    ny, nx = grid.nodes.shape
    dx, dy = grid.nodes.spacing
    return min(int(math.ceil(radius / dx)), nx - 1), min(int(math.ceil(radius / dy)), ny - 1)


def _half_extent(points: np.ndarray, summary: Summary, direction: DirectionClass) -> float:
    if direction.tolerance >= 90.0:
        return 0.5 * summary.max_distance
    az = math.radians(direction.azimuth)
    return 0.5 * float(np.ptp(points @ np.array([math.sin(az), math.cos(az)])))


def lags_needed(lags: LagRequest, points, summary, directions) -> tuple[np.ndarray | None, list[float]]:
    explicit = validate_lags(lags)
    if explicit is not None:
        return explicit, [float(explicit[-1])] * len(directions)
    largest = [_half_extent(points, summary, d) for d in directions]
    if min(largest) <= NO_EXTENT * summary.max_distance:
        raise InvalidInput.at("/directions", "the samples have no extent along a requested direction")
    return None, largest


def _classify(sums: LagSums, directions, edges):
    mask = half_plane(sums) & (sums.count > 0)
    hx, hy = sums.separations()
    return mask, classify_lags(hx[mask], hy[mask], directions, edges)


def _resolve_edges(sums, explicit, largest, lags, directions, min_pairs, spacing) -> list[np.ndarray]:
    if explicit is not None:
        return [explicit] * len(directions)
    if lags.method == "equal_pairs":
        fine = [np.linspace(0.0, top, AUTO_FINE_BINS + 1) for top in largest]
        mask, classes = _classify(sums, directions, fine)
        table = class_table(sums, classes, mask, AUTO_FINE_BINS)
        return [quantile_edges(top, table[k, :, K.COUNT], min_pairs) for k, top in enumerate(largest)]
    candidates = [spacing_edges(top, spacing_width(top, spacing)) for top in largest]
    kmax = max(len(e) - 1 for e in candidates)
    mask, classes = _classify(sums, directions, candidates)
    table = class_table(sums, classes, mask, kmax)
    return [merge_sparse(e, table[k, : len(e) - 1, K.COUNT], min_pairs) for k, e in enumerate(candidates)]


@dataclass(frozen=True)
class GridVariogram:
    """Class tables of a grid computation, before they become an experimental variogram."""

    table: np.ndarray
    edges: list[np.ndarray]
    report: GridReport
    bounds: np.ndarray | None
    pair_bounds: np.ndarray | None
    mean: float
    scale: float
    floors: np.ndarray | None = None  # semivariance: each class's rounding floor (fft.rounding_floors)


def grid_classes(
    grid: _Grid,
    *,
    lags: LagRequest,
    directions: list[DirectionClass],
    statistic: str,
    min_pairs: int,
    limits: Limits,
    spacing: float | None,
    tolerance: float | None,
    explicit: np.ndarray | None,
    largest: list[float],
) -> GridVariogram:
    """FFT sums, class tables and (for binned grids) error bounds of every class."""
    reach = _reach(grid, max(largest))
    first_moments = statistic != "semivariance"
    node_arrays = 0 if grid.source == "raster" else 3
    memory = check_budget(grid.nodes.shape, reach, limits, "/lags", first_moments, node_arrays)
    check_deadline()
    noise = None if first_moments else square_rounding(grid.norms, grid.nodes.shape, reach)
    sums = lag_sums(grid.nodes, reach, first_moments=first_moments)
    edges = _resolve_edges(sums, explicit, largest, lags, directions, min_pairs, spacing or 0.0)
    kmax = max(len(e) - 1 for e in edges)
    if max(e[-1] for e in edges) > max(largest) * (1 + 1e-12):
        raise AssertionError("automatic classes reach beyond the transforms' lags")
    mask, classes = _classify(sums, directions, edges)
    table = class_table(sums, classes, mask, kmax)
    floors = None if noise is None else rounding_floors(classes, sums.count[mask], kmax, noise)
    check_deadline()
    bounds = pair_bounds = None
    flagged = 0
    if grid.source == "binned":
        values = np.full((len(directions), kmax), np.nan)
        for k in range(len(directions)):
            for c in range(len(edges[k]) - 1):
                v = class_value(statistic, table[k, c], grid.nodes.mean, grid.nodes.scale, None).value
                values[k, c] = np.nan if v is None else v
        counts = sums.count[mask]
        if statistic == "semivariance":
            numerator = sums.square[mask] / 2.0
            within = (grid.within[0], grid.within[1])
        else:
            m = grid.nodes.mean
            numerator = sums.product[mask] + m * (sums.tail[mask] + sums.head[mask]) + m * m * counts
            within = (grid.within[0], grid.within[2])
        bounds, pair_bounds = relative_bounds(
            classes.hx, classes.hy, counts, numerator, within, directions, edges, math.hypot(*grid.spread), values
        )
        for k, e in enumerate(edges):
            flagged += int(np.sum(~(bounds[k, : len(e) - 1] <= tolerance)))
    ny, nx = grid.nodes.shape
    py, px = padded_shape((ny, nx), reach)
    report = GridReport(
        source=grid.source,
        origin=grid.origin,
        spacing=grid.nodes.spacing,
        shape=(nx, ny),
        padded=(px, py),
        reach=reach,
        memory_bytes=memory,
        tolerance=tolerance if grid.source == "binned" else None,
        within_cell_pairs=int(grid.within[0]),
        flagged=flagged,
    )
    return GridVariogram(table, edges, report, bounds, pair_bounds, grid.nodes.mean, grid.nodes.scale, floors)


def grid_cell(summary: Summary, explicit, largest, lags: LagRequest, spacing, limits: Limits) -> float:
    """Cell side of the grid method (module docstring)."""
    if explicit is not None:
        narrowest = float(np.diff(explicit).min())
    elif lags.method == "equal_pairs":
        narrowest = min(largest) / AUTO_MAX_CLASSES
    else:
        narrowest = min(spacing_width(top, spacing) for top in largest)
    extent = [hi - lo for lo, hi in summary.extent.values()]
    cell = max(min(narrowest / CELLS_PER_CLASS, max(extent) / MIN_GRID_SIDE), max(extent) / (MAX_GRID_SIDE - 1))
    radius = max(largest)
    while True:
        shape = (int(extent[1] // cell) + 1, int(extent[0] // cell) + 1)
        reach = (min(int(math.ceil(radius / cell)), shape[1] - 1), min(int(math.ceil(radius / cell)), shape[0] - 1))
        if fft_bytes(shape, reach) <= limits.memory_budget_bytes:
            return cell
        cell *= 1.25


def refuse_unbounded(statistic: str) -> None:
    """The grid method on scattered samples states bounds for ratio statistics only."""
    if statistic not in BOUND_STATISTICS:
        raise InvalidInput.at(
            "/statistic",
            f"the grid method bounds its error for {', '.join(BOUND_STATISTICS)} only; "
            f"use method 'exact' for {statistic!r}",
        )


def grid_summary(samples: SampleSet) -> Summary:
    """Summary without declustering (the grid method serves large sets; cell declustering is not run)."""
    coords, values = np.ascontiguousarray(samples.coords), np.ascontiguousarray(samples.values)
    x_lo, x_hi, y_lo, y_hi, v_lo, v_hi, mean = extent_and_mean(coords, values)
    return Summary(
        samples=samples.size,
        dimension=samples.dimension,
        mean=float(mean),
        variance=float(np.mean((values - mean) ** 2)),
        minimum=float(v_lo),
        maximum=float(v_hi),
        extent={"x": [float(x_lo), float(x_hi)], "y": [float(y_lo), float(y_hi)]},
        max_distance=largest_separation(samples.coords),
        declustering=None,
    )


def raster_spacing(raster: Raster) -> float:
    """A raster's typical spacing: its smaller node spacing."""
    return float(min(raster.spacing))


def binned_spacing(samples: SampleSet) -> float:
    """Typical spacing of scattered samples (median nearest-neighbour distance)."""
    return typical_spacing(samples.coords)
