"""Service configuration: ``LAGWISE_*`` environment variables and their defaults.

=============================  ==========  ==============================================
variable                       default     meaning
=============================  ==========  ==============================================
LAGWISE_MAX_BODY_BYTES         67108864    largest request body (64 MiB); larger -> 413
LAGWISE_MAX_SAMPLES            200000      samples per request
LAGWISE_MAX_PAIRS              2000000000  pairs within the search radius x direction classes
LAGWISE_MAX_MEDIAN_PAIRS       5000000     differences held for the median-based estimator
LAGWISE_MAX_SCATTER_PAIRS      100000      pairs returned for one h-scattergram
LAGWISE_MAX_MAP_CELLS          201         cells per side of a variogram map
LAGWISE_MAX_UNIQUE_SAMPLES     10000       samples for kriging with the unique neighbourhood
LAGWISE_MAX_TARGETS            2000000     prediction targets per request
LAGWISE_MAX_KRIGING_FLOPS      2e13        estimated floating-point work of one request's kriging
LAGWISE_THREADS                cores/workers  compute threads per worker process
=============================  ==========  ==============================================
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from dataclasses import dataclass, field, fields

from ..core.limits import Limits

DEFAULT_MAX_BODY_BYTES = 64 * 1024 * 1024


def _int_env(env: Mapping[str, str], name: str, default: int) -> int:
    raw = env.get(name)
    if raw is None or raw == "":
        return default
    try:
        value = int(float(raw))
    except ValueError as exc:
        raise ValueError(f"{name} must be a whole number, got {raw!r}") from exc
    if value < 1:
        raise ValueError(f"{name} must be at least 1, got {raw!r}")
    return value


@dataclass(frozen=True)
class Settings:
    """Resolved service settings (see the module table)."""

    max_body_bytes: int = DEFAULT_MAX_BODY_BYTES
    limits: Limits = field(default_factory=Limits)

    @classmethod
    def from_env(cls, env: Mapping[str, str] | None = None) -> Settings:
        """Read the ``LAGWISE_*`` variables (``os.environ`` by default)."""
        env = os.environ if env is None else env
        defaults = Limits()
        limit_values = {
            f.name: _int_env(env, f"LAGWISE_{f.name.upper()}", getattr(defaults, f.name)) for f in fields(Limits)
        }
        return cls(
            max_body_bytes=_int_env(env, "LAGWISE_MAX_BODY_BYTES", DEFAULT_MAX_BODY_BYTES),
            limits=Limits(**limit_values),
        )
