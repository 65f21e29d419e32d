"""Unit checks of the FFT pair sums' parts: the in-place spectrum products, the windowed inverse,
the raster's on-demand node layers and the working-memory estimate.

References: numpy's complex arithmetic for the products; ``scipy.fft.irfft2`` (a whole 2-D inverse)
for the windowed inverse; direct sums by numpy slices and the pair engine for the rounding estimate; node arrays formed explicitly in numpy for the raster layers;
``tracemalloc`` (numpy reports its data allocations to it) for the memory estimate.
"""

from __future__ import annotations

import tracemalloc

import numpy as np
import pytest
import scipy.fft
from lagwise.core.data.raster import build_raster, raster_points
from lagwise.core.variography import spectra
from lagwise.core.variography.directions import DirectionClass
from lagwise.core.variography.experimental import experimental_variogram, raster_variogram
from lagwise.core.variography.fft import (
    LAYERS,
    NodeSums,
    RasterNodes,
    _Transforms,
    fft_bytes,
    lag_sums,
    padded_shape,
    square_rounding,
)
from lagwise.core.variography.gridded import raster_nodes
from lagwise.core.variography.lags import LagRequest
from lagwise.core.variography.maps import raster_map, variogram_map


def _spectrum(rng, n=1000):
    return rng.normal(size=n) + 1j * rng.normal(size=n)


def test_products_in_place_match_numpy(rng):
    a, b = _spectrum(rng), _spectrum(rng)
    out = np.empty_like(a)
    spectra.cross_into(out, a, b)
    np.testing.assert_allclose(out, np.conj(a) * b, rtol=1e-15, atol=1e-15)
    power = a.copy()
    spectra.power_into(power, power)
    np.testing.assert_allclose(power, np.abs(a) ** 2, rtol=1e-15)
    assert np.all(power.imag == 0.0)
    q = b.copy()
    spectra.twice_real_cross(q, a)
    np.testing.assert_allclose(q, (np.conj(b) * a + np.conj(a) * b).real, rtol=1e-14, atol=1e-14)
    s = _spectrum(rng)
    less = q.copy()
    spectra.less_twice_power(less, s)
    np.testing.assert_allclose(less, q - 2.0 * np.abs(s) ** 2, rtol=1e-14, atol=1e-14)


@pytest.mark.parametrize("reach", [(0, 0), (3, 0), (0, 4), (5, 7), (11, 8)])
def test_windowed_inverse_matches_a_whole_inverse(reach, rng):
    ny, nx = 9, 12
    nodes = NodeSums(rng.random((ny, nx)), rng.random((ny, nx)), rng.random((ny, nx)), (1.0, 1.0), 0.0, 1.0)
    shape = padded_shape((ny, nx), reach)
    t = _Transforms(nodes, shape, reach)
    spectrum = t.forward("total")
    expected = scipy.fft.irfft2(spectrum, s=shape)
    rx, ry = reach
    rows = np.r_[shape[0] - ry : shape[0], 0 : ry + 1]
    columns = np.r_[shape[1] - rx : shape[1], 0 : rx + 1]
    got = t.inverse(spectrum)
    np.testing.assert_allclose(got, expected[np.ix_(rows, columns)], rtol=1e-12, atol=1e-12)


def test_raster_layers_are_the_explicit_node_arrays(rng):
    nx, ny = 14, 9
    values = rng.normal(5.0, 2.0, nx * ny)
    values[rng.random(values.size) < 0.3] = np.nan
    raster = build_raster((0.0, 0.0), (1.0, 1.5), (nx, ny), values)
    mean = raster.moments[0]
    present = ~np.isnan(values.reshape(ny, nx))
    centred = np.where(present, values.reshape(ny, nx) - mean, 0.0)
    explicit = NodeSums(present.astype(float), centred, centred**2, raster.spacing, mean, 1.0)
    lazy = RasterNodes(raster.grid, raster.present, raster.spacing, mean, 1.0)
    assert lazy.shape == explicit.shape == (ny, nx)
    for layer in LAYERS:
        out = np.full((ny, nx), 99.0)
        lazy.fill(layer, out)
        np.testing.assert_array_equal(out, getattr(explicit, layer))
    for first_moments in (True, False):
        a = lag_sums(lazy, (6, 5), first_moments)
        b = lag_sums(explicit, (6, 5), first_moments)
        for name in ("count", "square", "tail", "head", "tail2", "head2", "product"):
            np.testing.assert_array_equal(getattr(a, name), getattr(b, name))


