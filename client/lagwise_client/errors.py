"""Exceptions of the Lagwise client.

::

    LagwiseError                      any failure; carries the RFC 9457 problem fields
     ├── MalformedRequestError        400, 413, 415: the body could not be read
     ├── ValidationError (ValueError) 422 invalid-input: see .errors for each field
     │    └── LimitError              422 limit-exceeded: .limit, .allowed, .requested
     ├── AuthError                    401: missing or unknown API key
     ├── UnavailableError             429, 502, 503, 504 after the retries ran out
     └── TransportError               no answer: connection refused, reset, timed out
"""

from __future__ import annotations


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


class AuthError(LagwiseError, PermissionError):
    """Missing or unknown API key (401)."""


class UnavailableError(LagwiseError):
    """The service stayed unavailable or overloaded through every retry (429, 502, 503, 504)."""


class TransportError(LagwiseError, ConnectionError):
    """No HTTP answer: connection refused or reset, or a timeout."""


def error_for(status: int, problem: dict, request_id: str | None) -> LagwiseError:
    """The exception for an HTTP error status and its problem document (the one status table)."""
    message = problem.get("detail") or problem.get("title") or f"HTTP {status}"
    kwargs = dict(status=status, problem=problem, request_id=request_id)
    if status == 422:
        kind = str(problem.get("type", ""))
        return (LimitError if kind.endswith("limit-exceeded") else ValidationError)(message, **kwargs)
    if status in (400, 413, 415):
        return MalformedRequestError(message, **kwargs)
    if status == 401:
        return AuthError(message, **kwargs)
    if status in (429, 502, 503, 504):
        return UnavailableError(message, **kwargs)
    return LagwiseError(message, **kwargs)
