"""Turn core results into response documents."""

from __future__ import annotations

import math

from ..core.analysis import FAN_DESCRIPTION
from ..core.data.raster import Raster
from ..core.data.samples import SampleSet
from ..core.data.variables import MultiSampleSet
from ..core.kriging.exceedance import reading
from ..core.kriging.transformed import units_warning
from ..core.selection import RULE as SELECTION_RULE
from ..core.variography.experimental import ExperimentalVariogram
from ..core.variography.maps import VariogramMap
from ..core.variography.several import CROSS_MEANING, SeveralVariograms

ANGLES = "degrees; azimuth clockwise from north (+y), folded into [0, 180); dip below horizontal"
CLASSES = "half-open [lower, upper); divisors N"


def _as_float(value):
    return None if value is None else float(value)


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


def experimental(result: ExperimentalVariogram, samples: SampleSet | Raster) -> dict:
    """Response body of ``POST /v1/experimental-variograms`` (without provenance)."""
    dimension = samples.dimension
    directions = []
    for d in result.directions:
        entry = d.direction.as_dict(dimension)
        entry["classes"] = [_class_row(row) for row in d.classes]
        directions.append(entry)
    document = {
        "directions": directions,
        "summary": result.summary.as_dict(),
        "colocated_pairs": result.colocated_pairs,
        "parameters": {
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
        "warnings": list(result.warnings),
    }
    if result.scattergram is not None:
        s = result.scattergram
        document["pairs_for_class"] = {
            "direction": s.direction,
            "class": s.klass,
            "pairs_in_class": s.pairs_in_class,
            "stride": s.stride,
            "tail": s.tail,
            "head": s.head,
        }
    return document


def several_experimental(result: SeveralVariograms, samples: MultiSampleSet) -> dict:
    """Response body of ``POST /v1/experimental-variograms`` for several variables (without provenance)."""
    dimension = samples.dimension

    def directions(results) -> list[dict]:
        return [{**d.direction.as_dict(dimension), "classes": [_class_row(row) for row in d.classes]} for d in results]

    first = result.variables[0].result
    return {
        "variables": [
            {
                "name": v.name,
                "unit": v.unit,
                "directions": directions(v.result.directions),
                "summary": v.result.summary.as_dict(),
            }
            for v in result.variables
        ],
        "cross": [{"variables": list(c.names), "directions": directions(c.directions)} for c in result.cross],
        "colocated_pairs": result.colocated_pairs,
        "parameters": {
            **sample_parameters(samples),
            "variables": list(samples.names),
            "statistic": result.statistic,
            "cross_statistic": CROSS_MEANING.get(result.statistic),
            "min_pairs": result.min_pairs,
            "lags": lag_parameters(first),
            "directions": [d.direction.as_dict(dimension) for d in first.directions],
            "angle_convention": ANGLES,
            "class_convention": CLASSES,
            "class_uncertainty": {"method": None, "blocks": None},
        },
        "warnings": list(result.warnings),
    }


def uncertainty_parameters(result: ExperimentalVariogram) -> dict:
    """How the classes' standard errors and intervals were found."""
    if result.uncertainty is None:
        return {"method": None, "blocks": None}
    return {"method": result.uncertainty.method, "blocks": result.uncertainty.blocks}


def lag_parameters(result: ExperimentalVariogram) -> dict:
    """Resolved distance classes of every direction."""
    out: dict[str, object] = {
        "method": result.lag_method,
        "edges": [[row.lower for row in d.classes] + [d.classes[-1].upper] for d in result.directions],
    }
    if result.spacing is not None:
        out["typical_spacing"] = result.spacing
        out["rule"] = (
            "width = typical spacing (median nearest-neighbour distance), at least 1/40 of the largest distance; "
            "edges 0, w/2, 3w/2, ... up to half the extent; classes under min_pairs merged with the next"
        )
    return out


def _class_row(row) -> dict:
    out = {
        "lower": row.lower,
        "upper": row.upper,
        "mean_distance": _as_float(row.mean_distance),
        "pairs": row.pairs,
        "value": _as_float(row.value),
        "sparse": row.sparse,
        "standard_error": _as_float(row.standard_error),
        "interval_95": None if row.interval_95 is None else [float(v) for v in row.interval_95],
    }
    if row.reason is not None:
        out["reason"] = row.reason
    if row.standard_error is None and row.uncertainty_reason is not None:
        out["uncertainty_reason"] = row.uncertainty_reason
    if row.bound_exceeded is not None:
        out.update(error_bound=_as_float(row.error_bound), pair_bound=row.pair_bound, bound_exceeded=row.bound_exceeded)
    if row.tail_mean is not None:
        out.update(
            tail_mean=_as_float(row.tail_mean),
            head_mean=_as_float(row.head_mean),
            tail_sd=_as_float(row.tail_sd),
            head_sd=_as_float(row.head_sd),
        )
    return out


def variogram_map(result: VariogramMap, samples: SampleSet | Raster) -> dict:
    """Response body of ``POST /v1/variogram-maps`` (without provenance)."""
    return {
        "hx": result.hx,
        "hy": result.hy,
        "values": [[_as_float(v) for v in row] for row in result.values],
        "pairs": result.pairs,
        "summary": result.summary.as_dict(),
        "parameters": {
            **sample_parameters(samples),
            "statistic": result.statistic,
            "cell_size": result.cell_size,
            "cells": result.cells,
            **(
                {}
                if result.spacing is None
                else {
                    "typical_spacing": result.spacing,
                    "min_pairs": result.min_pairs,
                    "cell_rule": "omitted values: cell side = typical spacing (median nearest-neighbour distance), at "
                    "least sqrt(min_pairs * hull area) / n and half the largest separation / 40.5; cells reach half "
                    "the largest separation",
                }
            ),
            "cell_convention": "cell (i, j) holds hx in [(i - 1/2) s, (i + 1/2) s) and hy likewise; each pair counted as h and -h; rows by hy",
        },
        "warnings": list(result.warnings),
    }


CRITERION = "AICc (corrected Akaike criterion of the weighted least-squares fit; lower is better)"


def _candidate(rank: int, c, selected: bool) -> dict:
    return {
        "rank": rank,
        "label": c.label,
        "model": None if c.model is None else c.model.as_dict(),
        "selected": selected,
        "parameters": c.parameters,
        "weighted_sse": c.weighted_sse,
        "r_squared": c.r_squared,
        "criterion": c.criterion,
        "converged": c.converged,
        "iterations": c.evaluations,
        "note": c.note,
    }


def model_fit(fit, statistic: str, *, summary: dict | None, sample_params: dict | None, options: dict) -> dict:
    """Response body of ``POST /v1/model-fits`` (without provenance)."""
    best = fit.best
    points = fit.points
    modelled = fit.fitted_values
    directions: dict[int, dict] = {}
    for i in range(points.distance.size):
        entry = directions.setdefault(int(points.direction[i]), {"azimuth": float(points.azimuth[i]), "classes": []})
        entry["classes"].append(
            {
                "mean_distance": float(points.distance[i]) if points.usable[i] or points.distance[i] > 0 else None,
                "value": float(points.value[i]) if points.usable[i] or points.pairs[i] > 0 else None,
                "pairs": int(points.pairs[i]),
                "used": bool(points.usable[i]),
                "model_value": float(modelled[i]) if points.distance[i] > 0 else None,
            }
        )
    document = {
        "model": best.model.as_dict(),
        "diagnostics": {
            "weighted_sse": best.weighted_sse,
            "r_squared": best.r_squared,
            "criterion": best.criterion,
            "criterion_name": CRITERION,
            "converged": best.converged,
            "iterations": best.evaluations,
        },
        "candidates": [_candidate(rank + 1, c, c is best) for rank, c in enumerate(fit.candidates)],
        "experimental": {"statistic": statistic, "directions": [directions[k] for k in sorted(directions)]},
        "parameters": {
            **(sample_params or {}),
            **options,
            "statistic": statistic,
            "weighting": fit.weighting,
            "nugget": fit.nugget,
            "anisotropy": fit.anisotropy,
            "range_convention": "practical range: 95 % of the partial sill (exact sill for spherical, cubic, pentaspherical, circular)",
            "criterion": CRITERION,
        },
        "warnings": list(fit.warnings),
    }
    if summary is not None:
        document["summary"] = summary
    return document


def _unestimated(reasons: dict) -> list[dict]:
    return [{"index": int(i), "reason": why} for i, why in sorted(reasons.items())]


def kriging_parameters(samples: SampleSet, model, spec, neighbourhood) -> dict:
    return {
        **sample_parameters(samples),
        "model": model.as_dict(),
        "kriging": spec.as_dict(),
        "neighbourhood": neighbourhood.as_dict(),
        "coordinates_centred": "drift terms use coordinates centred on the sample mean and scaled by the largest offset",
    }


def cross_validation(result, samples: SampleSet, model, spec, neighbourhood, scheme, threshold) -> dict:
    """Response body of ``POST /v1/cross-validations`` (without provenance)."""
    return {
        "statistics": result.statistics,
        "samples": {
            "id": list(samples.ids),
            "observed": result.observed,
            "estimate": result.estimate,
            "standard_deviation": result.standard_deviation,
            "error": result.error,
            "standardized_error": result.standardized_error,
            "outlier": result.outlier,
        },
        "assessment": result.assessment,
        "unestimated": _unestimated(result.reasons),
        "parameters": {
            **kriging_parameters(samples, model, spec, neighbourhood),
            "scheme": scheme.as_dict(),
            "method": result.method,
            "outlier_threshold": threshold,
            "error_convention": "error = estimate - observed; standard_deviation is that of the error (nugget included)",
        },
        "warnings": list(samples.warnings),
    }


CROSS_VALIDATION_UNITS = (
    "observed, estimate, standard_deviation and error in original units (back-transformed mean and standard "
    "deviation of each held-out estimate); standardized_error, outlier, the standardized statistics and "
    "interval_coverage_95 in the transformed space, where the kriging error is read as Gaussian"
)


def add_transform(document: dict, working, model) -> None:
    """State the transform (and its back-transform) in a cross-validation's ``parameters``; warn when the
    model looks untransformed."""
    document["parameters"]["transform"] = working.transform.as_dict()
    if working.transform.kind != "none":
        document["parameters"]["units"] = CROSS_VALIDATION_UNITS
    note = units_warning(model, working)
    if note:
        document["warnings"].append(note)


def exceedance_parameters(found, spec, support: str = "point") -> dict:
    """How exceedance probabilities were read (thresholds in original and transformed units)."""
    return {
        **reading(spec.type, spec.nugget_as, support),
        "thresholds": list(found.thresholds),
        "transformed_thresholds": [t if math.isfinite(t) else None for t in found.transformed],
    }


def exceedance(found) -> list[dict]:
    return [{"threshold": t, "probability": row} for t, row in zip(found.thresholds, found.probability, strict=True)]


def prediction(answer, samples: SampleSet, model, spec, neighbourhood) -> dict:
    """Response body of ``POST /v1/predictions`` (without provenance); ``answer`` a TransformedPrediction."""
    result = answer.result
    points = result.targets
    p = result.prediction
    document = {name: points[:, a] for a, name in enumerate(("x", "y", "z")[: points.shape[1]])}
    document.update(estimate=answer.estimate, variance=answer.variance, unestimated=_unestimated(p.reasons))
    if result.grid is not None:
        document["grid"] = result.grid.as_dict()
    if answer.exceedance is not None:
        document["exceedance"] = exceedance(answer.exceedance)
    document["support"] = result.support
    if p.weights:
        document["weights"] = [
            {
                "target": w["target"],
                "samples": [samples.ids[i] for i in w["samples"]],
                "weights": w["weights"],
                "lagrange": w["lagrange"],
            }
            for w in p.weights
        ]
    document["parameters"] = {
        **kriging_parameters(samples, model, spec, neighbourhood),
        "variance": "kriging variance (includes the nugget unless nugget_as is measurement_error)",
        "transform": answer.transform.as_dict(),
    }
    if answer.transform.kind != "none":
        document["parameters"]["variance"] += (
            "; estimate and variance are the back-transformed mean and variance (transform.method), "
            "model and weights in transformed units"
        )
    if result.blocks is not None:
        document["parameters"]["blocks"] = result.blocks.as_dict()
        document["parameters"]["variance"] = (
            "block-kriging variance of the block average (the nugget averages out over a block)"
        )
    if answer.exceedance is not None:
        document["parameters"]["exceedance"] = exceedance_parameters(answer.exceedance, spec, result.support)
    document["warnings"] = list(samples.warnings) + list(answer.warnings)
    return document


def _experimental_body(result) -> dict:
    return {
        "directions": [
            {**d.direction.as_dict(2), "classes": [_class_row(r) for r in d.classes]} for d in result.directions
        ],
        "colocated_pairs": result.colocated_pairs,
    }


def _strategy(strategy) -> dict:
    return {
        "name": strategy.name,
        "model": strategy.model.as_dict(),
        "kriging": strategy.kriging.as_dict(),
        "statistics": strategy.cross_validation.statistics if strategy.cross_validation is not None else None,
        "selected": strategy.selected,
        "why": strategy.why,
    }


def _selection(selection) -> dict | None:
    if selection is None:
        return None
    return {
        "strategies": [_strategy(s) for s in selection.strategies],
        "reason": selection.reason,
        "rule": SELECTION_RULE,
    }


def _anisotropy(estimate) -> dict | None:
    if estimate is None:
        return None
    return {**estimate.__dict__, "method": FAN_DESCRIPTION}


def _decisions(decisions, stage) -> dict:
    """The prediction stage's exceedance, probability classes and simulation."""
    if decisions is None or decisions.exceedance is None:
        return {"exceedance": [], "classes": [], "simulation": None}
    simulated = decisions.simulation
    out: dict = {
        "exceedance": exceedance(decisions.exceedance),
        "classes": [
            {**c.as_dict(), "support": decisions.classes_support, "method": decisions.classes_method}
            for c in decisions.classes
        ],
        "simulation": None,
    }
    if simulated is not None:
        out["simulation"] = {
            "realisations": stage.simulation.realisations,
            "seed": stage.simulation.seed,
            "above": [
                {"threshold": t, "fraction": {"mean": f.mean, "p10": f.p10, "p50": f.p50, "p90": f.p90}}
                for t, f in simulated.above
            ],
            "method": simulated.method(),
        }
        if simulated.blocks is not None:
            out["simulation"]["blocks"] = {
                "grid": simulated.blocks.grid.as_dict(),
                "mean": simulated.blocks.mean,
                "exceedance": [{"threshold": t, "probability": p} for t, p in simulated.blocks.exceedance],
            }
    return out


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
        out["exceedance"] = exceedance_parameters(decisions.exceedance, result.kriging, result.prediction.support)
        out["classes"] = (
            "targets by probability of exceeding each threshold: below (at most 1 - confidence), above (at least "
            "confidence), uncertain between; "
            + (
                "simulated block averages (share of realisations above)"
                if decisions.classes_method == "simulation"
                else "kriged blocks"
                if decisions.classes_support == "block"
                else "grid nodes"
            )
        )
    return out


def analysis(result, samples: SampleSet, figures: dict, options, figure_options: dict) -> dict:
    """Response body of ``POST /v1/analyses`` (without provenance); ``options`` is the AnalysisOptions."""
    fit_body = model_fit(result.fit, result.omnidirectional.statistic, summary=None, sample_params={}, options={})
    cv = result.cross_validation
    document = {
        "summary": result.summary.as_dict(),
        "transformed_summary": result.transformed_summary.as_dict(),
        "experimental": {
            "omnidirectional": _experimental_body(result.omnidirectional),
            "directional": _experimental_body(result.directional) if result.directional is not None else None,
            "residual": _experimental_body(result.residual) if result.residual is not None else None,
            "anisotropy": _anisotropy(result.anisotropy),
        },
        "fit": {
            **{k: fit_body[k] for k in ("diagnostics", "candidates")},
            "model": {**result.model.as_dict(), "transform": result.transform.kind},
        },
        "selection": _selection(result.selection),
        "cross_validation": None,
        "prediction": None,
        "figures": figures,
        "warnings": list(result.warnings),
        "verdict": result.verdict.as_dict(),
    }
    stage = options.cross_validation
    if cv is not None:
        body = cross_validation(
            cv, samples, result.model, result.kriging, result.neighbourhood, stage.scheme, stage.outlier_threshold
        )
        document["cross_validation"] = {k: body[k] for k in ("statistics", "samples", "assessment", "unestimated")}
    if result.prediction is not None:
        estimate, variance = result.back_transformed
        points = result.prediction.targets
        document["prediction"] = {
            "x": points[:, 0],
            "y": points[:, 1],
            "estimate": estimate,
            "variance": variance,
            "grid": result.prediction.grid.as_dict(),
            "unestimated": _unestimated(result.prediction.prediction.reasons),
            "support": result.prediction.support,
            **_decisions(result.decisions, options.prediction),
        }
    document["parameters"] = {
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
        "figures": list(figures),
        "figure_format": figure_options.get("figure_format"),
        "figure_size": figure_options.get("figure_size"),
        "figure_colour_scale": figure_options.get("figure_colour_scale"),
        "variable": figure_options.get("variable"),
        "coordinate_unit": figure_options.get("coordinate_unit"),
        "thresholds": figure_options.get("thresholds"),
    }
    return document


def simulation(result, samples: SampleSet, model, neighbourhood, request: dict) -> dict:
    """Response body of ``POST /v1/simulations`` (without provenance); ``result`` a SimulationResult."""
    document: dict = {
        "grid": result.grid.as_dict(),
        "mean": result.mean,
        "variance": result.variance,
        "quantiles": result.quantiles,
        "exceedance": [{"threshold": t, "probability": p} for t, p in result.exceedance],
        "above": [
            {"threshold": t, "fraction": {"mean": f.mean, "p10": f.p10, "p50": f.p50, "p90": f.p90}}
            for t, f in result.above
        ],
        "method": result.method(),
    }
    if result.blocks is not None:
        document["blocks"] = {
            "grid": result.blocks.grid.as_dict(),
            "mean": result.blocks.mean,
            "exceedance": [{"threshold": t, "probability": p} for t, p in result.blocks.exceedance],
        }
    if result.realisations is not None:
        document["realisations"] = result.realisations
    document["parameters"] = {
        **sample_parameters(samples),
        "model": model.as_dict(),
        "model_units": "transformed",
        "kriging": {"type": result.spec.type, **({"mean": result.spec.mean} if result.spec.type == "simple" else {})},
        "neighbourhood": neighbourhood.as_dict(),
        "transform": result.transform.as_dict(),
        "realisations": request["realisations"],
        "seed": request["seed"],
        "thresholds": request["thresholds"],
        "blocks": request.get("blocks"),
        "return_realisations": request["return_realisations"],
        "support": "point values including the nugget; blocks average the grid nodes they cover",
        "exceedance": "share of the realisations strictly above the threshold",
    }
    document["warnings"] = list(result.warnings)
    return document
