"""Core results to response documents: each response is dumped by its schema (:mod:`.schemas`).

A response schema is the one definition of its document: the contract is generated from it
and every answer is its ``dump`` of a :class:`View` of the core result. A view maps the
result's attributes to the response's members (renaming, picking, adding the resolved
request echoes and the fixed conventions); nothing here computes. Per-target and
per-sample arrays pass through as numpy arrays (:class:`~lagwise.api.fields.Column`).
The ``parameters`` of each response (the audit trail) are built here from what the
result resolved.
"""

from __future__ import annotations

import math
from typing import Any

from ..core.analysis import FAN_DESCRIPTION
from ..core.data.raster import Raster
from ..core.data.samples import SampleSet
from ..core.data.variables import MultiSampleSet
from ..core.selection import RULE as SELECTION_RULE
from ..core.variography.experimental import ExperimentalVariogram
from ..core.variography.several import CROSS_MEANING
from . import schemas

ANGLES = "degrees; azimuth clockwise from north (+y), folded into [0, 180); dip below horizontal"
CLASSES = "half-open [lower, upper); divisors N"
LAG_RULE = (
    "width = typical spacing (median nearest-neighbour distance), at least 1/40 of the largest distance; "
    "edges 0, w/2, 3w/2, ... up to half the extent; classes under min_pairs merged with the next"
)
CELL_RULE = (
    "omitted values: cell side = typical spacing (median nearest-neighbour distance), at "
    "least sqrt(min_pairs * hull area) / n and half the largest separation / 40.5; cells reach half "
    "the largest separation"
)
CELL_CONVENTION = (
    "cell (i, j) holds hx in [(i - 1/2) s, (i + 1/2) s) and hy likewise; each pair counted as h and -h; rows by hy"
)
CRITERION = "AICc (corrected Akaike criterion of the weighted least-squares fit; lower is better)"
JOINT_CRITERION = "AICc over every direct and cross class (lower is better)"
RANGE_CONVENTION = (
    "practical range: 95 % of the partial sill (exact sill for spherical, cubic, pentaspherical, circular)"
)
JOINT_METHOD = (
    "linear model of coregionalisation: shared structures from each variable's direct fit, "
    "ranges refined by a bounded search, matrices by the Goulard-Voltz (1992) iteration (PSD by construction)"
)
CENTRED = "drift terms use coordinates centred on the sample mean and scaled by the largest offset"
ERROR_CONVENTION = "error = estimate - observed; standard_deviation is that of the error (nugget included)"
CROSS_VALIDATION_UNITS = (
    "observed, estimate, standard_deviation and error in original units (back-transformed mean and standard "
    "deviation of each held-out estimate); standardized_error, outlier, the standardized statistics and "
    "interval_coverage_95 in the transformed space, where the kriging error is read as Gaussian"
)
POINT_VARIANCE = "kriging variance (includes the nugget unless nugget_as is measurement_error)"
BACK_TRANSFORMED_VARIANCE = (
    "; estimate and variance are the back-transformed mean and variance (transform.method), "
    "model and weights in transformed units"
)
BLOCK_VARIANCE = "block-kriging variance of the block average (the nugget averages out over a block)"
CLASSES_RULE = (
    "targets by probability of exceeding each threshold: below (at most 1 - confidence), above (at least "
    "confidence), uncertain between; "
)


class View:
    """What a response schema dumps: the members given here, else the attributes of ``source``.

    Parameters
    ----------
    source : object, optional
        A core result whose attributes (or a dict whose keys) are members of the response
        under the same names.
    **members
        Members the result does not carry under the response's name (renamed, picked,
        echoed request options, conventions).
    """

    __slots__ = ("_members", "_source")

    def __init__(self, source: Any = None, **members: Any):
        self._source = source
        self._members = members

    def __getattr__(self, name: str) -> Any:
        if name.startswith("_"):
            raise AttributeError(name)
        if name in self._members:
            return self._members[name]
        if isinstance(self._source, dict):
            try:
                return self._source[name]
            except KeyError:
                raise AttributeError(name) from None
        if self._source is None:
            raise AttributeError(name)
        return getattr(self._source, name)


