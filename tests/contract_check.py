"""Every response the test suite receives is checked against the committed contract (openapi-core).

:class:`ContractClient` replaces Flask's test client for the whole session (see
``tests/conftest.py``): after each request it checks that the status is declared for
the path and method and that the body and media type match the declared schema, and
fails the test on a mismatch. Paths or methods the contract does not list must answer
404 or 405 with a valid problem. CORS preflights (OPTIONS) and HEAD are outside the
contract and are not checked.
"""

from __future__ import annotations

import functools
import json
from pathlib import Path

import pyarrow as pa
import yaml
from flask.testing import FlaskClient
from openapi_core import Config, OpenAPI
from openapi_core.contrib.werkzeug import WerkzeugOpenAPIRequest, WerkzeugOpenAPIResponse
from openapi_core.templating.paths.exceptions import OperationNotFound, PathNotFound
from openapi_schema_validator import OAS31Validator

CONTRACT = Path(__file__).resolve().parents[1] / "openapi" / "openapi.yaml"
UNCHECKED_METHODS = frozenset({"OPTIONS", "HEAD"})
TALLY = {"checked": 0, "mismatches": 0}


class ContractMismatch(AssertionError):
    """A response that the committed contract does not allow."""


def _arrow_stream(body: bytes) -> str:
    """An Arrow answer must be a readable Arrow IPC stream (pyarrow); its JSON metadata stands for the string."""
    return pa.ipc.open_stream(body).read_all().schema.metadata[b"response"].decode()


# openapi-core reads application/json itself; the problem, YAML and Arrow media types are added here.
MEDIA_TYPES = {
    "application/problem+json": json.loads,
    "application/yaml": yaml.safe_load,
    "application/vnd.apache.arrow.stream": _arrow_stream,
}


@functools.cache
def _document() -> dict:
    return yaml.safe_load(CONTRACT.read_text())


@functools.cache
def contract() -> OpenAPI:
    return OpenAPI.from_dict(_document(), config=Config(extra_media_type_deserializers=MEDIA_TYPES))


@functools.cache
def _problem_validator() -> OAS31Validator:
    return OAS31Validator({"$ref": "#/components/schemas/Problem", "components": _document()["components"]})


class _AnsweredRequest(WerkzeugOpenAPIRequest):
    """The request as openapi-core needs it to find the operation; its body was already read."""

    @property
    def body(self) -> bytes:
        return b""


def _fail(response, why: str) -> None:
    TALLY["mismatches"] += 1
    request = response.request
    raise ContractMismatch(
        f"{request.method} {request.path} -> {response.status_code}: the response breaks the contract: {why}\n"
        f"body: {response.get_data(as_text=True)[:600]}"
    )


def check(response) -> None:
    """Fail with :class:`ContractMismatch` unless the contract allows ``response`` to its request."""
    request = response.request
    if request.method in UNCHECKED_METHODS:
        return
    TALLY["checked"] += 1
    try:
        contract().validate_response(_AnsweredRequest(request), WerkzeugOpenAPIResponse(response))
    except (PathNotFound, OperationNotFound) as exc:
        expected = 404 if isinstance(exc, PathNotFound) else 405
        if response.status_code != expected or response.mimetype != "application/problem+json":
            _fail(response, f"{exc}; expected a {expected} problem")
        errors = list(_problem_validator().iter_errors(json.loads(response.get_data())))
        if errors:
            _fail(response, "; ".join(e.message for e in errors[:3]))
    except Exception as exc:  # every other openapi-core error is a mismatch to report
        causes = getattr(exc, "schema_errors", None) or [getattr(exc, "__cause__", None)]
        details = "; ".join(f"{getattr(c, 'message', c)} at {list(getattr(c, 'absolute_path', []))}" for c in causes)
        _fail(response, f"{type(exc).__name__}: {exc} {details}")


class ContractClient(FlaskClient):
    """Flask's test client, checking every response against the contract."""

    def open(self, *args, **kwargs):
        response = super().open(*args, **kwargs)
        check(response)
        return response
