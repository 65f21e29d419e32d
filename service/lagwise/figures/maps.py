"""Maps of kriging results on a grid: estimates (with threshold contours), standard deviations and
probabilities of exceeding a threshold.

Everything on a map is drawn in the grid's own coordinates: planar units, or degrees
of longitude and latitude for geographic samples (then one degree of longitude is
drawn cos(latitude) times as wide as one of latitude, so that shapes are not stretched).
"""

from __future__ import annotations

import math

import numpy as np
from matplotlib.colors import BoundaryNorm, LogNorm, Normalize
from matplotlib.lines import Line2D
from matplotlib.patches import Patch
from matplotlib.ticker import FuncFormatter, LogLocator

from .labels import Labels
from .style import ESTIMATE_RAMP, FOG, PROBABILITY_RAMP, SLATE, SPREAD_RAMP, render, style_axes

COLOUR_SCALES = ("auto", "linear", "log", "quantile")
QUANTILE_CLASSES = 10


def resolve_scale(scale: str, transform: str, values: np.ndarray) -> tuple[str, str | None]:
    """The colour scale to use and, when the one asked for cannot be drawn, why.

    ``auto`` is ``log`` for log and normal-score analyses (skewed values, where one high
    cell would wash out a linear scale) and ``linear`` otherwise. A log scale needs
    positive values; without them ``quantile`` is used instead and the reason returned.
    """
    wanted = ("log" if transform in ("log", "normal_score") else "linear") if scale == "auto" else scale
    finite = values[np.isfinite(values)]
    if wanted == "log" and (finite.size == 0 or finite.min() <= 0):
        return "quantile", "log scale impossible (values ≤ 0): colours by decile"
    return wanted, None


def _norm(scale: str, values: np.ndarray):
    finite = values[np.isfinite(values)]
    low, high = (float(finite.min()), float(finite.max())) if finite.size else (0.0, 1.0)
    if high <= low:
        return Normalize(low - 0.5, high + 0.5)
    if scale == "log":
        return LogNorm(low, high)
    if scale == "quantile":
        edges = np.unique(np.quantile(finite, np.linspace(0.0, 1.0, QUANTILE_CLASSES + 1)))
        if edges.size >= 3:
            return BoundaryNorm(edges, ncolors=ESTIMATE_RAMP.N)
    return Normalize(low, high)


def _axes_for(fig, labels: Labels, grid):
    ax = fig.add_subplot()
    if labels.geographic:
        middle = grid.origin[1] + grid.spacing[1] * (grid.shape[1] - 1) / 2
        ax.set_aspect(1.0 / max(math.cos(math.radians(middle)), 1e-6))
    else:
        ax.set_aspect("equal")
    ax.set_xlabel(labels.coordinate("x"))
    ax.set_ylabel(labels.coordinate("y"))
    ax.ticklabel_format(useOffset=False, style="plain")  # full coordinates, no "+4.6e1" offsets
    return ax


def _surface(grid, values: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    nx, ny = int(grid.shape[0]), int(grid.shape[1])
    x = grid.origin[0] + grid.spacing[0] * np.arange(nx)
    y = grid.origin[1] + grid.spacing[1] * np.arange(ny)
    return x, y, np.asarray(values, dtype=float).reshape(ny, nx)


def _samples(ax, sample_xy: np.ndarray) -> Line2D:
    ax.scatter(sample_xy[:, 0], sample_xy[:, 1], s=7, color="white", edgecolors=SLATE, linewidths=0.5,
               gid="sample-locations", zorder=4)  # fmt: skip
    return Line2D([], [], marker="o", linestyle="", markersize=4, markerfacecolor="white", markeredgecolor=SLATE,
                  label=f"{len(sample_xy)} samples")  # fmt: skip


def _legend(ax, handles: list) -> None:
    ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(0.0, -0.1), ncols=min(len(handles), 3))


