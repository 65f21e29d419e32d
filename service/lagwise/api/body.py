"""Reading request bodies: media type, size, strict JSON, schema validation."""

from __future__ import annotations

import zlib

from flask import current_app, g, request
from marshmallow import Schema, ValidationError

from . import members, prescan
from .columnar import MULTIPART_MEDIA_TYPE, read_raster_values, read_samples, refuse_charset, split_form
from .fields import FURTHER_INVALID
from .jsonio import MalformedJSON, parse, repeated_member
from .problems import Problem, invalid_detail


def _pointers(messages, prefix: str = "") -> list[dict]:
    """Flatten marshmallow's nested error messages into JSON Pointer entries.

    Invalid elements of an array counted but not listed (:data:`~lagwise.api.fields.FURTHER_INVALID`)
    become one entry at the array with ``further`` set to their number.
    """
    if isinstance(messages, dict):
        out = []
        for key, value in messages.items():
            if key == FURTHER_INVALID:
                out.append({"pointer": prefix, "detail": f"{value} further elements are invalid", "further": value})
                continue
            where = prefix if key == "_schema" else f"{prefix}/{key}"
            out.extend(_pointers(value, where))
        return out
    if isinstance(messages, list) and all(isinstance(m, str) for m in messages):
        return [{"pointer": prefix, "detail": m} for m in messages]
    return [{"pointer": prefix, "detail": str(messages)}]


READ_BLOCK = 1 << 16
ACCEPTED_ENCODINGS = "gzip"


def _too_large(limit: int, name: str = "LAGWISE_MAX_BODY_BYTES") -> Problem:
    return Problem("body-too-large", f"The body exceeds the limit of {limit} bytes ({name}).")


def _read_declared(size: int) -> bytes:
    """The ``size`` bytes of a body with a Content-Length, read into one buffer (no block copies)."""
    buffer = bytearray(size)
    view = memoryview(buffer)
    received = 0
    while received < size:
        got = request.stream.readinto(view[received:])  # type: ignore[attr-defined]  # a werkzeug LimitedStream
        if not got:
            break
        received += got
    return buffer if received == size else bytes(view[:received])  # type: ignore[return-value]


def _raw_body(limit: int, name: str) -> bytes:
    """The body as sent, refusing more than ``limit`` bytes.

    With a Content-Length, Flask refuses an oversized body before reading it. A
    chunked body (no Content-Length, de-chunked by the server) is read block by
    block and refused as soon as it passes the limit, so memory stays bounded.
    """
    if request.content_length is not None:
        if request.content_length > limit:
            raise _too_large(limit, name)
        return _read_declared(request.content_length)
    if "wsgi.input_terminated" not in request.environ:
        return b""
    stream = request.environ["wsgi.input"]
    blocks: list[bytes] = []
    total = 0
    while True:
        try:
            block = stream.read(READ_BLOCK)
        except Exception as exc:  # the server's de-chunking: e.g. an invalid chunk size
            raise Problem("malformed-json", f"the chunked body cannot be read: {exc}") from None
        if not block:
            return b"".join(blocks)
        total += len(block)
        if total > limit:
            raise _too_large(limit, name)
        blocks.append(block)


def _gunzip(data: bytes, limit: int, name: str) -> bytes:
    """Decode a gzip body (RFC 9112 §7.2) of one member or several in a row (RFC 1952 §2.2: their
    contents joined), refusing more than ``limit`` decoded bytes before holding them."""
    blocks: list[bytes] = []
    total = 0
    pending = data
    try:
        while True:
            decoder = zlib.decompressobj(16 + zlib.MAX_WBITS)
            while not decoder.eof:
                block = decoder.decompress(pending, READ_BLOCK)
                pending = decoder.unconsumed_tail
                if not block and not pending:
                    break
                total += len(block)
                if total > limit:
                    raise _too_large(limit, name)
                blocks.append(block)
            if not decoder.eof:
                raise Problem("malformed-request", "The gzip body is truncated.")
            pending = decoder.unused_data
            if not pending:
                return b"".join(blocks)
    except zlib.error as exc:
        raise Problem(
            "malformed-request", f"The gzip body is corrupt or followed by data that is no gzip member: {exc}."
        ) from None


def read_body(limit: int | None = None, name: str = "LAGWISE_MAX_BODY_BYTES") -> bytes:
    """The request body, decoded, refusing more than ``limit`` bytes sent or decoded.

    ``limit`` defaults to ``MAX_CONTENT_LENGTH``; ``name`` is the variable that sets it.
    ``Content-Encoding: gzip`` is decoded within the same limit (a small compressed body
    cannot expand past it); any other coding is refused with 415 and ``Accept-Encoding``.
    """
    if limit is None:
        limit = current_app.config["MAX_CONTENT_LENGTH"]
    elif request.content_length is not None and request.content_length > limit:
        raise _too_large(limit, name)
    request.max_content_length = limit
    codings = [c.strip().lower() for c in request.headers.get("Content-Encoding", "").split(",") if c.strip()]
    codings = [c for c in codings if c != "identity"]
    if codings and codings != ["gzip"] and codings != ["x-gzip"]:
        raise Problem(
            "unsupported-media-type",
            f"Content-Encoding {', '.join(codings)} is not supported; send the body as is or gzip-compressed.",
            headers={"Accept-Encoding": ACCEPTED_ENCODINGS},
        )
    body = _raw_body(limit, name)
    return _gunzip(body, limit, name) if codings else body


