"""Exceptions raised by the numerical core.

The core never formats HTTP responses; the web layer maps these exceptions to
RFC 9457 problems in one place.

``LagwiseCoreError``
 ├── ``InvalidInput``   -- input that can never be computed (names each offending field)
 └── ``LimitExceeded``  -- valid input whose estimated cost exceeds a configured limit
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class FieldIssue:
    """One problem with one input field.

    Attributes
    ----------
    pointer : str
        JSON Pointer (RFC 6901) into the request, e.g. ``/samples/values/17``.
    detail : str
        What is wrong, in plain words.
    """

    pointer: str
    detail: str


class LagwiseCoreError(Exception):
    """Root of the core's exceptions."""


class InvalidInput(LagwiseCoreError):
    """Input that cannot be computed; carries one :class:`FieldIssue` per problem."""

    def __init__(self, issues: list[FieldIssue] | FieldIssue, summary: str | None = None):
        self.issues = [issues] if isinstance(issues, FieldIssue) else list(issues)
        self.summary = summary or self.issues[0].detail
        super().__init__(self.summary)

    @classmethod
    def at(cls, pointer: str, detail: str) -> InvalidInput:
        """Build an error about a single field."""
        return cls(FieldIssue(pointer, detail))


class LimitExceeded(LagwiseCoreError):
    """The request is valid but would cost more than a configured limit allows.

    Parameters
    ----------
    limit : str
        Name of the limit (the ``LAGWISE_*`` variable that sets it).
    allowed : float
        The configured value.
    requested : float
        The estimated cost of the request in the same unit.
    advice : str
        What the caller can change to fit under the limit.
    pointer : str
        The field the cost mostly depends on.
    """

    def __init__(self, limit: str, allowed: float, requested: float, advice: str, pointer: str = ""):
        self.limit = limit
        self.allowed = allowed
        self.requested = requested
        self.advice = advice
        self.pointer = pointer
        super().__init__(f"{limit} is {allowed:g}; this request needs {requested:g}. {advice}")
