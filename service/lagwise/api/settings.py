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
LAGWISE_MEMORY_BUDGET_BYTES    268435456   working memory of one request's largest arrays (256 MiB):
                                           batched kriging solves are cut to fit it; unique-
                                           neighbourhood matrices beyond it are refused
LAGWISE_THREADS                cores/workers  compute threads per worker process
LAGWISE_DEADLINE_SECONDS       60          time budget of one request; past it -> 503
LAGWISE_API_KEYS               (none)      comma-separated SHA-256 hex digests of API keys
LAGWISE_API_KEYS_FILE          (none)      file of SHA-256 hex digests, one per line (# comments)
LAGWISE_CORS_ORIGINS           (none)      comma-separated origins allowed by CORS (off when empty)
LAGWISE_METRICS_BIND           (none)      serve /metrics on this address instead (gunicorn master)
=============================  ==========  ==============================================

With no API key digest configured, the service is open (for a private network).
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


def _digests(env: Mapping[str, str]) -> frozenset[str]:
    entries = [d for d in env.get("LAGWISE_API_KEYS", "").split(",")]
    path = env.get("LAGWISE_API_KEYS_FILE")
    if path:
        with open(path, encoding="utf-8") as handle:
            entries += [line.split("#", 1)[0] for line in handle]
    digests = frozenset(e.strip().lower() for e in entries if e.strip())
    bad = [d for d in digests if len(d) != 64 or any(c not in "0123456789abcdef" for c in d)]
    if bad:
        raise ValueError("LAGWISE_API_KEYS / LAGWISE_API_KEYS_FILE must hold SHA-256 hex digests (64 hex characters)")
    return digests


@dataclass(frozen=True)
class Settings:
    """Resolved service settings (see the module table)."""

    max_body_bytes: int = DEFAULT_MAX_BODY_BYTES
    limits: Limits = field(default_factory=Limits)
    deadline_seconds: float = 60.0
    api_key_digests: frozenset[str] = frozenset()
    cors_origins: frozenset[str] = frozenset()
    metrics_on_main_listener: bool = True

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
            deadline_seconds=float(_int_env(env, "LAGWISE_DEADLINE_SECONDS", 60)),
            api_key_digests=_digests(env),
            cors_origins=frozenset(o.strip() for o in env.get("LAGWISE_CORS_ORIGINS", "").split(",") if o.strip()),
            metrics_on_main_listener=not env.get("LAGWISE_METRICS_BIND"),
        )
