"""Strict JSON in and out.

Bodies are parsed with orjson, which rejects NaN and Infinity literals (the problem names
the literal and its character position), invalid UTF-8 and nesting deeper than 1024
levels (all malformed: 400). A number that
overflows a double (``1e400``) is well-formed JSON but not a usable value: such a
body is parsed again with the standard library so that validation can name the
field (422). Output uses orjson with numpy support; any NaN or infinity that
reached it would be written as ``null``.

A member named twice in one object (``{"width": 1, "width": 2}``) is refused rather than
read as the last one: orjson keeps the last without telling, so the raw body is scanned
once (:mod:`lagwise.api.members`), and only when that pass finds a possible repeat is the
body parsed again by the standard library, keeping each object's members in order, to
name it (:func:`repeated_member`).
"""

from __future__ import annotations

import json
from typing import Any

import numpy as np
import orjson

from ..core.data.identifiers import CompactIds
from .fields import pointer_token


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


class _Repeats(dict):
    """An object parsed by the standard library in which ``repeated`` was given more than once."""

    repeated: str


def _keep_repeats(pairs: list[tuple[str, Any]]) -> dict:
    found = dict(pairs)
    if len(found) == len(pairs):
        return found
    marked = _Repeats(found)
    seen: set[str] = set()
    for key, _ in pairs:
        if key in seen:
            marked.repeated = key
            break
        seen.add(key)
    return marked


def repeated_member(body: bytes) -> str | None:
    """The JSON Pointer of the first member (in document order) named twice in one object of
    ``body``, or None; ``""`` when the body is too deeply nested for the standard library to tell.

    ``body`` is strict JSON already (parsed by :func:`parse`): this parse is exact, not fast.
    """
    try:
        document = json.loads(body, object_pairs_hook=_keep_repeats)
    except RecursionError:
        return ""
    stack: list[tuple[Any, str]] = [(document, "")] if isinstance(document, dict | list) else []
    while stack:
        node, pointer = stack.pop()
        if isinstance(node, _Repeats):
            return f"{pointer}/{pointer_token(node.repeated)}"
        children = list(node.items()) if isinstance(node, dict) else list(enumerate(node))
        stack.extend(
            (value, f"{pointer}/{pointer_token(str(key))}")
            for key, value in reversed(children)
            if isinstance(value, dict | list)
        )
    return None


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
