"""Figures for analyses (matplotlib, Agg renderers): SVG text or PNG bytes.

Style: our own quiet palette (see :mod:`.style`), the variable's name and unit and the
distance unit on every axis (:mod:`.labels`). Renders are deterministic: the same
request gives the same bytes. Artists carry SVG ids (``experimental-points-0``,
``sample-locations``...) so that tests and clients can find them.

Modules: :mod:`.variogram` (experimental variogram with directional model curves,
variogram map), :mod:`.maps` (estimates, standard deviations and exceedance probabilities on a grid),
:mod:`.validation` (cross-validation errors and interval calibration).
"""

from __future__ import annotations

from .labels import Labels
from .maps import COLOUR_SCALES, prediction_map, probability_map, standard_deviation_map
from .validation import cross_validation, interval_coverage
from .variogram import variogram, variogram_map

FIGURES = (
    "variogram",
    "variogram_map",
    "cross_validation",
    "prediction_map",
    "standard_deviation_map",
    "probability_map",
)
FORMATS = ("svg", "png")

__all__ = [
    "COLOUR_SCALES",
    "FIGURES",
    "FORMATS",
    "Labels",
    "cross_validation",
    "interval_coverage",
    "prediction_map",
    "probability_map",
    "standard_deviation_map",
    "variogram",
    "variogram_map",
]
