"""The HTTP operations: thin views (parse, call the core, serialise) and their contract."""

from __future__ import annotations

import functools
import time
from collections.abc import Sequence
from dataclasses import dataclass, replace

import numba
import numpy as np
import scipy
from flask import Blueprint, Response, current_app, g, request

from .. import __version__
from ..core import analysis_cost
from ..core.analysis import Given, analyse
from ..core.batch import batch_inputs, of_variable
from ..core.data.raster import Raster, raster_points
from ..core.data.samples import SampleSet
from ..core.data.variables import MultiSampleSet
from ..core.deadline import deadline
from ..core.errors import InvalidInput
from ..core.kriging.neighbourhood import Neighbourhood
from ..core.kriging.systems import KrigingSpec
from ..core.kriging.transformed import working_samples
from ..core.modelling.families import FIT_SCALES, family_catalogue, model_parameter_catalogue
from ..core.simulation import simulate
from ..core.stages import (
    VariogramOptions,
    fit_sample_minimum,
    given_setup,
    run_fit,
    run_fit_to_samples,
    run_transformed_cross_validation,
    run_transformed_prediction,
    run_variogram,
    validate_stages,
)
from ..core.variography.experimental import ExperimentalVariogram, raster_variogram
from ..core.variography.fft import FFT_STATISTICS
from ..core.variography.maps import raster_map, variogram_map
from ..core.variography.several import several_variograms
from . import convert, joint, serialize
from .body import load_json
from .columnar import ARROW_MEDIA_TYPE, JSON_MEDIA_TYPE, arrow_answer, wants_arrow
from .figure_set import check_cost as check_figures
from .figure_set import marks as figure_marks
from .figure_set import render
from .jsonio import dumps
from .negotiation import check_acceptable
from .observability import count_work
from .problems import KINDS, Problem
from .schemas import (
    AnalysisRequest,
    AnalysisResponse,
    BatchAnalysisResponse,
    CrossValidationRequest,
    CrossValidationResponse,
    ExperimentalRequest,
    ExperimentalResponse,
    FamiliesResponse,
    HealthSchema,
    MapRequest,
    MapResponse,
    ModelFitFromExperimental,
    ModelFitFromSamples,
    ModelFitRequest,
    ModelFitResponse,
    PredictionAtTargets,
    PredictionOnGrid,
    PredictionRequest,
    PredictionResponse,
    SeveralExperimentalResponse,
    SimulationRequest,
    SimulationResponse,
)

blueprint = Blueprint("lagwise", __name__)


@dataclass(frozen=True)
class Operation:
    """One documented operation (used to generate the OpenAPI document)."""

    path: str
    method: str
    operation_id: str
    summary: str
    request: type | tuple[type, ...] | None
    response: type | tuple[type, ...]
    errors: tuple[int, ...]


OPERATIONS: list[Operation] = []
COMPUTE_ERRORS = (400, 413, 415, 422, 503)
# Per-target (per-node) arrays answered as Arrow columns when asked (Accept), as patterns of
# JSON Pointers (``*``: any member or element; see lagwise.api.columnar.arrow_answer).
PREDICTION_COLUMNS = ("x", "y", "z", "estimate", "variance", "exceedance/*/probability")
SIMULATION_COLUMNS = ("mean", "variance", "quantiles/*", "exceedance/*/probability", "realisations/*")
# Operation id -> the columns it answers in Arrow (documented in the contract).
ARROW_ANSWERS = {"predictions": PREDICTION_COLUMNS, "simulations": SIMULATION_COLUMNS}


def answer_media_types(operation_id: str) -> tuple[str, ...]:
    """The media types of an operation's successful answers: JSON, and an Arrow stream where documented."""
    arrow = (ARROW_MEDIA_TYPE,) if operation_id in ARROW_ANSWERS else ()
    return (JSON_MEDIA_TYPE, *arrow)


