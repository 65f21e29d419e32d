"""Render the figures an analysis asked for (SVG text, or PNG as base64)."""

from __future__ import annotations

import base64
import math

import numpy as np

from .. import figures


def labels_for(document: dict, samples, transform: str) -> figures.Labels:
    """Names and units of a request's figures (``variable``, ``coordinate_unit``)."""
    variable = document["variable"]
    return figures.Labels(
        name=variable["name"],
        unit=variable["unit"],
        coordinate_unit=document["coordinate_unit"],
        transform=transform,
        geographic=samples.coordinates == "geographic",
    )


def _map_coordinates(samples) -> np.ndarray:
    """Sample locations in the coordinates maps are drawn in (degrees for geographic sets)."""
    if samples.coordinates != "geographic":
        return samples.coords[:, : min(samples.dimension, 2)]
    lon, lat = samples.projection.inverse(samples.coords[:, 0], samples.coords[:, 1])
    return np.column_stack([lon, lat])


def check_cost(document: dict, samples: int, limits) -> None:
    """Refuse, before any work, a requested figure that would draw more marks than the limits allow.

    A map draws one mark per grid node and one per sample; the cross-validation figure two
    per sample (locations and errors). The variogram figure draws a few marks per class and
    the variogram map one raster image (its cells bounded by ``LAGWISE_MAX_MAP_CELLS``).
    """
    names = document["figures"]
    if "prediction" in document:
        nodes = math.prod(document["prediction"]["grid"]["shape"])
        for name in ("prediction_map", "standard_deviation_map"):
            if name in names:
                limits.check_figure(name, nodes + samples, document["figure_format"])
    if "cross_validation" in names:
        limits.check_figure("cross_validation", 2 * samples, document["figure_format"])


def marks(document: dict, samples: int) -> int:
    """Marks the requested maps and the cross-validation figure draw together (grid nodes and sample markers)."""
    names = document["figures"]
    nodes = math.prod(document["prediction"]["grid"]["shape"]) if "prediction" in document else 0
    maps = sum(name in names for name in ("prediction_map", "standard_deviation_map", "probability_map"))
    return maps * (nodes + samples) + (2 * samples if "cross_validation" in names else 0)


def render(result, samples, document: dict) -> dict:
    """Figure name -> SVG text or base64 PNG, for the requested figures that apply to ``result``."""
    names = document["figures"]
    if not names:
        return {}
    fmt, size = document["figure_format"], tuple(document["figure_size"])
    labels = labels_for(document, samples, result.transform.kind)
    where = _map_coordinates(samples)
    experimental = result.directional or result.omnidirectional
    model = result.model
    prediction = result.prediction
    out = {}
    for name in names:
        if name == "variogram":
            image = figures.variogram(
                experimental,
                model,
                labels,
                sill_reference=result.transformed_summary.variance,
                size=size,
                fmt=fmt,
            )
        elif name == "variogram_map" and result.variogram_map is not None:
            image = figures.variogram_map(
                result.variogram_map, labels, min_pairs=experimental.min_pairs, model=model, size=size, fmt=fmt
            )
        elif name == "cross_validation" and result.cross_validation is not None:
            image = figures.cross_validation(result.cross_validation, where, labels, size=size, fmt=fmt)
        elif name == "prediction_map" and prediction is not None:
            image = figures.prediction_map(
                prediction.grid,
                result.back_transformed[0],
                labels,
                sample_xy=where,
                scale=document["figure_colour_scale"],
                thresholds=tuple(document["prediction"]["thresholds"]),
                size=size,
                fmt=fmt,
            )
        elif name == "standard_deviation_map" and prediction is not None:
            image = figures.standard_deviation_map(
                prediction.grid, np.sqrt(result.back_transformed[1]), labels, sample_xy=where, size=size, fmt=fmt
            )
        elif name == "probability_map" and prediction is not None and result.decisions is not None:
            found = result.decisions.exceedance
            if found is None:
                continue
            image = figures.probability_map(
                prediction.grid,
                found.probability[0],
                result.back_transformed[0],
                found.thresholds[0],
                labels,
                sample_xy=where,
                support=prediction.support,
                size=size,
                fmt=fmt,
            )
        else:
            continue
        # SVG comes as text, PNG as bytes (see figures.style.render).
        out[name] = image if isinstance(image, str) else base64.b64encode(image).decode("ascii")
    return out
