"""Requests with a joint model of several variables: cokriging predictions and cross-validation.

The views of :mod:`.operations` hand a request here when its ``model`` names
``variables``; this module turns the document into the core's inputs, calls one core
function and serialises the result (no numerics here).
"""

from __future__ import annotations

import numpy as np

from ..core.data.variables import MultiSampleSet
from ..core.errors import FieldIssue, InvalidInput
from ..core.kriging.cokriging import CokrigingSpec, VariableColumns
from ..core.kriging.cokriging_runs import cokrige_points, cross_validate_cokriging, default_means
from ..core.limits import Limits
from ..core.modelling.coregionalisation import JointModel, JointStructure
from ..core.modelling.models import Anisotropy
from . import convert

SHAPE_MEMBERS = ("smoothness", "shape")


def is_joint(document: dict) -> bool:
    """Whether the request's model is a joint model (it names ``variables``)."""
    return isinstance(document.get("model"), dict) and "variables" in document["model"]


def joint_model(document: dict) -> JointModel:
    """The request's joint model (validated by the core when used)."""
    raw = document["model"]
    p = len(raw["variables"])
    nugget = raw.get("nugget")
    structures = []
    for s in raw["structures"]:
        aniso = s.get("anisotropy") or {}
        extra = next((s[m] for m in SHAPE_MEMBERS if s.get(m) is not None), None)
        structures.append(
            JointStructure(
                s["family"],
                float(s["range"]),
                _matrix(s["sills"]),
                extra,
                Anisotropy(aniso.get("azimuth", 0.0), aniso.get("ratio", 1.0), aniso.get("vertical_ratio", 1.0)),
            )
        )
    return JointModel(
        tuple(raw["variables"]), np.zeros((p, p)) if nugget is None else _matrix(nugget), tuple(structures)
    )


def _matrix(rows: list) -> np.ndarray:
    """A list of rows as a float matrix; ragged rows become a one-row array the core refuses by shape."""
    if len({len(r) for r in rows}) != 1:
        return np.full((1, 1), np.nan)
    return np.array(rows, dtype=np.float64)


def _refuse_single_variable_options(document: dict) -> None:
    issues = []
    if document.get("transform") not in (None, "none"):
        issues.append(FieldIssue("/transform", "cokriging works in the variables' own units: give no transform"))
    if document.get("thresholds"):
        issues.append(FieldIssue("/thresholds", "exceedance probabilities are not computed by cokriging"))
    if document.get("return_weights"):
        issues.append(FieldIssue("/return_weights", "cokriging weights are not returned"))
    if document.get("blocks"):
        issues.append(FieldIssue("/blocks", "block cokriging is not offered; predict at points"))
    if "variable" in document:
        issues.append(FieldIssue("/variable", "with a joint model, name the estimated variable in primary"))
    if issues:
        raise InvalidInput(issues)


def _inputs(document: dict, limits: Limits):
    _refuse_single_variable_options(document)
    samples = convert.samples_of(document, limits)
    if not isinstance(samples, MultiSampleSet):
        raise InvalidInput.at("/samples", "a joint model needs samples with several variables (samples.variables)")
    model = joint_model(document)
    primary = document.get("primary") or model.variables[0]
    kriging = document["kriging"]
    means = None
    if kriging["type"] == "simple":
        columns = VariableColumns(samples.coords, samples.names, samples.values, samples.ids)
        known = [v for v in model.variables if v in samples.names]
        means = {**default_means(columns, tuple(known)), **(kriging.get("means") or {})}
    spec = CokrigingSpec(kriging["type"], primary, means, kriging["nugget_as"])
    return samples, model, spec, convert.neighbourhood(document)


def _unestimated(reasons: dict) -> list[dict]:
    return [{"index": int(i), "reason": why} for i, why in sorted(reasons.items())]


def _gain(result, primary: str) -> dict:
    return {
        "primary": primary,
        "secondaries": list(result.secondaries),
        **result.comparison.as_dict(),
        "variance_primary_only": result.comparison.primary_only,
    }


def _parameters(samples: MultiSampleSet, model: JointModel, spec: CokrigingSpec, hood) -> dict:
    return {
        "samples": samples.size,
        "dimension": samples.dimension,
        "coordinates": samples.coordinates,
        "variables": list(samples.names),
        "model": model.as_dict(),
        "kriging": spec.as_dict(),
        "neighbourhood": hood.as_dict(),
        "constraints": "ordinary cokriging: the primary's weights sum to 1, each secondary's to 0"
        if spec.type == "ordinary"
        else "simple cokriging: known means, no constraint",
    }


def prediction(document: dict, limits: Limits, workers: int) -> tuple[dict, str, int]:
    """Body, input hash and sample count of a cokriging ``POST /v1/predictions``."""
    samples, model, spec, hood = _inputs(document, limits)
    result = cokrige_points(
        samples,
        model,
        spec,
        hood,
        targets=convert.targets(document, samples.dimension),
        grid=convert.grid(document),
        limits=limits,
        workers=workers,
    )
    points = result.targets
    assert points is not None  # cokrige_points always echoes its points
    p = result.prediction
    body: dict = {name: points[:, a] for a, name in enumerate(("x", "y", "z")[: points.shape[1]])}
    body.update(estimate=p.estimate, variance=p.variance, unestimated=_unestimated(p.reasons))
    if result.grid is not None:
        body["grid"] = result.grid.as_dict()
    body["support"] = "point"
    body["cokriging"] = _gain(result, spec.primary)
    body["parameters"] = {
        **_parameters(samples, model, spec, hood),
        "variance": "cokriging variance of the primary (includes its nugget unless nugget_as is measurement_error)",
    }
    body["warnings"] = list(samples.warnings)
    return body, samples.input_hash, samples.size


def cross_validation(document: dict, limits: Limits, workers: int) -> tuple[dict, str, int]:
    """Body, input hash and sample count of a cokriging ``POST /v1/cross-validations`` of the primary."""
    samples, model, spec, hood = _inputs(document, limits)
    scheme = convert.scheme(document)
    columns = VariableColumns(samples.coords, samples.names, samples.values, samples.ids)
    found = cross_validate_cokriging(
        columns,
        model,
        spec,
        hood,
        scheme,
        outlier_threshold=document["outlier_threshold"],
        limits=limits,
        workers=workers,
    )
    result = found.result
    rows = np.flatnonzero(np.isfinite(columns.column(spec.primary)))
    body = {
        "statistics": result.statistics,
        "samples": {
            "id": [samples.ids[i] for i in rows],
            "observed": result.observed,
            "estimate": result.estimate,
            "standard_deviation": result.standard_deviation,
            "error": result.error,
            "standardized_error": result.standardized_error,
            "outlier": result.outlier,
        },
        "assessment": result.assessment,
        "unestimated": _unestimated(result.reasons),
        "cokriging": {
            **_gain(found, spec.primary),
            "variance_primary_only": found.comparison.primary_only,
            "statistics_primary_only": found.primary_only.statistics,
        },
        "parameters": {
            **_parameters(samples, model, spec, hood),
            "scheme": scheme.as_dict(),
            "method": result.method,
            "outlier_threshold": document["outlier_threshold"],
            "left_out": "the primary value only; secondary values measured at a left-out sample stay",
            "error_convention": "error = estimate - observed; standard_deviation is that of the error (nugget included)",
        },
        "warnings": list(samples.warnings),
    }
    return body, samples.input_hash, samples.size
