"""Sample identifiers, held compactly and made into text only when read.

Ten million samples would otherwise cost ten million Python strings (several seconds and
about 600 MB) for identifiers that only a few per-sample answers (cross-validation, weights,
singular-system messages) ever read. Identifiers take one of three forms:

* a tuple of str: identifiers given in JSON (already Python strings);
* :class:`IndexIds`: the input index of samples sent without ids (no array at all), and
  :class:`IntegerIds`: integers read as their decimal text — an integer ``ids`` column of an
  Arrow stream, a raster's cell numbers, the index ids of a subset;
* :class:`TextIds`: UTF-8 bytes and offsets (the layout of an Arrow string column, viewed
  without copying), with the column's rows in the set's order.

Repeated identifiers are refused (:func:`check_distinct`) with the same issues whatever the
form: one per repeat, in input order, at the later sample, naming the first sample with that id.
"""

from __future__ import annotations

from collections.abc import Hashable, Iterator, Sequence
from typing import overload

import numpy as np
from numba import njit

from ..errors import FieldIssue, InvalidInput

MAX_LISTED = 20
# Odd 64-bit multipliers of the splitmix64 finaliser (Steele, Lea and Flood 2014).
_MIX_1 = np.uint64(0xBF58476D1CE4E5B9)
_MIX_2 = np.uint64(0x94D049BB133111EB)
# Integer ids spanning at most this many values per id are checked with a bit per value.
DENSE_SPAN_PER_ID = 8


class CompactIds(Sequence[str]):
    """Identifiers kept as arrays; an element becomes a str when it is read.

    Subclasses give :meth:`__len__`, :meth:`take` (the identifiers at some rows),
    :meth:`_text` (one identifier), and for the search of repeats :meth:`_hashes` (one
    integer per row, equal wherever the identifiers are equal) and :meth:`_key` (a row's
    exact key); :meth:`_distinct_quickly` may prove the identifiers distinct without a sort.
    """

    def take(self, rows: np.ndarray) -> CompactIds:
        """The identifiers at the integer positions ``rows``, in that order."""
        raise NotImplementedError

    def _text(self, i: int) -> str:
        raise NotImplementedError

    def _hashes(self) -> tuple[np.ndarray, bool]:
        """Per row an integer, equal for equal identifiers, and whether the array is a fresh one
        (which the search may sort in place)."""
        raise NotImplementedError

    def _key(self, row: int) -> Hashable:
        """The exact key of the identifier at ``row`` (equal keys: equal identifiers)."""
        raise NotImplementedError

    def _distinct_quickly(self) -> bool:
        """True when a check cheaper than the sort proves the identifiers distinct."""
        return False

    @overload
    def __getitem__(self, i: int) -> str: ...

    @overload
    def __getitem__(self, i: slice) -> CompactIds: ...

    def __getitem__(self, i):
        if isinstance(i, slice):
            return self.take(np.arange(*i.indices(len(self))))
        index = int(i)
        if not -len(self) <= index < len(self):
            raise IndexError("identifier index out of range")
        return self._text(index % len(self))

    def __iter__(self) -> Iterator[str]:
        return (self._text(i) for i in range(len(self)))

    def __eq__(self, other: object) -> bool:
        return (
            isinstance(other, Sequence)
            and len(other) == len(self)
            and all(a == b for a, b in zip(self, other, strict=True))
        )

    __hash__ = None  # type: ignore[assignment]  # array-backed, like a list

    def repeats(self, limit: int = MAX_LISTED) -> list[tuple[int, int]]:
        """The first ``limit`` repeats as (row, first row with that identifier), in row order.

        One sort of an integer per row finds the rows whose integer repeats (O(n log n),
        vectorised); only those candidates are compared exactly, so hash collisions cost
        time, never a wrong answer.
        """
        if self._distinct_quickly():
            return []
        hashes, fresh = self._hashes()
        ordered = hashes if fresh else hashes.copy()
        ordered.sort()
        same = ordered[1:] == ordered[:-1]
        if not same.any():
            return []
        repeated = np.unique(ordered[1:][same])
        if fresh:
            hashes, _ = self._hashes()
        where = np.minimum(np.searchsorted(repeated, hashes), repeated.size - 1)
        candidates = np.flatnonzero(repeated[where] == hashes)
        return _first_repeats(((int(row), self._key(int(row))) for row in candidates), limit)


