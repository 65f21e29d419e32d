"""Compact identifiers (lagwise.core.data.identifiers): text read on demand, repeats found by a sort.

References: Python's own ``str``, ``bytes.decode`` and ``dict`` (the tuple-of-str path,
which keeps the first sample of each id while walking the input in order) for what every
compact form must read and refuse.
"""

from __future__ import annotations

import time

import numpy as np
import pytest
from lagwise.core.data.identifiers import IndexIds, IntegerIds, TextIds, check_distinct, given_ids, pick_ids
from lagwise.core.data.samples import build_sample_set, columnar_pointer
from lagwise.core.errors import InvalidInput


def refusal(ids) -> list[tuple[str, str]]:
    """(pointer, detail) of each issue check_distinct raises for ``ids``; [] when they are distinct."""
    try:
        check_distinct(ids, columnar_pointer)
    except InvalidInput as exc:
        return [(i.pointer, i.detail) for i in exc.issues]
    return []


def test_text_ids_read_their_bytes_as_str_and_follow_rows():
    words = ["BH-1", "", "Zürich 7", "BH-1b", "日本"]
    ids = TextIds.from_strings(words)
    assert list(ids) == words and len(ids) == 5
    assert ids[2] == "Zürich 7" and ids[-1] == "日本" and ids[1] == ""
    assert ids == tuple(words) and ids != words[:4]
    part = pick_ids(ids, np.array([4, 0, 2]))
    assert list(part) == ["日本", "BH-1", "Zürich 7"]
    assert list(pick_ids(part, np.array([True, False, True]))) == ["日本", "Zürich 7"]
    assert list(part[1:]) == ["BH-1", "Zürich 7"]
    with pytest.raises(IndexError):
        ids[5]


def test_text_ids_take_offsets_as_an_arrow_column_has_them():
    # A sliced column's offsets need not start at 0, and may be 32-bit (Arrow's string layout).
    data = np.frombuffer(b"xxabcdefg", dtype=np.uint8)
    ids = TextIds(data, np.array([2, 4, 4, 9], dtype=np.int32))
    assert list(ids) == ["ab", "", "cdefg"]
    assert not ids.data.flags.writeable and not ids.offsets.flags.writeable
    with pytest.raises(TypeError):
        TextIds(data, np.array([0.0, 1.0]))


def test_integer_ids_read_as_decimal_text():
    ids = IntegerIds(np.array([7, 3, 2**64 - 1], dtype=np.uint64)[[0, 2]])
    assert list(ids) == ["7", str(2**64 - 1)] and ids[1] == "18446744073709551615"
    signed = IntegerIds(np.array([7, -3, 0], dtype=np.int16))
    assert list(signed) == ["7", "-3", "0"] and list(signed.take(np.array([2, 1]))) == ["0", "-3"]
    with pytest.raises(TypeError):
        IntegerIds(np.array([1.5]))


def test_given_ids_keep_compact_forms_and_make_text_of_the_rest():
    compact = TextIds.from_strings(["a", "b"])
    assert given_ids(compact, 2) is compact
    assert given_ids([1, "b"], 2) == ("1", "b")
    assert isinstance(given_ids(None, 3), IndexIds) and list(given_ids(None, 3)) == ["0", "1", "2"]


def test_index_ids_hold_no_array_and_become_integers_when_picked():
    ids = IndexIds(10_000_000)
    assert len(ids) == 10_000_000 and ids[9_999_999] == "9999999" and ids[-2] == "9999998"
    assert ids.repeats() == [] and refusal(ids) == []
    part = pick_ids(ids, np.array([5, 2]))
    assert isinstance(part, IntegerIds) and list(part) == ["5", "2"]
    assert list(ids[3:6]) == ["3", "4", "5"]
    assert IndexIds(5).count("3") == 1 and IndexIds(5).index("4") == 4  # the Sequence methods still work


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_every_form_refuses_repeats_as_the_tuple_of_str_does(seed):
    rng = np.random.default_rng(seed)
    numbers = rng.integers(0, 400, 300)  # many repeats, some more than twice
    words = [f"S{v}" for v in numbers]
    want = refusal(tuple(words))
    assert len(want) == 20
    assert refusal(TextIds.from_strings(words)) == want
    assert refusal(IntegerIds(numbers)) == refusal(tuple(str(v) for v in numbers.tolist()))
    # Through a subset too (rows reordered): the row numbers are the subset's.
    order = rng.permutation(300)
    assert refusal(pick_ids(TextIds.from_strings(words), order)) == refusal(tuple(words[i] for i in order))


