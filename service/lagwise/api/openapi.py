"""The OpenAPI document, generated from the marshmallow schemas (apispec)."""

from __future__ import annotations

import yaml
from apispec import APISpec
from apispec.ext.marshmallow import MarshmallowPlugin

from .. import __version__
from .fields import choice_properties, directions_properties, number_array_properties
from .operations import OPERATIONS
from .problems import KINDS, PROBLEM_MEDIA_TYPE
from .schemas import DirectionSchema, ProblemSchema

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

Estimates are statistical; decisions about health or safety follow local
regulations and the judgement of a qualified professional.
"""


def build_spec() -> APISpec:
    """Build the :class:`apispec.APISpec` of the service."""
    plugin = MarshmallowPlugin()
    spec = APISpec(
        title="Lagwise",
        version=__version__,
        openapi_version="3.0.3",
        plugins=[plugin],
        info={"description": DESCRIPTION, "license": {"name": "Proprietary"}},
    )
    plugin.converter.add_attribute_function(number_array_properties)
    plugin.converter.add_attribute_function(choice_properties)
    plugin.converter.add_attribute_function(directions_properties)
    spec.components.schema("Problem", schema=ProblemSchema)
    spec.components.schema("Direction", schema=DirectionSchema)
    for op in sorted(OPERATIONS, key=lambda o: o.path):
        responses = {"200": {"description": "Success", "content": {"application/json": {"schema": op.response}}}}
        for status in op.errors:
            titles = sorted({k.title for k in KINDS.values() if k.status == status})
            responses[str(status)] = {
                "description": " / ".join(titles),
                "content": {PROBLEM_MEDIA_TYPE: {"schema": "Problem"}},
            }
        body = {}
        if op.request is not None:
            body = {"requestBody": {"required": True, "content": {"application/json": {"schema": op.request}}}}
        spec.path(
            path=op.path,
            operations={
                op.method.lower(): {
                    "operationId": op.operation_id,
                    "summary": op.summary,
                    **body,
                    "responses": responses,
                }
            },
        )
    return spec


def as_dict() -> dict:
    """The OpenAPI document as a dictionary."""
    return build_spec().to_dict()


def as_yaml() -> str:
    """The OpenAPI document as YAML text (stable key order)."""
    return yaml.safe_dump(as_dict(), sort_keys=True, allow_unicode=True)