@pytest.mark.parametrize("first_moments", [True, False])
def test_working_memory_stays_within_the_estimate(first_moments, rng):
    ny, nx, reach = 300, 420, (40, 30)
    nodes = NodeSums(rng.random((ny, nx)), rng.random((ny, nx)), rng.random((ny, nx)), (1.0, 1.0), 0.0, 1.0)
    lag_sums(nodes, reach, first_moments)  # compiled kernels and FFT plans made before measuring
    tracemalloc.start()
    try:
        lag_sums(nodes, reach, first_moments)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    py, px = padded_shape((ny, nx), reach)
    spectrum = py * (px // 2 + 1) * 16
    assert peak <= fft_bytes((ny, nx), reach, first_moments, node_arrays=0)
    # The peak is the padded layer, two (semivariance) or three spectra and one inverse's window rows.
    window_rows = 2 * (2 * reach[1] + 1) * (px // 2 + 1) * 16
    windows = 8 * (2 * reach[0] + 1) * (2 * reach[1] + 1) * 8
    assert peak <= (3 if not first_moments else 4) * spectrum + window_rows + windows + 0.05 * spectrum


def _direct_square(s: np.ndarray, present: np.ndarray, i: int, j: int) -> float:
    """Sum over present node pairs (k, k + (i, j)) of (S_k - S_(k+s))^2, by numpy slices (j >= 0)."""
    ny, nx = s.shape
    tail = (slice(0, ny - j), slice(max(0, -i), nx - max(0, i)))
    head = (slice(j, ny), slice(max(0, i), nx + min(0, i)))
    both = present[tail] & present[head]
    return float(np.sum(((s[tail] - s[head])[both]) ** 2))


def test_rounding_estimate_covers_the_square_sums_error(rng):
    """square_rounding against direct sums (numpy slices): trends, waves and noise, 10 % missing."""
    for kind in range(3):
        ny, nx = (int(v) for v in rng.integers(20, 200, 2))
        x, y = np.meshgrid(np.arange(nx), np.arange(ny))
        field = (10.0 * x, 1e3 * np.sin(x / 7.0) + y**2 / 10.0, 1e4 * rng.normal(size=x.shape))[kind]
        field = field + 1e-6 * rng.normal(size=x.shape)
        field[rng.random(field.shape) < 0.1] = np.nan
        grid = raster_nodes(build_raster((0.0, 0.0), (1.0, 1.0), (nx, ny), field.ravel()))
        reach = (4, 4)
        sums = lag_sums(grid.nodes, reach, first_moments=False)
        noise = square_rounding(grid.norms, grid.nodes.shape, reach)
        present = ~np.isnan(field)
        s = np.where(present, field - grid.nodes.mean, 0.0)
        for i in range(-4, 5):
            for j in range(0, 5):
                assert abs(sums.square[j + 4, i + 4] - _direct_square(s, present, i, j)) <= noise


@pytest.mark.parametrize("noise", [1e-1, 1e-5])
def test_a_semivariance_within_rounding_is_left_undefined(noise, rng):
    """A strong trend across x, little variation along y: the classes along y are either within
    1e-6 of the pair engine on the cells as points, or undefined with the rounding reason (never a
    negative or a wrong number)."""
    nx, ny = 200, 150
    x, _ = np.meshgrid(np.arange(nx), np.arange(ny))
    values = (10.0 * x + noise * rng.normal(size=x.shape)).ravel()
    raster = build_raster((0.0, 0.0), (1.0, 1.0), (nx, ny), values)
    lags = LagRequest(width=1.0, count=4)
    along_y = [DirectionClass(azimuth=0.0, tolerance=1.0)]
    by_fft = raster_variogram(raster, lags=lags, directions=along_y)
    exact = experimental_variogram(raster_points(raster), lags=lags, directions=along_y)
    rounded = 0
    for a, b in zip(by_fft.directions[0].classes, exact.directions[0].classes, strict=True):
        assert a.pairs == b.pairs
        if a.value is None and b.value is not None:
            assert a.reason.startswith("the semivariance is within the FFT's rounding error")
            rounded += 1
        elif b.value is not None:
            assert abs(a.value - b.value) <= 1e-6 * b.value
    assert (rounded == 3) == (noise == 1e-5)
    assert (rounded > 0) == any("rounding error" in w for w in by_fft.warnings)


@pytest.mark.parametrize("noise", [1e-1, 1e-5])
def test_a_map_cell_within_rounding_is_left_undefined(noise, rng):
    """As for classes: each raster map cell is within 1e-6 of the exact map of the cells as points,
    or undefined (with the warning), never a wrong or negative number."""
    nx, ny = 120, 90
    x, _ = np.meshgrid(np.arange(nx), np.arange(ny))
    values = (10.0 * x + noise * rng.normal(size=x.shape)).ravel()
    raster = build_raster((0.0, 0.0), (1.0, 1.0), (nx, ny), values)
    by_fft = raster_map(raster, cell_size=1.0, cells=2)
    exact = variogram_map(raster_points(raster), cell_size=1.0, cells=2)
    assert by_fft.pairs.tolist() == exact.pairs.tolist()
    rounded = 0
    for a, b in zip(sum(by_fft.values, []), sum(exact.values, []), strict=True):
        if a is None and b is not None:
            rounded += 1
        elif b is not None:
            assert abs(a - b) <= 1e-6 * b
    assert (rounded == 4) == (noise == 1e-5)  # the four cells along y, (0, +-1) and (0, +-2)
    assert (rounded > 0) == any("rounding error" in w for w in by_fft.warnings)


@pytest.mark.parametrize("noise", [1e-1, 1e-3, 1e-4])
def test_a_rasters_error_bound_states_the_rounding_estimate(noise, rng):
    """Under a strong trend a defined class's FFT value is off the pair engine's (the cells as points)
    by no more than its stated error_bound times the value; the bound is positive, not a claimed 0."""
    nx, ny = 200, 150
    x, _ = np.meshgrid(np.arange(nx), np.arange(ny))
    raster = build_raster((0.0, 0.0), (1.0, 1.0), (nx, ny), (10.0 * x + noise * rng.normal(size=x.shape)).ravel())
    lags = LagRequest(width=1.0, count=4)
    along_y = [DirectionClass(azimuth=0.0, tolerance=1.0)]
    by_fft = raster_variogram(raster, lags=lags, directions=along_y)
    exact = experimental_variogram(raster_points(raster), lags=lags, directions=along_y)
    checked = 0
    for a, b in zip(by_fft.directions[0].classes, exact.directions[0].classes, strict=True):
        if a.value is not None and b.value is not None:
            assert 0.0 < a.error_bound < 1.0
            assert abs(a.value - b.value) <= a.error_bound * abs(a.value)
            checked += 1
    assert checked == 3
    flat = raster_map(raster, cell_size=1.0, cells=2)
    bounds = [e for row in flat.error_bound.tolist() for e in row if not np.isnan(e)]
    assert bounds and all(0.0 < e < 1.0 for e in bounds)


def test_a_plain_rasters_error_bound_is_tiny(rng):
    """No trend: the rounding estimate is far below any tolerance a user would set (common practice:
    float64 FFT sums keep about 1e-12 relative on fields of moderate size)."""
    x, y = np.meshgrid(np.arange(120), np.arange(90))
    raster = build_raster((0.0, 0.0), (1.0, 1.0), (120, 90), (np.sin(x / 9) + np.cos(y / 7)).ravel())
    result = raster_variogram(raster, lags=LagRequest(width=2.0, count=8))
    bounds = [r.error_bound for r in result.directions[0].classes if r.value is not None]
    assert bounds and all(0.0 < e < 1e-10 for e in bounds)