def test_distinct_ids_pass_in_every_form():
    words = [f"S{i}" for i in range(1000)]
    assert refusal(TextIds.from_strings(words)) == [] == refusal(IntegerIds(np.arange(1000)))


class _Colliding(TextIds):
    """Text ids whose every hash is the same: only the exact comparison tells them apart."""

    def _hashes(self):
        hashes, _ = super()._hashes()
        return np.zeros_like(hashes), True


def test_hash_collisions_never_read_as_repeats():
    words = ["a", "b", "c", "b", "d", "a"]
    colliding = _Colliding(TextIds.from_strings(words).data, TextIds.from_strings(words).offsets)
    assert colliding.repeats() == [(3, 1), (5, 0)] == TextIds.from_strings(words).repeats()
    assert _Colliding.from_strings(["x", "y", "z"]).repeats() == []


def test_one_repeat_among_a_million_text_ids_is_found_quickly():
    n = 1_000_000
    words = [f"BH-{i:08d}" for i in np.random.default_rng(4).permutation(n).tolist()]
    words[654_321] = words[12_345]
    ids = TextIds.from_strings(words)
    start = time.perf_counter()
    issues = refusal(ids)
    seconds = time.perf_counter() - start
    assert issues == [
        ("/samples/ids/654321", f"repeats the id {words[12_345]!r} of sample 12345; ids must be distinct")
    ]
    # The tuple-of-str check takes about 0.3 s here; the sort of a million hashes about 0.1 s unloaded.
    assert seconds < 5.0


def test_a_set_of_one_repeated_id_stops_at_twenty_issues():
    ids = IntegerIds(np.zeros(2_000_000, dtype=np.int64))
    issues = refusal(ids)
    assert [p for p, _ in issues] == [f"/samples/ids/{i}" for i in range(1, 21)]
    assert issues[0][1] == "repeats the id '0' of sample 0; ids must be distinct"


def test_sample_sets_keep_compact_ids_through_duplicates_and_subsets():
    ids = TextIds.from_strings(["a", "b", "c", "d"])
    samples = build_sample_set([1.0, 2.0, 3.0, 4.0], [0.0, 1.0, 1.0, 2.0], ids=ids)
    assert isinstance(samples.ids, TextIds) and samples.ids == ("a", "b", "d")
    assert samples.subset(np.array([False, True, True])).ids == ("b", "d")
    with pytest.raises(InvalidInput) as caught:
        build_sample_set([1.0, 2.0, 3.0], [0.0, 1.0, 2.0], ids=IntegerIds(np.array([4, 5, 4])))
    assert caught.value.issues[0].pointer == "/samples/ids/2"


@pytest.mark.parametrize(
    "numbers",
    [
        np.random.default_rng(8).permutation(5000),  # dense: a bit per value
        np.random.default_rng(8).permutation(5000) * 10**12,  # sparse: the sort
        np.arange(-120, 120, dtype=np.int8),  # dense across zero, in a narrow type
        np.array([2**64 - 1, 0, 2**63], dtype=np.uint64),
    ],
)
def test_integer_ids_dense_or_sparse_are_checked_alike(numbers):
    assert refusal(IntegerIds(numbers)) == []
    repeated = numbers.copy()
    repeated[-1] = repeated[1]
    text = tuple(str(v) for v in repeated.tolist())
    assert refusal(IntegerIds(repeated)) == refusal(text) != []
