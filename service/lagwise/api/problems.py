"""RFC 9457 problem details: the kinds of refusal and the one place that builds them.

Each kind has a stable type URI, ``/problems/<kind>``, relative to the service;
``GET /problems/<kind>`` describes it.
"""

from __future__ import annotations

from dataclasses import dataclass

from flask import Flask, Response, request
from werkzeug.exceptions import HTTPException, MethodNotAllowed

from ..core.deadline import DeadlineExceeded
from ..core.errors import InvalidInput, LimitExceeded
from ..serving.answers import FRONT_KINDS
from .jsonio import dumps
from .observability import REFUSALS, logger, request_id

PROBLEM_MEDIA_TYPE = "application/problem+json"
MAX_LISTED_ERRORS = 100


@dataclass(frozen=True)
class ProblemKind:
    """One kind of refusal: HTTP status, title and a description for people."""

    status: int
    title: str
    description: str


KINDS = {
    "malformed-json": ProblemKind(
        400,
        "Malformed JSON",
        "The body is not strict JSON (RFC 8259): NaN and Infinity literals, invalid UTF-8 and nesting deeper than 1024 levels are refused.",
    ),
    "unauthorized": ProblemKind(401, "Unauthorized", "A valid API key is required (Authorization: Bearer <key>)."),
    "not-found": ProblemKind(404, "Not found", "No resource at this path."),
    "method-not-allowed": ProblemKind(405, "Method not allowed", "This path does not accept this method."),
    "not-acceptable": ProblemKind(
        406,
        "Not acceptable",
        "The Accept header names no media type this path can answer with; acceptable lists those it can.",
    ),
    "body-too-large": ProblemKind(413, "Body too large", "The body exceeds LAGWISE_MAX_BODY_BYTES."),
    "unsupported-media-type": ProblemKind(
        415,
        "Unsupported media type",
        "Send Content-Type: application/json (or multipart/form-data with the samples as an Arrow stream), in "
        "UTF-8: a charset other than UTF-8 is refused, and so is a Content-Encoding other than gzip.",
    ),
    "invalid-input": ProblemKind(
        422, "Invalid input", "One or more fields are invalid; see errors for each field and sample index."
    ),
    "limit-exceeded": ProblemKind(
        422, "Limit exceeded", "The request is valid but would cost more than a configured limit allows."
    ),
    "not-ready": ProblemKind(503, "Not ready", "The service is starting or stopping; retry shortly."),
    "deadline-exceeded": ProblemKind(
        503,
        "Deadline exceeded",
        "The request ran past LAGWISE_DEADLINE_SECONDS; ask for less work (fewer samples, targets or classes). Retrying the same request will not help.",
    ),
    "internal-error": ProblemKind(
        500, "Internal error", "An unexpected error; this is a bug, please report it with the request id."
    ),
    # Written by the front (lagwise serve) for what never reaches a worker, or a worker lost mid-request.
    **{kind: ProblemKind(*entry) for kind, entry in FRONT_KINDS.items()},
}


class Problem(Exception):
    """A refusal to send as an RFC 9457 problem.

    Parameters
    ----------
    kind : str
        Key of :data:`KINDS`.
    detail : str
        What happened, for this request.
    errors : list of dict, optional
        ``{"pointer": ..., "detail": ...}`` per offending field; at most
        :data:`MAX_LISTED_ERRORS` are sent, and ``errors_omitted`` counts the rest.
    omitted : int
        Further problems known but not in ``errors`` (e.g. invalid array elements past the first 20).
    headers : dict, optional
        Response header fields that go with it (e.g. ``Allow`` for a 405).
    extra : dict, optional
        Further members (e.g. the limit's name and value).
    """

    def __init__(
        self,
        kind: str,
        detail: str,
        errors: list[dict] | None = None,
        *,
        omitted: int = 0,
        headers: dict | None = None,
        **extra,
    ):
        super().__init__(detail)
        self.kind = kind
        self.detail = detail
        self.errors = (errors or [])[:MAX_LISTED_ERRORS]
        self.omitted = omitted + max(0, len(errors or []) - MAX_LISTED_ERRORS)
        self.headers = headers or {}
        self.extra = extra