# One instance per response schema (dumping keeps no state).
EXPERIMENTAL = schemas.ExperimentalResponse()
SEVERAL_EXPERIMENTAL = schemas.SeveralExperimentalResponse()
MAP = schemas.MapResponse()
MODEL_FIT = schemas.ModelFitResponse()
CROSS_VALIDATION = schemas.CrossValidationResponse()
PREDICTION = schemas.PredictionResponse()
SIMULATION = schemas.SimulationResponse()
ANALYSIS = schemas.AnalysisResponse()
BATCH_ANALYSIS = schemas.BatchAnalysisResponse()


# ---- samples and classes --------------------------------------------------------------


def raster_parameters(raster: Raster) -> dict:
    """Resolved raster for the audit trail."""
    return {
        "coordinates": "planar",
        "dimension": 2,
        "samples_received": int(raster.grid.size),
        "samples_used": raster.size,
        "distance_unit": "coordinate units",
        "raster": {"origin": list(raster.origin), "spacing": list(raster.spacing), "shape": list(raster.shape)},
    }


def sample_parameters(samples: SampleSet | MultiSampleSet | Raster) -> dict:
    """Resolved sample handling for the audit trail."""
    if isinstance(samples, Raster):
        return raster_parameters(samples)
    out = {
        "coordinates": samples.coordinates,
        "duplicates": samples.duplicates.policy,
        "dimension": samples.dimension,
        "samples_received": int(samples.size + samples.duplicates.removed),
        "samples_used": samples.size,
        "distance_unit": "metres" if samples.coordinates == "geographic" else "coordinate units",
    }
    if samples.projection is not None:
        out["projection"] = {
            "method": "local azimuthal equidistant on a sphere of radius 6371008.8 m",
            "centre_longitude": samples.projection.longitude,
            "centre_latitude": samples.projection.latitude,
        }
    return out


def _directions(results, dimension: int) -> list[dict]:
    """Direction classes as resolved (dip members in 3-D only), each with its class rows (dumped by ClassSchema)."""
    return [{**d.direction.as_dict(dimension), "classes": d.classes} for d in results]


def uncertainty_parameters(result) -> dict:
    """How the classes' standard errors and intervals were found (``result.uncertainty``, a plan or None)."""
    if result.uncertainty is None:
        return {"method": None, "blocks": None}
    return {"method": result.uncertainty.method, "blocks": result.uncertainty.blocks}


def _shared_uncertainty(plans: list[dict]) -> dict:
    """The request's class uncertainty: the method when any variogram has one, the blocks when all agree."""
    methods = {p["method"] for p in plans if p["method"] is not None}
    blocks = {p["blocks"] for p in plans}
    return {"method": methods.pop() if methods else None, "blocks": blocks.pop() if len(blocks) == 1 else None}


def lag_parameters(result: ExperimentalVariogram) -> dict:
    """Resolved distance classes of every direction."""
    out: dict[str, object] = {
        "method": result.lag_method,
        "edges": [[row.lower for row in d.classes] + [d.classes[-1].upper] for d in result.directions],
    }
    if result.spacing is not None:
        out["typical_spacing"] = result.spacing
        out["rule"] = LAG_RULE
    return out


# ---- experimental variograms and maps ---------------------------------------------------


def experimental(result: ExperimentalVariogram, samples: SampleSet | Raster) -> dict:
    """Response body of ``POST /v1/experimental-variograms`` (without provenance)."""
    dimension = samples.dimension
    view = View(
        result,
        directions=_directions(result.directions, dimension),
        pairs_for_class=result.scattergram,
        parameters={
            **sample_parameters(samples),
            "statistic": result.statistic,
            "min_pairs": result.min_pairs,
            "lags": lag_parameters(result),
            "directions": [d.direction.as_dict(dimension) for d in result.directions],
            "angle_convention": ANGLES,
            "class_convention": CLASSES,
            "class_uncertainty": uncertainty_parameters(result),
            "method": result.method,
            **({} if result.grid is None else {"grid": result.grid.as_dict()}),
        },
    )
    return EXPERIMENTAL.dump(view)


