"""Samples as an Apache Arrow IPC stream in, per-target columns as an Arrow stream out.

Requests
--------
A ``multipart/form-data`` body with two parts: ``request`` (``application/json``: the
options, without ``samples``) and ``samples`` (``application/vnd.apache.arrow.stream``:
columns ``x``, ``y``, ``z``, ``values`` and optionally ``ids``,
``censored``, ``detection_limits``; for a raster, the request part's ``samples`` holds
``{"raster": {"origin", "spacing", "shape"}}`` and the stream one column ``values``, x
fastest, null for a missing cell). The stream is checked in three steps before any
column is converted: its schema (names and types), then the rows of each record batch,
counted from the batch header (batches are views of the received buffer, nothing is
copied before the count passes), then nulls. The columns then take the same path as
JSON columns (schema validation, :func:`lagwise.api.convert.sample_set`), so the same
samples give the same numbers and the same ``provenance.input_sha256`` either way.

Answers
-------
With ``Accept: application/vnd.apache.arrow.stream``, an endpoint that answers per-target
columns (predictions) sends an Arrow stream: one float64 column per array (null where
the JSON answer has ``null``) and the rest of the JSON answer, as JSON text, in the
schema metadata under the key ``response``.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pyarrow as pa
from flask import request
from werkzeug.http import parse_options_header

from ..core.data.identifiers import CompactIds, IntegerIds, TextIds
from ..core.errors import FieldIssue, InvalidInput, LimitExceeded
from .fields import MISSING, pointer_token
from .jsonio import dumps
from .problems import Problem

ARROW_MEDIA_TYPE = "application/vnd.apache.arrow.stream"
MULTIPART_MEDIA_TYPE = "multipart/form-data"
JSON_MEDIA_TYPE = "application/json"
METADATA_KEY = b"response"
# Field metadata key of a variable column holding the variable's unit.
UNIT_KEY = b"unit"
# The options part is small JSON; a larger one is a mistake (or samples sent as a text field).
MAX_OPTIONS_BYTES = 1 << 20
MAX_PARTS = 8
PART_NAMES = ("request", "samples")
NUMBER_COLUMNS = ("x", "y", "z", "values")
COLUMNS = (*NUMBER_COLUMNS, "ids", "censored", "detection_limits")
MAX_LISTED = 20
RASTER_POINTER = "/samples/raster"


def refuse_charset(charset: str | None, what: str) -> None:
    """Refuse JSON declared in a charset other than UTF-8 (RFC 8259 §8.1: JSON is UTF-8); none is fine.

    Raises
    ------
    Problem
        415 ``unsupported-media-type`` naming the accepted charset.
    """
    if charset is not None and charset.strip().lower() != "utf-8":
        raise Problem(
            "unsupported-media-type",
            f"{what} is declared as charset {charset}; JSON is read as UTF-8 only (charset=utf-8, or no charset)",
        )


def _parts(body: bytes, boundary: bytes) -> dict[str, tuple[str, memoryview, str | None]]:
    """Name -> (media type, content, charset or None) of each part of a multipart/form-data body (RFC 7578).

    Contents are views of ``body``: a part of hundreds of megabytes is not copied.
    """
    delimiter = b"--" + boundary
    view = memoryview(body)
    position = body.find(delimiter)
    if position < 0:
        raise Problem("malformed-request", "The multipart body holds no boundary delimiter.")
    parts: dict[str, tuple[str, memoryview, str | None]] = {}
    position += len(delimiter)
    while body[position : position + 2] != b"--":
        if body[position : position + 2] != b"\r\n" or len(parts) == MAX_PARTS:
            raise Problem("malformed-request", f"The multipart body is malformed or has more than {MAX_PARTS} parts.")
        head_end = body.find(b"\r\n\r\n", position + 2)
        close = body.find(b"\r\n" + delimiter, head_end + 4) if head_end >= 0 else -1
        if close < 0:
            raise Problem("malformed-request", "A part of the multipart body is not closed by the boundary.")
        headers = {}
        for line in body[position + 2 : head_end].decode("latin-1").split("\r\n"):
            name, _, value = line.partition(":")
            headers[name.strip().lower()] = value.strip()
        _, disposition = parse_options_header(headers.get("content-disposition", ""))
        media_type, type_options = parse_options_header(headers.get("content-type", "text/plain"))
        name = disposition.get("name", "")
        if name in parts:
            raise InvalidInput.at(
                "/samples" if name == "samples" else "",
                f"the multipart form has more than one {name or 'unnamed'} part; send each part once",
            )
        parts[name] = (media_type, view[head_end + 4 : close], type_options.get("charset"))
        position = close + 2 + len(delimiter)
    return parts


def split_form(body: bytes, content_type: str) -> tuple[memoryview, memoryview]:
    """The ``request`` (JSON) and ``samples`` (Arrow stream) parts of a multipart body.

    Raises
    ------
    Problem
        400 ``malformed-request`` when the body is not multipart/form-data with a boundary,
        422 ``invalid-input`` naming a missing, repeated or unknown part, 415 for a samples part
        of another type or a request part declared in a charset other than UTF-8.
    """
    _, options = parse_options_header(content_type)
    boundary = options.get("boundary")
    if not boundary:
        raise Problem("malformed-request", "The multipart/form-data Content-Type has no boundary parameter.")
    parts = _parts(body, boundary.encode("latin-1"))
    unknown = [name for name in parts if name not in PART_NAMES]
    if unknown:
        raise InvalidInput.at(
            "",
            f"the multipart form has a part named {unknown[0] or '(no name)'!r}; it takes only a request part "
            "(application/json: the options) and a samples part (application/vnd.apache.arrow.stream)",
        )
    if "request" not in parts:
        raise InvalidInput.at("", "the multipart form needs a request part (application/json: the options)")
    refuse_charset(parts["request"][2], "the request part")
    if len(parts["request"][1]) > MAX_OPTIONS_BYTES:
        raise InvalidInput.at(
            "", f"the request part is over {MAX_OPTIONS_BYTES} bytes; the samples go in the samples part"
        )
    if "samples" not in parts:
        raise InvalidInput.at(
            "/samples", "the multipart form needs a samples part (application/vnd.apache.arrow.stream)"
        )
    media_type, samples, _ = parts["samples"]
    if media_type != ARROW_MEDIA_TYPE:
        raise Problem("unsupported-media-type", f"the samples part must be {ARROW_MEDIA_TYPE}, got {media_type}")
    return parts["request"][1], samples


VARIABLE_PREFIXES = ("variables", "censored", "detection_limits")


def _split(name: str) -> tuple[str, str | None]:
    """``("variables", "lead")`` for the column ``variables/lead``; ``(name, None)`` for a plain column."""
    prefix, slash, variable = name.partition("/")
    return (prefix, variable) if slash and prefix in VARIABLE_PREFIXES else (name, None)


def _kind_error(name: str, kind: pa.DataType) -> str | None:
    prefix, _ = _split(name)
    if prefix in NUMBER_COLUMNS or prefix in ("variables", "detection_limits"):
        ok = pa.types.is_floating(kind) or pa.types.is_integer(kind)
        return None if ok else f"column {name} must hold numbers (floating-point or integer), got {kind}"
    if prefix == "censored":
        return None if pa.types.is_boolean(kind) else f"column {name} must be boolean, got {kind}"
    text = pa.types.is_string(kind) or pa.types.is_large_string(kind) or pa.types.is_string_view(kind)
    return None if text or pa.types.is_integer(kind) else f"column ids must hold text or integers, got {kind}"


def _form_issues(names: list[str]) -> list[FieldIssue]:
    """One variable (``values``) or several (``variables/<name>`` columns), not both; per-variable
    censoring columns name a variable of the stream."""
    variables = {v for prefix, v in map(_split, names) if prefix == "variables"}
    several = [n for n in names if _split(n)[1] is not None]
    issues = []
    if "x" not in names:
        issues.append(FieldIssue("/samples/x", "the Arrow stream has no column x"))
    if not variables and "values" not in names:
        issues.append(FieldIssue("/samples/values", "the Arrow stream has no column values (nor variables/<name>)"))
    if variables and any(n in names for n in ("values", "censored", "detection_limits")):
        issues.append(
            FieldIssue(
                "/samples/values",
                "give values, censored and detection_limits (one variable) or variables/<name> columns "
                "(several), not both",
            )
        )
    for name in several:
        prefix, variable = _split(name)
        if prefix != "variables" and variable not in variables:
            issues.append(
                FieldIssue(
                    f"/samples/{prefix}/{pointer_token(variable or '')}",
                    f"column {name} names no variables/{variable} column",
                )
            )
    return issues


def _check_schema(schema: pa.Schema) -> None:
    issues = _form_issues(schema.names)
    seen: set[str] = set()
    for column in schema:
        if column.name in seen:
            issues.append(FieldIssue(_pointer(column.name), f"column {column.name} appears twice"))
            continue
        seen.add(column.name)
        if column.name not in COLUMNS and _split(column.name)[1] is None:
            issues.append(
                FieldIssue(
                    f"/samples/{column.name}",
                    f"unknown column {column.name!r}; the columns are {', '.join(COLUMNS)}, or x, y, z, ids and "
                    "variables/<name> (with censored/<name>, detection_limits/<name>) for several variables",
                )
            )
            continue
        message = _kind_error(column.name, column.type)
        if message:
            issues.append(FieldIssue(_pointer(column.name), message))
    if issues:
        raise InvalidInput(issues)


def _pointer(name: str, row: int | None = None) -> str:
    """JSON Pointer of a column (``/samples/variables/lead``) or of one of its rows."""
    prefix, variable = _split(name)
    base = f"/samples/{prefix}" if variable is None else f"/samples/{prefix}/{pointer_token(variable)}"
    return base if row is None else f"{base}/{row}"


def _batches(
    reader: pa.ipc.RecordBatchStreamReader,
    max_rows: int,
    limit: str = "LAGWISE_MAX_ARROW_ROWS",
    advice: str = "Send fewer samples per request (thin or split the data set).",
) -> list[pa.RecordBatch]:
    batches: list[pa.RecordBatch] = []
    rows = 0
    while True:
        try:
            batch = reader.read_next_batch()
        except StopIteration:
            return batches
        except (pa.ArrowException, OSError) as exc:
            raise InvalidInput.at("/samples", f"the Arrow stream is truncated or corrupt: {exc}") from None
        rows += batch.num_rows
        if rows > max_rows:
            raise LimitExceeded(limit, max_rows, rows, advice, "/samples")
        try:
            batch.validate(full=True)
        except pa.ArrowException as exc:
            raise InvalidInput.at("/samples", f"the Arrow stream holds an invalid record batch: {exc}") from None
        batches.append(batch)


def _ids(column: pa.ChunkedArray) -> CompactIds:
    """The ``ids`` column without a Python string per row: integers as they are, text as its
    UTF-8 bytes and offsets (views of the stream's buffers; a column of several batches is
    joined once, a ``string_view`` column cast to ``large_string``)."""
    array = column.chunk(0) if column.num_chunks == 1 else column.combine_chunks()
    if pa.types.is_integer(array.type):
        return IntegerIds(array.to_numpy())
    if pa.types.is_string_view(array.type):
        array = array.cast(pa.large_string())
    width = np.dtype(np.int32 if pa.types.is_string(array.type) else np.int64)
    _, offsets, data = array.buffers()
    return TextIds(
        np.zeros(0, dtype=np.uint8) if data is None else np.frombuffer(data, dtype=np.uint8),
        np.frombuffer(offsets, dtype=width, count=len(array) + 1, offset=array.offset * width.itemsize),
    )


def _column(name: str, column: pa.ChunkedArray):
    """A numpy array (numbers, flags) or compact identifiers (ids) from one Arrow column.

    Nulls: a detection limit's is none, a variable's is not measured (NaN, as JSON's null);
    elsewhere they are refused, as is a NaN number where null marks not measured.
    """
    prefix, _ = _split(name)
    if prefix in ("detection_limits", "variables"):
        numbers = column.cast(pa.float64(), safe=False)
        if prefix == "variables":
            given = numbers.fill_null(0.0).to_numpy()
            nan = np.flatnonzero(np.isnan(given))
            if nan.size:
                raise InvalidInput(
                    [
                        FieldIssue(_pointer(name, int(i)), "not a finite number (null marks not measured)")
                        for i in nan[:MAX_LISTED]
                    ],
                    total=int(nan.size),
                )
        return numbers.fill_null(np.nan).to_numpy()
    if column.null_count:
        missing = np.flatnonzero(~column.is_valid().to_numpy(zero_copy_only=False))
        raise InvalidInput(
            [FieldIssue(_pointer(name, int(i)), MISSING) for i in missing[:MAX_LISTED]], total=int(missing.size)
        )
    if name in NUMBER_COLUMNS:
        return column.cast(pa.float64(), safe=False).to_numpy()
    if prefix == "censored":
        return column.to_numpy(zero_copy_only=False)
    return _ids(column)


def _samples_member(table: pa.Table) -> dict:
    """The ``samples`` member of the JSON form: plain columns, and ``variables``, ``censored``,
    ``detection_limits`` and ``units`` (from a variable column's field metadata ``unit``) by name."""
    samples: dict = {}
    units = {}
    for field in table.schema:
        prefix, variable = _split(field.name)
        value = _column(field.name, table.column(field.name))
        if variable is None:
            samples[prefix] = value
            continue
        samples.setdefault(prefix, {})[variable] = value
        unit = (field.metadata or {}).get(UNIT_KEY)
        if prefix == "variables" and unit is not None:
            units[variable] = unit.decode("utf-8", errors="replace")
    if units:
        samples["units"] = units
    return samples


def read_samples(data: bytes | memoryview, max_rows: int) -> dict:
    """The sample columns of an Arrow IPC stream, checked in the order the module states.

    Parameters
    ----------
    data : bytes or memoryview
        The stream (the ``samples`` part).
    max_rows : int
        ``LAGWISE_MAX_ARROW_ROWS``: more rows are refused before any column is converted.

    Returns
    -------
    dict
        The ``samples`` member of the JSON form: column name to float64 array (numbers; NaN
        for a null detection limit or an unmeasured variable), boolean array (``censored``)
        or :class:`~lagwise.core.data.identifiers.CompactIds` (``ids``: integers, or text as UTF-8
        bytes and offsets, read as str only where an answer echoes them); for several variables, ``variables``, ``censored`` and
        ``detection_limits`` map each variable's name to its column and ``units`` to its unit.

    Raises
    ------
    InvalidInput
        Naming the column (``/samples/<column>``) or the row (``/samples/<column>/<row>``).
    LimitExceeded
        ``LAGWISE_MAX_ARROW_ROWS``.
    """
    reader = _open(data)
    _check_schema(reader.schema)
    return _samples_member(pa.Table.from_batches(_batches(reader, max_rows), schema=reader.schema))


def _open(data: bytes | memoryview) -> pa.ipc.RecordBatchStreamReader:
    try:
        return pa.ipc.open_stream(pa.py_buffer(data))
    except (pa.ArrowException, OSError) as exc:
        raise InvalidInput.at("/samples", f"the samples part is not an Arrow IPC stream: {exc}") from None


def read_raster_values(data: bytes | memoryview, max_cells: int) -> np.ndarray:
    """A raster's values from an Arrow IPC stream of one number column ``values`` (x fastest, null
    for a missing cell), checked as :func:`read_samples` checks sample columns.

    Parameters
    ----------
    data : bytes or memoryview
        The stream (the ``samples`` part).
    max_cells : int
        ``LAGWISE_MAX_ARROW_CELLS``: more rows are refused before the column is converted.

    Returns
    -------
    ndarray of float64
        The values, NaN for a missing cell (as the JSON form's null).

    Raises
    ------
    InvalidInput
        Naming the column (``/samples/raster/values``) or the cell (``/samples/raster/values/<i>``).
    LimitExceeded
        ``LAGWISE_MAX_ARROW_CELLS``.
    """
    reader = _open(data)
    pointer = f"{RASTER_POINTER}/values"
    names = reader.schema.names
    if names != ["values"]:
        raise InvalidInput.at(
            pointer,
            f"a raster's Arrow stream holds one column, values (x fastest, null for a missing cell); got {names}",
        )
    message = _kind_error("values", reader.schema.field("values").type)
    if message:
        raise InvalidInput.at(pointer, message)
    batches = _batches(reader, max_cells, "LAGWISE_MAX_ARROW_CELLS", "Send a smaller or coarser raster.")
    column = pa.Table.from_batches(batches, schema=reader.schema).column("values")
    values = column.cast(pa.float64(), safe=False).fill_null(np.nan).to_numpy()
    given = column.is_valid().to_numpy(zero_copy_only=False) if column.null_count else None
    bad = ~np.isfinite(values)  # NaN numbers and infinities; a null (NaN here) is a missing cell
    if given is not None:
        bad &= given
    if bad.any():
        where = np.flatnonzero(bad)
        raise InvalidInput(
            [
                FieldIssue(f"{pointer}/{int(i)}", "not a finite number (null marks a missing cell)")
                for i in where[:MAX_LISTED]
            ],
            total=int(where.size),
        )
    return values


def wants_arrow() -> bool:
    """True when the request's ``Accept`` prefers an Arrow stream to JSON."""
    return request.accept_mimetypes.best_match([JSON_MEDIA_TYPE, ARROW_MEDIA_TYPE]) == ARROW_MEDIA_TYPE


Path = tuple[str | int, ...]


def _at(document, path: Path):
    for key in path:
        document = document[key]
    return document


def _expand(document: dict, pattern: str) -> list[Path]:
    """The paths of ``document`` that ``pattern`` names (``/``-separated; ``*`` is any member or element)."""
    paths: list[Path] = [()]
    for token in pattern.split("/"):
        found: list[Path] = []
        for path in paths:
            node = _at(document, path)
            if isinstance(node, dict):
                found += [(*path, k) for k in (node if token == "*" else [token] if token in node else [])]
            elif token == "*" and isinstance(node, (list, tuple, np.ndarray)):
                found += [(*path, i) for i in range(len(node))]
        paths = found
    return [p for p in paths if isinstance(_at(document, p), (list, tuple, np.ndarray))]


def _without(node, paths: list[Path]):
    """A copy of ``node`` without the arrays at ``paths``: object members dropped, array elements null."""
    heads: dict = {}
    for path in paths:
        heads.setdefault(path[0], []).append(path[1:])
    if isinstance(node, dict):
        return {
            k: v if k not in heads else _without(v, heads[k]) for k, v in node.items() if () not in heads.get(k, [])
        }
    items = list(node)
    for i, rest in heads.items():
        items[i] = None if () in rest else _without(items[i], rest)
    return items


def column_name(path: Path) -> str:
    """The Arrow column of the array at ``path``: its JSON Pointer without the leading ``/``."""
    return "/".join(pointer_token(str(key)) for key in path)


def arrow_answer(document: dict, columns: Sequence[str]) -> bytes:
    """An Arrow IPC stream of ``document``'s per-node arrays named by the patterns ``columns``.

    Each array becomes a float64 column (NaN and null as null) named by its JSON Pointer without
    the leading slash (``mean``, ``quantiles/p10``, ``exceedance/0/probability``; ``*`` in a
    pattern is any member or element). The rest of the document, as JSON text, is the schema
    metadata (key ``response``): a moved array's member is left out of its object, or is
    ``null`` in its array, so that putting each column back at its pointer gives the JSON answer.
    """
    paths = [path for pattern in columns for path in _expand(document, pattern)]
    arrays = {column_name(p): pa.array(np.asarray(_at(document, p), dtype=np.float64), from_pandas=True) for p in paths}
    table = pa.table(arrays).replace_schema_metadata({METADATA_KEY: dumps(_without(document, paths))})
    sink = pa.BufferOutputStream()
    with pa.ipc.new_stream(sink, table.schema) as writer:
        writer.write_table(table)
    return sink.getvalue().to_pybytes()
