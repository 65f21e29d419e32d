"""The result of :meth:`Lagwise.simulate` (plain Python; numpy optional for the 2-D arrays).

Every per-node list of the response runs x fastest over ``grid["shape"] = [nx, ny]``; the
``*_grid`` methods reshape them to 2-D numpy arrays with rows by y and columns by x
(``array[j, i]`` is the node at origin + (i * dx, j * dy)). numpy is imported only there.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from .results import Response, _raw


def _numpy():
    try:
        import numpy as np
    except ImportError as exc:  # pragma: no cover - depends on the environment
        raise ImportError("the *_grid() methods need numpy: pip install numpy") from exc
    return np


def _find(entries: tuple[dict, ...], threshold: float, what: str) -> dict:
    for entry in entries:
        if entry["threshold"] == threshold:
            return entry
    known = ", ".join(str(e["threshold"]) for e in entries) or "none"
    raise KeyError(f"no {what} for threshold {threshold!r} (thresholds: {known})")


@dataclass(frozen=True, kw_only=True)
class Simulation(Response):
    """Conditional realisations summarised per node, per block and over the grid.

    Attributes
    ----------
    grid : dict
        ``origin``, ``spacing``, ``shape`` ([nx, ny]) and ``order`` (x fastest).
    mean, variance : tuple of float
        Per node: e-type mean (original units) and variance over the realisations.
    quantiles : dict
        ``p10``, ``p50``, ``p90``: per-node lists.
    exceedance : tuple of dict
        ``{"threshold", "probability"}``: share of the realisations above the threshold per node.
    above : tuple of dict
        ``{"threshold", "fraction": {"mean", "p10", "p50", "p90"}}``: share of the grid above it.
    blocks : dict or None
        ``{"grid", "mean", "exceedance"}`` when blocks were asked for.
    realisations : tuple of list or None
        One list per realisation (x fastest) when ``return_realisations`` was true.
    """

    grid: dict
    mean: tuple[float, ...]
    variance: tuple[float, ...]
    quantiles: dict
    exceedance: tuple[dict, ...] = ()
    above: tuple[dict, ...] = ()
    blocks: dict | None = None
    realisations: tuple[list, ...] | None = None
    method: dict = field(default_factory=dict)
    parameters: dict = field(default_factory=dict)
    warnings: tuple[str, ...] = ()
    provenance: dict = field(default_factory=dict)
    raw: dict = _raw()

    def _shape(self, grid: dict | None = None) -> tuple[int, int]:
        nx, ny = (grid or self.grid)["shape"]
        return ny, nx

    def to_grid(self, which: str = "mean") -> Any:
        """``mean``, ``variance``, ``p10``, ``p50`` or ``p90`` as a 2-D numpy array (rows by y)."""
        values = self.quantiles[which] if which in ("p10", "p50", "p90") else getattr(self, which)
        return _numpy().asarray(values, dtype=float).reshape(self._shape())

    def exceedance_grid(self, threshold: float) -> Any:
        """Share of the realisations above ``threshold`` per node, as a 2-D numpy array."""
        probability = _find(self.exceedance, threshold, "exceedance")["probability"]
        return _numpy().asarray(probability, dtype=float).reshape(self._shape())

    def realisation_grid(self, index: int) -> Any:
        """Realisation ``index`` as a 2-D numpy array (needs ``return_realisations=True``)."""
        return self.realisation_grids()[index]

    def realisation_grids(self) -> Any:
        """Every realisation as a 3-D numpy array (realisation, y, x)."""
        if self.realisations is None:
            raise ValueError("the realisations were not returned: call simulate(..., return_realisations=True)")
        ny, nx = self._shape()
        return _numpy().asarray(self.realisations, dtype=float).reshape(len(self.realisations), ny, nx)

    def block_grid(self, threshold: float | None = None) -> Any:
        """Block means (``threshold`` None) or the block exceedance of ``threshold``, as a 2-D array."""
        if self.blocks is None:
            raise ValueError("no blocks were asked for: call simulate(..., blocks={'size': [bx, by]})")
        if threshold is None:
            values = self.blocks["mean"]
        else:
            values = _find(tuple(self.blocks["exceedance"]), threshold, "block exceedance")["probability"]
        return _numpy().asarray(values, dtype=float).reshape(self._shape(self.blocks["grid"]))

    def fraction_above(self, threshold: float) -> dict:
        """Share of the grid above ``threshold``: ``{"mean", "p10", "p50", "p90"}`` over the realisations."""
        return dict(_find(self.above, threshold, "share of the grid")["fraction"])