def several_experimental(result, samples: MultiSampleSet) -> dict:
    """Response body of ``POST /v1/experimental-variograms`` for several variables (without provenance)."""
    dimension = samples.dimension
    first = result.variables[0].result
    direct = [uncertainty_parameters(v.result) for v in result.variables]
    cross = [uncertainty_parameters(c) for c in result.cross]
    view = View(
        result,
        variables=[
            View(
                v,
                directions=_directions(v.result.directions, dimension),
                summary=v.result.summary,
                class_uncertainty=plan,
            )
            for v, plan in zip(result.variables, direct, strict=True)
        ],
        cross=[
            View(c, variables=c.names, directions=_directions(c.directions, dimension), class_uncertainty=plan)
            for c, plan in zip(result.cross, cross, strict=True)
        ],
        parameters={
            **sample_parameters(samples),
            "variables": list(samples.names),
            "statistic": result.statistic,
            "cross_statistic": CROSS_MEANING.get(result.statistic),
            "min_pairs": result.min_pairs,
            "lags": lag_parameters(first),
            "directions": [d.direction.as_dict(dimension) for d in first.directions],
            "angle_convention": ANGLES,
            "class_convention": CLASSES,
            "class_uncertainty": _shared_uncertainty(direct + cross),
        },
    )
    return SEVERAL_EXPERIMENTAL.dump(view)


def variogram_map(result, samples: SampleSet | Raster) -> dict:
    """Response body of ``POST /v1/variogram-maps`` (without provenance)."""
    automatic = (
        {}
        if result.spacing is None
        else {"typical_spacing": result.spacing, "min_pairs": result.min_pairs, "cell_rule": CELL_RULE}
    )
    view = View(
        result,
        parameters={
            **sample_parameters(samples),
            "statistic": result.statistic,
            "cell_size": result.cell_size,
            "cells": result.cells,
            **automatic,
            "cell_convention": CELL_CONVENTION,
            "method": result.method,
            **({} if result.grid is None else {"grid": result.grid.as_dict()}),
        },
    )
    return MAP.dump(view)


# ---- model fits ---------------------------------------------------------------------------


def _model(model, transform: str | None) -> dict:
    """A model as sent and returned (:class:`~lagwise.api.schemas.Model`), with the transform it was fitted in."""
    return model.as_dict() if transform is None else {**model.as_dict(), "transform": transform}


def _candidates(candidates, best, transform: str | None) -> list[View]:
    return [
        View(
            c,
            rank=rank + 1,
            selected=c is best,
            model=None if c.model is None else _model(c.model, transform),
            iterations=c.evaluations,
        )
        for rank, c in enumerate(candidates)
    ]


def _fit_classes(points, modelled, has_distance, has_value) -> list[View]:
    """The fitted classes by direction; a distance or value is null where its mask is false."""
    directions: dict[int, View] = {}
    for i in range(points.distance.size):
        entry = directions.setdefault(int(points.direction[i]), View(azimuth=float(points.azimuth[i]), classes=[]))
        entry.classes.append(
            {
                "mean_distance": float(points.distance[i]) if has_distance[i] else None,
                "value": float(points.value[i]) if has_value[i] else None,
                "pairs": int(points.pairs[i]),
                "used": bool(points.usable[i]),
                "model_value": float(modelled[i]) if points.distance[i] > 0 else None,
            }
        )
    return [directions[k] for k in sorted(directions)]


def _single_classes(points, modelled) -> list[View]:
    """One variable's fitted classes: a used class, or one at a positive distance (with pairs), has its numbers."""
    return _fit_classes(points, modelled, points.usable | (points.distance > 0), points.usable | (points.pairs > 0))


def _joint_classes(points, modelled) -> list[View]:
    """A joint fit's classes: a class without pairs has no distance nor value."""
    return _fit_classes(points, modelled, points.pairs > 0, points.pairs > 0)


def _fit_view(fit, model: dict, transform: str | None) -> View:
    """The selected ``model``, the diagnostics and the ranked candidates of one variable's fit."""
    best = fit.best
    return View(
        fit,
        model=model,
        diagnostics=View(best, criterion_name=CRITERION, iterations=best.evaluations),
        candidates=_candidates(fit.candidates, best, transform),
    )


