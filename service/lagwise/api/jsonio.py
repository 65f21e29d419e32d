"""Strict JSON in and out.

Bodies are parsed with orjson, which rejects NaN and Infinity literals (the problem names
the literal and its character position), invalid UTF-8 and nesting deeper than 1024
levels (all malformed: 400). A number that
overflows a double (``1e400``) is well-formed JSON but not a usable value: such a
body is parsed again with the standard library so that validation can name the
field (422). Output uses orjson with numpy support; any NaN or infinity that
reached it would be written as ``null``.
"""

from __future__ import annotations

import json
from typing import Any

import numpy as np
import orjson

from ..core.data.identifiers import CompactIds


class MalformedJSON(ValueError):
    """The body is not strict JSON."""


def _reject_constant(name: str) -> Any:
    raise MalformedJSON(f"{name} is not valid JSON (use null for a missing value)")


def _constant_at(body: bytes, position: int) -> str | None:
    """The NaN or Infinity literal where orjson stopped (it stops after a minus sign), if any."""
    for literal in (b"-Infinity", b"NaN", b"Infinity"):
        for start in (position, position - 1):
            if start >= 0 and body[start : start + len(literal)] == literal:
                return literal.decode()
    return None


def parse(body: bytes) -> Any:
    """Parse a request body strictly; raises :class:`MalformedJSON`."""
    try:
        return orjson.loads(body)
    except orjson.JSONDecodeError as exc:
        literal = _constant_at(body, exc.pos)
        if literal is not None:
            raise MalformedJSON(
                f"{literal} at character {exc.pos} is not valid JSON (use null for a missing value)"
            ) from None
        if "infinity" not in str(exc):
            raise MalformedJSON(str(exc)) from None
    try:
        return json.loads(body, parse_constant=_reject_constant)
    except RecursionError:
        raise MalformedJSON("nesting is too deep") from None
    except (ValueError, UnicodeDecodeError) as exc:
        raise MalformedJSON(str(exc)) from None


def _fallback(value: Any) -> Any:
    if isinstance(value, np.ndarray):
        return np.ascontiguousarray(value)
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, CompactIds):
        return list(value)
    raise TypeError(f"cannot serialise {type(value).__name__}")


def dumps(document: Any) -> bytes:
    """Serialise a response document (numpy arrays, strided views and scalars allowed)."""
    return orjson.dumps(document, default=_fallback, option=orjson.OPT_SERIALIZE_NUMPY)
