"""API keys, CORS and security headers."""

from __future__ import annotations

import hashlib
import hmac

from flask import Flask, Response, request

from .problems import Problem

# Open even when keys are configured: the probes, the page (whose own key field must be
# reachable), the contract and the problem descriptions. Everything that computes needs a key.
OPEN_PATHS = frozenset({"/healthz", "/readyz", "/", "/openapi.json", "/openapi.yaml"})
OPEN_PREFIXES = ("/problems/",)
SECURITY_HEADERS = {
    "X-Content-Type-Options": "nosniff",
    "X-Frame-Options": "DENY",
    "Referrer-Policy": "no-referrer",
    "Cache-Control": "no-store",
    "Content-Security-Policy": "default-src 'none'; frame-ancestors 'none'",
}


def is_open(path: str) -> bool:
    """Whether ``path`` answers without an API key."""
    return path in OPEN_PATHS or path.startswith(OPEN_PREFIXES)


def key_matches(presented: str, digests: frozenset[str]) -> bool:
    """Compare the SHA-256 of a presented key with every configured digest in constant time."""
    digest = hashlib.sha256(presented.encode("utf-8")).hexdigest()
    matched = False
    for known in digests:
        matched |= hmac.compare_digest(digest, known)
    return matched


def install(app: Flask) -> None:
    """Require API keys when configured; answer CORS for configured origins; add security headers."""
    settings = app.extensions["lagwise"]

    @app.before_request
    def _authenticate():
        if request.method == "OPTIONS" and settings.cors_origins:
            return Response(status=204)
        if not settings.api_key_digests or is_open(request.path):
            return None
        scheme, _, key = request.headers.get("Authorization", "").partition(" ")
        if scheme.lower() != "bearer" or not key or not key_matches(key.strip(), settings.api_key_digests):
            raise Problem("unauthorized", "send a valid API key as 'Authorization: Bearer <key>'")
        return None

    @app.after_request
    def _headers(response: Response) -> Response:
        for name, value in SECURITY_HEADERS.items():
            response.headers.setdefault(name, value)
        if response.status_code == 401:
            response.headers["WWW-Authenticate"] = 'Bearer realm="lagwise"'
        origin = request.headers.get("Origin")
        if origin and origin in settings.cors_origins:
            response.headers["Access-Control-Allow-Origin"] = origin
            response.headers["Vary"] = "Origin"
            response.headers["Access-Control-Allow-Methods"] = "GET, POST, OPTIONS"
            response.headers["Access-Control-Allow-Headers"] = "Content-Type, Authorization, X-Request-ID"
            response.headers["Access-Control-Expose-Headers"] = "X-Request-ID"
        return response
