"""FFT variograms of rasters with missing cells against brute-force enumeration.

References: every pair of present cells enumerated with ``scipy.spatial.distance.pdist``
and classified by explicit angles (tests/reference/brute.py); masked pair sums against
direct convolutions with ``scipy.signal.fftconvolve`` and against explicit shifts in
numpy; the variogram map against the floor rule on every ordered pair.
"""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.raster import build_raster
from lagwise.core.variography.directions import DirectionClass
from lagwise.core.variography.experimental import raster_variogram
from lagwise.core.variography.fft import NodeSums, lag_sums
from lagwise.core.variography.lags import LagRequest
from lagwise.core.variography.maps import raster_map
from scipy.signal import fftconvolve

from .brute import class_statistics, members, pair_table

TOL = 1e-9


def _raster(rng, nx=23, ny=17, missing=0.2, spacing=(1.0, 2.0)):
    x, y = np.meshgrid(np.arange(nx), np.arange(ny))
    field = np.sin(x / 4.0) + 0.5 * np.cos(y / 3.0) + rng.normal(0, 0.3, (ny, nx)) + 10.0
    values = field.reshape(-1)
    values[rng.random(values.size) < missing] = np.nan
    return build_raster((5.0, -3.0), spacing, (nx, ny), values), values


def _points(raster):
    rows, columns = np.nonzero(raster.present)
    # Separations from the node indexes (exact in binary for these spacings).
    coords = np.column_stack([columns * raster.spacing[0], rows * raster.spacing[1]])
    return coords, raster.grid[rows, columns]


def _close(got, expected):
    if expected is None:
        return got is None
    return got is not None and abs(got - expected) <= TOL * max(1.0, abs(expected))


DIRECTIONS = [
    [DirectionClass()],
    [DirectionClass(0.0, 22.5), DirectionClass(45.0, 22.5), DirectionClass(90.0, 22.5), DirectionClass(135.0, 22.5)],
    [DirectionClass(30.0, 45.0, bandwidth=3.0), DirectionClass(120.0, 10.0)],
]


@pytest.mark.parametrize("statistic", ["semivariance", "covariance", "covariance_noncentered", "correlogram"])
@pytest.mark.parametrize("layout", range(len(DIRECTIONS)))
@pytest.mark.parametrize("lags", [LagRequest(width=2.0, count=7), LagRequest(edges=(0.0, 1.0, 2.5, 4.0, 9.0, 14.0))])
def test_classes_match_enumeration(statistic, layout, lags, rng):
    raster, _ = _raster(rng)
    directions = DIRECTIONS[layout]
    result = raster_variogram(raster, lags=lags, directions=directions, statistic=statistic, min_pairs=1)
    coords, values = _points(raster)
    i, j, h, d = pair_table(coords, values)
    edges = np.asarray(lags.edges) if lags.edges is not None else lags.width * np.arange(lags.count + 1)
    for k, direction in enumerate(directions):
        ok, klass, sign = members(h, d, edges, direction.azimuth, direction.tolerance, direction.bandwidth)
        expected = class_statistics(statistic, values, i, j, ok, klass, sign, len(edges) - 1)
        for c, (n, value) in enumerate(expected):
            row = result.directions[k].classes[c]
            assert row.pairs == n
            assert _close(row.value, value), (k, c, row.value, value)
            if n:
                mean_distance = d[ok & (klass == c)].mean()
                assert abs(row.mean_distance - mean_distance) <= TOL * mean_distance


def test_automatic_classes_match_enumeration(rng):
    raster, _ = _raster(rng, nx=19, ny=21, spacing=(1.0, 1.0))
    result = raster_variogram(raster, min_pairs=30)
    coords, values = _points(raster)
    i, j, h, d = pair_table(coords, values)
    row_edges = [row.lower for row in result.directions[0].classes] + [result.directions[0].classes[-1].upper]
    ok, klass, sign = members(h, d, np.array(row_edges))
    expected = class_statistics("semivariance", values, i, j, ok, klass, sign, len(row_edges) - 1)
    assert [row.pairs for row in result.directions[0].classes] == [n for n, _ in expected]
    assert all(_close(row.value, v) for row, (_, v) in zip(result.directions[0].classes, expected, strict=True))


