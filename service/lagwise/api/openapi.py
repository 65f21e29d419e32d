"""The OpenAPI 3.1 document, generated from the marshmallow schemas (apispec).

Nulls follow JSON Schema 2020-12 (``type: [number, "null"]``; a nullable object is
``anyOf: [{$ref}, {type: "null"}]``). Every path declares each status it can answer,
a ``default`` problem for the unexpected, the ``X-Request-ID`` header both ways and
whether it needs an API key (the bearer scheme ``apiKey``; open paths say
``security: []``).
"""

from __future__ import annotations

from dataclasses import dataclass

import yaml
from apispec import APISpec
from apispec.ext.marshmallow import MarshmallowPlugin
from marshmallow import Schema, fields

from .. import __version__
from . import examples
from .columnar import ARROW_MEDIA_TYPE, COLUMNS, METADATA_KEY, MULTIPART_MEDIA_TYPE
from .fields import choice_properties, number_array_properties, variants_properties
from .operations import ARROW_ANSWERS, OPERATIONS
from .problems import KINDS, PROBLEM_MEDIA_TYPE
from .schemas import ArrowRaster, ProblemKindSchema, ProblemSchema, SampleOptions
from .security import is_open

OPENAPI_VERSION = "3.1.0"
DESCRIPTION = """\
Lagwise computes experimental variograms, variogram maps and related spatial
statistics from georeferenced samples. Every computing endpoint is a pure,
idempotent POST: the same request gives the same numbers, so clients may retry.

Conventions: distances in the samples' coordinate unit (metres for geographic
coordinates, projected about the data centroid); angles in degrees, azimuth
clockwise from north (+y); distance classes half-open [lower, upper); divisors N.
Refusals are RFC 9457 problems (application/problem+json) whose `errors` list
names each offending field with a JSON Pointer, down to the sample index.
Undefined values are `null` with a `reason`; NaN and Infinity never appear.

When the deployment configures API keys, every computing path needs
`Authorization: Bearer <key>`; the page, the contract, the problem descriptions
and the health probes stay open.

Estimates are statistical; decisions about health or safety follow local
regulations and the judgement of a qualified professional.
"""
SECURITY_SCHEME = "apiKey"
REQUEST_ID_DOC = (
    "Correlates a request with its logs. A well-formed value (1 to 128 of A-Z a-z 0-9 . _ : -) is echoed; "
    "otherwise the service makes one up. The same value is the problem's request_id."
)
# A readable component name for each problem status.
PROBLEM_RESPONSES = {
    400: "MalformedJSON",
    401: "Unauthorized",
    404: "NotFound",
    405: "MethodNotAllowed",
    406: "NotAcceptable",
    413: "BodyTooLarge",
    415: "UnsupportedMediaType",
    422: "InvalidInput",
    503: "Unavailable",
}


TAGS = (
    {"name": "computations", "description": "Pure, idempotent computations on samples: same request, same numbers."},
    {"name": "reference", "description": "What the service knows: model families and kinds of refusal."},
    {"name": "service", "description": "Probes, metrics, the browser page and this contract."},
)
REFERENCE = frozenset({"model_families", "problem_kind"})
COMPUTATION_NOTE = (
    "Pure and idempotent: the same request gives the same numbers, so a client may retry it. "
    "Refusals are problems naming each offending field by JSON Pointer."
)


def _tag(operation_id: str, computes: bool) -> list[str]:
    if computes:
        return ["computations"]
    return ["reference" if operation_id in REFERENCE else "service"]


@dataclass(frozen=True)
class Document:
    """A path outside the blueprint's operations that serves a fixed document (not JSON, or open)."""

    path: str
    operation_id: str
    summary: str
    media_type: str
    schema: dict | str
    errors: tuple[int, ...] = ()
    parameters: tuple[dict, ...] = ()


DOCUMENTS = (
    Document(
        "/", "page", "A browser page for people: upload a table, map columns, analyse", "text/html", {"type": "string"}
    ),
    Document("/openapi.json", "openapi_json", "This contract as JSON", "application/json", {"type": "object"}),
    Document("/openapi.yaml", "openapi_yaml", "This contract as YAML", "application/yaml", {"type": "object"}),
    Document(
        "/metrics",
        "metrics",
        "Prometheus metrics (404 when they are served on LAGWISE_METRICS_BIND instead)",
        "text/plain",
        {"type": "string"},
        errors=(404,),
    ),
    Document(
        "/problems/{kind}",
        "problem_kind",
        "Describe a kind of refusal (the type of a problem)",
        "application/json",
        "ProblemKind",
        errors=(404,),
        parameters=(
            {
                "name": "kind",
                "in": "path",
                "required": True,
                "description": "The last segment of a problem's type.",
                "schema": {"type": "string", "enum": list(KINDS)},
            },
        ),
    ),
)


