"""Every ``LAGWISE_*`` environment variable: name, default, meaning, in one table.

The service settings (``lagwise.api.settings``), the gunicorn configuration
(``lagwise.serving.gunicorn_conf``) and the front (``lagwise.serving.front``) read
their variables through :func:`value`, so a variable cannot be read without being
listed here. The README's configuration table is :func:`markdown_table` (``lagwise
settings`` prints it; a test compares the two). This module imports nothing heavy:
the front process reads it without loading Flask or numpy.

The cost limits (``LAGWISE_MAX_SAMPLES`` ...) are the fields of
:class:`lagwise.core.limits.Limits`; their defaults and meanings are taken from that
class, so a new limit appears here without a second definition.
"""

from __future__ import annotations

import os
import re
from collections.abc import Mapping
from dataclasses import MISSING, dataclass, fields

from .core.limits import Limits


@dataclass(frozen=True)
class Variable:
    """One environment variable.

    Attributes
    ----------
    name : str
        The variable, e.g. ``LAGWISE_WORKERS``.
    default : str
        The value used when it is unset or empty, as written in the environment;
        empty when there is no value (the feature is off) or when it is computed
        (``shown`` then says how).
    meaning : str
        One line for the documentation.
    shown : str
        The default as documented, when it is not a literal value (e.g. ``cores``).
    """

    name: str
    default: str
    meaning: str
    shown: str = ""

    @property
    def documented_default(self) -> str:
        """The default as the README shows it."""
        if self.shown:
            return self.shown
        return f"`{self.default}`" if self.default else "none"


def _limit_meaning(name: str) -> str:
    """The first sentence of a :class:`Limits` attribute's description, without its variable name."""
    doc = Limits.__doc__ or ""
    match = re.search(rf"^\s*{name} : [^\n]*\n((?:\s{{8}}[^\n]*\n?)+)", doc, re.MULTILINE)
    if match is None:
        return "cost limit checked before work (422 `limit-exceeded` above it)"
    text = " ".join(line.strip() for line in match.group(1).splitlines())
    text = re.sub(r",\s*``LAGWISE_[A-Z_]+``", "", text)
    text = re.sub(r"``LAGWISE_[A-Z_]+``[;,]?\s*", "", text)
    text = re.sub(r"\s*\(\)", "", text).replace("``", "`").rstrip(".")
    return text[0].lower() + text[1:]


def _limit_default(f) -> str:
    value = f.default if f.default is not MISSING else f.default_factory()
    return f"{value:.0e}".replace("e+", "e") if isinstance(value, int) and value >= 10**10 else str(value)


SERVING = (
    Variable("LAGWISE_BIND", "127.0.0.1:8750", "listen address (host:port); `lagwise serve --bind` wins over it"),
    Variable("LAGWISE_WORKERS", "", "gunicorn sync workers (CPU-bound work: one per core)", shown="cores"),
    Variable(
        "LAGWISE_THREADS",
        "",
        "compute threads per worker; keep workers × threads ≤ cores",
        shown="cores ÷ workers, at least 1",
    ),
    Variable(
        "LAGWISE_DEADLINE_SECONDS",
        "60",
        "time budget of one request; past it the answer is a 503 `deadline-exceeded` problem "
        "(the worker timeout sits 30 s above it)",
    ),
    Variable("LAGWISE_GRACEFUL_SECONDS", "90", "on SIGTERM, how long in-flight requests may run before workers stop"),
    Variable("LAGWISE_MAX_REQUESTS", "2000", "a worker is replaced after this many requests (10 % jitter)"),
    Variable("LAGWISE_TRUSTED_PROXIES", "127.0.0.1", "addresses whose `X-Forwarded-*` headers gunicorn trusts"),
    Variable(
        "LAGWISE_RECEIVE_SECONDS",
        "30",
        "time a client has to send a whole request (line, headers and body) to the front; past it a 408 problem",
    ),
    Variable(
        "LAGWISE_MAX_CONNECTIONS",
        "1000",
        "client connections the front holds at once; more are answered 503 `overloaded` at once",
    ),
    Variable("LAGWISE_METRICS_BIND", "", "serve `/metrics` on this separate address (and not on the main listener)"),
    Variable("LAGWISE_LOG_LEVEL", "info", "log level; logs are JSON lines on stderr, never sample data"),
)

SERVICE = (
    Variable("LAGWISE_MAX_BODY_BYTES", str(64 * 1024 * 1024), "largest request body, after decoding (413 above)"),
    Variable(
        "LAGWISE_MAX_ARROW_BYTES",
        str(512 * 1024 * 1024),
        "largest multipart body with the samples as an Arrow stream, after decoding (413 above); "
        "the front receives bodies up to this size when they are multipart; set below "
        "`LAGWISE_MAX_BODY_BYTES`, that larger limit applies to multipart bodies too",
    ),
    Variable(
        "LAGWISE_MAX_ARROW_ROWS",
        "10000000",
        "samples per Arrow stream, counted from its batch headers before the columns are read "
        "(422 `limit-exceeded` above); it replaces `LAGWISE_MAX_SAMPLES` for such requests",
    ),
    Variable(
        "LAGWISE_MAX_ARROW_CELLS",
        str(4096 * 4096),
        "raster cells per Arrow stream (a raster's values as one Arrow column), counted from its batch headers "
        "before the column is read (422 `limit-exceeded` above)",
    ),
    *(Variable(f"LAGWISE_{f.name.upper()}", _limit_default(f), _limit_meaning(f.name)) for f in fields(Limits)),
    Variable(
        "LAGWISE_API_KEYS",
        "",
        "comma-separated SHA-256 hex digests of the accepted API keys (the service is open when no digest is set)",
    ),
    Variable("LAGWISE_API_KEYS_FILE", "", "file of SHA-256 hex digests, one per line (`#` starts a comment)"),
    Variable("LAGWISE_CORS_ORIGINS", "", "comma-separated origins allowed by CORS (off when empty)"),
)

TOOLING = (Variable("LAGWISE_PORT", "8750", "port of `python3 manage.py run` (not read by the service)"),)

VARIABLES: tuple[Variable, ...] = SERVING + SERVICE + TOOLING
BY_NAME = {v.name: v for v in VARIABLES}


def value(name: str, env: Mapping[str, str] | None = None) -> str:
    """The variable's value in ``env`` (``os.environ`` by default), or its default when unset or empty.

    Raises
    ------
    KeyError
        For a name that is not in the table (so every variable read is documented).
    """
    variable = BY_NAME[name]
    raw = (os.environ if env is None else env).get(name, "")
    return raw if raw.strip() else variable.default


def whole_number(name: str, env: Mapping[str, str] | None = None, *, fallback: int | None = None) -> int:
    """The variable as a whole number of at least 1 (``1e6`` is accepted); ``fallback`` for a computed default."""
    raw = value(name, env)
    if raw == "" and fallback is not None:
        return fallback
    try:
        number = int(float(raw))
    except ValueError as exc:
        raise ValueError(f"{name} must be a whole number, got {raw!r}") from exc
    if number < 1:
        raise ValueError(f"{name} must be at least 1, got {raw!r}")
    return number


def markdown_table() -> str:
    """The README's configuration table."""
    lines = ["| variable | default | meaning |", "|---|---|---|"]
    lines += [f"| `{v.name}` | {v.documented_default} | {v.meaning} |" for v in VARIABLES]
    return "\n".join(lines) + "\n"