def operation(path, method, summary, request=None, response=HealthSchema, errors=COMPUTE_ERRORS):
    """Register a view on the blueprint and in :data:`OPERATIONS`; computing views run under the deadline.
    Every view first refuses an ``Accept`` header it cannot satisfy (:func:`check_acceptable`)."""

    def decorate(view):
        OPERATIONS.append(Operation(path, method, view.__name__, summary, request, response, errors))

        @functools.wraps(view)
        def acceptable_then_view():
            check_acceptable(answer_media_types(view.__name__))
            if request is None:
                return view()
            with deadline(settings().deadline_seconds):
                return view()

        blueprint.add_url_rule(path, view.__name__, acceptable_then_view, methods=[method])
        return view

    return decorate


def settings():
    """The service settings; for samples sent as an Arrow stream, with that form's own sample limit."""
    base = current_app.extensions["lagwise"]
    return base.for_arrow_samples() if g.get("arrow_samples") else base


def json_response(document: dict, status: int = 200) -> Response:
    return Response(dumps(document), status=status, mimetype="application/json")


def with_provenance(
    document: dict, input_sha256: str, samples: int = 0, pairs: int = 0, *, columns: tuple[str, ...] = ()
) -> Response:
    """Add provenance, count the work done, and answer: JSON, or an Arrow stream of ``columns``
    (per-target arrays) when the client asks for one (``Accept``)."""
    rule = request.url_rule
    assert rule is not None  # called from a routed view
    count_work(rule.rule, samples, pairs)
    document["provenance"] = {
        "service": "lagwise",
        "version": __version__,
        "numpy": np.__version__,
        "scipy": scipy.__version__,
        "numba": numba.__version__,
        "input_sha256": input_sha256,
        "elapsed_ms": round((time.perf_counter() - g.started) * 1000.0, 3),
    }
    if columns and wants_arrow():
        return Response(arrow_answer(document, columns), mimetype=ARROW_MEDIA_TYPE)
    return json_response(document)


@operation(
    "/v1/experimental-variograms",
    "POST",
    "Experimental variogram (or another class statistic) per direction class; with several variables, "
    "every direct and cross variogram",
    ExperimentalRequest,
    (ExperimentalResponse, SeveralExperimentalResponse),
)
def experimental_variograms():
    document = load_json(ExperimentalRequest())
    stage = convert.variogram_options(document, for_fit=False)
    grid = convert.raster(document)
    if grid is not None:
        return _raster_variograms(document, grid, stage)
    given = convert.samples_of(document, settings().limits)
    if isinstance(given, MultiSampleSet) and "variable" not in document:
        return _several_variograms(document, given, stage)
    samples = given.variable(convert.chosen_variable(document, given)) if isinstance(given, MultiSampleSet) else given
    validate_stages(samples, [("", stage)])
    result = run_variogram(samples, stage, limits=settings().limits)
    return _experimental_answer(result, samples)


def _experimental_answer(result: ExperimentalVariogram, samples: SampleSet | Raster, note: str | None = None):
    if note is not None:
        result = replace(result, warnings=result.warnings + (note,))
    pairs = sum(row.pairs for d in result.directions for row in d.classes)
    return with_provenance(serialize.experimental(result, samples), samples.input_hash, samples.size, pairs)


def _raster_variograms(document: dict, grid: Raster, stage: VariogramOptions) -> Response:
    """A raster's variogram: by FFT on its own grid (method grid, or auto for an FFT statistic), else its
    present cells taken as points."""
    method = document.get("method") or "auto"
    if method == "grid" or (method == "auto" and stage.statistic in FFT_STATISTICS):
        if stage.pairs_for_class is not None:
            raise InvalidInput.at(
                "/pairs_for_class", "h-scattergrams need method 'exact' (the raster's cells as points)"
            )
        result = raster_variogram(
            grid,
            lags=stage.lags,
            directions=stage.classes,
            statistic=stage.statistic,
            min_pairs=stage.min_pairs,
            limits=settings().limits,
        )
        return _experimental_answer(result, grid)
    samples = raster_points(grid, settings().limits)
    stage = replace(stage, method="exact")
    validate_stages(samples, [("", stage)])
    note = None
    if method != "exact":
        note = f"{stage.statistic!r} is not an FFT statistic: the raster's cells were taken as points"
    return _experimental_answer(run_variogram(samples, stage, limits=settings().limits), samples, note)