@pytest.mark.parametrize("statistic", ["semivariance", "covariance", "correlogram"])
def test_map_matches_enumeration(statistic, rng):
    raster, _ = _raster(rng, nx=15, ny=12, spacing=(1.0, 0.5))
    s, k = 1.5, 5
    result = raster_map(raster, cell_size=s, cells=k, statistic=statistic)
    coords, values = _points(raster)
    i, j, h, _ = pair_table(coords, values)
    hx, hy = np.concatenate([h[:, 0], -h[:, 0]]), np.concatenate([h[:, 1], -h[:, 1]])
    tail, head = np.concatenate([values[i], values[j]]), np.concatenate([values[j], values[i]])
    col = np.floor(hx / s + 0.5).astype(int) + k
    row = np.floor(hy / s + 0.5).astype(int) + k
    for r in range(2 * k + 1):
        for c in range(2 * k + 1):
            m = (row == r) & (col == c)
            assert result.pairs[r, c] == m.sum()
            if not m.sum():
                assert result.values[r][c] is None
                continue
            t, hd = tail[m], head[m]
            if statistic == "semivariance":
                expected = np.mean((hd - t) ** 2) / 2  # Matheron (1962)
            elif statistic == "covariance":
                expected = np.mean(t * hd) - t.mean() * hd.mean()
            else:
                expected = (np.mean(t * hd) - t.mean() * hd.mean()) / (t.std() * hd.std())
            assert _close(result.values[r][c], expected)


def test_masked_sums_against_fftconvolve_and_shifts(rng):
    """Each lag sum is a cross-correlation: fftconvolve(a, b reversed) and, for one lag, an explicit shift."""
    ny, nx = 13, 18
    mask = (rng.random((ny, nx)) > 0.25).astype(float)
    z = rng.normal(2.0, 1.0, (ny, nx)) * mask
    nodes = NodeSums(mask, z, z * z, (1.0, 1.0), 0.0, 1.0)
    reach = (nx - 1, ny - 1)
    sums = lag_sums(nodes, reach)

    def corr(a, b):
        # corr(a, b)(s) = sum_k a_k b_(k+s) = (a reversed * b)(s), lags -(n-1) .. n-1.
        return fftconvolve(a[::-1, ::-1], b, mode="full")

    np.testing.assert_allclose(sums.count, corr(mask, mask), atol=1e-9)
    np.testing.assert_allclose(sums.tail, corr(z, mask), atol=1e-9)
    np.testing.assert_allclose(sums.head, corr(mask, z), atol=1e-9)
    np.testing.assert_allclose(sums.tail2, corr(z * z, mask), atol=1e-9)
    np.testing.assert_allclose(sums.product, corr(z, z), atol=1e-9)
    # One lag by explicit shift: s = (3, 2) (3 columns, 2 rows).
    sx, sy = 3, 2
    tail_m, head_m = mask[: ny - sy, : nx - sx], mask[sy:, sx:]
    tail_z, head_z = z[: ny - sy, : nx - sx], z[sy:, sx:]
    both = tail_m * head_m
    at = (sy + reach[1], sx + reach[0])
    assert sums.count[at] == both.sum()
    assert abs(sums.product[at] - np.sum(tail_z * head_z)) < 1e-9
    square = sums.tail2[at] + sums.head2[at] - 2 * sums.product[at]
    assert abs(square - np.sum(both * (head_z - tail_z) ** 2)) < 1e-9
    assert abs(sums.square[at] - square) < 1e-9
    # The semivariance-only transforms give the same counts and squared differences at every lag.
    short = lag_sums(nodes, reach, first_moments=False)
    np.testing.assert_array_equal(short.count, sums.count)
    square_all = corr(z * z, mask) + corr(mask, z * z) - 2 * corr(z, z)
    np.testing.assert_allclose(short.square, np.where(sums.count > 0, square_all, 0.0), atol=1e-9)