def _json_object(body: bytes, what: str) -> dict:
    """Parse a JSON object, refusing first a body with more values than the limits allow (:mod:`.prescan`),
    then one that names a member twice in an object (:mod:`.members`), by pointer."""
    scanned = members.scan(body)
    prescan.check_body(body, current_app.extensions["lagwise"].limits, scanned.values)
    try:
        document = parse(body)
    except MalformedJSON as exc:
        raise Problem("malformed-json", str(exc)) from None
    repeated = repeated_member(body) if scanned.maybe_repeated else None
    if repeated is not None:
        detail = "names a member already given in its object (give each member once)"
        raise Problem(
            "invalid-input", f"{repeated}: {detail}" if repeated else detail, [{"pointer": repeated, "detail": detail}]
        )
    del body
    if not isinstance(document, dict):
        raise Problem(
            "invalid-input", f"{what} must be a JSON object", [{"pointer": "", "detail": "must be a JSON object"}]
        )
    return document


def _multipart_document() -> dict:
    """The options of the ``request`` part with the ``samples`` part's Arrow columns as ``samples``.

    The body is limited by ``LAGWISE_MAX_ARROW_BYTES`` and the stream's rows by
    ``LAGWISE_MAX_ARROW_ROWS`` (a raster's cells by ``LAGWISE_MAX_ARROW_CELLS``; see
    :mod:`lagwise.api.columnar`); ``g.arrow_samples`` then
    tells the views to use that row limit in place of ``LAGWISE_MAX_SAMPLES``.
    """
    settings = current_app.extensions["lagwise"]
    body = read_body(max(settings.max_arrow_bytes, current_app.config["MAX_CONTENT_LENGTH"]), "LAGWISE_MAX_ARROW_BYTES")
    options, stream = split_form(body, request.headers.get("Content-Type", ""))
    document = _json_object(bytes(options), "the request part")
    raster = _raster_layout(document)
    if raster is not None:
        document["samples"] = {"raster": {**raster, "values": read_raster_values(stream, settings.max_arrow_cells)}}
    else:
        document["samples"] = read_samples(stream, settings.max_arrow_rows)
    g.arrow_samples = True
    return document


def _raster_layout(document: dict) -> dict | None:
    """The raster layout (origin, spacing, shape) a request part may carry as ``samples``, else None.

    Raises
    ------
    Problem
        422 for any other ``samples`` member in the request part (samples go in the samples part).
    """
    if "samples" not in document:
        return None
    given = document["samples"]
    layout = given.get("raster") if isinstance(given, dict) and set(given) == {"raster"} else None
    if isinstance(layout, dict) and "values" not in layout:
        return layout
    detail = (
        "send the samples in the samples part (Arrow), not in the request part; for a raster the request "
        'part\'s samples holds only {"raster": {"origin", "spacing", "shape"}} and the stream its values'
    )
    raise Problem("invalid-input", f"/samples: {detail}", [{"pointer": "/samples", "detail": detail}])


def load_json(schema: Schema) -> dict:
    """Parse and validate the current request with ``schema``: a JSON body, or a multipart form
    whose ``request`` part holds the options and whose ``samples`` part is an Arrow stream.

    Raises
    ------
    Problem
        415 for another media type or a charset other than UTF-8, 400 for malformed JSON or multipart, 422 for invalid
        fields; 413 before a body over its limit is read.
    LimitExceeded
        For more values or samples than the limits allow, counted before the body is
        parsed or validated (:mod:`lagwise.api.prescan`).
    """
    mimetype = request.mimetype or ""
    if mimetype == MULTIPART_MEDIA_TYPE:
        document = _multipart_document()
    elif mimetype != "application/json" and not mimetype.endswith("+json"):
        raise Problem(
            "unsupported-media-type",
            f"expected Content-Type application/json (or multipart/form-data with Arrow samples), got {mimetype or 'none'}",
        )
    else:
        refuse_charset(request.mimetype_params.get("charset"), "the body")
        document = _json_object(read_body(), "the body")
        prescan.check_parsed(document, current_app.extensions["lagwise"].limits)
    try:
        return schema.load(document)
    except ValidationError as exc:
        entries = _pointers(exc.messages)
        further = sum(e.get("further", 0) for e in entries)
        errors = [e for e in entries if "further" not in e]
        raise Problem("invalid-input", invalid_detail(errors, len(errors) + further), errors, omitted=further) from None
