"""Counts taken before a body becomes Python objects, so a huge body is refused before it is held.

A parsed JSON value costs far more than its text: a float or a short string is an
object of 24 to 56 bytes plus an 8-byte slot in its list, so a 64 MB body of ``"a",``
becomes about 1.5 GB. Two counts run over the raw bytes:

* values: every JSON value but the first follows a comma or opens an array or object,
  so commas + brackets + braces + 1 bound the number of values from above (commas
  inside strings only make the bound larger); the count is taken by the one compiled
  pass of :mod:`lagwise.api.members` (which also looks for members named twice). Above
  the memory budget divided by :data:`VALUE_BYTES` the body is refused
  (``LAGWISE_MEMORY_BUDGET_BYTES``).
* GeoJSON points: every Point feature holds the string ``"Point"`` once, so a
  collection with more of them than ``LAGWISE_MAX_SAMPLES`` is refused before its
  features are parsed and converted.

After parsing, the lengths of the sample arrays (or of the features list) are checked
against ``LAGWISE_MAX_SAMPLES`` before validation and duplicate handling: the limit
counts the samples sent, not what remains after duplicates are merged.
"""

from __future__ import annotations

from ..core.errors import LimitExceeded
from ..core.limits import Limits

VALUE_BYTES = 48  # a parsed float or short string with its list slot, bytes (CPython 3.11, 64-bit)
COLUMNS = ("x", "y", "z", "values", "ids", "censored", "detection_limits")


def check_body(body: bytes, limits: Limits, values: int) -> None:
    """Refuse a raw JSON body whose values (``values``, the bound counted by :func:`lagwise.api.members.scan`)
    or GeoJSON points exceed the limits (see the module notes)."""
    if b'"geojson"' in body:
        points = body.count(b'"Point"')
        if points > limits.max_samples:
            raise LimitExceeded(
                "LAGWISE_MAX_SAMPLES",
                limits.max_samples,
                points,
                f'The body holds {points:,} "Point" geometries (counted before parsing). Send fewer samples '
                "per request (thin or split the data set).",
                "/samples/geojson/features",
            )
    if values * VALUE_BYTES > limits.memory_budget_bytes:
        raise LimitExceeded(
            "LAGWISE_MEMORY_BUDGET_BYTES",
            limits.memory_budget_bytes,
            values * VALUE_BYTES,
            f"The body holds up to {values:,} JSON values (counted before parsing), about {VALUE_BYTES} bytes "
            "each once parsed. Send fewer samples or targets per request.",
            "",
        )


def check_parsed(document: dict, limits: Limits) -> None:
    """Refuse more samples than ``LAGWISE_MAX_SAMPLES`` as sent, before validation and duplicate handling."""
    samples = document.get("samples")
    if not isinstance(samples, dict):
        return
    collection = samples.get("geojson")
    if isinstance(collection, dict) and isinstance(collection.get("features"), list):
        lengths = {"/samples/geojson/features": len(collection["features"])}
    else:
        lengths = {f"/samples/{name}": len(samples[name]) for name in COLUMNS if isinstance(samples.get(name), list)}
        variables = samples.get("variables")
        if isinstance(variables, dict):
            lengths.update(
                (f"/samples/variables/{name}", len(column))
                for name, column in variables.items()
                if isinstance(column, list)
            )
    for pointer, n in lengths.items():
        if n > limits.max_samples:
            raise LimitExceeded(
                "LAGWISE_MAX_SAMPLES",
                limits.max_samples,
                n,
                "Send fewer samples per request (thin or split the data set); the limit counts the samples "
                "sent, before duplicates are merged.",
                pointer,
            )