def _several_variograms(document: dict, samples: MultiSampleSet, stage: VariogramOptions) -> Response:
    """Direct and cross experimental variograms of every variable of the samples."""
    if stage.pairs_for_class is not None:
        raise InvalidInput.at("/pairs_for_class", "h-scattergrams are of one variable: name it with variable")
    result = several_variograms(
        samples,
        lags=stage.lags,
        directions=stage.classes,
        statistic=stage.statistic,
        min_pairs=stage.min_pairs,
        limits=settings().limits,
    )
    body = serialize.several_experimental(result, samples)
    return with_provenance(body, samples.input_hash, samples.size, result.pairs)


@operation(
    "/v1/variogram-maps", "POST", "Variogram map: a statistic on a grid of separation vectors", MapRequest, MapResponse
)
def variogram_maps():
    document = load_json(MapRequest())
    limits = settings().limits
    grid = convert.raster(document)
    method = document.get("method")
    options = {
        "cell_size": document.get("cell_size"),
        "cells": document.get("cells"),
        "statistic": document["statistic"],
        "min_pairs": document["min_pairs"],
        "limits": limits,
    }
    note = None
    if grid is not None:
        if method in (None, "auto", "grid") and (method == "grid" or document["statistic"] in FFT_STATISTICS):
            found = raster_map(grid, **options)
            pairs = int(found.pairs.sum()) // 2
            return with_provenance(serialize.variogram_map(found, grid), grid.input_hash, grid.size, pairs)
        if method != "exact":
            note = f"{document['statistic']!r} is not an FFT statistic: the raster's cells were taken as points"
        samples = raster_points(grid, limits)
        method = "exact"
    else:
        samples = convert.sample_set(document, limits)
    result = variogram_map(samples, method=method or "exact", tolerance=document["tolerance"], **options)
    if note is not None:
        result = replace(result, warnings=result.warnings + (note,))
    return with_provenance(
        serialize.variogram_map(result, samples), samples.input_hash, samples.size, int(result.pairs.sum()) // 2
    )


@operation(
    "/v1/model-fits",
    "POST",
    "Fit variogram models to samples or to a previous experimental variogram; ranked candidates",
    (ModelFitFromSamples, ModelFitFromExperimental),
    ModelFitResponse,
)
def model_fits():
    document = load_json(ModelFitRequest())
    if joint.is_joint_fit(document):
        return with_provenance(*joint.model_fit(document, settings().limits))
    fit = convert.fit_options(document)
    if "samples" not in document:
        points, dimension, variance, statistic, digest = convert.experimental_points(document, document["min_pairs"])
        fit.validate_in(dimension)
        found = run_fit(points, dimension, variance, fit)
        return with_provenance(
            serialize.model_fit(found, statistic, dimension=dimension, min_pairs=document["min_pairs"]), digest
        )
    variogram = convert.variogram_options(document)
    samples = convert.sample_set(document, settings().limits)
    working = working_samples(samples, document["transform"])
    validate_stages(working.samples, [("", variogram), ("", fit)])
    if variogram.directions is None:
        fit_sample_minimum(working.samples, variogram.min_pairs, fit)
    result = run_fit_to_samples(working.samples, variogram, fit, limits=settings().limits)
    body = serialize.model_fit(
        result.fit,
        variogram.statistic,
        samples=samples,
        experimental=result.experimental,
        min_pairs=variogram.min_pairs,
        transform=document["transform"],
    )
    pairs = sum(row.pairs for d in result.experimental.directions for row in d.classes)
    return with_provenance(body, samples.input_hash, samples.size, pairs)


