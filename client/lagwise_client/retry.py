"""Retry policy: capped exponential backoff with jitter, honouring ``Retry-After``."""

from __future__ import annotations

import random
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from email.utils import parsedate_to_datetime

RETRY_STATUSES = frozenset({429, 502, 503, 504})


@dataclass(frozen=True)
class RetryPolicy:
    """How the client retries idempotent requests.

    Attributes
    ----------
    retries : int
        Retries after the first attempt (0 disables retrying).
    backoff : float, seconds
        First delay; doubles on every retry.
    cap : float, seconds
        Longest delay between attempts (also caps ``Retry-After``).
    jitter : float
        Each delay is multiplied by a uniform factor in [1 - jitter, 1].
    sleep : callable
        Called with the delay in seconds (tests replace it).
    """

    retries: int = 3
    backoff: float = 0.25
    cap: float = 8.0
    jitter: float = 0.5
    sleep: Callable[[float], None] = field(default=time.sleep, compare=False)
    random: Callable[[], float] = field(default=random.random, compare=False)

    def delay(self, attempt: int, retry_after: str | None = None) -> float:
        """Seconds to wait before retry number ``attempt`` (0-based)."""
        hinted = parse_retry_after(retry_after)
        if hinted is not None:
            return min(self.cap, hinted)
        base = min(self.cap, self.backoff * (2**attempt))
        return base * (1.0 - self.jitter * self.random())


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