def problem_response(problem: Problem) -> Response:
    """Build the ``application/problem+json`` response for a :class:`Problem`."""
    kind = KINDS[problem.kind]
    document = {
        "type": f"/problems/{problem.kind}",
        "title": kind.title,
        "status": kind.status,
        "detail": problem.detail,
        "instance": request.path,
        "request_id": request_id(),
    }
    if problem.errors:
        document["errors"] = problem.errors
    if problem.omitted:
        document["errors_omitted"] = problem.omitted
    document.update(problem.extra)
    REFUSALS.labels(problem.kind).inc()
    return Response(dumps(document), status=kind.status, mimetype=PROBLEM_MEDIA_TYPE, headers=problem.headers)


def invalid_detail(errors: list[dict], total: int | None = None) -> str:
    """The ``detail`` of an invalid-input problem listing ``errors`` (pointer and detail each).

    ``total`` counts every invalid field (default: those listed). One field names itself (without
    a pointer when it is the document root); more give their number and how many are listed.
    """
    total = max(total or 0, len(errors))
    listed = min(len(errors), MAX_LISTED_ERRORS)
    if total == 1:
        pointer, text = errors[0]["pointer"], errors[0]["detail"]
        return f"{pointer}: {text}" if pointer else text
    out = f"{total} fields are invalid"
    if listed < total:
        out += f" (the first {listed} listed)"
    return out


def from_invalid_input(exc: InvalidInput) -> Problem:
    """Map the core's :class:`InvalidInput` to an ``invalid-input`` problem."""
    errors = [{"pointer": i.pointer, "detail": i.detail} for i in exc.issues]
    omitted = max(0, exc.total - len(errors))
    return Problem("invalid-input", invalid_detail(errors, exc.total), errors, omitted=omitted)


def from_limit(exc: LimitExceeded) -> Problem:
    """Map the core's :class:`LimitExceeded` to a ``limit-exceeded`` problem."""
    errors = [{"pointer": exc.pointer, "detail": str(exc)}] if exc.pointer else []
    return Problem("limit-exceeded", str(exc), errors, limit=exc.limit, allowed=exc.allowed, requested=exc.requested)


_HTTP_KINDS = {404: "not-found", 405: "method-not-allowed", 413: "body-too-large", 415: "unsupported-media-type"}


def register_error_handlers(app: Flask) -> None:
    """Route every error through :func:`problem_response`."""
    app.register_error_handler(Problem, problem_response)
    app.register_error_handler(InvalidInput, lambda exc: problem_response(from_invalid_input(exc)))
    app.register_error_handler(LimitExceeded, lambda exc: problem_response(from_limit(exc)))
    app.register_error_handler(DeadlineExceeded, lambda exc: problem_response(Problem("deadline-exceeded", str(exc))))

    def http_error(exc: HTTPException) -> Response:
        kind = _HTTP_KINDS.get(exc.code or 500)
        if kind is None:
            return problem_response(Problem("internal-error", exc.description or "unexpected HTTP error"))
        detail = KINDS[kind].description
        headers = {}
        if kind == "body-too-large":
            detail = f"The body exceeds the limit of {app.config['MAX_CONTENT_LENGTH']} bytes (LAGWISE_MAX_BODY_BYTES)."
        if isinstance(exc, MethodNotAllowed) and exc.valid_methods:
            allowed = ", ".join(sorted(exc.valid_methods))
            headers["Allow"] = allowed
            detail = f"{request.method} is not allowed on {request.path}; allowed: {allowed}."
        return problem_response(Problem(kind, detail, headers=headers))

    def unexpected(exc: Exception) -> Response:
        logger().exception("unhandled error", extra={"request_id": request_id(), "path": request.path})
        return problem_response(Problem("internal-error", "An unexpected error occurred; it has been logged."))

    app.register_error_handler(HTTPException, http_error)
    app.register_error_handler(Exception, unexpected)