def model_fit(
    fit,
    statistic: str,
    *,
    samples: SampleSet | None = None,
    experimental: ExperimentalVariogram | None = None,
    dimension: int | None = None,
    min_pairs: int,
    transform: str | None = None,
) -> dict:
    """Response body of ``POST /v1/model-fits`` (without provenance).

    From samples, give ``samples`` and the ``experimental`` variogram the fit was made
    to (its summary, lags and warnings are reported) and the ``transform`` fitted in;
    from a given experimental response, its ``dimension``.
    """
    if samples is not None and experimental is not None:
        source = {**sample_parameters(samples), "min_pairs": min_pairs, "lags": lag_parameters(experimental)}
        warnings = experimental.warnings + fit.warnings
    else:
        source = {"dimension": dimension, "min_pairs": min_pairs}
        warnings = fit.warnings
    view = _fit_view(fit, _model(fit.best.model, transform), transform)
    view._members.update(
        experimental=View(statistic=statistic, directions=_single_classes(fit.points, fit.fitted_values)),
        summary=None if experimental is None else experimental.summary,
        warnings=warnings,
        parameters={
            **source,
            "families": fit.families,
            "structures": fit.structures,
            "statistic": statistic,
            "weighting": fit.weighting,
            "nugget": fit.nugget,
            "anisotropy": fit.anisotropy,
            "range_convention": RANGE_CONVENTION,
            "criterion": CRITERION,
            **({} if transform is None else {"transform": transform}),
        },
    )
    return MODEL_FIT.dump(view)


def joint_model_fit(result, statistic: str, parameters: dict, warnings: tuple[str, ...] = ()) -> dict:
    """Response body of a joint ``POST /v1/model-fits`` (without provenance); ``warnings`` come first."""
    best = result.best
    names = result.experimental.variables
    points = result.experimental.points
    p = len(names)
    view = View(
        result,
        model=best.model.as_dict(),
        diagnostics=View(best, criterion_name=JOINT_CRITERION, iterations=best.sweeps),
        candidates=[
            View(c, rank=rank + 1, selected=c is best, model=c.model.as_dict(), iterations=c.sweeps)
            for rank, c in enumerate(result.candidates)
        ],
        experimental=View(
            statistic=statistic,
            directions=[],
            variables=[
                View(name=names[i], directions=_joint_classes(points[(i, i)], result.fitted[(i, i)])) for i in range(p)
            ],
            cross=[
                View(variables=[names[i], names[j]], directions=_joint_classes(points[(i, j)], result.fitted[(i, j)]))
                for i in range(p)
                for j in range(i + 1, p)
                if (i, j) in points
            ],
        ),
        parameters={
            **parameters,
            "statistic": statistic,
            "weighting": result.weighting,
            "method": JOINT_METHOD,
        },
        warnings=tuple(warnings) + result.warnings,
    )
    return MODEL_FIT.dump(view)


# ---- kriging: cross-validation, predictions, simulations ---------------------------------


def _unestimated(reasons: dict) -> list[dict]:
    return [{"index": int(i), "reason": why} for i, why in sorted(reasons.items())]


def kriging_parameters(samples: SampleSet, model, spec, neighbourhood) -> dict:
    return {
        **sample_parameters(samples),
        "model": model.as_dict(),
        "kriging": spec.as_dict(),
        "neighbourhood": neighbourhood.as_dict(),
        "coordinates_centred": CENTRED,
    }


def cross_validation(result, samples: SampleSet, model, spec, neighbourhood, scheme, threshold, transform) -> dict:
    """Response body of ``POST /v1/cross-validations`` (without provenance); ``transform`` the one kriged in."""
    parameters = {
        **kriging_parameters(samples, model, spec, neighbourhood),
        "scheme": scheme.as_dict(),
        "method": result.method,
        "outlier_threshold": threshold,
        "error_convention": ERROR_CONVENTION,
        "transform": transform.as_dict(),
    }
    if transform.kind != "none":
        parameters["units"] = CROSS_VALIDATION_UNITS
    view = View(
        result,
        samples=View(result, id=samples.ids),
        unestimated=_unestimated(result.reasons),
        parameters=parameters,
        warnings=(*samples.warnings, *result.warnings),
    )
    return CROSS_VALIDATION.dump(view)


