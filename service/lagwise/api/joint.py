"""Requests about several variables at once: joint fits, cokriging predictions and cross-validation.

The views of :mod:`.operations` hand a request here when its ``model`` names
``variables`` (cokriging) or when a model fit is given several variables; this module turns the document into the core's inputs, calls one core
function and serialises the result (no numerics here).
"""

from __future__ import annotations

import numpy as np

from ..core.data.samples import input_hash
from ..core.data.variables import MultiSampleSet
from ..core.errors import FieldIssue, InvalidInput
from ..core.kriging.cokriging import CokrigingSpec, VariableColumns
from ..core.kriging.cokriging_runs import cokrige_points, cross_validate_cokriging, default_means
from ..core.limits import Limits
from ..core.modelling.coregionalisation import JointModel, JointStructure
from ..core.modelling.fitting import SEMIVARIANCE_STATISTICS
from ..core.modelling.joint_fitting import JointFitResult, fit_joint_model, joint_points, joint_points_from_variograms
from ..core.modelling.models import Anisotropy
from ..core.variography.several import several_variograms
from . import convert, serialize

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
    kriging = document.get("kriging") or {}
    if kriging.get("mean") is not None:
        issues.append(FieldIssue("/kriging/mean", "simple cokriging takes means: one per variable, by name"))
    if kriging.get("drift") is not None:
        issues.append(FieldIssue("/kriging/drift", "cokriging is ordinary or simple; no drift"))
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


def is_joint_fit(document: dict) -> bool:
    """Whether a model-fit request fits several variables jointly: a several-variable experimental,
    or samples with two or more variables and no ``variable`` chosen."""
    if "variables" in (document.get("experimental") or {}):
        return True
    samples = document.get("samples") or {}
    named = samples.get("variables") or samples.get("variable_properties") or ()
    return len(named) >= 2 and "variable" not in document


def _rows(directions: list) -> list:
    return [
        (
            d["azimuth"],
            k,
            c,
            convert._ClassRow(row.get("mean_distance"), row.get("value"), row["pairs"]),
        )
        for k, d in enumerate(directions)
        for c, row in enumerate(d["classes"])
    ]


def _given_experimental(document: dict, min_pairs: int):
    given = document["experimental"]
    statistic = (given.get("parameters") or {}).get("statistic", "semivariance")
    if statistic not in SEMIVARIANCE_STATISTICS:
        raise InvalidInput.at(
            "/experimental/parameters/statistic", f"models are fitted to semivariances, not to {statistic!r}"
        )
    names = tuple(v["name"] for v in given["variables"])
    repeated = sorted({n for n in names if names.count(n) > 1})
    if repeated:
        raise InvalidInput.at("/experimental/variables", f"names {repeated[0]!r} more than once")
    cross = {}
    for k, pair in enumerate(given["cross"]):
        a, b = pair["variables"]
        for name in (a, b):
            if name not in names:
                raise InvalidInput.at(f"/experimental/cross/{k}/variables", f"names no variable of variables: {name!r}")
        if a == b:
            raise InvalidInput.at(f"/experimental/cross/{k}/variables", "a cross pair needs two different variables")
        cross[(a, b)] = _rows(pair["directions"])
    summaries = [v.get("summary") or {} for v in given["variables"]]
    # Clustered sampling: the declustered variance is the sill reference (as for one variable).
    variances = tuple(
        convert._finite_number(
            s.get("declustered_variance") if (s.get("declustering") or {}).get("weights_used") else s.get("variance")
        )
        for s in summaries
    )
    dimension = int((given.get("summary") or summaries[0]).get("dimension", 2))
    if dimension not in (1, 2, 3):
        raise InvalidInput.at("/experimental/summary/dimension", "must be 1, 2 or 3")
    experimental = joint_points(
        names,
        {v["name"]: _rows(v["directions"]) for v in given["variables"]},
        cross,
        dimension=dimension,
        min_pairs=min_pairs,
        variances=variances,
    )
    columns = [
        column
        for points in experimental.points.values()
        for column in (points.distance, points.value, points.pairs.astype(np.float64))
    ]
    return experimental, statistic, input_hash(columns)


