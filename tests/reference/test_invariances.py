"""Invariances of the experimental variogram (property tests with hypothesis).

Facts of the definitions (common practice): the semivariance does not depend on
sample order, on a translation of the coordinates or on a constant added to the
values; scaling values by c scales it by c squared.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from lagwise.core.data.samples import build_sample_set
from lagwise.core.variography.directions import DirectionClass
from lagwise.core.variography.experimental import experimental_variogram
from lagwise.core.variography.lags import LagRequest

LAGS = LagRequest(edges=(0.0, 7.0, 15.0, 30.0, 45.0))
DIRECTIONS = [DirectionClass(0.0, 90.0), DirectionClass(40.0, 30.0, 12.0)]


def _values(coords, values):
    result = experimental_variogram(
        build_sample_set(values, coords[:, 0], coords[:, 1]), lags=LAGS, directions=DIRECTIONS, min_pairs=1
    )
    return [(row.pairs, row.value) for d in result.directions for row in d.classes]


def _same(a, b, scale=1.0):
    assert [p for p, _ in a] == [p for p, _ in b]
    for (_, u), (_, v) in zip(a, b, strict=False):
        assert (u is None) == (v is None)
        if u is not None:
            assert v == pytest.approx(u * scale, rel=1e-8, abs=1e-9)


seeds = st.integers(min_value=0, max_value=2**32 - 1)
common = settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def _data(seed):
    rng = np.random.default_rng(seed)
    # Integer coordinates keep every separation exact under translation and permutation.
    coords = rng.integers(0, 60, (60, 2)).astype(float)
    coords = np.unique(coords, axis=0)
    return rng, coords, rng.normal(0, 3, coords.shape[0])


@common
@given(seeds)
def test_sample_order(seed):
    rng, coords, values = _data(seed)
    perm = rng.permutation(len(values))
    _same(_values(coords, values), _values(coords[perm], values[perm]))


@common
@given(seeds, st.integers(-(10**6), 10**6), st.integers(-(10**6), 10**6))
def test_translation(seed, dx, dy):
    _, coords, values = _data(seed)
    _same(_values(coords, values), _values(coords + [dx, dy], values))


@common
@given(seeds, st.floats(-1e4, 1e4))
def test_constant_added_to_values(seed, shift):
    _, coords, values = _data(seed)
    _same(_values(coords, values), _values(coords, values + shift))


@common
@given(seeds, st.floats(0.01, 100.0))
def test_scaling_values(seed, c):
    _, coords, values = _data(seed)
    _same(_values(coords, values), _values(coords, values * c), scale=c * c)
