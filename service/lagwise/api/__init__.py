"""The Flask web layer: ``create_app`` builds the service."""

from __future__ import annotations

import threading
from collections.abc import Mapping
from pathlib import Path

from flask import Flask, Response

from ..core.warmup import warm_kernels
from . import members, observability, security
from .jsonio import dumps
from .negotiation import check_acceptable
from .openapi import DOCUMENTS, as_dict, as_yaml
from .operations import blueprint
from .problems import Problem, register_error_handlers
from .settings import Settings

# The media type each fixed document is served as (the contract's), checked against Accept.
SERVED_AS = {doc.operation_id: doc.media_type for doc in DOCUMENTS}
# The page's own script and styles are inline; it talks only to this service.
PAGE_POLICY = (
    "default-src 'none'; script-src 'unsafe-inline'; style-src 'unsafe-inline'; img-src data: blob:; "
    "connect-src 'self'; form-action 'none'; frame-ancestors 'none'; base-uri 'none'"
)


def create_app(config: Mapping | None = None, *, settings: Settings | None = None, warm: bool = True) -> Flask:
    """Build the Lagwise WSGI application.

    Parameters
    ----------
    config : mapping, optional
        Extra Flask configuration (e.g. ``{"TESTING": True}``).
    settings : Settings, optional
        Limits and sizes; default read from the ``LAGWISE_*`` environment variables.
    warm : bool
        Compile or load and run the pair kernels before returning, so that
        ``/readyz`` is ready and no request pays for compilation.
    """
    settings = settings or Settings.from_env()
    app = Flask(__name__)
    app.config.update(MAX_CONTENT_LENGTH=settings.max_body_bytes, PROPAGATE_EXCEPTIONS=False)
    app.config.update(config or {})
    app.extensions["lagwise"] = settings
    ready = threading.Event()
    app.extensions["lagwise_ready"] = ready

    observability.install(app)
    security.install(app)

    @app.get("/metrics")
    def metrics():
        check_acceptable((SERVED_AS["metrics"],))
        if not settings.metrics_on_main_listener:
            raise Problem("not-found", "metrics are served on LAGWISE_METRICS_BIND")
        return observability.metrics_response()

    page = (Path(__file__).parent / "static" / "page.html").read_bytes()

    @app.get("/")
    def home():
        check_acceptable((SERVED_AS["page"],))
        response = Response(page, mimetype="text/html")
        response.headers["Content-Security-Policy"] = PAGE_POLICY
        return response

    @app.get("/openapi.json")
    def openapi_json():
        check_acceptable((SERVED_AS["openapi_json"],))
        return Response(dumps(as_dict()), mimetype="application/json")

    @app.get("/openapi.yaml")
    def openapi_yaml():
        check_acceptable((SERVED_AS["openapi_yaml"],))
        return Response(as_yaml(), mimetype="application/yaml")

    app.register_blueprint(blueprint)
    register_error_handlers(app)
    if warm:
        warm_kernels()
        members.warm()
        ready.set()
    return app