def _fit_directions(points, fitted) -> list[dict]:
    directions: dict[int, dict] = {}
    for i in range(points.distance.size):
        entry = directions.setdefault(int(points.direction[i]), {"azimuth": float(points.azimuth[i]), "classes": []})
        entry["classes"].append(
            {
                "mean_distance": float(points.distance[i]) if points.pairs[i] > 0 else None,
                "value": float(points.value[i]) if points.pairs[i] > 0 else None,
                "pairs": int(points.pairs[i]),
                "used": bool(points.usable[i]),
                "model_value": float(fitted[i]) if points.distance[i] > 0 else None,
            }
        )
    return [directions[k] for k in sorted(directions)]


def fit_body(result: JointFitResult, statistic: str, parameters: dict) -> dict:
    """Response body of a joint ``POST /v1/model-fits`` (without provenance)."""
    best = result.best
    names = result.experimental.variables
    p = len(names)
    points = result.experimental.points
    return {
        "model": best.model.as_dict(),
        "diagnostics": {
            "weighted_sse": best.weighted_sse,
            "r_squared": best.r_squared,
            "criterion": best.criterion,
            "criterion_name": "AICc over every direct and cross class (lower is better)",
            "converged": best.converged,
            "iterations": best.sweeps,
        },
        "candidates": [
            {
                "rank": rank + 1,
                "label": c.label,
                "model": c.model.as_dict(),
                "selected": c is best,
                "parameters": c.parameters,
                "weighted_sse": c.weighted_sse,
                "r_squared": c.r_squared,
                "criterion": c.criterion,
                "converged": c.converged,
                "iterations": c.sweeps,
            }
            for rank, c in enumerate(result.candidates)
        ],
        "experimental": {
            "statistic": statistic,
            "directions": [],
            "variables": [
                {"name": names[i], "directions": _fit_directions(points[(i, i)], result.fitted_values(i, i))}
                for i in range(p)
            ],
            "cross": [
                {
                    "variables": [names[i], names[j]],
                    "directions": _fit_directions(points[(i, j)], result.fitted_values(i, j)),
                }
                for i in range(p)
                for j in range(i + 1, p)
                if (i, j) in points
            ],
        },
        "parameters": {
            **parameters,
            "statistic": statistic,
            "weighting": result.weighting,
            "method": "linear model of coregionalisation: shared structures from each variable's direct fit, "
            "ranges refined by a bounded search, matrices by the Goulard-Voltz (1992) iteration (PSD by construction)",
        },
        "warnings": list(result.warnings),
    }


def model_fit(document: dict, limits: Limits) -> tuple[dict, str, int, int]:
    """Body, input hash, sample and pair counts of a joint ``POST /v1/model-fits``: from samples
    (direct and cross variograms in one pass first) or from a several-variable experimental response."""
    options = {k: document[k] for k in ("families", "nugget", "weighting", "anisotropy", "structures")}
    min_pairs = document["min_pairs"]
    if "experimental" in document:
        experimental, statistic, digest = _given_experimental(document, min_pairs)
        result = fit_joint_model(experimental, min_pairs=min_pairs, **options)
        parameters = {"dimension": experimental.dimension, "min_pairs": min_pairs, **options}
        return fit_body(result, statistic, parameters), digest, 0, 0
    if document.get("transform") not in (None, "none"):
        raise InvalidInput.at("/transform", "a joint fit works in the variables' own units: give no transform")
    if document["statistic"] != "semivariance":
        raise InvalidInput.at(
            "/statistic", "a joint fit needs cross-semivariances, which only the semivariance statistic has"
        )
    samples = convert.samples_of(document, limits)
    assert isinstance(samples, MultiSampleSet)  # is_joint_fit saw two or more variables
    several = several_variograms(
        samples,
        lags=convert.lag_request(document),
        directions=convert.direction_classes(document),
        statistic="semivariance",
        min_pairs=min_pairs,
        limits=limits,
    )
    experimental = joint_points_from_variograms(several, dimension=samples.dimension, min_pairs=min_pairs)
    result = fit_joint_model(experimental, min_pairs=min_pairs, **options)
    parameters = {**serialize.sample_parameters(samples), "min_pairs": min_pairs, **options}
    body = fit_body(result, "semivariance", parameters)
    body["warnings"] = list(several.warnings) + body["warnings"]
    pairs = sum(row.pairs for v in several.variables for d in v.result.directions for row in d.classes)
    return body, samples.input_hash, samples.size, pairs