class IntegerIds(CompactIds):
    """Integer identifiers, read as their decimal text (``7`` is ``"7"``).

    Parameters
    ----------
    numbers : ndarray of int, shape (n,)
        The identifiers in the set's order (any integer type; kept as given).
    """

    def __init__(self, numbers: np.ndarray) -> None:
        numbers = np.asarray(numbers)
        if numbers.dtype.kind not in "iu":
            raise TypeError(f"integer identifiers need an integer array, got {numbers.dtype}")
        # A read-only view, as TextIds' arrays are: one array type for the compiled check.
        self.numbers = numbers.view()
        self.numbers.flags.writeable = False

    def __len__(self) -> int:
        return int(self.numbers.size)

    def take(self, rows: np.ndarray) -> IntegerIds:
        return IntegerIds(self.numbers[rows])

    def _text(self, i: int) -> str:
        return str(int(self.numbers[i]))

    def __iter__(self) -> Iterator[str]:
        return (str(v) for v in self.numbers.tolist())

    # Distinct integers have distinct decimal texts: the numbers are their own hashes and keys.
    def _hashes(self):
        return self.numbers, False

    def _key(self, row):
        return int(self.numbers[row])

    def _distinct_quickly(self):
        """A bit per value from the smallest to the largest, when that span is small (sample
        numbers, raster cells): one pass, at most ``DENSE_SPAN_PER_ID`` bits per id."""
        if self.numbers.size == 0:
            return True
        low, high = self.numbers.min(), self.numbers.max()
        span = int(high) - int(low) + 1
        return span <= DENSE_SPAN_PER_ID * self.numbers.size and _distinct_in_span(self.numbers, low, span)


class IndexIds(CompactIds):
    """The identifiers of samples sent without ids: each one's input index, as text; no array.

    Parameters
    ----------
    size : int
        The number of samples (identifiers ``"0"`` .. ``str(size - 1)``).
    """

    def __init__(self, size: int) -> None:
        self.size = int(size)

    def __len__(self) -> int:
        return self.size

    def take(self, rows: np.ndarray) -> IntegerIds:
        return IntegerIds(np.asarray(rows, dtype=np.int64))

    def _text(self, i: int) -> str:
        return str(i)

    def __iter__(self) -> Iterator[str]:
        return map(str, range(self.size))

    def _distinct_quickly(self):
        return True  # input indices are distinct: the search never needs hashes


class TextIds(CompactIds):
    """Text identifiers as UTF-8 bytes and offsets (Arrow's string layout).

    Parameters
    ----------
    data : ndarray of uint8
        The identifiers' UTF-8 bytes, one after the other.
    offsets : ndarray of int32 or int64, shape (m + 1,)
        Identifier ``j`` of the column is ``data[offsets[j]:offsets[j + 1]]``.
    rows : ndarray of int, shape (n,), optional
        The column's identifier of each sample, in the set's order; default the column as it is.
    """

    def __init__(self, data: np.ndarray, offsets: np.ndarray, rows: np.ndarray | None = None) -> None:
        # Read-only views: the identifiers cannot change under the set, and the hash kernel
        # sees one array type whatever buffer they came from (compiled once, in warmup.compile_kernels).
        self.data = np.ascontiguousarray(data, dtype=np.uint8).view()
        self.offsets = np.ascontiguousarray(offsets).view()
        if self.offsets.dtype not in (np.int32, np.int64) or self.offsets.ndim != 1 or self.offsets.size == 0:
            raise TypeError("offsets must be a non-empty int32 or int64 array")
        self.data.flags.writeable = False
        self.offsets.flags.writeable = False
        self.rows = None if rows is None else np.asarray(rows, dtype=np.int64)
        self._bytes = memoryview(self.data.data)

    @classmethod
    def from_strings(cls, strings: Sequence[str]) -> TextIds:
        """The identifiers of a sequence of str (encoded once; for tests and small inputs)."""
        encoded = [s.encode("utf-8") for s in strings]
        lengths = np.fromiter((len(e) for e in encoded), dtype=np.int64, count=len(encoded))
        offsets = np.concatenate([[0], np.cumsum(lengths)]).astype(np.int64)
        return cls(np.frombuffer(b"".join(encoded), dtype=np.uint8), offsets)

    def __len__(self) -> int:
        return int(self.offsets.size - 1 if self.rows is None else self.rows.size)

    def take(self, rows: np.ndarray) -> TextIds:
        rows = np.asarray(rows, dtype=np.int64)
        return TextIds(self.data, self.offsets, rows if self.rows is None else self.rows[rows])

    def _text(self, i: int) -> str:
        row = i if self.rows is None else int(self.rows[i])
        return str(self._bytes[int(self.offsets[row]) : int(self.offsets[row + 1])], "utf-8")

    def _hashes(self):
        hashes = _text_hashes(self.data, self.offsets)
        return (hashes if self.rows is None else hashes[self.rows]), True

    def _key(self, row):
        return self._text(row)


