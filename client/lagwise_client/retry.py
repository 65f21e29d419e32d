"""Retry policy: which failures are retried, and how long to wait (capped exponential backoff
with jitter, honouring ``Retry-After``).

Every endpoint is idempotent, so a retry never changes a result; what a retry can cost is a
second full computation. The policy therefore retries what the service did not (or could not)
compute: refused or reset connections, connection timeouts, 429, 502, 503 and 504. It does not
retry:

* a read timeout on a computing endpoint (``POST``) unless ``retry_read_timeouts`` is set: the
  service is most likely still computing, and resending starts the same computation again;
* a 503 whose problem type is ``deadline-exceeded``: the same request runs past the same
  deadline again.
"""

from __future__ import annotations

import random
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from email.utils import parsedate_to_datetime

RETRY_STATUSES = frozenset({429, 502, 503, 504})
FINAL_PROBLEM_TYPES = frozenset({"deadline-exceeded"})


@dataclass(frozen=True)
class RetryPolicy:
    """How the client retries.

    Attributes
    ----------
    retries : int
        Retries after the first attempt (0 disables retrying).
    backoff : float, seconds
        First delay; doubles on every retry.
    cap : float, seconds
        Longest delay between attempts (also caps ``Retry-After``).
    jitter : float
        Each computed delay is multiplied by a uniform factor in [1 - jitter, 1].
    retry_read_timeouts : bool
        Also retry a read timeout (no answer within ``timeout`` after the request was sent) on
        computing endpoints; off by default because the service is then usually still
        computing. Read timeouts of ``GET`` requests are always retried.
    sleep : callable
        Called with the delay in seconds (tests replace it).
    random : callable
        Uniform numbers in [0, 1) for the jitter (tests replace it).
    """

    retries: int = 3
    backoff: float = 0.25
    cap: float = 8.0
    jitter: float = 0.5
    retry_read_timeouts: bool = False
    sleep: Callable[[float], None] = field(default=time.sleep, compare=False)
    random: Callable[[], float] = field(default=random.random, compare=False)

    def __post_init__(self) -> None:
        if self.retries < 0:
            raise ValueError(f"retries must be 0 or more, got {self.retries}")
        if self.backoff < 0 or self.cap < 0:
            raise ValueError(f"backoff and cap must be 0 or more seconds, got {self.backoff} and {self.cap}")
        if not 0.0 <= self.jitter <= 1.0:
            raise ValueError(f"jitter must lie in [0, 1], got {self.jitter}")

    def delay(self, attempt: int, retry_after: str | None = None) -> float:
        """Seconds to wait before retry number ``attempt`` (0-based)."""
        hinted = parse_retry_after(retry_after)
        if hinted is not None:
            return min(self.cap, hinted)
        base = min(self.cap, self.backoff * (2**attempt))
        return base * (1.0 - self.jitter * self.random())

    def retries_status(self, status: int, problem_type: str | None) -> bool:
        """Whether an HTTP answer with ``status`` and problem ``type`` is worth another attempt."""
        if status not in RETRY_STATUSES:
            return False
        return problem_kind(problem_type) not in FINAL_PROBLEM_TYPES

    def retries_failure(self, *, read_timeout: bool, computing: bool) -> bool:
        """Whether a request that got no HTTP answer is worth another attempt.

        Parameters
        ----------
        read_timeout : bool
            The request was sent and no complete answer came within the timeout.
        computing : bool
            The endpoint computes (``POST``); resending repeats the computation.
        """
        return not (read_timeout and computing and not self.retry_read_timeouts)


def problem_kind(problem_type: str | None) -> str | None:
    """The last path segment of a problem ``type`` URI (``/problems/not-ready`` -> ``not-ready``)."""
    if not problem_type:
        return None
    return str(problem_type).rstrip("/").rsplit("/", 1)[-1]


def parse_retry_after(value: str | None) -> float | None:
    """Seconds from a ``Retry-After`` header (delta-seconds or HTTP-date), or None."""
    if not value:
        return None
    value = value.strip()
    if value.isdigit():
        return float(value)
    try:
        when = parsedate_to_datetime(value)
    except (TypeError, ValueError):
        return None
    return max(0.0, when.timestamp() - time.time())
