"""Render the figures an analysis asked for (SVG text, or PNG as base64)."""

from __future__ import annotations

import base64


def render(result, samples, names: list[str], fmt: str, size: tuple[int, int]) -> dict:
    """Figure name -> SVG text or base64 PNG, for the figures that apply to this result."""
    if not names:
        return {}
    from .. import figures

    distance = "metres" if samples.coordinates == "geographic" else "coordinate units"
    value = (
        "value units" if result.transform.kind == "none" else f"{result.transform.kind.replace('_', ' ')} of the value"
    )
    units = {"distance": distance, "coordinate": distance, "value": value, "gamma": f"({value})²"}
    out = {}
    for name in names:
        if name == "variogram":
            image = figures.variogram(result, units, size, fmt)
        elif name == "variogram_map" and result.variogram_map is not None:
            image = figures.variogram_map(result.variogram_map, units, size, fmt)
        elif name == "cross_validation" and result.cross_validation is not None:
            image = figures.cross_validation(result.cross_validation, units, size, fmt)
        elif name == "prediction_map" and result.prediction is not None:
            original = {**units, "value": "value units"}
            image = figures.prediction_map(
                result.prediction.grid, result.back_transformed[0], samples.coords, original, size, fmt
            )
        else:
            continue
        out[name] = image if fmt == "svg" else base64.b64encode(image).decode("ascii")
    return out
