"""What the front answers by itself: liveness, and problem documents for what never reaches a worker.

The documents have the members of the service's own problems (RFC 9457: ``type``,
``title``, ``status``, ``detail``, ``instance``, ``request_id``). The kinds below are
merged into the service's table (``lagwise.api.problems.KINDS``), so ``GET
/problems/<kind>`` describes them too. Nothing here imports Flask or numpy.
"""

from __future__ import annotations

import json
import re
import uuid
from collections.abc import Sequence
from http import HTTPStatus

REQUEST_ID = re.compile(r"^[A-Za-z0-9._:-]{1,128}$")
PROBLEM_MEDIA_TYPE = "application/problem+json"

# kind: (status, title, description)
FRONT_KINDS: dict[str, tuple[int, str, str]] = {
    "malformed-request": (
        400,
        "Malformed request",
        "The request is not valid HTTP/1.1 (request line, header syntax or body framing), or its gzip body is corrupt.",
    ),
    "request-timeout": (
        408,
        "Request timeout",
        "The request (line, headers and body) did not arrive within LAGWISE_RECEIVE_SECONDS.",
    ),
    "uri-too-long": (414, "URI too long", "The request line is longer than 8190 bytes."),
    "headers-too-large": (
        431,
        "Header fields too large",
        "More than 100 header fields, a field longer than 8190 bytes, or more than 64 KiB of headers.",
    ),
    "worker-lost": (
        502,
        "Worker lost",
        "The worker computing this request stopped before answering (killed, out of memory or past the "
        "worker timeout). The request was not completed; retry it once, then ask for less work.",
    ),
    "overloaded": (
        503,
        "Overloaded",
        "The instance holds LAGWISE_MAX_CONNECTIONS connections already; retry shortly or on another instance.",
    ),
}

# Kinds the front shares with the service (same type, same meaning).
SHARED_KINDS: dict[str, tuple[int, str]] = {
    "body-too-large": (413, "Body too large"),
    "not-ready": (503, "Not ready"),
    "internal-error": (500, "Internal error"),
}

# The problem kind for an error status that did not come with a problem document (e.g. gunicorn's
# own HTML pages); any other status maps to the nearest class.
KIND_BY_STATUS = {
    400: "malformed-request",
    408: "request-timeout",
    413: "body-too-large",
    414: "uri-too-long",
    431: "headers-too-large",
    502: "worker-lost",
    503: "not-ready",
}


def request_id_for(given: str | None) -> str:
    """The caller's X-Request-ID when well formed, else a fresh one."""
    return given if given and REQUEST_ID.match(given) else uuid.uuid4().hex


def _status_and_title(kind: str) -> tuple[int, str]:
    if kind in FRONT_KINDS:
        status, title, _ = FRONT_KINDS[kind]
        return status, title
    return SHARED_KINDS[kind]


def kind_for_status(status: int) -> str:
    """The problem kind that stands for an HTTP error status."""
    if status in KIND_BY_STATUS:
        return KIND_BY_STATUS[status]
    return "malformed-request" if status < 500 else "internal-error"


def problem(
    kind: str, detail: str, *, instance: str | None = None, request_id: str
) -> tuple[int, list[tuple[bytes, bytes]], bytes]:
    """Status, headers and body of a problem document written by the front.

    ``instance`` is the request's path; the member is left out when it is unknown (None or
    empty: a connection refused before its request was read, an unreadable request line).
    """
    status, title = _status_and_title(kind)
    document = {"type": f"/problems/{kind}", "title": title, "status": status, "detail": detail}
    if instance:
        document["instance"] = instance
    document["request_id"] = request_id
    body = json.dumps(document, separators=(",", ":")).encode()
    return status, _headers(PROBLEM_MEDIA_TYPE, body, request_id), body


def _media_ranges(accept: str) -> dict[str, float]:
    """The media ranges of an ``Accept`` value (type/subtype, lower case) and their quality.

    Parameters other than ``q`` are dropped; a range given twice keeps its larger quality; a
    ``q`` that is not a number counts as 0 (that range allows nothing).
    """
    ranges: dict[str, float] = {}
    for element in accept.split(","):
        essence, *parameters = (part.strip() for part in element.split(";"))
        if "/" not in essence:
            continue
        quality = 1.0
        for parameter in parameters:
            name, _, value = parameter.partition("=")
            if name.strip().lower() == "q":
                try:
                    quality = min(max(float(value.strip()), 0.0), 1.0)
                except ValueError:
                    quality = 0.0
        essence = essence.lower()
        ranges[essence] = max(quality, ranges.get(essence, 0.0))
    return ranges


def accepts(accept: str | None, produced: Sequence[str]) -> bool:
    """True when an ``Accept`` value (None: no header, anything goes) allows one of ``produced``.

    RFC 9110 §12.5.1 on type and subtype: each media type takes the quality of the most
    specific range matching it (``type/subtype``, then ``type/*``, then ``*/*``), and a
    quality of 0 refuses it. Parameters other than ``q`` are not compared, so
    ``text/plain;version=0.0.4`` asks for ``text/plain``.
    """
    if accept is None:
        return True
    ranges = _media_ranges(accept)
    for media_type in produced:
        essence = media_type.split(";", 1)[0].strip().lower()
        kind = essence.split("/", 1)[0]
        quality = next((ranges[c] for c in (essence, f"{kind}/*", "*/*") if c in ranges), 0.0)
        if quality > 0:
            return True
    return False


def alive(request_id: str) -> tuple[int, list[tuple[bytes, bytes]], bytes]:
    """The liveness answer (the same document as the service's ``/healthz``)."""
    body = b'{"status":"alive"}'
    return 200, _headers("application/json", body, request_id), body


def _headers(media_type: str, body: bytes, request_id: str) -> list[tuple[bytes, bytes]]:
    return [
        (b"content-type", media_type.encode()),
        (b"content-length", str(len(body)).encode()),
        (b"x-request-id", request_id.encode()),
        (b"cache-control", b"no-store"),
        (b"x-content-type-options", b"nosniff"),
    ]


def reason(status: int) -> bytes:
    """The standard reason phrase of a status."""
    try:
        return HTTPStatus(status).phrase.encode()
    except ValueError:
        return b""