def _problem_component(status: int) -> dict:
    kinds = {name: k for name, k in KINDS.items() if k.status == status}
    response: dict = {
        "description": " / ".join(k.title for k in kinds.values())
        + ": "
        + " ".join(k.description for k in kinds.values()),
        "headers": {"X-Request-ID": {"$ref": "#/components/headers/RequestId"}},
        "content": {PROBLEM_MEDIA_TYPE: {"schema": {"$ref": "#/components/schemas/Problem"}}},
    }
    if status == 422:
        response["content"][PROBLEM_MEDIA_TYPE]["examples"] = {
            "invalid-input": {"summary": "A field is invalid", "value": examples.INVALID_INPUT},
            "limit-exceeded": {"summary": "Over a configured limit", "value": examples.LIMIT_EXCEEDED},
        }
    return response


def _responses(success: dict, statuses: set[int]) -> dict:
    out = {"200": success}
    for status in sorted(statuses):
        out[str(status)] = {"$ref": f"#/components/responses/{PROBLEM_RESPONSES[status]}"}
    out["default"] = {"$ref": "#/components/responses/Unexpected"}
    return out


def _statuses(path: str, errors: tuple[int, ...]) -> set[int]:
    """Every path refuses other methods (405) and, unless open, a missing key (401)."""
    return set(errors) | {405} | (set() if is_open(path) else {401})


def _success(media_type: str, schema, example) -> dict:
    content: dict = {"schema": schema}
    if example is not None:
        content["example"] = example
    return {
        "description": "Success",
        "headers": {"X-Request-ID": {"$ref": "#/components/headers/RequestId"}},
        "content": {media_type: content},
    }


def _request_schema(request) -> object:
    if isinstance(request, tuple):
        return {"oneOf": list(request)}
    return request


SAMPLES_PART = (
    "The samples as an Apache Arrow IPC stream, sent as a file part: float columns x (required), y, z, "
    f"values (required), detection_limits (null: none) and optional ids (text) and censored (boolean); "
    f"the columns are {', '.join(COLUMNS)}. Several variables: in place of values, censored and "
    "detection_limits, one float column variables/<name> per variable (null: not measured) with optional "
    "censored/<name> (boolean) and detection_limits/<name>; a variable's unit in its field metadata key unit. "
    "Limits of their own: LAGWISE_MAX_ARROW_BYTES for the body and "
    "LAGWISE_MAX_ARROW_ROWS for the rows (it replaces LAGWISE_MAX_SAMPLES), checked before the columns are read. "
    'A raster: the request part\'s samples holds its layout ({"raster": {"origin", "spacing", "shape"}}) '
    "and the stream one number column values, nx * ny rows, x fastest, null for a missing cell "
    "(LAGWISE_MAX_ARROW_CELLS rows at most). "
    "The same samples give the same results and provenance.input_sha256 as JSON columns or a JSON raster."
)


def _options_schema(spec: APISpec, schema: type[Schema]) -> dict:
    """A reference to ``schema`` without ``samples`` (registered once as ``<name>Options``)."""
    name = f"{schema.__name__}Options"
    if name not in spec.components.schemas:
        options = type(
            name,
            (schema,),
            {
                "samples": fields.Nested(
                    ArrowRaster,
                    metadata={"description": "Only for a raster: its layout (its values are the samples part)."},
                ),
                "__doc__": f"{(schema.__doc__ or '').strip()} The options, without samples but a raster's layout "
                "(multipart form).",
            },
        )
        spec.components.schema(name, schema=options)
    return {"$ref": f"#/components/schemas/{name}"}


def _multipart_content(spec: APISpec, request) -> dict | None:
    """The multipart/form-data form of a request that carries samples (None for one that does not)."""
    forms = [r for r in (request if isinstance(request, tuple) else (request,)) if issubclass(r, SampleOptions)]
    forms = [r for r in forms if "samples" in r().fields]
    if not forms:
        return None
    refs = [_options_schema(spec, form) for form in forms]
    return {
        "schema": {
            "type": "object",
            "required": ["request", "samples"],
            "properties": {
                "request": refs[0] if len(refs) == 1 else {"oneOf": refs},
                "samples": {
                    "type": "string",
                    "format": "binary",
                    "contentMediaType": ARROW_MEDIA_TYPE,
                    "description": SAMPLES_PART,
                },
            },
        },
        "encoding": {"request": {"contentType": "application/json"}, "samples": {"contentType": ARROW_MEDIA_TYPE}},
    }


def _arrow_answer(columns: tuple[str, ...]) -> dict:
    return {
        "schema": {
            "type": "string",
            "format": "binary",
            "contentMediaType": ARROW_MEDIA_TYPE,
            "description": f"With Accept: {ARROW_MEDIA_TYPE}, an Arrow IPC stream with one float64 column per "
            "per-node array of the JSON answer (null where the JSON answer has null), named by its JSON Pointer "
            f"without the leading slash: {', '.join(columns)} (* is any member or element; those present, e.g. "
            "exceedance/0/probability). The rest of the JSON answer is JSON text in the schema metadata key "
            f"{METADATA_KEY.decode()!r}, where a moved array is left out of its object or is null in its array: "
            "putting each column back at its pointer gives the JSON answer.",
        }
    }