@operation(
    "/v1/cross-validations",
    "POST",
    "Leave-one-out or k-fold kriging cross-validation: statistics and per-sample results",
    CrossValidationRequest,
    CrossValidationResponse,
)
def cross_validations():
    document = load_json(CrossValidationRequest())
    if joint.is_joint(document):
        return with_provenance(*joint.cross_validation(document, settings().limits, numba.get_num_threads()))
    samples = convert.sample_set(document, settings().limits)
    working = working_samples(samples, convert.transform_kind(document))
    stage = convert.cross_validation_options(
        document, default_mean=lambda: working.simple_kriging_mean, default_neighbourhood=Neighbourhood()
    )
    validate_stages(working.samples, [("", stage)])
    result = run_transformed_cross_validation(working, stage, limits=settings().limits, workers=numba.get_num_threads())
    model, kriging, hood = given_setup(stage)
    body = serialize.cross_validation(
        result, samples, model, kriging, hood, stage.scheme, stage.outlier_threshold, working.transform
    )
    return with_provenance(body, samples.input_hash, samples.size)


@operation(
    "/v1/predictions",
    "POST",
    "Kriging estimates and variances at target points or on a grid",
    (PredictionAtTargets, PredictionOnGrid),
    PredictionResponse,
)
def predictions():
    document = load_json(PredictionRequest())
    if joint.is_joint(document):
        body, digest, size = joint.prediction(document, settings().limits, numba.get_num_threads())
        return with_provenance(body, digest, size, columns=PREDICTION_COLUMNS)
    samples = convert.sample_set(document, settings().limits)
    working = working_samples(samples, convert.transform_kind(document))
    stage = convert.prediction_options(
        document,
        transform=working.transform.kind,
        dimension=samples.dimension,
        default_mean=lambda: working.simple_kriging_mean,
        default_neighbourhood=Neighbourhood(),
    )
    validate_stages(working.samples, [("", stage)])
    result = run_transformed_prediction(working, stage, limits=settings().limits, workers=numba.get_num_threads())
    return with_provenance(
        serialize.prediction(result, samples, *given_setup(stage)),
        samples.input_hash,
        samples.size,
        columns=PREDICTION_COLUMNS,
    )


@operation(
    "/v1/simulations",
    "POST",
    "Gaussian conditional simulation on a grid: per-node and block summaries, exceedance, share of the grid above",
    SimulationRequest,
    SimulationResponse,
)
def simulations():
    document = load_json(SimulationRequest())
    samples = convert.sample_set(document, settings().limits)
    model, hood = convert.variogram_model(document), convert.neighbourhood(document)
    kriging = document["kriging"]
    result = simulate(
        samples,
        model,
        grid=convert.simulation_grid(document),
        transform=convert.transform_kind(document, default="normal_score"),
        spec=KrigingSpec(type=kriging["type"], mean=kriging.get("mean")),
        neighbourhood=hood,
        realisations=document["realisations"],
        seed=document["seed"],
        thresholds=tuple(document["thresholds"]),
        block_size=tuple(document["blocks"]["size"]) if "blocks" in document else None,
        return_realisations=document["return_realisations"],
        limits=settings().limits,
        workers=numba.get_num_threads(),
    )
    body = serialize.simulation(result, samples, model, hood, document)
    return with_provenance(body, samples.input_hash, samples.size, columns=SIMULATION_COLUMNS)


@operation(
    "/v1/analyses",
    "POST",
    "The whole chain in one call: checks, experimental variograms, fit, cross-validation, predictions, figures, verdict; "
    "with several variables, the chain for each",
    AnalysisRequest,
    (AnalysisResponse, BatchAnalysisResponse),
)
def analyses():
    document = load_json(AnalysisRequest())
    given = convert.samples_of(document, settings().limits)
    if isinstance(given, MultiSampleSet) and document["variable"]["name"] not in given.names:
        _check_analysis_cost(document, [given.variable(name) for name in given.names], given.names)
        return _batch_analyses(document, given)
    samples = given.variable(convert.chosen_variable(document, given)) if isinstance(given, MultiSampleSet) else given
    _check_analysis_cost(document, [samples])
    body, pairs = _analysis_body(document, samples)
    return with_provenance(body, samples.input_hash, samples.size, pairs)


