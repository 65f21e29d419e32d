"""Samples sent as an Apache Arrow IPC stream, and Arrow answers read back (needs pyarrow).

pyarrow is optional: without it every request is JSON. With it, :class:`~lagwise_client.Lagwise`
sends columnar samples of at least ``arrow_above`` samples (default :data:`ARROW_SAMPLES`) as a
``multipart/form-data`` request: part ``request`` (the options as JSON) and part ``samples``
(an Arrow stream of the columns x, y, z, values, ids, censored, detection_limits). A raster of at
least ``arrow_above`` cells goes the same way: its layout (origin, spacing, shape) in the request
part, its values as the stream's one column ``values`` (null for a missing cell). The service
gives the same numbers and the same ``provenance.input_sha256`` for either form.
"""

from __future__ import annotations

import importlib.util
import json
from collections.abc import Mapping
from typing import Any

from urllib3.filepost import encode_multipart_formdata  # urllib3 is requests' own transport

ARROW_MEDIA_TYPE = "application/vnd.apache.arrow.stream"
# Samples from which the client sends Arrow by default: about 1 MB of JSON.
ARROW_SAMPLES = 20_000
FLOAT_MEMBERS = ("x", "y", "z", "values", "detection_limits")
COLUMN_MEMBERS = (*FLOAT_MEMBERS, "ids", "censored")


def available() -> bool:
    """True when pyarrow can be imported."""
    return importlib.util.find_spec("pyarrow") is not None


def columnar(samples: Any) -> bool:
    """True for a ``samples`` member made only of columns (not GeoJSON, a raster or several variables)."""
    return isinstance(samples, Mapping) and "values" in samples and set(samples) <= set(COLUMN_MEMBERS)


def raster(samples: Any) -> bool:
    """True for the ``samples`` member of a raster (see :func:`~lagwise_client.raster_samples`)."""
    return (
        isinstance(samples, Mapping)
        and set(samples) == {"raster"}
        and isinstance(samples["raster"], Mapping)
        and "values" in samples["raster"]
    )


def _fits(name: str, values: Any) -> bool:
    """False for a column that pyarrow would convert but the JSON form refuses: booleans among the
    numbers (pyarrow reads True as 1.0), numbers as ``censored`` flags (pyarrow reads 1 as True)."""
    kind = getattr(getattr(values, "dtype", None), "kind", None)
    if name == "censored":
        return kind in (None, "b", "O")  # lists and object arrays are checked by pyarrow itself
    if kind is not None and kind != "O":
        return kind in ("i", "u", "f")
    return not any(isinstance(v, bool) for v in values)


def raster_table(values: Any) -> Any:
    """The Arrow table of a raster's values (one float64 column ``values``, None as null), or None
    when a value is not a number (such a raster goes as JSON, and the service names the bad cell)."""
    import pyarrow as pa

    if not _fits("values", values):
        return None
    try:
        return pa.table({"values": pa.array(values, type=pa.float64())})
    except (pa.ArrowException, TypeError, ValueError, OverflowError):
        return None


def samples_table(samples: Mapping[str, Any]) -> Any:
    """The Arrow table of columnar samples (a ``pyarrow.Table``), or None when a column does not fit
    its Arrow type (e.g. text among the numbers): such samples go as JSON, and the service names the
    bad entry."""
    import pyarrow as pa

    types = {name: pa.float64() for name in FLOAT_MEMBERS} | {"ids": pa.string(), "censored": pa.bool_()}
    if not all(_fits(name, samples[name]) for name in samples if name != "ids"):
        return None
    try:
        return pa.table({name: pa.array(samples[name], type=types[name]) for name in samples})
    except (pa.ArrowException, TypeError, ValueError, OverflowError):
        return None


def non_finite(table: Any, prefix: str, limit: int) -> tuple[list[str], int]:
    """The JSON pointers (``<prefix>/<column>/<index>``) of the first ``limit`` NaN or Infinity values
    of ``table``'s float columns, column by column as the samples member lists them, and their total
    (null is not counted: it marks a missing value)."""
    import pyarrow as pa
    import pyarrow.compute as pc

    pointers: list[str] = []
    total = 0
    for name in table.column_names:
        column = table.column(name)
        if not pa.types.is_floating(column.type):
            continue
        bad = pc.invert(pc.is_finite(column))
        count = pc.sum(bad).as_py() or 0
        if count and len(pointers) < limit:
            indices = pc.indices_nonzero(bad).slice(0, limit - len(pointers)).to_pylist()
            pointers += [f"{prefix}/{name}/{i}" for i in indices]
        total += count
    return pointers, total


def table_stream(table: Any) -> bytes:
    """The Arrow IPC stream of a table."""
    import pyarrow as pa

    sink = pa.BufferOutputStream()
    with pa.ipc.new_stream(sink, table.schema) as writer:
        writer.write_table(table)
    return sink.getvalue().to_pybytes()


def samples_stream(samples: Mapping[str, Any]) -> bytes | None:
    """The Arrow IPC stream of columnar samples, or None when a column does not fit its Arrow type
    (see :func:`samples_table`)."""
    table = samples_table(samples)
    return None if table is None else table_stream(table)


def multipart_body(options: bytes, stream: bytes) -> tuple[bytes, str]:
    """The multipart/form-data body (``request`` and ``samples`` parts) and its Content-Type."""
    return encode_multipart_formdata(
        {
            "request": ("request.json", options, "application/json"),
            "samples": ("samples.arrows", stream, ARROW_MEDIA_TYPE),
        }
    )


def _key(node: Any, token: str) -> str | int:
    """A JSON Pointer reference token (RFC 6901) as an array index or a member name of ``node``."""
    return int(token) if isinstance(node, list) else token.replace("~1", "/").replace("~0", "~")


def answer_document(data: bytes) -> dict:
    """The JSON document of an Arrow answer: each column (a list, None for null) put back at its
    JSON Pointer (the column name without the leading slash, e.g. ``quantiles/p10`` or
    ``exceedance/0/probability``) into the members kept as JSON text in the schema metadata."""
    import pyarrow as pa

    table = pa.ipc.open_stream(data).read_all()
    document = json.loads(table.schema.metadata[b"response"])
    for name in table.column_names:
        *parents, last = name.split("/")
        node: Any = document
        for token in parents:
            node = node[_key(node, token)]
        node[_key(node, last)] = table.column(name).to_pylist()
    return document