def build_spec() -> APISpec:
    """Build the :class:`apispec.APISpec` of the service."""
    plugin = MarshmallowPlugin()
    spec = APISpec(
        title="Lagwise",
        version=__version__,
        openapi_version=OPENAPI_VERSION,
        plugins=[plugin],
        info={
            "description": DESCRIPTION,
            "license": {"name": "Proprietary", "identifier": "LicenseRef-Proprietary"},
            "contact": {"name": "Lagwise maintainers"},
        },
        tags=list(TAGS),
        servers=[{"url": "/", "description": "The service that serves this document."}],
        # A key, or none where the deployment configures no keys; open paths override with [].
        security=[{SECURITY_SCHEME: []}, {}],
    )
    converter = plugin.converter
    assert converter is not None  # set when the spec initialised the plugin
    converter.add_attribute_function(number_array_properties)
    converter.add_attribute_function(choice_properties)
    converter.add_attribute_function(variants_properties)
    spec.components.security_scheme(
        SECURITY_SCHEME,
        {
            "type": "http",
            "scheme": "bearer",
            "description": "An API key, when the deployment configures keys (LAGWISE_API_KEYS or LAGWISE_API_KEYS_FILE): Authorization: Bearer <key>.",
        },
    )
    spec.components.header("RequestId", {"description": REQUEST_ID_DOC, "schema": {"type": "string"}})
    spec.components.parameter(
        "RequestId", "header", {"name": "X-Request-ID", "description": REQUEST_ID_DOC, "schema": {"type": "string"}}
    )
    spec.components.schema("Problem", schema=ProblemSchema)
    spec.components.schema("ProblemKind", schema=ProblemKindSchema)
    for status, name in PROBLEM_RESPONSES.items():
        spec.components.response(name, _problem_component(status))
    spec.components.response(
        "Unexpected",
        {
            "description": "Internal error: a bug, reported with the request id.",
            "headers": {"X-Request-ID": {"$ref": "#/components/headers/RequestId"}},
            "content": {PROBLEM_MEDIA_TYPE: {"schema": {"$ref": "#/components/schemas/Problem"}}},
        },
    )
    request_id = "RequestId"
    entries: list[tuple[str, str, dict]] = []
    for op in OPERATIONS:
        name = op.operation_id
        body: dict = {}
        if op.request is not None:
            body = {
                "requestBody": {
                    "required": True,
                    "content": {
                        "application/json": {
                            "schema": _request_schema(op.request),
                            "example": examples.REQUESTS[name],
                        }
                    },
                }
            }
            multipart = _multipart_content(spec, op.request)
            if multipart is not None:
                body["requestBody"]["content"][MULTIPART_MEDIA_TYPE] = multipart
        success = _success("application/json", _request_schema(op.response), examples.RESPONSES.get(name))
        if name in ARROW_ANSWERS:
            success["content"][ARROW_MEDIA_TYPE] = _arrow_answer(ARROW_ANSWERS[name])
        entries.append(
            (
                op.path,
                op.method.lower(),
                {
                    "operationId": name,
                    "summary": op.summary,
                    "description": f"{op.summary}. " + (COMPUTATION_NOTE if op.request is not None else "Read only."),
                    "tags": _tag(name, op.request is not None),
                    "parameters": [request_id],
                    **body,
                    "responses": _responses(success, _statuses(op.path, op.errors) | {406}),
                },
            )
        )
    for doc in DOCUMENTS:
        success = _success(doc.media_type, doc.schema, examples.RESPONSES[doc.operation_id])
        entries.append(
            (
                doc.path,
                "get",
                {
                    "operationId": doc.operation_id,
                    "summary": doc.summary,
                    "description": f"{doc.summary}. Read only; served as {doc.media_type}.",
                    "tags": _tag(doc.operation_id, False),
                    "parameters": [*doc.parameters, request_id],
                    "responses": _responses(success, _statuses(doc.path, doc.errors) | {406}),
                },
            )
        )
    for path, method, operation in sorted(entries, key=lambda e: e[0]):
        if is_open(path):
            operation["security"] = []
        spec.path(path=path, operations={method: operation})
    return spec


def _one_bound_per_side(node) -> None:
    """Keep only the exclusive bound where apispec wrote an inclusive one beside it (same value)."""
    if isinstance(node, dict):
        for inclusive, exclusive in (("minimum", "exclusiveMinimum"), ("maximum", "exclusiveMaximum")):
            if exclusive in node and node.get(inclusive) == node[exclusive]:
                del node[inclusive]
        for value in node.values():
            _one_bound_per_side(value)
    elif isinstance(node, list):
        for value in node:
            _one_bound_per_side(value)


def as_dict() -> dict:
    """The OpenAPI document as a dictionary."""
    document = build_spec().to_dict()
    _one_bound_per_side(document)
    return document


def as_yaml() -> str:
    """The OpenAPI document as YAML text (stable key order)."""
    return yaml.safe_dump(as_dict(), sort_keys=True, allow_unicode=True)