def exceedance_parameters(found) -> dict:
    """How exceedance probabilities were read (thresholds in original and transformed units)."""
    return {
        **found.reading,
        "thresholds": list(found.thresholds),
        "transformed_thresholds": [t if math.isfinite(t) else None for t in found.transformed],
    }


def _exceedance(found) -> list[View]:
    return [View(threshold=t, probability=row) for t, row in zip(found.thresholds, found.probability, strict=True)]


def _coordinates(points) -> dict:
    """Target coordinates as columns x, y (and z), by the points' dimension."""
    return {name: points[:, a] for a, name in enumerate(("x", "y", "z")[: points.shape[1]])}


def prediction(answer, samples: SampleSet, model, spec, neighbourhood) -> dict:
    """Response body of ``POST /v1/predictions`` (without provenance); ``answer`` a TransformedPrediction."""
    result = answer.result
    p = result.prediction
    variance = POINT_VARIANCE + (BACK_TRANSFORMED_VARIANCE if answer.transform.kind != "none" else "")
    parameters = {
        **kriging_parameters(samples, model, spec, neighbourhood),
        "variance": variance,
        "transform": answer.transform.as_dict(),
    }
    if result.blocks is not None:
        parameters["blocks"] = result.blocks.as_dict()
        parameters["variance"] = BLOCK_VARIANCE
    if answer.exceedance is not None:
        parameters["exceedance"] = exceedance_parameters(answer.exceedance)
    view = View(
        answer,
        **_coordinates(result.targets),
        unestimated=_unestimated(p.reasons),
        grid=None if result.grid is None else result.grid.as_dict(),
        exceedance=None if answer.exceedance is None else _exceedance(answer.exceedance),
        support=result.support,
        weights=[View(w, samples=[samples.ids[i] for i in w["samples"]]) for w in p.weights] or None,
        parameters=parameters,
        warnings=(*samples.warnings, *answer.warnings),
    )
    return PREDICTION.dump(view)


def _cokriging_parameters(samples: MultiSampleSet, model, spec, neighbourhood) -> dict:
    return {
        "samples": samples.size,
        "dimension": samples.dimension,
        "coordinates": samples.coordinates,
        "variables": list(samples.names),
        "model": model.as_dict(),
        "kriging": spec.as_dict(),
        "neighbourhood": neighbourhood.as_dict(),
        "constraints": "ordinary cokriging: the primary's weights sum to 1, each secondary's to 0"
        if spec.type == "ordinary"
        else "simple cokriging: known means, no constraint",
    }


def _gain(result, primary: str) -> dict:
    """What the secondaries bought against kriging the primary alone."""
    return {
        "primary": primary,
        "secondaries": list(result.secondaries),
        **result.comparison.as_dict(),
        "variance_primary_only": result.comparison.primary_only,
    }


def cokriging_prediction(result, samples: MultiSampleSet, model, spec, neighbourhood) -> dict:
    """Response body of a cokriging ``POST /v1/predictions`` (without provenance)."""
    p = result.prediction
    view = View(
        p,
        **_coordinates(result.targets),
        unestimated=_unestimated(p.reasons),
        grid=None if result.grid is None else result.grid.as_dict(),
        weights=None,
        support="point",
        cokriging=_gain(result, spec.primary),
        parameters={
            **_cokriging_parameters(samples, model, spec, neighbourhood),
            "variance": "cokriging variance of the primary (includes its nugget unless nugget_as is measurement_error)",
        },
        warnings=samples.warnings,
    )
    return PREDICTION.dump(view)


def cokriging_cross_validation(
    found, samples: MultiSampleSet, model, spec, neighbourhood, scheme, threshold, ids
) -> dict:
    """Response body of a cokriging ``POST /v1/cross-validations`` of the primary (without provenance);
    ``ids`` those of the samples where the primary was measured, in order."""
    result = found.result
    view = View(
        result,
        samples=View(result, id=ids),
        unestimated=_unestimated(result.reasons),
        cokriging={**_gain(found, spec.primary), "statistics_primary_only": found.primary_only.statistics},
        parameters={
            **_cokriging_parameters(samples, model, spec, neighbourhood),
            "scheme": scheme.as_dict(),
            "method": result.method,
            "outlier_threshold": threshold,
            "left_out": "the primary value only; secondary values measured at a left-out sample stay",
            "error_convention": ERROR_CONVENTION,
        },
        warnings=samples.warnings,
    )
    return CROSS_VALIDATION.dump(view)


