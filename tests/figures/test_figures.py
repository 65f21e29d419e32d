"""Figures: labels with units, directional model curves, interval calibration, reproducible SVG."""

from __future__ import annotations

import io
import struct
import xml.etree.ElementTree as ET
from dataclasses import replace

import numpy as np
import pytest
from lagwise import figures
from lagwise.core.data.samples import build_sample_set
from lagwise.core.kriging.prediction import Grid
from lagwise.core.modelling.models import Anisotropy, Structure, VariogramModel
from lagwise.core.variography.directions import DirectionClass
from lagwise.core.variography.experimental import DirectionResult, experimental_variogram
from lagwise.core.variography.maps import variogram_map
from lagwise.figures.maps import resolve_scale
from lagwise.figures.variogram import along, masked_cells
from matplotlib.image import imread
from scipy.stats import norm

SVG = "{http://www.w3.org/2000/svg}"
LEAD = figures.Labels(name="lead", unit="mg/kg", coordinate_unit="m")
MODEL = VariogramModel(0.1, (Structure("exponential", 0.9, 300.0, anisotropy=Anisotropy(60.0, 0.4)),))


@pytest.fixture(scope="module")
def samples():
    rng = np.random.default_rng(7)
    x, y = rng.uniform(0, 500, 150), rng.uniform(0, 300, 150)
    return build_sample_set(np.sin(x / 80) + np.cos(y / 60) + rng.normal(0, 0.2, 150), x, y)


@pytest.fixture(scope="module")
def fan(samples):
    return experimental_variogram(samples, directions=[DirectionClass(60.0, 22.5), DirectionClass(150.0, 22.5)])


def _texts(svg: str) -> list[str]:
    return ["".join(e.itertext()) for e in ET.fromstring(svg).iter(f"{SVG}text")]


def _ids(svg: str) -> set[str]:
    return {e.get("id") for e in ET.fromstring(svg).iter() if e.get("id")}


def test_labels_carry_the_given_units_and_no_placeholders():
    assert LEAD.value == "lead (mg/kg)"
    assert LEAD.distance == "separation distance (m)"
    assert LEAD.gamma("semivariance") == "semivariance of lead ((mg/kg)²)"
    assert LEAD.coordinate("x") == "x (m)"
    logged = figures.Labels(name="lead", unit="mg/kg", transform="log")
    assert logged.working == "ln lead (lead in mg/kg)" and "dimensionless" in logged.gamma("semivariance")
    bare = figures.Labels()
    assert bare.value == "value" and bare.distance == "separation distance"
    geographic = figures.Labels(geographic=True)
    assert geographic.distance == "separation distance (m)" and geographic.coordinate("y") == "latitude (°)"


def test_a_dollar_sign_is_shown_not_parsed():
    """matplotlib reads $...$ as mathematics; a caller's unit must come out as typed."""
    svg = figures.variogram_map(
        _tiny_map(), figures.Labels(name="price", unit="$/t"), min_pairs=1, size=(400, 300), fmt="svg"
    )
    assert any("($/t)²" in t for t in _texts(svg))


def test_model_along_an_azimuth_applies_the_anisotropy():
    """Exponential with practical range a: gamma = c0 + c (1 - exp(-3h/a)) (practical-range convention of the
    trade); along the major azimuth the range is 300, across it 0.4 x 300 = 120."""
    h = np.array([50.0, 120.0, 300.0])
    expected_major = 0.1 + 0.9 * (1 - np.exp(-3 * h / 300.0))
    expected_minor = 0.1 + 0.9 * (1 - np.exp(-3 * h / 120.0))
    np.testing.assert_allclose(along(MODEL, 60.0, h), expected_major, rtol=1e-12)
    np.testing.assert_allclose(along(MODEL, 150.0, h), expected_minor, rtol=1e-12)
    np.testing.assert_allclose(along(MODEL, 240.0, h), expected_major, rtol=1e-12)


def test_each_direction_gets_its_own_model_curve(fan):
    svg = figures.variogram(fan, MODEL, LEAD, sill_reference=1.0)
    ids = _ids(svg)
    assert {"experimental-points-0", "experimental-points-1", "model-curve-0", "model-curve-1"} <= ids
    assert {"pair-counts-0", "pair-counts-1"} <= ids
    texts = _texts(svg)
    assert "model along 60°" in texts and "model along 150°" in texts
    squeezed = "".join("".join(texts).split())  # the subtitle wraps over lines
    assert "".join("exponential (partial sill 0.9, range 300 m along 60°, ratio 0.40)".split()) in squeezed
    assert "separation distance (m)" in texts and "semivariance of lead ((mg/kg)²)" in texts


