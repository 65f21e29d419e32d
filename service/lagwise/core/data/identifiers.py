"""Sample identifiers: given text, or the input index as text, made only when read.

Ten million samples sent without ``ids`` would otherwise cost ten million Python strings
(several seconds and about 600 MB) for identifiers that only a few per-sample answers
(cross-validation, weights, singular-system messages) ever read.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from typing import overload

import numpy as np

from ..errors import FieldIssue, InvalidInput

MAX_LISTED = 20


class IndexIds(Sequence[str]):
    """The identifiers of samples given without ids: each sample's input index, as text.

    Parameters
    ----------
    positions : ndarray of int, shape (n,)
        The input index of each sample, in the set's order.
    """

    def __init__(self, positions: np.ndarray) -> None:
        self.positions = np.asarray(positions, dtype=np.int64)

    def __len__(self) -> int:
        return int(self.positions.size)

    @overload
    def __getitem__(self, i: int) -> str: ...

    @overload
    def __getitem__(self, i: slice) -> IndexIds: ...

    def __getitem__(self, i):
        if isinstance(i, slice):
            return IndexIds(self.positions[i])
        return str(int(self.positions[i]))

    def __iter__(self) -> Iterator[str]:
        return (str(i) for i in self.positions.tolist())

    def __eq__(self, other: object) -> bool:
        return (
            isinstance(other, Sequence)
            and len(other) == len(self)
            and all(a == b for a, b in zip(self, other, strict=True))
        )

    __hash__ = None  # type: ignore[assignment]  # mutable-array backed, like a list


def pick_ids(ids: Sequence[str], rows: np.ndarray) -> Sequence[str]:
    """The identifiers at ``rows`` (integer positions or a boolean mask), in that order."""
    rows = np.flatnonzero(rows) if np.asarray(rows).dtype == bool else np.asarray(rows)
    if isinstance(ids, IndexIds):
        return IndexIds(ids.positions[rows])
    return tuple(ids[i] for i in rows.tolist())


def check_distinct(ids: Sequence[str], pointer_for) -> None:
    """Refuse identifiers given more than once, naming each repeat and the sample it repeats.

    Parameters
    ----------
    ids : sequence of str
        The given identifiers (as text), in input order.
    pointer_for : callable
        ``pointer_for("ids", i)``: the JSON Pointer of sample ``i``'s identifier.

    Raises
    ------
    InvalidInput
        One issue per repeat (at most 20), at the later sample, naming the earlier one.
    """
    if len(set(ids)) == len(ids):
        return
    first: dict[str, int] = {}
    issues = []
    for index, identifier in enumerate(ids):
        earlier = first.setdefault(identifier, index)
        if earlier != index:
            issues.append(
                FieldIssue(
                    pointer_for("ids", index),
                    f"repeats the id {identifier[:60]!r} of sample {earlier}; ids must be distinct",
                )
            )
            if len(issues) == MAX_LISTED:
                break
    raise InvalidInput(issues)