def _simulated(result) -> dict:
    """Members a simulation shares with an analysis's simulation: shares above and block averages."""
    blocks = result.blocks
    return {
        "above": [View(threshold=t, fraction=fraction) for t, fraction in result.above],
        "blocks": None
        if blocks is None
        else View(
            blocks,
            grid=blocks.grid.as_dict(),
            exceedance=[View(threshold=t, probability=p) for t, p in blocks.exceedance],
        ),
    }


def simulation(result, samples: SampleSet, model, neighbourhood, request: dict) -> dict:
    """Response body of ``POST /v1/simulations`` (without provenance); ``result`` a SimulationResult."""
    spec = result.spec
    view = View(
        result,
        grid=result.grid.as_dict(),
        exceedance=[View(threshold=t, probability=p) for t, p in result.exceedance],
        **_simulated(result),
        parameters={
            **sample_parameters(samples),
            "model": model.as_dict(),
            "model_units": "transformed",
            "kriging": {"type": spec.type, **({"mean": spec.mean} if spec.type == "simple" else {})},
            "neighbourhood": neighbourhood.as_dict(),
            "transform": result.transform.as_dict(),
            "realisations": request["realisations"],
            "seed": request["seed"],
            "thresholds": request["thresholds"],
            "blocks": request.get("blocks"),
            "return_realisations": request["return_realisations"],
            "support": "point values including the nugget; blocks average the grid nodes they cover",
            "exceedance": "share of the realisations strictly above the threshold",
        },
    )
    return SIMULATION.dump(view)


# ---- analyses -------------------------------------------------------------------------------


def _variogram_body(result) -> View | None:
    """An analysis's experimental variogram: its directions (dip members for 3-D samples) and co-located pairs."""
    if result is None:
        return None
    return View(result, directions=_directions(result.directions, result.summary.dimension))


def _selection(selection) -> View | None:
    if selection is None:
        return None
    return View(
        selection,
        strategies=[
            View(
                s,
                model=s.model.as_dict(),
                kriging=s.kriging.as_dict(),
                statistics=None if s.cross_validation is None else s.cross_validation.statistics,
            )
            for s in selection.strategies
        ],
        rule=SELECTION_RULE,
    )


def _decisions(decisions, stage) -> dict:
    """The prediction stage's exceedance, probability classes and simulation."""
    if decisions is None or decisions.exceedance is None:
        return {"exceedance": [], "classes": [], "simulation": None}
    simulated = decisions.simulation
    return {
        "exceedance": _exceedance(decisions.exceedance),
        "classes": [
            {**c.as_dict(), "support": decisions.classes_support, "method": decisions.classes_method}
            for c in decisions.classes
        ],
        "simulation": None
        if simulated is None
        else View(
            simulated,
            realisations=stage.simulation.realisations,
            seed=stage.simulation.seed,
            **_simulated(simulated),
        ),
    }


def _prediction_parameters(result, stage) -> dict | None:
    """How the prediction stage's numbers were found."""
    if stage is None:
        return None
    out: dict = {
        "thresholds": list(stage.thresholds),
        "blocks": None if stage.blocks is None else stage.blocks.as_dict(),
        "simulation": None if stage.simulation is None else stage.simulation.as_dict(),
    }
    decisions = result.decisions
    if decisions is not None and decisions.exceedance is not None:
        out["exceedance"] = exceedance_parameters(decisions.exceedance)
        out["classes"] = CLASSES_RULE + (
            "simulated block averages (share of realisations above)"
            if decisions.classes_method == "simulation"
            else "kriged blocks"
            if decisions.classes_support == "block"
            else "grid nodes"
        )
    return out


def _analysis_prediction(result, stage) -> View | None:
    if result.prediction is None:
        return None
    estimate, variance = result.back_transformed
    points = result.prediction.targets
    return View(
        result.prediction,
        x=points[:, 0],
        y=points[:, 1],
        estimate=estimate,
        variance=variance,
        grid=result.prediction.grid.as_dict(),
        unestimated=_unestimated(result.prediction.prediction.reasons),
        **_decisions(result.decisions, stage),
    )