def prediction_map(
    grid,
    estimate: np.ndarray,
    labels: Labels,
    *,
    sample_xy: np.ndarray,
    scale: str = "auto",
    thresholds: tuple[float, ...] = (),
    size: tuple[int, int] = (800, 500),
    fmt: str = "svg",
) -> str | bytes:
    """Kriging estimates on the grid (original units), sample locations and threshold contours.

    Parameters
    ----------
    grid : Grid
        The prediction grid (x fastest).
    estimate : ndarray, shape (grid.size,)
        Estimates in original units; NaN where a node could not be estimated.
    labels : Labels
    sample_xy : ndarray, shape (n, 2)
        Sample locations in the grid's coordinates (degrees for geographic samples).
    scale : {"auto", "linear", "log", "quantile"}
        Colour scale (see :func:`resolve_scale`).
    thresholds : tuple of float
        Values (original units) whose contours are drawn and labelled.

    Returns
    -------
    str or bytes
        SVG text or PNG bytes; the surface has id ``estimate-surface``, contours
        ``threshold-contours``, samples ``sample-locations``.
    """
    x, y, surface = _surface(grid, estimate)
    used, note = resolve_scale(scale, labels.transform, surface)
    masked = np.ma.masked_invalid(surface)

    def draw(fig):
        ax = _axes_for(fig, labels, grid)
        norm = _norm(used, surface)
        mesh = ax.pcolormesh(x, y, masked, cmap=ESTIMATE_RAMP.with_extremes(bad=FOG), norm=norm, shading="nearest",
                             gid="estimate-surface")  # fmt: skip
        bar = fig.colorbar(mesh, ax=ax, shrink=0.9)
        scale_text = {"linear": "linear colour scale", "log": "log colour scale", "quantile": "colours by decile"}
        bar.set_label(f"estimate of {labels.value}")
        if used == "log":
            bar.ax.yaxis.set_major_locator(LogLocator(subs=(1.0, 2.0, 5.0)))
            bar.ax.yaxis.set_minor_locator(LogLocator(subs="all"))
            bar.ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
            bar.ax.yaxis.set_minor_formatter(FuncFormatter(lambda v, _: ""))
        elif isinstance(norm, BoundaryNorm):
            bar.ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:.3g}"))
        handles = [_samples(ax, sample_xy)]
        finite = surface[np.isfinite(surface)]
        crossed = [t for t in sorted(thresholds) if finite.size and finite.min() < t < finite.max()]
        missed = [t for t in sorted(thresholds) if t not in crossed]
        if crossed:
            lines = ax.contour(x, y, masked, levels=crossed, colors=[SLATE], linewidths=1.1)
            lines.set_gid("threshold-contours")
            ax.clabel(lines, fmt=lambda v: f"{v:g}", fontsize=7)
            handles.append(Line2D([], [], color=SLATE, linewidth=1.1, label="threshold contours"))
        if np.ma.count_masked(masked):
            handles.append(Patch(facecolor=FOG, label="not estimated"))
        _legend(ax, handles)
        subtitle = [scale_text[used]] + ([note] if note else [])
        if missed:
            subtitle.append("not reached: " + ", ".join(f"{t:g}" for t in missed))
        if labels.transform != "none":
            subtitle.append("back-transformed to original units")
        style_axes(ax, f"Kriging estimates of {labels.value}", "; ".join(subtitle))
        ax.grid(False)

    return render(draw, size, fmt)


def standard_deviation_map(
    grid,
    deviation: np.ndarray,
    labels: Labels,
    *,
    sample_xy: np.ndarray,
    size: tuple[int, int] = (800, 500),
    fmt: str = "svg",
) -> str | bytes:
    """Kriging standard deviations on the grid (original units) with the sample locations.

    The surface has id ``deviation-surface``; samples ``sample-locations``.
    """
    x, y, surface = _surface(grid, deviation)
    masked = np.ma.masked_invalid(surface)

    def draw(fig):
        ax = _axes_for(fig, labels, grid)
        mesh = ax.pcolormesh(x, y, masked, cmap=SPREAD_RAMP.with_extremes(bad=FOG), norm=_norm("linear", surface),
                             shading="nearest", gid="deviation-surface")  # fmt: skip
        bar = fig.colorbar(mesh, ax=ax, shrink=0.9)
        bar.set_label(f"standard deviation of {labels.value}")
        handles = [_samples(ax, sample_xy)]
        if np.ma.count_masked(masked):
            handles.append(Patch(facecolor=FOG, label="not estimated"))
        _legend(ax, handles)
        subtitle = "lowest near samples, highest far from them"
        if labels.transform != "none":
            subtitle += "; back-transformed to original units"
        style_axes(ax, f"Kriging standard deviation of {labels.value}", subtitle)
        ax.grid(False)

    return render(draw, size, fmt)