def test_an_isotropic_model_is_drawn_once(fan):
    model = VariogramModel(0.1, (Structure("spherical", 0.9, 200.0),))
    ids = _ids(figures.variogram(fan, model, LEAD))
    assert "model-curve-0" in ids and "model-curve-1" not in ids


def _with_intervals(experimental, interval):
    directions = tuple(
        DirectionResult(d.direction, tuple(replace(r, interval_95=interval(r)) for r in d.classes))
        for d in experimental.directions
    )
    return replace(experimental, directions=directions)


def test_uncertainty_bars_only_when_classes_carry_them(fan):
    """The classes' 95 % intervals (jackknife, from the experimental variogram) are drawn as bars."""
    svg = figures.variogram(fan, MODEL, LEAD)
    assert {"class-uncertainty-0", "class-uncertainty-1"} <= _ids(svg)
    assert any("bars: 95 % intervals" in t for t in _texts(svg))
    bare = figures.variogram(_with_intervals(fan, lambda r: None), MODEL, LEAD)
    assert not any(i.startswith("class-uncertainty") for i in _ids(bare))
    assert not any("bars:" in t for t in _texts(bare))


def test_two_renders_are_byte_identical_and_text_is_text(fan):
    first = figures.variogram(fan, MODEL, LEAD)
    second = figures.variogram(fan, MODEL, LEAD)
    assert first == second
    assert "<dc:date>" not in first
    assert len(_texts(first)) > 10  # tick labels, axis labels, title, legend as <text>
    png = [figures.variogram(fan, MODEL, LEAD, fmt="png", size=(500, 320)) for _ in range(2)]
    assert png[0] == png[1]


def test_png_decodes_at_the_requested_size(fan):
    data = figures.variogram(fan, MODEL, LEAD, fmt="png", size=(640, 410))
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and struct.unpack(">II", data[16:24]) == (640, 410)
    assert imread(io.BytesIO(data)).shape[:2] == (410, 640)


def _tiny_map():
    rng = np.random.default_rng(3)
    x, y = rng.uniform(0, 100, 60), rng.uniform(0, 100, 60)
    return variogram_map(build_sample_set(rng.normal(size=60), x, y), cell_size=10.0, cells=4)


def test_sparse_cells_are_masked():
    vmap = _tiny_map()
    cells = masked_cells(vmap, min_pairs=20)
    assert np.array_equal(np.ma.getmaskarray(cells), vmap.pairs < 20)
    assert 0 < (vmap.pairs < 20).sum() < vmap.pairs.size


def test_variogram_map_labels_and_model_outline():
    small = VariogramModel(0.1, (Structure("exponential", 0.9, 60.0, anisotropy=Anisotropy(60.0, 0.4)),))
    svg = figures.variogram_map(_tiny_map(), LEAD, min_pairs=5, model=small)
    texts = _texts(svg)
    assert "east-west separation hx (m)" in texts and "fewer than 5 pairs" in texts
    assert "model reaches 95 % of its sill" in texts


def test_coverage_against_the_normal_distribution():
    """|e| <= z_p with z_p = norm.ppf((1+p)/2) is the same event as 2 norm.cdf(|e|) - 1 <= p
    (scipy.stats.norm); for standard normal errors the share is about p (binomial noise)."""
    rng = np.random.default_rng(11)
    errors = rng.standard_normal(4000)
    levels = np.array([0.5, 0.8, 0.9, 0.95, 0.99])
    coverage = figures.interval_coverage(errors, levels)
    expected = np.array([(2 * norm.cdf(np.abs(errors)) - 1 <= p).mean() for p in levels])
    np.testing.assert_array_equal(coverage, expected)
    assert np.all(np.abs(coverage - levels) < 4 * np.sqrt(levels * (1 - levels) / errors.size))
    # Hand example: z_0.9 = 1.645, so of 0.5, 1.0, 2.0, 3.0 and a NaN two of four are inside.
    assert figures.interval_coverage(np.array([0.5, -1.0, 2.0, 3.0, np.nan]), np.array([0.9]))[0] == 0.5


