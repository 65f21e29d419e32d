"""The pair engine: prepares samples for the compiled kernels and runs them.

Samples are sorted by x (so a sweep finds every pair within the search radius),
padded to three coordinates, and their values centred on the sample mean. The
kernels use ``numba`` threads; their number follows ``numba.set_num_threads``
(the service sets it from ``LAGWISE_THREADS``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numba
import numpy as np
from scipy.spatial.distance import pdist

from ..deadline import check_deadline
from . import kernels as K
from .directions import HAS_DIP, VBAND2, DirectionClass, direction_table

ESTIMATE_SUBSET = 2000
CHUNK_VISITS = 50_000_000  # visited pairs per kernel call (about half a second): the deadline is checked between calls
MAX_LOOKUP_CELLS = 1 << 16
COLUMNS_PER_RADIUS = 16  # columns of the fast kernel across one search radius
COLUMN_SAMPLES = 64  # fewest samples per column on average
COUNTED_ROWS = 16_384  # rows whose column-sweep candidates are counted one by one (column_visits)
# Pair work of one run of the column sweep (its binary searches and the span's set-up), in units of
# one candidate or pair within the radius: a least-squares fit of the kernel's CPU time (one thread,
# 20,000-200,000 uniform samples, radii 10-500, load 8) gave 1.8 ns per unit and 340 ns per run;
# 1 to 32 columns per radius at 200,000 samples within 10 units, 160-290 ns per run.
RUN_WORK = 150
COLUMN_SWEEP = "column sweep"  # accumulate_horizontal: samples by columns of x, y-sorted runs
X_SWEEP = "sweep along x"  # every other kernel: the later samples within the radius along x


@dataclass(frozen=True)
class PreparedSamples:
    """Samples laid out for the kernels.

    Attributes
    ----------
    points : ndarray, shape (n, 3)
        Coordinates sorted by x, zero-padded to three axes.
    values : ndarray, shape (n,)
        Values in the same order, centred on ``mean``.
    mean : float
        Sample mean that was subtracted.
    scale : float
        Largest absolute sample value (for rounding-noise thresholds).
    order : ndarray, shape (n,)
        Input index of each sorted sample.
    """

    points: np.ndarray
    values: np.ndarray
    mean: float
    scale: float
    order: np.ndarray


def prepare(coords: np.ndarray, values: np.ndarray) -> PreparedSamples:
    """Sort by x, pad to 3-D and centre the values (see :class:`PreparedSamples`)."""
    order = np.argsort(coords[:, 0], kind="stable")
    points = np.zeros((coords.shape[0], 3))
    points[:, : coords.shape[1]] = coords[order]
    mean = float(np.mean(values))
    return PreparedSamples(
        points=np.ascontiguousarray(points),
        values=np.ascontiguousarray(values[order] - mean),
        mean=mean,
        scale=float(np.max(np.abs(values))),
        order=order,
    )


@dataclass(frozen=True)
class ClassLayout:
    """Distance classes of every direction, packed for the kernels.

    Attributes
    ----------
    edges : ndarray, shape (ndir, kmax + 1)
        Class edges per direction (rows padded with their last edge).
    counts : ndarray of int64, shape (ndir,)
        Number of classes per direction.
    inv_width : ndarray, shape (ndir,)
        1 / width for equal-width classes, 0 for irregular edges.
    table : ndarray
        Direction parameters (:func:`lagwise.core.variography.directions.direction_table`).
    padded : ndarray, shape (ndir, kmax + 3)
        ``[-inf, edges..., +inf...]`` per direction, for the fast kernel.
    lookup : ndarray of int64, shape (ndir, cells + 1)
        Class index at the start of each fine cell of width ``1 / inv_cell``.
    inv_cell : float
        Inverse width of the lookup cells.
    shared : bool
        Every direction has the same edges.
    resolved : bool
        The lookup cells are at most half the narrowest class wide, so that one step up and
        one down from a cell's class give every distance's class (False when that would take
        more than :data:`MAX_LOOKUP_CELLS` cells: the fast kernel does not apply).
    """

    edges: np.ndarray
    counts: np.ndarray
    inv_width: np.ndarray
    table: np.ndarray
    padded: np.ndarray
    lookup: np.ndarray
    inv_cell: float
    shared: bool
    resolved: bool = True

    @property
    def horizontal(self) -> bool:
        """No class uses a dip or a vertical band."""
        return horizontal_table(self.table)

    @property
    def fast(self) -> bool:
        """The fast kernel applies: horizontal classes and a lookup table that resolves them."""
        return self.horizontal and self.resolved

    @property
    def step_inverse(self) -> float:
        """1 / width when every direction has the same classes of equal width, else 0.

        Equal within :data:`lagwise.core.variography.kernels.UNSURE` / 10 class widths
        (edges against origin + k width, and the rounding of (d - origin) / width), so that
        floor((d - origin) / width) is the exact class of every distance farther than
        ``UNSURE`` widths from an edge.
        """
        count = int(self.counts[0])
        e = self.edges[0, : count + 1]
        if not self.shared or e[-1] <= e[0]:
            return 0.0
        inverse = count / (e[-1] - e[0])
        spread = float(np.max(np.abs(e - (e[0] + np.arange(count + 1) / inverse)))) * inverse
        rounding = 8.0 * np.finfo(float).eps * (abs(e[0]) + abs(e[-1])) * inverse
        return float(inverse) if spread + rounding < K.UNSURE / 10 else 0.0

    @property
    def kmax(self) -> int:
        """Largest class count over the directions."""
        return int(self.edges.shape[1] - 1)

    @property
    def search_radius(self) -> float:
        """Largest upper edge: no pair farther apart is visited."""
        return float(max(self.edges[k, c] for k, c in enumerate(self.counts)))


def horizontal_table(table: np.ndarray) -> bool:
    """Whether no direction of a :func:`~lagwise.core.variography.directions.direction_table` uses a dip or a
    vertical band (the fast kernel's condition besides a resolving lookup table)."""
    return bool(np.all(table[:, HAS_DIP] == 0.0) and np.all(np.isinf(table[:, VBAND2])))


def layout(directions: list[DirectionClass], edges_per_direction: list[np.ndarray]) -> ClassLayout:
    """Pack per-direction edges (each strictly increasing) into a :class:`ClassLayout`."""
    kmax = max(len(e) - 1 for e in edges_per_direction)
    edges = np.zeros((len(directions), kmax + 1))
    inv_width = np.zeros(len(directions))
    for k, e in enumerate(edges_per_direction):
        edges[k, : len(e)] = e
        edges[k, len(e) :] = e[-1]
        widths = np.diff(e)
        if np.allclose(widths, widths[0], rtol=1e-12, atol=0.0):
            inv_width[k] = 1.0 / widths[0]
    counts = np.array([len(e) - 1 for e in edges_per_direction], dtype=np.int64)
    padded = np.full((len(directions), kmax + 3), np.inf)
    padded[:, 0] = -np.inf
    for k, e in enumerate(edges_per_direction):
        padded[k, 1 : len(e) + 1] = e
    radius = float(max(e[-1] for e in edges_per_direction))
    narrowest = float(min(np.diff(e).min() for e in edges_per_direction))
    needed = float(np.ceil(2.0 * radius / narrowest))
    cells = int(min(MAX_LOOKUP_CELLS, max(64, needed)))
    starts = np.arange(cells + 1) * (radius / cells)
    lookup = np.array([np.searchsorted(e, starts, side="right") - 1 for e in edges_per_direction], dtype=np.int64)
    shared = all(np.array_equal(e, edges_per_direction[0]) for e in edges_per_direction)
    return ClassLayout(
        edges=edges,
        counts=counts,
        inv_width=inv_width,
        table=direction_table(directions),
        padded=padded,
        lookup=lookup,
        inv_cell=cells / radius,
        shared=shared,
        resolved=needed <= MAX_LOOKUP_CELLS,
    )


def sweep_visits(xs: np.ndarray, reach: float) -> np.ndarray:
    """Pairs each sample visits in the x-sorted sweep: the later samples within ``reach`` along x.

    ``xs`` is sorted. The sweep's work follows these visits, not the pairs within the
    search radius: samples strung out along y all lie within any reach of each other
    along x, so every pair is visited even when few are close.
    """
    ends = np.searchsorted(xs, xs + reach, side="right")
    return np.maximum(ends - np.arange(1, xs.size + 1), 0).astype(np.int64)


def row_chunks(visits: np.ndarray, per_chunk: int) -> list[tuple[int, int]]:
    """Split the sweep's rows into ranges of about ``per_chunk`` visited pairs each
    (whole blocks of :data:`lagwise.core.variography.kernels.ROW_BLOCK` rows)."""
    n = visits.size
    total = np.cumsum(visits)
    if n == 0 or total[-1] <= per_chunk:
        return [(0, n)]
    cuts = np.searchsorted(total, np.arange(per_chunk, total[-1], per_chunk), side="right")
    cuts = np.unique((cuts // K.ROW_BLOCK + 1) * K.ROW_BLOCK)
    bounds = [0] + [int(c) for c in cuts if 0 < c < n] + [n]
    return list(zip(bounds[:-1], bounds[1:], strict=True))


def in_chunks(visits: np.ndarray, run) -> None:
    """Call ``run(first, last)`` for each range of rows, checking the deadline between ranges."""
    for first, last in row_chunks(visits, CHUNK_VISITS):
        check_deadline()
        run(first, last)
    check_deadline()


@dataclass(frozen=True)
class Columns:
    """Samples cut along x into columns and sorted by y within each, for
    :func:`lagwise.core.variography.kernels.accumulate_horizontal`.

    Attributes
    ----------
    cols : ndarray, shape (4, n)
        Rows x, y, z and centred value, in column order.
    column : ndarray of int64, shape (n,)
        Column of each row (non-decreasing).
    starts : ndarray of int64, shape (columns + 1,)
        First row of each column; the last entry is n.
    lowest : ndarray, shape (columns,)
        Smallest x of each column (an empty column takes the next sample's x).
    order : ndarray of int64, shape (n,)
        Row of :class:`PreparedSamples` (x order) at each position of the column order.
    """

    cols: np.ndarray
    column: np.ndarray
    starts: np.ndarray
    lowest: np.ndarray
    order: np.ndarray


def columns(prepared: PreparedSamples, radius: float) -> Columns:
    """Cut the x-sorted samples into columns of width radius / :data:`COLUMNS_PER_RADIUS` (fewer
    when a column would hold under :data:`COLUMN_SAMPLES` samples on average), y-sorted within each."""
    x, y = prepared.points[:, 0], prepared.points[:, 1]
    n = x.size
    extent = float(x[-1] - x[0]) if n else 0.0
    count = 1
    if extent > 0.0 and radius > 0.0:
        count = int(max(1, min(n // COLUMN_SAMPLES, np.ceil(COLUMNS_PER_RADIUS * extent / radius))))
    column = (
        np.minimum(((x - x[0]) * (count / extent)).astype(np.int64), count - 1)
        if count > 1
        else np.zeros(n, dtype=np.int64)
    )
    order = np.lexsort((y, column)).astype(np.int64)
    starts = np.searchsorted(column, np.arange(count + 1)).astype(np.int64)
    cols = np.empty((4, n))
    cols[:3] = prepared.points[order].T
    cols[3] = prepared.values[order]
    return Columns(
        cols=cols,
        column=np.ascontiguousarray(column[order]),
        starts=starts,
        lowest=np.ascontiguousarray(x[np.minimum(starts[:-1], max(n - 1, 0))]),
        order=order,
    )


def column_visits(cut: Columns, radius: float) -> np.ndarray:
    """Pair work of the column sweep (:func:`lagwise.core.variography.kernels.accumulate_horizontal`)
    from each row of ``cut`` (column order): the candidates it visits, counted with the kernel's own
    bounds, plus :data:`RUN_WORK` for each run of a column it takes.

    Exact up to :data:`COUNTED_ROWS` rows; above, every s-th row is counted (s the smallest
    stride leaving at most that many) and its count stands for the s rows from it. Rows next
    to each other in column order are neighbours in space, so the sum stays within a fraction
    of a per cent on spread samples (tests/core/test_pair_cost.py) for a few binary searches
    per counted row and column.
    """
    n = cut.column.size
    stride = max(1, -(-n // COUNTED_ROWS))
    counts = K.column_candidates(cut.cols, cut.column, cut.starts, cut.lowest, radius * radius, stride, RUN_WORK)
    return np.repeat(counts, stride)[:n]


def pass_visits(prepared: PreparedSamples, radius: float, kernels: list[str]) -> list[tuple[str, int]]:
    """(kernel, candidates visited) of each pass over the pairs within ``radius``, one per entry of
    ``kernels`` (:data:`COLUMN_SWEEP` or :data:`X_SWEEP`); each kernel's count is exact."""
    counts: dict[str, int] = {}
    for kernel in set(kernels):
        if kernel == COLUMN_SWEEP:
            counts[kernel] = int(column_visits(columns(prepared, radius), radius).sum())
        else:
            counts[kernel] = int(sweep_visits(prepared.points[:, 0], radius).sum())
    return [(kernel, counts[kernel]) for kernel in kernels]


def accumulate(prepared: PreparedSamples, classes: ClassLayout, mode: int) -> tuple[np.ndarray, int]:
    """Run the pair kernel over ranges of rows; returns the table (ndir, kmax, ACCUMULATORS) and co-located pairs.

    The ranges hold about :data:`CHUNK_VISITS` candidates of the kernel that runs: the column
    sweep's (:func:`column_visits`) on the fast path, else the x-sorted sweep's."""
    radius = classes.search_radius
    total = np.zeros((classes.table.shape[0] * classes.kmax, K.ACCUMULATORS))
    colocated = [0]
    if classes.fast:
        cut = columns(prepared, radius)
        visits = column_visits(cut, radius)
    else:
        visits = sweep_visits(prepared.points[:, 0], radius)

    def run(first: int, last: int) -> None:
        if classes.fast:
            table, zero = K.accumulate_horizontal(
                cut.cols,
                cut.column,
                cut.starts,
                cut.lowest,
                prepared.mean,
                radius * radius,
                classes.table,
                classes.padded,
                classes.lookup,
                classes.inv_cell,
                classes.shared,
                classes.edges[0, 0],
                classes.step_inverse,
                mode,
                numba.get_num_threads(),
                first,
                last,
            )
        else:
            table, zero = K.accumulate_classes(
                prepared.points,
                prepared.values,
                prepared.mean,
                radius * radius,
                classes.table,
                classes.edges,
                classes.counts,
                classes.inv_width,
                mode,
                numba.get_num_threads(),
                first,
                last,
            )
        total[:] += table
        colocated[0] += int(zero)

    in_chunks(visits, run)
    return total.reshape(classes.table.shape[0], classes.kmax, K.ACCUMULATORS), colocated[0]


def accumulate_by_block(
    prepared: PreparedSamples, classes: ClassLayout, mode: int, blocks: np.ndarray, nblocks: int
) -> tuple[np.ndarray, np.ndarray]:
    """Run the per-block pair kernel over ranges of rows (deadline checked between them).

    ``blocks`` labels the samples in prepared (x-sorted) order. Returns the total table
    (ndir * kmax, ACCUMULATORS) and the per-block tables (nblocks, ndir * kmax, ACCUMULATORS);
    see :func:`lagwise.core.variography.kernels.accumulate_blocks`.
    """
    radius = classes.search_radius
    bins = classes.table.shape[0] * classes.kmax
    return _summed_by_block(
        prepared.points[:, 0],
        radius,
        np.zeros((bins, K.ACCUMULATORS)),
        np.zeros((nblocks, bins, K.ACCUMULATORS)),
        lambda first, last: K.accumulate_blocks(
            prepared.points, prepared.values, prepared.mean, radius * radius, classes.table, classes.edges,
            classes.counts, classes.inv_width, mode, blocks, nblocks, numba.get_num_threads(), first, last,
        ),
    )  # fmt: skip


def _summed_by_block(xs: np.ndarray, radius: float, total: np.ndarray, by_block: np.ndarray, kernel):
    """``total`` and ``by_block`` with ``kernel(first, last) -> (part, parts)`` added over ranges of
    rows of the x-sorted samples ``xs`` (deadline checked between them)."""

    def run(first: int, last: int) -> None:
        part, parts = kernel(first, last)
        total[:] += part
        by_block[:] += parts

    in_chunks(sweep_visits(xs, radius), run)
    return total, by_block


_NONE_F = np.zeros(0)
_NONE_I = np.zeros(0, dtype=np.int64)


def _collect(prepared, classes, offsets, ends, out_abs, target, stride, tail, head) -> int:
    """Serial passes of :func:`lagwise.core.variography.kernels.collect_pairs` over the layout's classes,
    range of rows by range; returns the scattergram pairs written."""
    radius = classes.search_radius
    state = np.zeros(2, dtype=np.int64)

    def run(first: int, last: int) -> None:
        K.collect_pairs(
            prepared.points,
            prepared.values,
            radius * radius,
            classes.table,
            classes.edges,
            classes.counts,
            classes.inv_width,
            offsets,
            ends,
            out_abs,
            target,
            stride,
            tail,
            head,
            state,
            first,
            last,
        )

    in_chunks(sweep_visits(prepared.points[:, 0], radius), run)
    return int(state[1])


def absolute_differences(prepared: PreparedSamples, classes: ClassLayout, counts: np.ndarray) -> list[np.ndarray]:
    """|Delta| of every pair of every bin (bins ordered direction-major), given the bins' counts."""
    flat = counts.reshape(-1).astype(np.int64)
    starts = np.concatenate([[0], np.cumsum(flat)[:-1]]).astype(np.int64)
    out = np.empty(int(flat.sum()))
    _collect(prepared, classes, starts.copy(), starts + flat, out, -1, 1, _NONE_F, _NONE_F)
    return [out[s : s + c] for s, c in zip(starts, flat, strict=False)]


def scatter_pairs(prepared: PreparedSamples, classes: ClassLayout, bin_index: int, total: int, limit: int):
    """Tail and head values (original units) of every ``stride``-th pair of one bin.

    Returns (tail, head, stride) with at most ``limit`` pairs, spread evenly over the
    bin's pairs in visiting order.
    """
    stride = max(1, -(-total // limit))
    tail, head = np.empty(limit), np.empty(limit)
    written = _collect(prepared, classes, _NONE_I, _NONE_I, _NONE_F, bin_index, stride, tail, head)
    return tail[:written] + prepared.mean, head[:written] + prepared.mean, stride


def estimate_pairs_within(coords: np.ndarray, radius: float, seed: int = 0) -> int:
    """Estimate the number of distinct pairs closer than ``radius``.

    Exact for up to ``ESTIMATE_SUBSET`` samples; above, scales the share of close
    pairs in a seeded random subset (a few per cent of error, enough for limits).
    """
    n = coords.shape[0]
    if n <= ESTIMATE_SUBSET:
        return int(np.count_nonzero(pdist(coords) < radius))
    subset = np.random.default_rng(seed).choice(n, ESTIMATE_SUBSET, replace=False)
    share = float(np.mean(pdist(coords[subset]) < radius))
    return int(round(share * n * (n - 1) / 2))


@dataclass(frozen=True)
class PreparedVariables:
    """Several variables laid out for :func:`lagwise.core.variography.kernels.accumulate_variables`.

    Attributes
    ----------
    points : ndarray, shape (n, 3)
        Coordinates sorted by x, zero-padded to three axes.
    values : ndarray, shape (n, p)
        Values in the same order, centred per variable on ``means``, 0 where not measured.
    measured : ndarray, shape (n, p)
        1.0 where the variable was measured, else 0.0.
    means : ndarray, shape (p,)
        Mean of each variable over its measured samples (subtracted).
    scales : ndarray, shape (p,)
        Largest absolute measured value of each variable (for rounding-noise thresholds).
    order : ndarray, shape (n,)
        Input index of each sorted sample.
    """

    points: np.ndarray
    values: np.ndarray
    measured: np.ndarray
    means: np.ndarray
    scales: np.ndarray
    order: np.ndarray


def prepare_variables(coords: np.ndarray, table: np.ndarray) -> PreparedVariables:
    """Sort by x, pad to 3-D, centre each column on its measured mean and zero the missing entries.

    ``table`` is (n, p) with NaN where a variable was not measured.
    """
    order = np.argsort(coords[:, 0], kind="stable")
    points = np.zeros((coords.shape[0], 3))
    points[:, : coords.shape[1]] = coords[order]
    sorted_table = table[order]
    measured = ~np.isnan(sorted_table)
    means = np.array([float(np.mean(col[m])) for col, m in zip(sorted_table.T, measured.T, strict=True)])
    scales = np.array([float(np.max(np.abs(col[m]))) for col, m in zip(sorted_table.T, measured.T, strict=True)])
    return PreparedVariables(
        points=np.ascontiguousarray(points),
        values=np.ascontiguousarray(np.where(measured, sorted_table - means, 0.0)),
        measured=np.ascontiguousarray(measured.astype(np.float64)),
        means=means,
        scales=scales,
        order=order,
    )


def accumulate_variables(
    prepared: PreparedVariables, classes: ClassLayout, mode: int, cross: bool
) -> tuple[np.ndarray, int]:
    """Run the several-variable pair kernel over ranges of rows (deadline checked between them).

    Returns the table of shape (ndir, kmax, columns, slots) (see
    :func:`lagwise.core.variography.kernels.accumulate_variables`) and the co-located pairs.
    """
    radius = classes.search_radius
    parts: list[np.ndarray] = []
    colocated = [0]

    def run(first: int, last: int) -> None:
        table, zero = K.accumulate_variables(
            prepared.points,
            prepared.values,
            prepared.measured,
            prepared.means,
            radius * radius,
            classes.table,
            classes.edges,
            classes.counts,
            classes.inv_width,
            mode,
            cross,
            numba.get_num_threads(),
            first,
            last,
        )
        parts.append(table)
        colocated[0] += int(zero)

    in_chunks(sweep_visits(prepared.points[:, 0], radius), run)
    total = np.sum(parts, axis=0)
    ndir = classes.table.shape[0]
    return total.reshape(ndir, classes.kmax, total.shape[1], total.shape[2]), colocated[0]


def measurement_patterns(measured: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The distinct 0/1 measurement rows (G, p) and each sample's row index (n,)."""
    patterns, index = np.unique(measured, axis=0, return_inverse=True)
    return np.ascontiguousarray(patterns), np.ascontiguousarray(index.reshape(-1).astype(np.int64))


def accumulate_squares(
    prepared: PreparedVariables, classes: ClassLayout
) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    """Squared-difference sums of every pair of variables in one pass over the pairs.

    Returns (squares (ndir, kmax, p, p), counts (ndir, kmax, p, p), distances (ndir, kmax, p, p),
    co-located pairs): entry (a, b) sums (a_j - a_i)(b_j - b_i), the pairs and their
    distances over the pairs where a and b are both measured at both ends.
    """
    patterns, index = measurement_patterns(prepared.measured)
    radius = classes.search_radius
    ndir, kmax = classes.table.shape[0], classes.kmax
    bins, g_count, p = ndir * kmax, patterns.shape[0], prepared.values.shape[1]
    threads = numba.get_num_threads()
    head = np.zeros((threads, bins * g_count, prepared.points.shape[0]), dtype=np.float32)
    squares = np.zeros((bins, p, p))
    by_pattern = np.zeros((2, bins, g_count, g_count))
    colocated = [0]

    def run(first: int, last: int) -> None:
        sq, counts, distances, zero = K.accumulate_square_patterns(
            prepared.points,
            prepared.values,
            index,
            patterns,
            radius * radius,
            classes.table,
            classes.edges,
            classes.counts,
            classes.inv_width,
            classes.padded,
            classes.lookup,
            classes.inv_cell,
            classes.shared,
            classes.fast,
            threads,
            first,
            last,
            head,
        )
        squares[:] += sq
        by_pattern[0] += counts
        by_pattern[1] += distances
        colocated[0] += int(zero)

    in_chunks(sweep_visits(prepared.points[:, 0], radius), run)
    K.add_head_squares(squares, prepared.values, index, patterns, head.sum(axis=0))
    # Pairs of variables (a, b) count the pattern pairs that measure both at both ends.
    both = patterns[:, :, None] * patterns[:, None, :]  # (G, p, p)
    counts = np.einsum("kgh,gab,hab->kab", by_pattern[0], both, both)
    distances = np.einsum("kgh,gab,hab->kab", by_pattern[1], both, both)
    shape = (ndir, kmax, p, p)
    return squares.reshape(shape), counts.reshape(shape), distances.reshape(shape), colocated[0]


def accumulate_cross_by_block(
    prepared: PreparedVariables, classes: ClassLayout, pairs: np.ndarray, labels: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Cross-semivariance sums of the pairs of variables ``pairs`` (P, 2), in total and per spatial
    block, over ranges of rows (deadline checked between them).

    ``labels`` (n,) holds each sample's block (prepared order). Returns (total (ndir * kmax, 3, P), by_block
    (nblocks, ndir * kmax, 3, P)); see :func:`lagwise.core.variography.kernels.accumulate_cross_blocks`.
    """
    radius = classes.search_radius
    bins = classes.table.shape[0] * classes.kmax
    nblocks = int(labels.max()) + 1
    first_of, second_of = np.ascontiguousarray(pairs[:, 0]), np.ascontiguousarray(pairs[:, 1])
    return _summed_by_block(
        prepared.points[:, 0],
        radius,
        np.zeros((bins, 3, pairs.shape[0])),
        np.zeros((nblocks, bins, 3, pairs.shape[0])),
        lambda first, last: K.accumulate_cross_blocks(
            prepared.points, prepared.values, prepared.measured, radius * radius, classes.table, classes.edges,
            classes.counts, classes.inv_width, first_of, second_of, labels, nblocks, numba.get_num_threads(),
            first, last,
        ),
    )  # fmt: skip
