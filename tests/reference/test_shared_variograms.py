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
    (LagRequest(auto="equal_pairs"), [None]),
    (LagRequest(width=40.0, count=8), [None, FAN]),
]


@pytest.mark.parametrize("statistic", ["semivariance", "covariance", "madogram"])
@pytest.mark.parametrize(("lags", "sets"), CASES)
def test_each_variable_equals_its_own_request(statistic, lags, sets):
    samples = batch()
    members = []
    for name in samples.names:
        single = samples.variable(name)
        rows = np.flatnonzero(~np.isnan(samples.values[:, samples.index(name)]))
        members.append(Member(single, rows, decluster(single.coords, single.values)))
    found = shared_variograms(samples.coords, members, sets, lags=lags, statistic=statistic)
    for member, results in zip(members, found, strict=True):
        for directions, ours in zip(sets, results, strict=True):
            alone = experimental_variogram(
                member.samples, lags=lags, directions=directions, statistic=statistic, declustering=member.declustering
            )
            assert ours.warnings == alone.warnings
            assert ours.summary == alone.summary
            assert ours.spacing == alone.spacing and ours.uncertainty == alone.uncertainty
            assert ours.colocated_pairs == alone.colocated_pairs
            # The same pairs summed in the same order as the single-variable kernels: equal to the bit.
            assert ours.directions == alone.directions


def test_ranges_of_rows_are_summed_as_the_single_variable_passes_sum_them(monkeypatch):
    """Large sets are swept in ranges of rows (deadline checks between them); the sums keep their order."""
    import lagwise.core.variography.pairs as pairs
    import lagwise.core.variography.shared as shared

    monkeypatch.setattr(pairs, "CHUNK_VISITS", 3000)
    monkeypatch.setattr(shared, "CHUNK_VISITS", 3000)
    samples = batch(n=300)
    members = []
    for name in samples.names:
        single = samples.variable(name)
        rows = np.flatnonzero(~np.isnan(samples.values[:, samples.index(name)]))
        members.append(Member(single, rows, decluster(single.coords, single.values)))
    found = shared_variograms(samples.coords, members, [None])
    for member, results in zip(members, found, strict=True):
        for directions, ours in zip([None], results, strict=True):
            alone = experimental_variogram(member.samples, directions=directions, declustering=member.declustering)
            assert ours.directions == alone.directions
