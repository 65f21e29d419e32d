"""Exceptions raised by the numerical core.

The core never formats HTTP responses; the web layer maps these exceptions to
RFC 9457 problems in one place.

``LagwiseCoreError``
 ├── ``InvalidInput``   -- input that can never be computed (names each offending field)
 │    └── ``SingularSystem`` -- a kriging system the samples and model make singular or
 │                              ill-conditioned (an analysis falls back to another strategy)
 └── ``LimitExceeded``  -- valid input whose estimated cost exceeds a configured limit
"""

from __future__ import annotations

import contextlib
from collections.abc import Iterator
from dataclasses import dataclass, replace


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
    """Input that cannot be computed; carries one :class:`FieldIssue` per problem listed.

    ``total`` counts every invalid field when only the first few are listed in ``issues``
    (e.g. 150,000 bad values, 20 listed); it defaults to the number listed.
    """

    def __init__(self, issues: list[FieldIssue] | FieldIssue, summary: str | None = None, total: int | None = None):
        self.issues = [issues] if isinstance(issues, FieldIssue) else list(issues)
        self.summary = summary or self.issues[0].detail
        self.total = max(total or 0, len(self.issues))
        super().__init__(self.summary)

    @classmethod
    def at(cls, pointer: str, detail: str) -> InvalidInput:
        """Build an error about a single field."""
        return cls(FieldIssue(pointer, detail))

    def under(self, base: str) -> InvalidInput:
        """The same error with every pointer moved under ``base`` (e.g. ``/fit``)."""
        moved = type(self).__new__(type(self))
        InvalidInput.__init__(
            moved, [replace(i, pointer=base + i.pointer) for i in self.issues], self.summary, self.total
        )
        return moved


class SingularSystem(InvalidInput):
    """A kriging system that cannot be solved reliably (singular or ill-conditioned)."""


@contextlib.contextmanager
def pointers_under(base: str) -> Iterator[None]:
    """Re-raise any :class:`InvalidInput` raised inside with its pointers under ``base``.

    The separate endpoints take each stage's options at the top of the request; the
    analysis request nests them (``/variogram``, ``/fit``, ``/cross_validation``,
    ``/prediction``), so the same core validators serve both.
    """
    if not base:
        yield
        return
    try:
        yield
    except InvalidInput as exc:
        raise exc.under(base) from None


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
