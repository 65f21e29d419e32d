"""Direct variograms of a batch in one pass equal the single-variable requests, to the bit.

Reference: each variable's experimental variogram computed alone on the samples where it
was measured (:func:`experimental_variogram`, itself checked against a brute-force
enumeration with ``scipy.spatial.distance.pdist`` in tests/reference/test_brute_force.py),
including the delete-one-block jackknife standard errors (Kuensch 1989, Annals of
Statistics 17(3)); the data are invented and heterotopic.
"""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.declustering import decluster
from lagwise.core.data.variables import VariableInput, build_multi_sample_set
from lagwise.core.variography.directions import DirectionClass
from lagwise.core.variography.experimental import experimental_variogram
from lagwise.core.variography.lags import LagRequest
from lagwise.core.variography.pairs import layout
from lagwise.core.variography.shared import Member, shared_variograms

FAN = [DirectionClass(a, 15.0) for a in (0.0, 30.0, 60.0, 90.0, 120.0, 150.0)]


def batch(n=400, seed=9):
    """Four invented variables: two on every sample, one on 60 %, one on 35 %."""
    rng = np.random.default_rng(seed)
    coords = rng.uniform(0, 500, (n, 2))
    base = np.sin(coords[:, 0] / 60.0) + np.cos(coords[:, 1] / 90.0)
    columns = {
        "a": base + 0.3 * rng.normal(size=n),
        "b": 5.0 - base + 0.5 * rng.normal(size=n),
        "c": 2.0 * base + rng.normal(size=n),
        "d": rng.normal(size=n) + 10.0,
    }
    columns["c"][rng.random(n) > 0.6] = np.nan
    columns["d"][rng.random(n) > 0.35] = np.nan
    inputs = [VariableInput(k, v) for k, v in columns.items()]
    return build_multi_sample_set(inputs, coords[:, 0], coords[:, 1])


CASES = [
    (LagRequest(), [None]),
    (LagRequest(), [None, FAN]),
    (LagRequest(auto="equal_pairs"), [None]),
    (LagRequest(width=40.0, count=8), [None, FAN]),
]


def grid_batch(seed=3):
    """Three invented variables on a 24 x 24 grid of spacing 10 (one measured at 60 % of the nodes):
    the diagonals lie on the boundary of two classes of the fan, so pairs are admitted by two directions."""
    rng = np.random.default_rng(seed)
    g = np.arange(24 * 24)
    coords = np.column_stack([(g % 24) * 10.0, (g // 24) * 10.0])
    columns = {
        "a": np.sin(g * 0.37) + 0.1 * rng.normal(size=g.size),
        "b": np.cos(coords[:, 0] / 40.0) + rng.normal(size=g.size),
        "c": rng.lognormal(1.0, 0.4, g.size),
    }
    columns["c"][rng.random(g.size) > 0.6] = np.nan
    return build_multi_sample_set([VariableInput(k, v) for k, v in columns.items()], coords[:, 0], coords[:, 1])


def strip_batch(seed=5):
    """Two invented variables on a strip 5000 x 1 of near-duplicate samples: the automatic classes
    across the strip are too narrow for the fast kernel's lookup table (its exact fallback runs)."""
    rng = np.random.default_rng(seed)
    base = np.column_stack([rng.uniform(0.0, 5000.0, 200), rng.uniform(0.0, 1.0, 200)])
    coords = np.concatenate([base, base + 1e-4 * rng.normal(size=(200, 2)), base + [0.0, 0.3]])
    columns = {"a": rng.normal(size=600), "b": rng.normal(size=600) + 3.0}
    columns["b"][rng.random(600) > 0.7] = np.nan
    return build_multi_sample_set([VariableInput(k, v) for k, v in columns.items()], coords[:, 0], coords[:, 1])


def batch_members(samples):
    members = []
    for name in samples.names:
        single = samples.variable(name)
        rows = np.flatnonzero(~np.isnan(samples.values[:, samples.index(name)]))
        members.append(Member(single, rows, decluster(single.coords, single.values)))
    return members


def each_equals_its_own_request(samples, lags, sets, statistic, min_pairs=30):
    members = batch_members(samples)
    found = shared_variograms(samples.coords, members, sets, lags=lags, statistic=statistic, min_pairs=min_pairs)
    for member, results in zip(members, found, strict=True):
        for directions, ours in zip(sets, results, strict=True):
            alone = experimental_variogram(
                member.samples, lags=lags, directions=directions, statistic=statistic, min_pairs=min_pairs,
                declustering=member.declustering,
            )  # fmt: skip
            assert ours.warnings == alone.warnings
            assert ours.summary == alone.summary
            assert ours.spacing == alone.spacing and ours.uncertainty == alone.uncertainty
            assert ours.colocated_pairs == alone.colocated_pairs
            # The same pairs summed in the same order as the single-variable kernels: equal to the bit.
            assert ours.directions == alone.directions


@pytest.mark.parametrize("statistic", ["semivariance", "covariance", "madogram"])
@pytest.mark.parametrize(("lags", "sets"), CASES)
def test_each_variable_equals_its_own_request(statistic, lags, sets):
    each_equals_its_own_request(batch(), lags, sets, statistic)


@pytest.mark.parametrize("statistic", ["semivariance", "covariance"])
def test_pairs_admitted_by_two_directions_are_summed_in_the_fast_kernels_order(statistic):
    """The fast kernel adds such pairs after the other pairs of their span of candidates."""
    each_equals_its_own_request(grid_batch(), LagRequest(), [None, FAN], statistic)


def test_classes_too_narrow_for_the_lookup_table():
    samples = strip_batch()
    alone = experimental_variogram(samples.variable("a"), directions=FAN, min_pairs=1)
    edges = [np.array([row.lower for row in d.classes] + [d.classes[-1].upper]) for d in alone.directions]
    assert not layout(FAN, edges).resolved
    each_equals_its_own_request(samples, LagRequest(), [None, FAN], "semivariance", min_pairs=1)


def test_ranges_of_rows_are_summed_as_the_single_variable_passes_sum_them(monkeypatch):
    """Large sets are swept in ranges of rows (deadline checks between them); the sums keep their order."""
    import lagwise.core.variography.pairs as pairs
    import lagwise.core.variography.shared as shared

    monkeypatch.setattr(pairs, "CHUNK_VISITS", 3000)
    monkeypatch.setattr(shared, "CHUNK_VISITS", 3000)
    samples = batch(n=300)
    members = batch_members(samples)
    found = shared_variograms(samples.coords, members, [None])
    for member, results in zip(members, found, strict=True):
        for directions, ours in zip([None], results, strict=True):
            alone = experimental_variogram(member.samples, directions=directions, declustering=member.declustering)
            assert ours.directions == alone.directions
