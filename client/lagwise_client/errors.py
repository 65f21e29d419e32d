"""Exceptions of the Lagwise client.

::

    LagwiseError                      any failure; carries the RFC 9457 problem fields
     ├── MalformedRequestError        400, 413, 415: the body could not be read
     ├── ValidationError (ValueError) 422 invalid-input: see .errors for each field;
     │    │                           also raised before sending (NaN or Infinity in the request)
     │    ├── LimitError              422 limit-exceeded: .limit, .allowed, .requested
     │    └── ColumnsError            before sending: ``columns`` names an unknown member or a
     │                                column the table lacks: .key, .column, .available
     ├── AuthError                    401: missing or unknown API key
     ├── UnavailableError             429, 502, 503, 504 after the retries ran out
     │    └── DeadlineError           503 deadline-exceeded: never retried, ask for less work
     ├── TransportError               no answer: connection refused, reset, timed out
     └── ResponseError                an answer the client cannot read (not JSON, a member missing)
"""

from __future__ import annotations

from .retry import problem_kind


class LagwiseError(Exception):
    """Root of the client's exceptions.

    Attributes
    ----------
    status : int or None
        HTTP status, None for transport failures.
    type, title, detail : str or None
        RFC 9457 problem members.
    errors : list of dict
        ``{"pointer", "detail"}`` per offending field.
    request_id : str or None
        The ``X-Request-ID`` sent with the request (quote it when reporting a problem).
    problem : dict
        The whole problem document.
    """

    def __init__(self, message: str, *, status=None, problem=None, request_id=None):
        super().__init__(message)
        problem = problem or {}
        self.status = status
        self.problem = problem
        self.type = problem.get("type")
        self.title = problem.get("title")
        self.detail = problem.get("detail", message)
        self.errors = list(problem.get("errors", []))
        self.request_id = request_id

    def __repr__(self) -> str:
        return f"{type(self).__name__}(status={self.status}, request_id={self.request_id!r}, detail={self.detail!r})"

    def __str__(self) -> str:
        lines = [self.detail or super().__str__()]
        lines += [f"  {e.get('pointer', '')}: {e.get('detail', '')}" for e in self.errors[:10]]
        return "\n".join(lines)


class MalformedRequestError(LagwiseError):
    """The service could not read the request (400, 413, 415)."""


class ValidationError(LagwiseError, ValueError):
    """One or more fields are invalid (422); ``errors`` names each one."""


class LimitError(ValidationError):
    """The request exceeds a configured limit (422 limit-exceeded)."""

    def __init__(self, message: str, **kwargs):
        super().__init__(message, **kwargs)
        self.limit = self.problem.get("limit")
        self.allowed = self.problem.get("allowed")
        self.requested = self.problem.get("requested")


class ColumnsError(ValidationError):
    """``columns`` names a sample member that does not exist, or a column the table lacks.

    Raised before anything is sent (``status`` is None).

    Attributes
    ----------
    key : str
        The offending key of ``columns``.
    column : str or None
        The table column it maps to (None when the key itself is unknown).
    available : tuple of str
        The sample members (unknown key) or the table's columns (missing column).
    """

    def __init__(self, message: str, *, key: str, column: str | None, available, **kwargs):
        super().__init__(message, **kwargs)
        self.key = key
        self.column = column
        self.available = tuple(available)


class AuthError(LagwiseError, PermissionError):
    """Missing or unknown API key (401)."""


class UnavailableError(LagwiseError):
    """The service stayed unavailable or overloaded through every retry (429, 502, 503, 504)."""


class DeadlineError(UnavailableError):
    """The request ran past the service's time budget (503 deadline-exceeded).

    Never retried: the same request would run past the same deadline again. Ask for less work
    (fewer samples, targets, classes or folds).
    """


class TransportError(LagwiseError, ConnectionError):
    """No HTTP answer: connection refused or reset, or a timeout."""


class ResponseError(LagwiseError):
    """An answer the client cannot read: not a JSON object, or a member it needs is missing."""


def error_for(status: int, problem: dict, request_id: str | None) -> LagwiseError:
    """The exception for an HTTP error status and its problem document (the one status table)."""
    message = problem.get("detail") or problem.get("title") or f"HTTP {status}"
    kwargs = dict(status=status, problem=problem, request_id=request_id)
    kind = problem_kind(problem.get("type"))
    if status == 422:
        return (LimitError if kind == "limit-exceeded" else ValidationError)(message, **kwargs)
    if status in (400, 413, 415):
        return MalformedRequestError(message, **kwargs)
    if status == 401:
        return AuthError(message, **kwargs)
    if status == 503 and kind == "deadline-exceeded":
        return DeadlineError(message, **kwargs)
    if status in (429, 502, 503, 504):
        return UnavailableError(message, **kwargs)
    return LagwiseError(message, **kwargs)