def test_overdispersed_errors_fall_below_the_diagonal():
    """Errors twice as wide as stated: at level p the share is 2 Phi(z_p / 2) - 1 < p (scipy.stats.norm)."""
    errors = 2.0 * np.random.default_rng(5).standard_normal(20000)
    p = np.array([0.9])
    expected = 2 * norm.cdf(norm.ppf(0.95) / 2) - 1
    assert figures.interval_coverage(errors, p)[0] == pytest.approx(expected, abs=0.015)


class _CV:
    def __init__(self, n, rng):
        self.observed = rng.normal(10, 1, n)
        self.estimate = self.observed + rng.normal(0, 0.5, n)
        self.standard_deviation = np.full(n, 0.5)
        self.error = self.estimate - self.observed
        self.standardized_error = self.error / self.standard_deviation
        self.outlier = np.abs(self.standardized_error) > 2.5
        self.statistics = {"root_mean_square_error": 0.5, "root_mean_square_standardized_error": 1.0}


def test_cross_validation_figure_maps_errors_and_calibration():
    rng = np.random.default_rng(2)
    cv = _CV(120, rng)
    svg = figures.cross_validation(cv, rng.uniform(0, 100, (120, 2)), LEAD)
    assert {"error-points", "coverage-curve"} <= _ids(svg)
    texts = _texts(svg)
    assert "error of lead, estimate − observed (mg/kg)" in texts and "stated level of the interval (%)" in texts
    one_d = figures.cross_validation(cv, rng.uniform(0, 100, (120, 1)), LEAD, fmt="png", size=(500, 300))
    assert struct.unpack(">II", one_d[16:24]) == (500, 300)


def test_colour_scale_rules():
    positive, mixed = np.array([1.0, 10.0, 100.0]), np.array([-1.0, 2.0, np.nan])
    assert resolve_scale("auto", "log", positive) == ("log", None)
    assert resolve_scale("auto", "normal_score", positive) == ("log", None)
    assert resolve_scale("auto", "none", positive) == ("linear", None)
    assert resolve_scale("quantile", "none", mixed) == ("quantile", None)
    used, note = resolve_scale("log", "none", mixed)
    assert used == "quantile" and "≤ 0" in note


GRID = Grid(origin=(0.0, 0.0), spacing=(10.0, 10.0), shape=(20, 12))


def _surface():
    x, y = GRID.points()[:, 0], GRID.points()[:, 1]
    return 50 + 40 * np.sin(x / 40) * np.cos(y / 30) + x / 4


def test_prediction_map_with_thresholds_and_scales():
    where = np.array([[15.0, 20.0], [150.0, 90.0]])
    estimate = _surface()
    for scale in ("linear", "log", "quantile"):
        svg = figures.prediction_map(GRID, estimate, LEAD, sample_xy=where, scale=scale, thresholds=(60.0, 1e6))
        ids, texts = _ids(svg), _texts(svg)
        assert {"estimate-surface", "threshold-contours", "sample-locations"} <= ids
        assert "estimate of lead (mg/kg)" in texts and "x (m)" in texts
        assert any("not reached: 1e+06" in t for t in texts)
        assert "60" in texts  # the contour's label


def test_standard_deviation_map():
    svg = figures.standard_deviation_map(GRID, np.abs(_surface()) / 10, LEAD, sample_xy=np.zeros((1, 2)))
    assert "deviation-surface" in _ids(svg)
    assert "standard deviation of lead (mg/kg)" in _texts(svg)


def test_geographic_map_is_drawn_in_degrees():
    """A lon/lat grid with samples in degrees fills the plot (not a speck in a metre-sized frame)."""
    grid = Grid(origin=(6.0, 46.0), spacing=(0.01, 0.01), shape=(30, 20))
    estimate = 5 + grid.points()[:, 0] - 6.0
    where = np.array([[6.05, 46.05], [6.2, 46.15]])
    labels = figures.Labels(name="lead", unit="mg/kg", geographic=True)
    png = figures.prediction_map(grid, estimate, labels, sample_xy=where, fmt="png", size=(600, 400))
    pixels = imread(io.BytesIO(png))[:, :, :3]
    coloured = np.ptp(pixels, axis=2) > 0.08  # not white or grey: the estimate ramp
    assert coloured.mean() > 0.25
    assert "longitude (°)" in _texts(figures.prediction_map(grid, estimate, labels, sample_xy=where))
