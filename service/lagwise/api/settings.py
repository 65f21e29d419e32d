"""Service settings resolved from the ``LAGWISE_*`` environment variables.

The variables, their defaults and meanings are listed once, in
:mod:`lagwise.configuration` (the README's table is generated from it). With no API
key digest configured, the service is open (for a private network).
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from dataclasses import dataclass, field, fields, replace

from ..configuration import value, whole_number
from ..core.limits import Limits

DEFAULT_MAX_BODY_BYTES = int(value("LAGWISE_MAX_BODY_BYTES", {}))


def _digests(env: Mapping[str, str]) -> frozenset[str]:
    entries = value("LAGWISE_API_KEYS", env).split(",")
    path = value("LAGWISE_API_KEYS_FILE", env)
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
    """Resolved service settings (see :mod:`lagwise.configuration` for the variables)."""

    max_body_bytes: int = DEFAULT_MAX_BODY_BYTES
    max_arrow_bytes: int = int(value("LAGWISE_MAX_ARROW_BYTES", {}))
    max_arrow_rows: int = int(value("LAGWISE_MAX_ARROW_ROWS", {}))
    max_arrow_cells: int = int(value("LAGWISE_MAX_ARROW_CELLS", {}))
    limits: Limits = field(default_factory=Limits)
    deadline_seconds: float = 60.0
    api_key_digests: frozenset[str] = frozenset()
    cors_origins: frozenset[str] = frozenset()
    metrics_on_main_listener: bool = True

    @classmethod
    def from_env(cls, env: Mapping[str, str] | None = None) -> Settings:
        """Read the ``LAGWISE_*`` variables (``os.environ`` by default)."""
        env = os.environ if env is None else env
        limit_values = {f.name: whole_number(f"LAGWISE_{f.name.upper()}", env) for f in fields(Limits)}
        return cls(
            max_body_bytes=whole_number("LAGWISE_MAX_BODY_BYTES", env),
            max_arrow_bytes=whole_number("LAGWISE_MAX_ARROW_BYTES", env),
            max_arrow_rows=whole_number("LAGWISE_MAX_ARROW_ROWS", env),
            max_arrow_cells=whole_number("LAGWISE_MAX_ARROW_CELLS", env),
            limits=Limits(**limit_values),
            deadline_seconds=float(whole_number("LAGWISE_DEADLINE_SECONDS", env)),
            api_key_digests=_digests(env),
            cors_origins=frozenset(o.strip() for o in value("LAGWISE_CORS_ORIGINS", env).split(",") if o.strip()),
            metrics_on_main_listener=not value("LAGWISE_METRICS_BIND", env),
        )

    def for_arrow_samples(self) -> Settings:
        """The settings of a request whose samples came as an Arrow stream: its row limit replaces
        ``LAGWISE_MAX_SAMPLES`` (the stream was already refused above it, before its columns were read)."""
        return replace(self, limits=replace(self.limits, max_samples=max(self.limits.max_samples, self.max_arrow_rows)))
