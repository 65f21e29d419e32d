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
from ..core.modelling.joint_fitting import fit_joint_model, joint_points, joint_points_from_variograms
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
    body = serialize.cokriging_prediction(result, samples, model, spec, hood)
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
    measured = np.flatnonzero(np.isfinite(columns.column(spec.primary)))
    ids = [samples.ids[i] for i in measured]
    body = serialize.cokriging_cross_validation(
        found, samples, model, spec, hood, scheme, document["outlier_threshold"], ids
    )
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


def model_fit(document: dict, limits: Limits) -> tuple[dict, str, int, int]:
    """Body, input hash, sample and pair counts of a joint ``POST /v1/model-fits``: from samples
    (direct and cross variograms in one pass first) or from a several-variable experimental response."""
    options = {k: document[k] for k in ("families", "nugget", "weighting", "anisotropy", "structures")}
    min_pairs = document["min_pairs"]
    if "experimental" in document:
        experimental, statistic, digest = _given_experimental(document, min_pairs)
        result = fit_joint_model(experimental, min_pairs=min_pairs, **options)
        parameters = {"dimension": experimental.dimension, "min_pairs": min_pairs, **options}
        return serialize.joint_model_fit(result, statistic, parameters), digest, 0, 0
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
    body = serialize.joint_model_fit(result, "semivariance", parameters, several.warnings)
    pairs = sum(row.pairs for v in several.variables for d in v.result.directions for row in d.classes)
    return body, samples.input_hash, samples.size, pairs
