"""The four-direction column sweep cuts each run of a later column by the sector edges: pieces that one
direction certainly admits skip the angle tests, pairs near an edge take them. The membership must
be exactly that of the angle test |h . u|^2 - |h|^2 cos^2(tolerance) >= 0 on every pair.

Reference: brute-force enumeration in numpy (every pair from ``numpy.triu_indices``, the angle test
written out on the pairs' float64 separations, classes by ``numpy.searchsorted``; a pair admitted by
several directions counts in each); counts must be equal and sums agree to 1e-12 (relative).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from lagwise.core.variography import kernels as K
from lagwise.core.variography.directions import COS2_TOL, UX, UY, DirectionClass, direction_table
from lagwise.core.variography.pairs import accumulate, columns, layout, prepare

FAN = [DirectionClass(a, 22.5) for a in (0.0, 45.0, 90.0, 135.0)]


def _brute(coords, values, directions, edges, radius):
    """Counts, distance and square sums per (direction, class) by enumerating every pair in numpy."""
    table = direction_table(directions)
    ndir, nclass = len(directions), len(edges) - 1
    counts = np.zeros((ndir, nclass))
    distances = np.zeros((ndir, nclass))
    squares = np.zeros((ndir, nclass))
    i_all, j_all = np.triu_indices(coords.shape[0], k=1)
    for chunk in range(0, i_all.size, 2_000_000):
        i, j = i_all[chunk : chunk + 2_000_000], j_all[chunk : chunk + 2_000_000]
        dx = coords[j, 0] - coords[i, 0]
        dy = coords[j, 1] - coords[i, 1]
        hh2 = dx * dx + dy * dy
        d = np.sqrt(hh2)
        klass = np.searchsorted(edges, d, side="right") - 1
        inside = (hh2 > 0.0) & (hh2 <= radius * radius) & (klass >= 0) & (klass < nclass)
        square = (values[j] - values[i]) ** 2
        for k in range(ndir):
            proj = dx * table[k, UX] + dy * table[k, UY]
            ok = inside & (proj * proj - hh2 * table[k, COS2_TOL] >= 0.0)
            counts[k] += np.bincount(klass[ok], minlength=nclass)
            distances[k] += np.bincount(klass[ok], weights=d[ok], minlength=nclass)
            squares[k] += np.bincount(klass[ok], weights=square[ok], minlength=nclass)
    return counts, distances, squares


def _check(coords, values, directions, edges):
    classes = layout(directions, [edges] * len(directions))
    assert classes.horizontal and classes.fast and classes.shared and classes.step_inverse > 0.0
    table, _ = accumulate(prepare(coords, values), classes, K.MODE_SQUARE)
    counts, distances, squares = _brute(coords, values, directions, edges, classes.search_radius)
    np.testing.assert_array_equal(table[:, : len(edges) - 1, K.COUNT], counts)
    np.testing.assert_allclose(table[:, : len(edges) - 1, K.DISTANCE], distances, rtol=1e-12)
    np.testing.assert_allclose(table[:, : len(edges) - 1, K.SQUARE], squares, rtol=1e-12, atol=1e-12 * squares.max())
    return counts


def _cut(directions):
    """Number of edge bands of the directions (0: runs are not cut)."""
    table = direction_table(directions)
    sectors = np.full((4, 4), np.inf)
    sectors[0, : len(directions)] = table[:, UX]
    sectors[1, : len(directions)] = table[:, UY]
    sectors[2, : len(directions)] = table[:, COS2_TOL]
    return K.sector_edges(sectors, len(directions))[2]


def _survey(seed, n=3000, side=100.0):
    """Uniform samples, a dense cluster (runs longer than a span), a row of samples sharing one y and a
    column sharing one x, and rays of samples from one centre along the fan's edges (22.5 and 67.5
    degrees from the x axis, both ways) at angles off the edge from 1e-15 to 1e-6 radians."""
    rng = np.random.default_rng(seed)
    parts = [rng.uniform(0.0, side, (n, 2)), rng.uniform(40.0, 60.0, (1000, 2))]
    parts.append(np.column_stack([rng.uniform(0.0, side, 60), np.full(60, 37.25)]))
    parts.append(np.column_stack([np.full(60, 61.5), rng.uniform(0.0, side, 60)]))
    centre = np.array([31.0, 47.0])
    rays = []
    for edge in (22.5, 67.5, -22.5, -67.5):
        for off in (0.0, 1e-15, -1e-15, 1e-12, -1e-12, 1e-9, -1e-9, 1e-8, -1e-8, 1e-7, -1e-7, 1e-6):
            angle = math.radians(edge) + off
            for t in (3.0, 17.0, 41.0):
                rays.append(centre + t * np.array([math.cos(angle), math.sin(angle)]))
    parts.append(np.vstack([centre[None, :], np.array(rays)]))
    return np.vstack(parts)


@pytest.mark.parametrize("seed", [11, 12])
def test_fan_of_touching_sectors_with_pairs_on_the_edges(seed):
    """Four sectors of 22.5 degrees sharing their edges (pairs on an edge are admitted by both), and
    samples placed on and within rounding of the edges, equal y and equal x."""
    coords = _survey(seed)
    values = np.random.default_rng(seed + 100).normal(size=coords.shape[0])
    assert _cut(FAN) == 4
    counts = _check(coords, values, FAN, np.linspace(0.0, 60.0, 13))
    assert counts.sum() > 1e6


def test_square_grid_whose_diagonals_lie_on_the_edges():
    """Sectors of 45 degrees about the axes: every diagonal pair of a square grid lies exactly on an edge
    (both directions admit it); the grid's rows share y and its columns x."""
    g = np.arange(70 * 70)
    coords = np.column_stack([(g % 70) * 1.5, (g // 70) * 1.5])
    values = np.sin(g * 0.61)
    cross = [DirectionClass(0.0, 45.0), DirectionClass(90.0, 45.0)]
    assert _cut(cross) == 2
    _check(coords, values, cross, np.linspace(0.0, 45.0, 16))
    _check(coords, values, FAN, np.linspace(0.0, 45.0, 16))


@pytest.mark.parametrize(
    "directions",
    [
        [DirectionClass(a, 30.0) for a in (0.0, 45.0, 90.0, 135.0)],  # overlapping sectors
        [DirectionClass(a, 10.0) for a in (15.0, 60.0, 105.0)],  # gaps no direction admits
        [DirectionClass(20.0, 89.0), DirectionClass(110.0, 5.0)],  # a wide and a narrow sector
    ],
)
def test_overlapping_and_separate_sectors(directions):
    coords = _survey(13, n=2500)
    values = np.random.default_rng(14).normal(size=coords.shape[0])
    assert _cut(directions) > 0
    _check(coords, values, directions, np.linspace(0.0, 50.0, 11))


@pytest.mark.parametrize("radius", [2e-3, 250.0])
def test_tiny_and_large_radius(radius):
    """A radius of 2e-3 among coordinates near 1e5 (the cut's rounding margin matters against |y|), and
    one beyond the survey's diagonal (every pair, runs of whole columns)."""
    rng = np.random.default_rng(15)
    if radius < 1.0:
        base = 1e5 + rng.uniform(0.0, 0.05, (200, 2))
        coords = np.vstack([base + rng.uniform(-radius, radius, (200, 2)) * (k / 12) for k in range(12)])
    else:
        coords = _survey(16, n=2000)
    values = rng.normal(size=coords.shape[0])
    _check(coords, values, FAN, np.linspace(0.0, radius, 9))


@pytest.mark.parametrize(
    "directions",
    [
        [DirectionClass(45.0, 45.0), DirectionClass(135.0, 45.0)],  # edges along the y axis
        [DirectionClass(0.0, 1e-3), DirectionClass(90.0, 1e-3)],  # tolerances too narrow to cut by
    ],
)
def test_directions_whose_runs_are_not_cut(directions):
    coords = _survey(17, n=2000)
    values = np.random.default_rng(18).normal(size=coords.shape[0])
    assert _cut(directions) == 0
    _check(coords, values, directions, np.linspace(0.0, 40.0, 9))


def test_rows_of_the_certain_pieces_pass_exactly_one_test():
    """The cut's own claim, row by row: every row of a piece given to one direction passes that
    direction's angle test and no other (the test written out in numpy), from every sample of the
    survey to each later column, the rays' centre included."""
    coords = _survey(19, n=2000)
    radius = 30.0
    cut = columns(prepare(coords, np.zeros(coords.shape[0])), radius)
    cols, starts, lowest = cut.cols, cut.starts, cut.lowest
    table = direction_table(FAN)
    sectors = np.full((4, 4), np.inf)
    sectors[0], sectors[1], sectors[2] = table[:, UX], table[:, UY], table[:, COS2_TOL]
    bands, gaps, nbands = K.sector_edges(sectors, 4)
    # The fan's four distinct edges (22.5 and 67.5 degrees from the x axis, both ways), each widened
    # by at least 1e-9 radians on either side; between them the sectors of azimuth 0, 135, 90, 45, 0.
    edges = np.radians([-67.5, -22.5, 22.5, 67.5])
    assert nbands == 4 and np.all(np.arctan(bands[0]) < edges - 1e-9) and np.all(np.arctan(bands[1]) > edges + 1e-9)
    assert list(gaps) == [0, 3, 2, 1, 0]
    index = K.bucket_rows(cols[1], starts)
    highest = np.array([cols[0, a:b].max() if b > a else 0.0 for a, b in zip(starts[:-1], starts[1:], strict=True)])
    pieces = np.empty((2, 2 * nbands + 3), dtype=np.int64)
    certain = near = 0
    centre = int(np.flatnonzero((cols[0] == 31.0) & (cols[1] == 47.0))[0])
    for i in [centre, *range(0, cols.shape[1], 7)]:
        c = cut.column[i]
        for c2 in range(c + 1, lowest.size):
            ok, lo, hi = K.column_run(cols[1], starts, lowest, c2, cols[0, i], cols[1, i], radius**2, 1e-12 * radius**2)
            if not ok:
                break
            if hi == lo:
                continue
            g0, g1 = lowest[c2] - cols[0, i], highest[c2] - cols[0, i]
            m = K.cut_run(cols, index, c2, i, lo, hi, g0, g1, radius, bands, nbands, gaps, pieces)
            assert pieces[0, 0] == lo and pieces[0, m] == hi and np.all(np.diff(pieces[0, : m + 1]) > 0)
            dx = cols[0, lo:hi] - cols[0, i]
            dy = cols[1, lo:hi] - cols[1, i]
            hh2 = dx * dx + dy * dy
            passes = np.array([(dx * ux + dy * uy) ** 2 - hh2 * c2 >= 0.0 for ux, uy, c2 in sectors[:3].T])
            for p in range(m):
                rows = slice(pieces[0, p] - lo, pieces[0, p + 1] - lo)
                k = pieces[1, p]
                if k < 0:
                    near += rows.stop - rows.start
                    continue
                certain += rows.stop - rows.start
                assert np.all(passes[k, rows]) and np.all(passes[:, rows].sum(axis=0) == 1)
    assert certain > near > 0
