"""One example per operation, shown in the contract and checked by the tests against the service.

The samples are small made-up values on a 5 x 4 grid of 10-unit spacing.
"""

from __future__ import annotations

from ..core.modelling.families import FIT_SCALES, family_catalogue, model_parameter_catalogue
from .problems import KINDS

_X = [float(10 * (i % 5)) for i in range(20)]
_Y = [float(10 * (i // 5)) for i in range(20)]
_VALUES = [
    round(3.0 + 0.05 * x + 0.03 * y + 0.4 * ((i * 7) % 5 - 2), 3) for i, (x, y) in enumerate(zip(_X, _Y, strict=True))
]
SAMPLES = {"x": _X, "y": _Y, "values": _VALUES}
MODEL = {"nugget": 0.1, "structures": [{"family": "spherical", "partial_sill": 0.8, "range": 35.0}]}

REQUESTS: dict[str, dict] = {
    "experimental_variograms": {
        "samples": SAMPLES,
        "lags": {"width": 10, "count": 4},
        "directions": [{"azimuth": 0, "tolerance": 22.5}, {"azimuth": 90, "tolerance": 22.5}],
        "min_pairs": 5,
    },
    "variogram_maps": {"samples": SAMPLES, "cell_size": 10, "cells": 3},
    "model_fits": {
        "samples": SAMPLES,
        "lags": {"width": 8, "count": 6},
        "families": ["spherical", "exponential"],
        "min_pairs": 5,
    },
    "cross_validations": {"samples": SAMPLES, "model": MODEL, "scheme": {"type": "leave_one_out"}},
    "predictions": {
        "samples": SAMPLES,
        "model": MODEL,
        "grid": {"origin": [0, 0], "spacing": [20, 15], "shape": [3, 3]},
    },
    "simulations": {
        "samples": SAMPLES,
        "model": {"nugget": 0.1, "structures": [{"family": "spherical", "partial_sill": 0.9, "range": 35.0}]},
        "grid": {"origin": [0, 0], "spacing": [5, 5], "shape": [8, 6]},
        "realisations": 20,
        "seed": 1,
        "thresholds": [3.5],
        "blocks": {"size": [20, 15]},
    },
    "analyses": {
        "samples": SAMPLES,
        "variogram": {"lags": {"width": 8, "count": 6}, "min_pairs": 5},
        "fit": {"families": ["spherical", "exponential"]},
    },
}

RESPONSES: dict[str, object] = {
    "healthz": {"status": "alive"},
    "model_families": {
        "families": family_catalogue()[:1],
        "model_parameters": model_parameter_catalogue()[:1],
        "fit_scales": FIT_SCALES,
        "conventions": {"range": "practical range: the distance at which a structure reaches 95 % of its partial sill"},
    },
    "readyz": {"status": "ready"},
    "problem_kind": {
        "type": "/problems/limit-exceeded",
        "title": KINDS["limit-exceeded"].title,
        "status": KINDS["limit-exceeded"].status,
        "description": KINDS["limit-exceeded"].description,
    },
    "page": "<!doctype html><html>...</html>",
    "metrics": 'lagwise_requests_total{endpoint="/healthz",method="GET",status="200"} 1.0\n',
    "openapi_json": {"openapi": "3.1.0", "info": {"title": "Lagwise", "version": "..."}, "paths": {}},
    "openapi_yaml": {"openapi": "3.1.0", "info": {"title": "Lagwise", "version": "..."}, "paths": {}},
}

LIMIT_EXCEEDED = {
    "type": "/problems/limit-exceeded",
    "title": KINDS["limit-exceeded"].title,
    "status": 422,
    "detail": "LAGWISE_MAX_SAMPLES is 200000; this request needs 250000. Send fewer samples.",
    "instance": "/v1/experimental-variograms",
    "request_id": "7f0c1d2e3a4b4c5d9e8f7a6b5c4d3e2f",
    "errors": [{"pointer": "/samples/values", "detail": "LAGWISE_MAX_SAMPLES is 200000; this request needs 250000."}],
    "limit": "LAGWISE_MAX_SAMPLES",
    "allowed": 200000,
    "requested": 250000,
}
INVALID_INPUT = {
    "type": "/problems/invalid-input",
    "title": KINDS["invalid-input"].title,
    "status": 422,
    "detail": "/samples/values/17: not a number",
    "instance": "/v1/experimental-variograms",
    "request_id": "7f0c1d2e3a4b4c5d9e8f7a6b5c4d3e2f",
    "errors": [{"pointer": "/samples/values/17", "detail": "not a number"}],
}
