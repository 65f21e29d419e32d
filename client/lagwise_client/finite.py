"""Find the NaN and Infinity values of a request body before it is sent.

JSON cannot carry them, so the client refuses such a body itself; these helpers name each
offending value by its JSON pointer (RFC 6901) into the body, as the service does.
"""

from __future__ import annotations

import math
from collections.abc import Iterator, Mapping
from typing import Any

MAX_LISTED = 20  # as many as the service lists for one sample member
DETAIL = "not a finite number"


def _token(key: Any) -> str:
    return str(key).replace("~", "~0").replace("/", "~1")


def _array_pointers(array: Any, pointer: str) -> Iterator[str] | None:
    """Pointers of the non-finite elements of a numeric numpy array (vectorised), or None when
    ``array`` is not one (object arrays and other sequences are walked element by element)."""
    kind = getattr(getattr(array, "dtype", None), "kind", None)
    if kind in ("b", "i", "u"):
        return iter(())
    if kind not in ("f", "c") or not hasattr(array, "shape"):
        return None
    import numpy as np  # only reached with a numpy array in hand

    bad = np.argwhere(~np.isfinite(np.asarray(array)))[:MAX_LISTED]
    return (pointer + "".join(f"/{int(i)}" for i in index) for index in bad)


def _pointers(value: Any, pointer: str) -> Iterator[str]:
    if isinstance(value, float):
        if not math.isfinite(value):
            yield pointer
        return
    if isinstance(value, str | bytes | bool | int) or value is None:
        return
    if isinstance(value, Mapping):
        for key, member in value.items():
            yield from _pointers(member, f"{pointer}/{_token(key)}")
        return
    from_array = _array_pointers(value, pointer)
    if from_array is not None:
        yield from from_array
        return
    if hasattr(value, "to_numpy"):  # a pandas Series
        yield from _pointers(value.to_numpy(), pointer)
        return
    if hasattr(value, "tolist"):  # an object array or a numpy scalar
        yield from _pointers(value.tolist(), pointer)
        return
    if isinstance(value, list | tuple):
        for i, element in enumerate(value):
            yield from _pointers(element, f"{pointer}/{i}")


def non_finite_errors(body: Any, limit: int = MAX_LISTED) -> list[dict]:
    """``{"pointer", "detail"}`` for the first ``limit`` NaN or Infinity values of ``body``.

    Parameters
    ----------
    body : JSON-like
        Mappings, lists, tuples, numbers, numpy arrays and scalars, pandas Series.
    limit : int
        At most this many entries, in document order (row-major within an array).

    Returns
    -------
    list of dict
        Pointers from the body's root (``/samples/values/1``); empty when every number is finite.
    """
    errors = []
    for pointer in _pointers(body, ""):
        errors.append({"pointer": pointer, "detail": DETAIL})
        if len(errors) >= limit:
            break
    return errors