@njit(cache=True)
def _text_hashes(data, offsets):
    """A 64-bit hash of each identifier's bytes: equal texts hash alike.

    The length, then each 8-byte word (little-endian, the last one zero-padded) is mixed in
    by an xor, a multiplication by an odd constant and an xor-shift (the steps of the
    splitmix64 finaliser, Steele, Lea and Flood 2014): each step is a bijection of the
    running hash, so texts of one length that differ in their last word never collide.
    """
    count = offsets.size - 1
    out = np.empty(count, dtype=np.uint64)
    for j in range(count):
        k, end = np.int64(offsets[j]), np.int64(offsets[j + 1])
        h = np.uint64(end - k) * _MIX_2
        while k + 8 <= end:
            # Eight byte loads written out: the compiler joins them into one 64-bit load.
            word = (
                np.uint64(data[k])
                | np.uint64(data[k + 1]) << np.uint64(8)
                | np.uint64(data[k + 2]) << np.uint64(16)
                | np.uint64(data[k + 3]) << np.uint64(24)
                | np.uint64(data[k + 4]) << np.uint64(32)
                | np.uint64(data[k + 5]) << np.uint64(40)
                | np.uint64(data[k + 6]) << np.uint64(48)
                | np.uint64(data[k + 7]) << np.uint64(56)
            )
            h = (h ^ word) * _MIX_1
            h ^= h >> np.uint64(31)
            k += 8
        if k < end:
            word, shift = np.uint64(0), np.uint64(0)
            while k < end:
                word |= np.uint64(data[k]) << shift
                shift += np.uint64(8)
                k += 1
            h = (h ^ word) * _MIX_1
            h ^= h >> np.uint64(31)
        h = (h ^ (h >> np.uint64(30))) * _MIX_2
        out[j] = h ^ (h >> np.uint64(31))
    return out


@njit(cache=True)
def _distinct_in_span(numbers, low, span):
    """True when no two of ``numbers`` (all within ``low`` .. ``low + span - 1``) are equal."""
    seen = np.zeros((span + 7) // 8, dtype=np.uint8)
    for i in range(numbers.size):
        v = np.int64(numbers[i] - low)
        byte, bit = v >> 3, np.uint8(1 << (v & 7))
        if seen[byte] & bit:
            return False
        seen[byte] |= bit
    return True


def _first_repeats(keyed, limit: int) -> list[tuple[int, int]]:
    """(row, first row with the same key) for each repeat of ``keyed`` ((row, key) in row order)."""
    first: dict[Hashable, int] = {}
    found: list[tuple[int, int]] = []
    for row, key in keyed:
        earlier = first.setdefault(key, row)
        if earlier != row:
            found.append((row, earlier))
            if len(found) == limit:
                break
    return found


def given_ids(ids: Sequence | None, n: int) -> Sequence[str]:
    """The identifiers of a set of ``n`` samples: as held when compact, else as a tuple of str;
    the input index (:class:`IndexIds`) when none are given."""
    if ids is None:
        return IndexIds(n)
    if isinstance(ids, CompactIds):
        return ids
    return tuple(str(i) for i in ids)


def pick_ids(ids: Sequence[str], rows: np.ndarray) -> Sequence[str]:
    """The identifiers at ``rows`` (integer positions or a boolean mask), in that order."""
    rows = np.flatnonzero(rows) if np.asarray(rows).dtype == bool else np.asarray(rows)
    if isinstance(ids, CompactIds):
        return ids.take(rows)
    return tuple(ids[i] for i in rows.tolist())


def check_distinct(ids: Sequence[str], pointer_for) -> None:
    """Refuse identifiers given more than once, naming each repeat and the sample it repeats.

    Parameters
    ----------
    ids : sequence of str
        The given identifiers, in input order (a tuple of str or a :class:`CompactIds`).
    pointer_for : callable
        ``pointer_for("ids", i)``: the JSON Pointer of sample ``i``'s identifier.

    Raises
    ------
    InvalidInput
        One issue per repeat (at most 20), at the later sample, naming the earlier one.
    """
    if isinstance(ids, CompactIds):
        found = ids.repeats(MAX_LISTED)
    elif len(set(ids)) == len(ids):
        return
    else:
        found = _first_repeats(enumerate(ids), MAX_LISTED)
    if found:
        raise InvalidInput(
            [
                FieldIssue(
                    pointer_for("ids", row),
                    f"repeats the id {ids[row][:60]!r} of sample {earlier}; ids must be distinct",
                )
                for row, earlier in found
            ]
        )