def probability_map(
    grid,
    probability: np.ndarray,
    estimate: np.ndarray,
    threshold: float,
    labels: Labels,
    *,
    sample_xy: np.ndarray,
    confidence: float = 0.9,
    support: str = "point",
    size: tuple[int, int] = (800, 500),
    fmt: str = "svg",
) -> str | bytes:
    """P(value > threshold) on the grid, with the threshold contour of the estimate and the class limits.

    Parameters
    ----------
    grid : Grid
    probability : ndarray, shape (grid.size,)
        Probabilities in [0, 1]; NaN where a node has no estimate.
    estimate : ndarray, shape (grid.size,)
        Estimates in original units; their contour at ``threshold`` is drawn solid.
    threshold : float
        Original units.
    confidence : float
        The probability contours 1 - confidence and confidence (dashed) bound the classes
        "below with at least ... %" and "above with at least ... %".
    support : {"point", "block"}
        Whether the probabilities are of point values or of block averages (labels only).

    Returns
    -------
    str or bytes
        SVG text or PNG bytes; ids ``probability-surface``, ``threshold-contour``,
        ``class-limits``, ``sample-locations``.
    """
    x, y, surface = _surface(grid, probability)
    _, _, level = _surface(grid, estimate)
    masked = np.ma.masked_invalid(surface)
    what = labels.value if support == "point" else f"the block average of {labels.value}"
    low, high = 1.0 - confidence, confidence

    def draw(fig):
        ax = _axes_for(fig, labels, grid)
        mesh = ax.pcolormesh(x, y, masked, cmap=PROBABILITY_RAMP.with_extremes(bad=FOG), norm=Normalize(0.0, 1.0),
                             shading="nearest", gid="probability-surface")  # fmt: skip
        bar = fig.colorbar(mesh, ax=ax, shrink=0.9)
        bar.set_label(f"probability of exceeding {threshold:g}")
        bar.ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v * 100:.0f} %"))
        handles = [_samples(ax, sample_xy)]
        finite = level[np.isfinite(level)]
        notes = []
        if finite.size and finite.min() < threshold < finite.max():
            lines = ax.contour(x, y, np.ma.masked_invalid(level), levels=[threshold], colors=[SLATE], linewidths=1.3)
            lines.set_gid("threshold-contour")
            handles.append(Line2D([], [], color=SLATE, linewidth=1.3, label=f"estimate = {threshold:g}"))
        else:
            notes.append(f"the estimate does not cross {threshold:g}")
        known = surface[np.isfinite(surface)]
        crossed = [v for v in (low, high) if known.size and known.min() < v < known.max()]
        if crossed:
            limits = ax.contour(x, y, masked, levels=crossed, colors=[SLATE], linewidths=0.8, linestyles="dashed")
            limits.set_gid("class-limits")
            handles.append(
                Line2D(
                    [],
                    [],
                    color=SLATE,
                    linewidth=0.8,
                    linestyle="dashed",
                    label=f"{low * 100:.0f} % and {high * 100:.0f} % probability",
                )  # fmt: skip
            )
        if np.ma.count_masked(masked):
            handles.append(Patch(facecolor=FOG, label="not estimated"))
        _legend(ax, handles)
        subtitle = ["multi-Gaussian reading of kriging" if support == "point" else "block averages"] + notes
        style_axes(ax, f"Probability that {what} exceeds {threshold:g}", "; ".join(subtitle))
        ax.grid(False)

    return render(draw, size, fmt)
