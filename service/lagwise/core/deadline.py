"""A per-request time budget that long computations check between stages.

The service sets a deadline around each request (``with deadline(seconds): ...``);
loops over chunks, folds and candidates call :func:`check_deadline`, which raises
:class:`DeadlineExceeded` once the budget is spent, so a worker is never killed
mid-request and the caller gets a clear refusal instead.
"""

from __future__ import annotations

import contextlib
import time
from contextvars import ContextVar

from .errors import LagwiseCoreError

# (monotonic end time, budget in seconds), or None outside a deadline.
_deadline: ContextVar[tuple[float, float] | None] = ContextVar("lagwise_deadline", default=None)


class DeadlineExceeded(LagwiseCoreError):
    """The request ran past its time budget (seconds)."""

    def __init__(self, seconds: float):
        self.seconds = seconds
        super().__init__(f"the request ran past its time budget of {seconds:g} s")


@contextlib.contextmanager
def deadline(seconds: float | None):
    """Give the enclosed work ``seconds`` of wall time (None: no limit)."""
    token = _deadline.set(None if seconds is None else (time.monotonic() + seconds, seconds))
    try:
        yield
    finally:
        _deadline.reset(token)


def check_deadline() -> None:
    """Raise :class:`DeadlineExceeded` if the current deadline has passed."""
    current = _deadline.get()
    if current is not None and time.monotonic() > current[0]:
        raise DeadlineExceeded(current[1])