def _batch_analyses(document: dict, samples: MultiSampleSet) -> Response:
    """The whole chain for each variable of the samples, in their order, in one response."""
    analyses, pairs = [], 0
    given = batch_inputs(samples, convert.analysis_options(document), settings().limits)
    for k, name in enumerate(samples.names):
        unit = samples.units[k] if samples.units[k] is not None else document["variable"]["unit"]
        try:
            body, counted = _analysis_body(
                {**document, "variable": {"name": name, "unit": unit}}, samples.variable(name), given[k]
            )
        except InvalidInput as exc:
            raise of_variable(exc, name) from None
        analyses.append((name, unit, body))
        pairs += counted
    return with_provenance(serialize.batch_analysis(samples, analyses), samples.input_hash, samples.size, pairs)


def _check_analysis_cost(document: dict, variables: list[SampleSet], names: Sequence[str] = ()) -> None:
    """Refuse, before any work, analyses whose figures exceed their mark limit or whose estimated
    seconds summed over ``variables`` exceed the limit (the specific figure limit is named first)."""
    options = replace(convert.analysis_options(document), with_map="variogram_map" in document["figures"])
    limits = settings().limits
    for samples in variables:
        check_figures(document, samples.size, limits)
    costs = [
        analysis_cost.estimate(
            samples,
            options,
            limits,
            figure_marks=figure_marks(document, samples.size),
            figure_format=document["figure_format"],
        )
        for samples in variables
    ]
    analysis_cost.check(costs, limits, names)


def _analysis_body(document: dict, samples: SampleSet, given: Given | None = None) -> tuple[dict, int]:
    """The analysis of one variable: its response body (without provenance) and the pairs counted
    (``given``: its first steps, done for a batch)."""
    options = replace(convert.analysis_options(document), with_map="variogram_map" in document["figures"])
    check_figures(document, samples.size, settings().limits)
    result = analyse(samples, options, limits=settings().limits, workers=numba.get_num_threads(), given=given)
    figures = render(result, samples, document)
    body = serialize.analysis(
        result,
        samples,
        figures,
        options,
        {
            "figure_format": document["figure_format"],
            "figure_size": document["figure_size"],
            "figure_colour_scale": document["figure_colour_scale"],
            "variable": document["variable"],
            "coordinate_unit": "m" if samples.coordinates == "geographic" else document["coordinate_unit"],
            "thresholds": document["prediction"]["thresholds"] if "prediction" in document else [],
        },
    )
    return body, sum(row.pairs for d in result.omnidirectional.directions for row in d.classes)


@operation(
    "/v1/model-families",
    "GET",
    "Model families, their parameters (units, bounds) and validity",
    response=FamiliesResponse,
    errors=(),
)
def model_families():
    return json_response(
        {
            "families": family_catalogue(),
            "model_parameters": model_parameter_catalogue(),
            "fit_scales": FIT_SCALES,
            "conventions": {
                "range": "practical range: the distance at which a structure reaches 95 % of its partial sill (its sill for spherical, cubic, pentaspherical, circular)",
                "anisotropy": "azimuth (degrees clockwise from north) of the longest range; ratio x range across it; vertical_ratio x range vertically",
            },
        }
    )


@operation("/healthz", "GET", "Liveness: the process answers", errors=())
def healthz():
    return json_response({"status": "alive"})


@operation("/readyz", "GET", "Readiness: kernels are compiled and warm", errors=(503,))
def readyz():
    if not current_app.extensions["lagwise_ready"].is_set():
        raise Problem("not-ready", "compute kernels are still warming up")
    return json_response({"status": "ready"})


@blueprint.get("/problems/<kind>")
def problem_kind(kind: str):
    check_acceptable((JSON_MEDIA_TYPE,))
    if kind not in KINDS:
        raise Problem("not-found", f"no problem type named {kind!r}")
    k = KINDS[kind]
    return json_response(
        {"type": f"/problems/{kind}", "title": k.title, "status": k.status, "description": k.description}
    )