def _map_parameters(vmap, stage) -> dict | None:
    """How the analysis's variogram map was found (None without one): the method asked for and the one used."""
    if vmap is None:
        return None
    return {
        "method_requested": stage.method,
        "method": vmap.method,
        "tolerance": stage.tolerance,
        "statistic": vmap.statistic,
        "cell_size": vmap.cell_size,
        "cells": vmap.cells,
        "typical_spacing": vmap.spacing,
        "cell_convention": CELL_CONVENTION,
        **({} if vmap.grid is None else {"grid": vmap.grid.as_dict()}),
    }


def analysis_view(result, samples: SampleSet, figures: dict, options, figure_options: dict) -> View:
    """What :class:`~lagwise.api.schemas.AnalysisResponse` dumps; ``options`` is the AnalysisOptions."""
    cv = result.cross_validation
    stage = options.cross_validation
    anisotropy = None if result.anisotropy is None else View(result.anisotropy, method=FAN_DESCRIPTION)
    return View(
        result,
        summary=result.summary,
        experimental=View(
            omnidirectional=_variogram_body(result.omnidirectional),
            directional=_variogram_body(result.directional),
            residual=_variogram_body(result.residual),
            anisotropy=anisotropy,
        ),
        fit=_fit_view(result.fit, _model(result.model, result.transform.kind), None),
        selection=_selection(result.selection),
        cross_validation=None
        if cv is None
        else View(cv, samples=View(cv, id=samples.ids), unestimated=_unestimated(cv.reasons)),
        prediction=_analysis_prediction(result, options.prediction),
        figures=figures,
        parameters={
            **sample_parameters(samples),
            "censoring": samples.censoring,
            "censored_samples": samples.censored,
            "transform": result.transform.as_dict(),
            "variogram": {
                "statistic": result.omnidirectional.statistic,
                "min_pairs": result.omnidirectional.min_pairs,
                "lags": lag_parameters(result.omnidirectional),
                "class_uncertainty": uncertainty_parameters(result.omnidirectional),
            },
            "fit": {
                "families": options.fit.families if options.fit.families == "auto" else list(options.fit.families),
                "nugget": result.fit.nugget,
                "weighting": result.fit.weighting,
                "anisotropy": options.fit.anisotropy,
                "compare": options.fit.compare,
                "given_model": options.fit.model is not None,
            },
            "cross_validation": {
                "kriging": "auto" if stage.kriging is None else stage.kriging.as_dict(),
                "kriging_used": result.kriging.as_dict(),
                "neighbourhood": result.neighbourhood.as_dict(),
                "scheme": stage.scheme.as_dict(),
                "units": "transformed values" if result.transform.kind != "none" else "values",
            },
            "envelope": result.envelope.as_dict(),
            "prediction_units": "original units (back-transformed)" if result.transform.kind != "none" else "values",
            "prediction": _prediction_parameters(result, options.prediction),
            "variogram_map": _map_parameters(result.variogram_map, options.map_stage),
            "figures": list(figures),
            **{
                name: figure_options.get(name)
                for name in (
                    "figure_format",
                    "figure_size",
                    "figure_colour_scale",
                    "variable",
                    "coordinate_unit",
                    "thresholds",
                )
            },
        },
    )


def analysis(result, samples: SampleSet, figures: dict, options, figure_options: dict) -> dict:
    """Response body of ``POST /v1/analyses`` (without provenance); ``options`` is the AnalysisOptions."""
    return ANALYSIS.dump(analysis_view(result, samples, figures, options, figure_options))


def batch_analysis(samples: MultiSampleSet, analyses: list[tuple[str, str | None, dict]]) -> dict:
    """Response body of ``POST /v1/analyses`` for several variables (without provenance): each variable's
    name, unit and analysis body (:func:`analysis`), in the samples' order."""
    view = View(
        variables=[View(body, name=name, unit=unit) for name, unit, body in analyses],
        parameters={**sample_parameters(samples), "variables": list(samples.names)},
        warnings=samples.warnings,
    )
    return BATCH_ANALYSIS.dump(view)
