"""Unit tests of lagwise.core.data.locations and the duplicates policies built on it.

The reference throughout is ``numpy.unique(coords, axis=0, return_index=True, return_inverse=True,
return_counts=True)`` (NumPy), with the policies written out on its numbering.
"""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data import locations as module
from lagwise.core.data.identifiers import CompactIds
from lagwise.core.data.locations import kept_rows, locations, repeated_locations
from lagwise.core.data.samples import build_sample_set
from lagwise.core.data.variables import VariableInput, build_multi_sample_set
from lagwise.core.errors import InvalidInput


def _unique(coords):
    _, first, inverse, counts = np.unique(coords, axis=0, return_index=True, return_inverse=True, return_counts=True)
    return first, inverse.reshape(-1), counts


def _coords(rng, n, d):
    coords = rng.integers(0, 6, (n, d)).astype(float)
    coords[::7, 0] = -0.0  # equal to 0.0 as a number
    coords[1::7, 0] = 0.0
    return coords


def _reference_groups(coords):
    """Repeated locations numbered in numpy.unique's order, -1 for single samples."""
    _, inverse, counts = _unique(coords)
    several = counts > 1
    number = np.cumsum(several) - 1
    return np.where(several[inverse], number[inverse], -1), counts[several]


@pytest.fixture(params=["hash", "every row collides", "half the rows collide"])
def hashing(request, monkeypatch):
    """The hash only narrows the search: forced collisions must not change the answer."""
    if request.param == "every row collides":
        monkeypatch.setattr(module, "_row_hashes", lambda c: np.zeros(c.shape[0], dtype=np.uint64))
    elif request.param == "half the rows collide":
        real = module._row_hashes
        monkeypatch.setattr(module, "_row_hashes", lambda c: np.where(c[:, -1] > 2, np.uint64(7), real(c)))
    return request.param


def test_locations_number_like_numpy_unique():
    rng = np.random.default_rng(17)
    for d in (1, 2, 3):
        coords = _coords(rng, 3000, d)
        first, inverse, counts = _unique(coords)
        got_first, got_inverse, got_counts = locations(coords)
        np.testing.assert_array_equal(got_first, first)
        np.testing.assert_array_equal(got_inverse, inverse)
        np.testing.assert_array_equal(got_counts, counts)


@pytest.mark.parametrize("d", [1, 2, 3])
@pytest.mark.parametrize("n, span", [(3000, 6), (5000, 60), (200, 10**6)])
def test_repeated_locations_match_numpy_unique(hashing, d, n, span):
    rng = np.random.default_rng(n + d)
    coords = rng.integers(0, span, (n, d)).astype(float) * 0.1
    coords[::5, 0] = -0.0
    coords[2::5, 0] = 0.0
    group, counts = repeated_locations(coords)
    want_group, want_counts = _reference_groups(coords)
    np.testing.assert_array_equal(group, want_group)
    np.testing.assert_array_equal(counts, want_counts)
    np.testing.assert_array_equal(kept_rows(group), np.sort(_unique(coords)[0]))


def test_no_duplicates_among_uniform_samples():
    coords = np.random.default_rng(3).uniform(0, 1000, (100_000, 2))
    group, counts = repeated_locations(coords)
    assert counts.size == 0 and (group == -1).all()


def _reference_set(values, coords, policy):
    """The duplicates policies on numpy.unique's numbering (values, kept input index)."""
    first, inverse, counts = _unique(coords)
    order = np.sort(first)
    if policy == "average":
        return (np.bincount(inverse, weights=values) / counts)[inverse[order]], order
    return values[order], order


@pytest.mark.parametrize("policy", ["average", "first"])
def test_policies_match_the_numpy_unique_reference(hashing, policy):
    rng = np.random.default_rng(5)
    coords = _coords(rng, 4000, 2)
    values = rng.normal(size=4000)
    samples = build_sample_set(values, coords[:, 0], coords[:, 1], duplicates=policy)
    want_values, want_order = _reference_set(values, coords, policy)
    np.testing.assert_array_equal(samples.values, want_values)
    np.testing.assert_array_equal(samples.source_index, want_order)
    np.testing.assert_array_equal(samples.coords, coords[want_order])
    assert list(samples.ids) == [str(i) for i in want_order]
    assert samples.duplicates.removed == 4000 - want_order.size
    assert samples.duplicates.locations == int((_unique(coords)[2] > 1).sum())


def test_reject_names_the_first_twenty_locations_in_numpy_unique_order(hashing):
    rng = np.random.default_rng(9)
    coords = _coords(rng, 500, 2)
    _, inverse, counts = _unique(coords)
    want = []
    for group in np.flatnonzero(counts > 1)[:20]:
        members = np.flatnonzero(inverse == group)
        want.append((f"/samples/x/{members[1]}", f"sample {members[1]} is at the same location as sample {members[0]}"))
    with pytest.raises(InvalidInput) as info:
        build_sample_set(rng.normal(size=500), coords[:, 0], coords[:, 1], duplicates="reject")
    got = [(issue.pointer, issue.detail.split(" (")[0]) for issue in info.value.issues]
    assert got == want


@pytest.mark.parametrize("policy", ["average", "first"])
def test_several_variables_match_the_numpy_unique_reference(hashing, policy):
    rng = np.random.default_rng(6)
    n = 3000
    coords = _coords(rng, n, 2)
    table = rng.normal(size=(n, 2))
    table[rng.random((n, 2)) < 0.3] = np.nan
    given = [VariableInput(name, table[:, k].tolist()) for k, name in enumerate(("lead", "zinc"))]
    samples = build_multi_sample_set(given, coords[:, 0], coords[:, 1], duplicates=policy)
    first, inverse, counts = _unique(coords)
    order = np.sort(first)
    want = np.full((counts.size, 2), np.nan)
    for k in range(2):
        for g in range(counts.size):
            column = table[inverse == g, k]
            measured = column[~np.isnan(column)]
            if measured.size:
                # Summed in input order, as a sequential bincount does.
                want[g, k] = sum(measured.tolist()) / measured.size if policy == "average" else measured[0]
    np.testing.assert_array_equal(samples.values, want[inverse[order]])
    np.testing.assert_array_equal(samples.source_index, order)


def test_index_ids_read_as_text_and_follow_subsets():
    samples = build_sample_set([1.0, 2.0, 3.0, 4.0], [0.0, 1.0, 1.0, 2.0])
    assert isinstance(samples.ids, CompactIds)
    assert list(samples.ids) == ["0", "1", "3"] and samples.ids[2] == "3" and samples.ids == ("0", "1", "3")
    part = samples.subset(np.array([False, True, True]))
    assert list(part.ids) == ["1", "3"] and part.ids[-1] == "3" and list(part.ids[:1]) == ["1"]
    given = build_sample_set([1.0, 2.0, 3.0], [0.0, 1.0, 2.0], ids=["a", "b", "c"])
    assert given.subset(np.array([True, False, True])).ids == ("a", "c")
