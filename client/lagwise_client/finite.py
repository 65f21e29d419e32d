"""Find the NaN and Infinity values of a request body before it is sent.

JSON cannot carry them, so the client refuses such a body itself; these helpers name each
offending value by its JSON pointer (RFC 6901) into the body, as the service does.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

MAX_LISTED = 20  # as many as the service lists for one sample member
DETAIL = "not a finite number"


def _token(key: Any) -> str:
    return str(key).replace("~", "~0").replace("/", "~1")


class _Walk:
    """The pointers of the first ``limit`` non-finite numbers of a document, and their total."""

    def __init__(self, limit: int):
        self.limit = limit
        self.pointers: list[str] = []
        self.total = 0

    def add(self, pointer: str) -> None:
        self.total += 1
        if len(self.pointers) < self.limit:
            self.pointers.append(pointer)

    def array(self, array: Any, pointer: str) -> bool:
        """Walk a numeric numpy array (vectorised); False when ``array`` is not one (object
        arrays and other sequences are walked element by element)."""
        kind = getattr(getattr(array, "dtype", None), "kind", None)
        if kind in ("b", "i", "u"):
            return True
        if kind not in ("f", "c") or not hasattr(array, "shape"):
            return False
        import numpy as np  # only reached with a numpy array in hand

        bad = ~np.isfinite(np.asarray(array))
        room = self.limit - len(self.pointers)
        self.pointers += [pointer + "".join(f"/{int(i)}" for i in index) for index in np.argwhere(bad)[:room]]
        self.total += int(np.count_nonzero(bad))
        return True

    def value(self, value: Any, pointer: str) -> None:
        if isinstance(value, float):
            if not math.isfinite(value):
                self.add(pointer)
        elif isinstance(value, str | bytes | bool | int) or value is None:
            return
        elif isinstance(value, Mapping):
            for key, member in value.items():
                self.value(member, f"{pointer}/{_token(key)}")
        elif self.array(value, pointer):
            return
        elif hasattr(value, "to_numpy"):  # a pandas Series
            self.value(value.to_numpy(), pointer)
        elif hasattr(value, "tolist"):  # an object array or a numpy scalar
            self.value(value.tolist(), pointer)
        elif isinstance(value, list | tuple):
            for i, element in enumerate(value):
                self.value(element, f"{pointer}/{i}")


def non_finite_errors(body: Any, limit: int = MAX_LISTED) -> tuple[list[dict], int]:
    """``{"pointer", "detail"}`` for the first ``limit`` NaN or Infinity values of ``body``.

    Parameters
    ----------
    body : JSON-like
        Mappings, lists, tuples, numbers, numpy arrays and scalars, pandas Series.
    limit : int
        At most this many entries, in document order (row-major within an array).

    Returns
    -------
    errors : list of dict
        Pointers from the body's root (``/samples/values/1``); empty when every number is finite.
    total : int
        How many values are not finite, listed or not.
    """
    walk = _Walk(limit)
    walk.value(body, "")
    return [{"pointer": p, "detail": DETAIL} for p in walk.pointers], walk.total
