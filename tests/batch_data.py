"""An invented 12-analyte soil batch (names of analytes only; the site and values are invented).

Seeded and deterministic: 90 samples on an invented 600 m x 400 m plot; the metals share
a smooth pattern along an old track (azimuth about 60 degrees), nutrients and solvents
have their own; analytes come in panels, so some are measured on part of the samples
(heterotopic), and one result of the solvent panel is below its detection limit.
"""

from __future__ import annotations

import numpy as np

ANALYTES = (
    "lead",
    "zinc",
    "copper",
    "cadmium",
    "nickel",
    "chromium",
    "arsenic",
    "nitrate",
    "phosphate",
    "potassium",
    "toluene",
    "xylene",
)
UNITS = {name: ("mg/kg" if name not in ("toluene", "xylene") else "ug/kg") for name in ANALYTES}


def batch(n: int = 90, seed: int = 12) -> dict:
    """Columnar samples with ``variables`` (null where not measured) and per-analyte units."""
    rng = np.random.default_rng(seed)
    x, y = rng.uniform(0, 600, n), rng.uniform(0, 400, n)
    along = (x * np.sin(np.radians(60)) + y * np.cos(np.radians(60))) / 120.0
    across = (x * np.cos(np.radians(60)) - y * np.sin(np.radians(60))) / 60.0
    track = np.exp(-(across**2)) * (1.0 + 0.3 * np.sin(along))
    nutrients = np.sin(x / 90.0) * np.cos(y / 70.0)
    nutrient_panel = rng.random(n) < 0.7
    solvent_panel = rng.random(n) < 0.6
    columns = {}
    for k, name in enumerate(ANALYTES):
        if k < 7:
            values = np.exp(3.0 + 0.2 * k + 1.2 * track + 0.25 * rng.normal(size=n))
            measured = np.ones(n, dtype=bool)
        elif k < 10:
            values = np.exp(2.0 + 0.8 * nutrients + 0.3 * rng.normal(size=n))
            measured = nutrient_panel
        else:
            values = np.exp(1.0 + 1.5 * track + 0.5 * rng.normal(size=n))
            measured = solvent_panel
        columns[name] = [round(float(v), 4) if m else None for v, m in zip(values, measured, strict=True)]
    censored = [False] * n
    first_solvent = int(np.flatnonzero(solvent_panel)[0])
    censored[first_solvent] = True
    columns["toluene"][first_solvent] = None
    limits = [None] * n
    limits[first_solvent] = 0.5
    return {
        "x": x.round(2).tolist(),
        "y": y.round(2).tolist(),
        "variables": columns,
        "units": dict(UNITS),
        "censored": {"toluene": censored},
        "detection_limits": {"toluene": limits},
    }
