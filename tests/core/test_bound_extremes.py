"""The grid bounds' extreme values without sorting equal the prefix-sorted formulation.

Reference: the extreme of a linear-fractional function (a + sum x_s a_s) / (b + sum x_s b_s)
over the box x in [0, 1]^m, b, b_s > 0, is taken at a prefix of the terms sorted by a_s / b_s
(common practice of fractional programming, e.g. Dinkelbach 1967, Management Science 13(7));
``prefix_extreme`` below enumerates every prefix of that order (the sort-based implementation
bounds.py had before), and brute force over every subset checks both on small cases.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from lagwise.core.limits import Limits
from lagwise.core.variography import bounds
from lagwise.core.variography.maps import variogram_map

from tests.reference.simulate import smooth_scattered


def prefix_extreme(cls, key, num, den, core_num, core_den, count, largest):
    """Every prefix of each class's entries in ratio order (descending for the largest)."""
    order = np.lexsort((-key if largest else key, cls))
    c, a, n = cls[order], num[order], den[order]
    starts = np.flatnonzero(np.r_[True, c[1:] != c[:-1]]) if c.size else np.zeros(0, dtype=np.int64)
    cum_a, cum_n = np.cumsum(a), np.cumsum(n)
    base_a = np.repeat(np.r_[0.0, cum_a][starts], np.diff(np.r_[starts, c.size]))
    base_n = np.repeat(np.r_[0.0, cum_n][starts], np.diff(np.r_[starts, c.size]))
    top = core_num[c] + cum_a - base_a
    bottom = core_den[c] + cum_n - base_n
    with np.errstate(divide="ignore", invalid="ignore"):
        values = np.where(bottom > 0, top / bottom, np.nan)
        out = np.where(core_den > 0, core_num / core_den, np.nan)
    if c.size:
        pick = np.fmax.reduceat(values, starts) if largest else np.fmin.reduceat(values, starts)
        out[c[starts]] = np.fmax(out[c[starts]], pick) if largest else np.fmin(out[c[starts]], pick)
    return out


def _case(rng, classes, entries, ties=False):
    cls = rng.integers(0, classes, entries)
    den = rng.integers(1, 50, entries).astype(float)
    ratio = rng.choice([0.5, 1.0, 2.0], entries) if ties else rng.lognormal(0.0, 0.5, entries)
    num = ratio * den
    core_den = np.where(rng.random(classes) < 0.2, 0.0, rng.integers(1, 500, classes).astype(float))
    core_num = core_den * rng.lognormal(0.0, 0.3, classes)
    return cls, num / den, num, den, core_num, core_den, classes


@pytest.mark.parametrize("seed", range(6))
@pytest.mark.parametrize("largest", [True, False])
def test_equal_to_the_prefix_formulation(seed, largest):
    rng = np.random.default_rng(seed)
    args = _case(rng, classes=40, entries=3000, ties=seed % 2 == 1)
    found = bounds._extreme(*args, largest)
    expected = prefix_extreme(*args, largest)
    assert np.array_equal(np.isnan(found), np.isnan(expected))
    # The prefix formulation's sums are differences of running totals over every class: rounding ~1e-12.
    np.testing.assert_allclose(found, expected, rtol=1e-10)


@pytest.mark.parametrize("largest", [True, False])
def test_equal_to_every_subset_on_small_classes(largest):
    rng = np.random.default_rng(9)
    cls, key, num, den, core_num, core_den, count = _case(rng, classes=12, entries=60)
    found = bounds._extreme(cls, key, num, den, core_num, core_den, count, largest)
    for k in range(count):
        members = np.flatnonzero(cls == k)
        values = [core_num[k] / core_den[k]] if core_den[k] > 0 else []
        for size in range(1, members.size + 1):
            for subset in itertools.combinations(members, size):
                s = list(subset)
                values.append((core_num[k] + num[s].sum()) / (core_den[k] + den[s].sum()))
        if not values:
            assert np.isnan(found[k])
        else:
            assert found[k] == pytest.approx(max(values) if largest else min(values), rel=1e-12)


def test_map_bounds_unchanged_on_20000_samples(monkeypatch):
    """The grid map's bounds and flags with the prefix formulation put back (the previous implementation)."""
    samples = smooth_scattered(20_000, 1)
    limits = Limits(max_pairs=10**13)
    found = variogram_map(samples, cell_size=25.0, cells=8, method="grid", limits=limits)
    monkeypatch.setattr(bounds, "_extreme", prefix_extreme)
    before = variogram_map(samples, cell_size=25.0, cells=8, method="grid", limits=limits)
    assert np.array_equal(np.isnan(found.error_bound), np.isnan(before.error_bound))
    np.testing.assert_allclose(found.error_bound, before.error_bound, rtol=1e-9, atol=1e-15)
    assert np.array_equal(found.bound_exceeded, before.bound_exceeded)
    assert np.array_equal(found.pair_bound, before.pair_bound)
