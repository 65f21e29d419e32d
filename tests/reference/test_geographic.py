"""Geographic coordinates against great-circle formulas.

Haversine distance on a sphere of mean Earth radius 6,371,008.8 m (IUGG mean radius)
and the initial great-circle bearing (both standard spherical-trigonometry formulas).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from scipy.spatial.distance import pdist

R = 6_371_008.8


def haversine(lon1, lat1, lon2, lat2):
    p1, p2 = math.radians(lat1), math.radians(lat2)
    dp, dl = p2 - p1, math.radians(lon2 - lon1)
    a = math.sin(dp / 2) ** 2 + math.cos(p1) * math.cos(p2) * math.sin(dl / 2) ** 2
    return 2 * R * math.asin(math.sqrt(a))


def bearing(lon1, lat1, lon2, lat2):
    p1, p2 = math.radians(lat1), math.radians(lat2)
    dl = math.radians(lon2 - lon1)
    y = math.sin(dl) * math.cos(p2)
    x = math.cos(p1) * math.sin(p2) - math.sin(p1) * math.cos(p2) * math.cos(dl)
    return math.degrees(math.atan2(y, x)) % 360.0


@pytest.fixture()
def field_50km():
    rng = np.random.default_rng(5)
    lon = 6.0 + rng.uniform(-0.32, 0.32, 40)  # about 50 km east-west at 46 N
    lat = 46.0 + rng.uniform(-0.22, 0.22, 40)  # about 50 km north-south
    return lon, lat


def test_distances_match_haversine(field_50km):
    lon, lat = field_50km
    samples = build_sample_set(np.ones(40), lon, lat, coordinates="geographic")
    projected = pdist(samples.coords)
    expected = [haversine(lon[a], lat[a], lon[b], lat[b]) for a in range(40) for b in range(a + 1, 40)]
    np.testing.assert_allclose(projected, expected, rtol=1e-4)


def test_azimuths_match_initial_bearing(field_50km):
    """Azimuths in the projected plane match true bearings within the meridian convergence (< 0.3 deg here)."""
    lon, lat = field_50km
    samples = build_sample_set(np.ones(40), lon, lat, coordinates="geographic")
    worst = 0.0
    for a in range(40):
        for b in range(a + 1, 40):
            h = samples.coords[b] - samples.coords[a]
            grid = math.degrees(math.atan2(h[0], h[1])) % 360.0
            true = bearing(lon[a], lat[a], lon[b], lat[b])
            gap = abs((grid - true + 180.0) % 360.0 - 180.0)
            worst = max(worst, gap)
    assert worst < 0.3


def test_projection_centre_is_exact():
    """From the projection centre, the projected distance is the haversine distance (Snyder 1987, eq. 25-2)."""
    samples = build_sample_set(
        np.array([1.0, 2.0, 3.0]), np.array([10.0, 10.1, 9.9]), np.array([50.0, 50.0, 50.0]), coordinates="geographic"
    )
    centre = samples.projection
    x, y = centre.forward(np.array([10.1]), np.array([50.0]))
    assert math.hypot(x[0], y[0]) == pytest.approx(haversine(centre.longitude, centre.latitude, 10.1, 50.0), rel=1e-12)


def test_inverse_lands_at_the_right_distance_and_bearing_from_the_centre():
    """Projected (x, y) back to degrees: the point lies hypot(x, y) from the centre (haversine) on the
    initial bearing atan2(x, y) (azimuthal equidistant, Snyder 1987, eqs. 20-14, 20-15, 25-15)."""
    centre = build_sample_set(
        np.ones(3), np.array([6.0, 6.1, 5.9]), np.array([46.0, 46.1, 45.9]), coordinates="geographic"
    ).projection
    rng = np.random.default_rng(9)
    x, y = rng.uniform(-40_000, 40_000, 50), rng.uniform(-40_000, 40_000, 50)
    lon, lat = centre.inverse(x, y)
    for k in range(50):
        assert haversine(centre.longitude, centre.latitude, lon[k], lat[k]) == pytest.approx(
            math.hypot(x[k], y[k]), rel=1e-9
        )
        assert bearing(centre.longitude, centre.latitude, lon[k], lat[k]) == pytest.approx(
            math.degrees(math.atan2(x[k], y[k])) % 360.0, abs=1e-7
        )
    back_x, back_y = centre.forward(lon, lat)
    np.testing.assert_allclose(np.column_stack([back_x, back_y]), np.column_stack([x, y]), atol=1e-6)
    assert centre.inverse(np.array([0.0]), np.array([0.0])) == pytest.approx((centre.longitude, centre.latitude))
