"""Variogram figures: experimental classes with directional model curves, and the variogram map."""

from __future__ import annotations

import math
import textwrap

import numpy as np
from matplotlib.colors import Normalize, to_rgba
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from .labels import STATISTIC_NAMES, Labels
from .style import AMBER, DIRECTION_COLOURS, DISSIMILARITY_RAMP, FOG, SLATE, render, style_axes

CURVE_POINTS = 240


def _direction_label(direction) -> str:
    if direction.tolerance >= 90:
        return "all directions"
    return f"azimuth {direction.azimuth:g}° ± {direction.tolerance:g}°"


def _anisotropic(model) -> bool:
    return any(not s.anisotropy.isotropic for s in model.structures)


def along(model, azimuth: float, distances: np.ndarray) -> np.ndarray:
    """The model's semivariance at ``distances`` along ``azimuth`` (degrees from north), anisotropy applied."""
    theta = math.radians(azimuth)
    vectors = np.outer(distances, [math.sin(theta), math.cos(theta)])
    return model.semivariance(vectors)


def _interval(row) -> tuple[float, float] | None:
    """A class's 95 % interval (``interval_95``, statistic units) when the class carries one."""
    return getattr(row, "interval_95", None)


def describe(model, labels: Labels) -> str:
    """One line naming the model's nugget and structures, with ranges in the distance unit."""
    unit = "" if labels.distance_unit is None else f"\u00a0{labels.distance_unit}"  # no break before the unit
    parts = [f"nugget {model.nugget:.3g}"] if model.nugget > 0 or not model.structures else []
    for s in model.structures:
        if s.family == "linear":
            parts.append(f"linear (slope {s.partial_sill:.3g})")
            continue
        if s.family == "power":
            parts.append(f"power (coefficient {s.partial_sill:.3g}, exponent {s.extra:.3g})")
            continue
        text = f"{s.family.replace('_', ' ')} (partial sill {s.partial_sill:.3g}, range {s.range:.4g}{unit}"
        if not s.anisotropy.isotropic:
            text += f" along {s.anisotropy.azimuth:.0f}°, ratio {s.anisotropy.ratio:.2f}"
        parts.append(text + ")")
    return "model: " + " + ".join(parts)


def _curves(model, directions) -> list[tuple[float | None, str, str]]:
    """(azimuth or None for isotropic, label, colour) of each model curve to draw."""
    if not _anisotropic(model):
        return [(None, "model (the same in every direction)", AMBER)]
    classes = [d.direction for d in directions if d.direction.tolerance < 90]
    if classes:
        return [
            (d.azimuth, f"model along {d.azimuth:g}°", DIRECTION_COLOURS[k % len(DIRECTION_COLOURS)])
            for k, d in enumerate(classes)
        ]
    major = model.structures[0].anisotropy.azimuth
    return [
        (major, f"model along {major:g}° (longest range)", AMBER),
        ((major + 90.0) % 180.0, f"model along {(major + 90.0) % 180.0:g}° (shortest range)", SLATE),
    ]


def variogram(
    experimental,
    model,
    labels: Labels,
    *,
    sill_reference: float | None = None,
    size: tuple[int, int] = (800, 500),
    fmt: str = "svg",
) -> str | bytes:
    """Experimental classes per direction, each with its own model curve, and the pairs behind them.

    Parameters
    ----------
    experimental : ExperimentalVariogram
        The classes drawn (one colour per direction class).
    model : VariogramModel
        The selected model; drawn along each class's azimuth when it is anisotropic.
    labels : Labels
        Names and units.
    sill_reference : float, optional
        The variance the sill is compared with (working units squared), drawn dotted.
    size : (int, int)
        Width and height, pixels.
    fmt : {"svg", "png"}

    Returns
    -------
    str or bytes
        SVG text or PNG bytes. Points carry ids ``experimental-points-k``, curves
        ``model-curve-k``, pair-count bars ``pair-counts-k``, uncertainty bars
        ``class-uncertainty-k``.
    """
    directions = [d for d in experimental.directions if any(r.pairs > 0 and r.value is not None for r in d.classes)]
    min_pairs = experimental.min_pairs

    characters = max(40, int(size[0] / 12))  # a subtitle line that fits beside the legend at 10 pt
    has_bars = any(_interval(r) is not None for d in directions for r in d.classes if r.pairs > 0)

    def draw(fig):
        top, bottom = fig.subplots(2, 1, sharex=True, height_ratios=[4, 1.2])
        reach = max((r.upper for d in directions for r in d.classes if r.pairs > 0), default=1.0)
        share = 0.8 / max(len(directions), 1)
        for k, d in enumerate(directions):
            colour = DIRECTION_COLOURS[k % len(DIRECTION_COLOURS)]
            rows = [r for r in d.classes if r.pairs > 0 and r.value is not None]
            h = np.array([r.mean_distance for r in rows])
            g = np.array([r.value for r in rows])
            n = np.array([r.pairs for r in rows])
            sparse = np.array([r.sparse for r in rows])
            area = 14 + 70 * np.sqrt(n / n.max())
            top.scatter(h, g, s=area, c=np.where(sparse, "white", colour), edgecolors=colour, linewidths=1.2,
                        label=_direction_label(d.direction), gid=f"experimental-points-{k}", zorder=3)  # fmt: skip
            intervals = [(x, y, _interval(r)) for x, y, r in zip(h, g, rows, strict=True) if _interval(r) is not None]
            if intervals:
                x, y, bounds = (np.array(column) for column in zip(*intervals, strict=True))
                low, high = np.maximum(y - bounds[:, 0], 0.0), np.maximum(bounds[:, 1] - y, 0.0)
                # Bars of different directions side by side, not on top of each other.
                shift = (k - (len(directions) - 1) / 2) * 0.006 * reach
                top.errorbar(x + shift, y, yerr=[low, high], fmt="none", ecolor=colour, elinewidth=0.9, capsize=1.5,
                             alpha=0.75 if len(directions) > 1 else 1.0, gid=f"class-uncertainty-{k}", zorder=2)  # fmt: skip
            width = np.array([r.upper - r.lower for r in rows]) * share
            offset = np.array([r.lower for r in rows]) + (
                np.array([r.upper - r.lower for r in rows]) * (0.1 + share * k)
            )
            shades = [to_rgba(colour, 0.35 if thin else 0.9) for thin in sparse]
            bottom.bar(offset, n, width=width, align="edge", color=shades, gid=f"pair-counts-{k}")
        grid = np.linspace(0.0, reach, CURVE_POINTS)[1:]
        for k, (azimuth, label, colour) in enumerate(_curves(model, directions)):
            gamma = model.semivariance(grid) if azimuth is None else along(model, azimuth, grid)
            top.plot(grid, gamma, color=colour, linewidth=1.8, linestyle="-" if k % 2 == 0 else "--",
                     label=label, gid=f"model-curve-{k}", zorder=2)  # fmt: skip
        if sill_reference is not None:
            top.axhline(sill_reference, color=SLATE, linewidth=0.9, linestyle=":", label="variance of the samples")
        bottom.axhline(min_pairs, color=SLATE, linewidth=0.8, linestyle="--")
        bottom.annotate(f"{min_pairs} pairs", (0, min_pairs), xytext=(3, 2), textcoords="offset points", fontsize=7,
                        ha="left", va="bottom", bbox={"facecolor": "white", "edgecolor": "none", "pad": 0.5})  # fmt: skip
        top.set_ylabel(labels.gamma(experimental.statistic))
        top.set_xlim(0, reach * 1.02)
        top.set_ylim(bottom=0)
        bottom.set_ylabel("pairs")
        bottom.set_xlabel(labels.distance)
        style_axes(
            top,
            f"Experimental {STATISTIC_NAMES.get(experimental.statistic, experimental.statistic)} and fitted model",
            textwrap.fill(describe(model, labels), width=characters)
            + f"\nmarker area grows with the pairs of a class; hollow: fewer than {min_pairs} pairs"
            + ("; bars: 95 % intervals" if has_bars else ""),
        )
        style_axes(bottom, "Pairs per class")
        bottom.title.set_fontsize(8)
        top.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0))

    return render(draw, size, fmt)


def _model_outline(ax, model, hx: np.ndarray, hy: np.ndarray) -> Line2D | None:
    """Contour where the model reaches 95 % of its structured sill (its practical-range outline)."""
    if not model.structures or not model.bounded:
        return None
    mx, my = np.meshgrid(np.linspace(hx[0], hx[-1], 161), np.linspace(hy[0], hy[-1], 161))
    gamma = model.semivariance(np.column_stack([mx.ravel(), my.ravel()])).reshape(mx.shape)
    level = model.nugget + 0.95 * (model.sill - model.nugget)
    if not gamma.min() < level < gamma.max():
        return None
    ax.contour(mx, my, gamma, levels=[level], colors=[SLATE], linewidths=1.2, linestyles="--")
    return Line2D([], [], color=SLATE, linewidth=1.2, linestyle="--", label="model reaches 95 % of its sill")


def masked_cells(vmap, min_pairs: int) -> np.ma.MaskedArray:
    """The map's values with undefined cells and cells of fewer than ``min_pairs`` pairs masked."""
    values = np.array([[np.nan if v is None else v for v in row] for row in vmap.values], dtype=float)
    return np.ma.masked_where(~np.isfinite(values) | (vmap.pairs < min_pairs), values)


def variogram_map(
    vmap,
    labels: Labels,
    *,
    min_pairs: int,
    model=None,
    size: tuple[int, int] = (800, 500),
    fmt: str = "svg",
) -> str | bytes:
    """The statistic on separation vectors (hx, hy); cells with fewer than ``min_pairs`` pairs masked.

    With a ``model``, the outline where it reaches 95 % of its sill is drawn dashed, so
    that the fitted anisotropy can be compared with the map's. Cells carry the id
    ``map-cells``.
    """
    masked = masked_cells(vmap, min_pairs)
    half = vmap.cell_size / 2

    def draw(fig):
        ax = fig.add_subplot()
        extent = (vmap.hx[0] - half, vmap.hx[-1] + half, vmap.hy[0] - half, vmap.hy[-1] + half)
        ramp = DISSIMILARITY_RAMP.with_extremes(bad=FOG)
        shown = masked.compressed()
        # From zero to the 98th percentile: a few noisy far cells must not wash out the short scales.
        top = float(np.quantile(shown, 0.98)) if shown.size else 1.0
        image = ax.imshow(masked, origin="lower", extent=extent, cmap=ramp, norm=Normalize(0.0, top or 1.0),
                          interpolation="nearest", gid="map-cells")  # fmt: skip
        bar = fig.colorbar(image, ax=ax, shrink=0.9, extend="max")
        bar.set_label(labels.gamma(vmap.statistic))
        ax.axhline(0, color="white", linewidth=0.6)
        ax.axvline(0, color="white", linewidth=0.6)
        handles = [Patch(facecolor=FOG, label=f"fewer than {min_pairs} pairs")]
        outline = None if model is None else _model_outline(ax, model, vmap.hx, vmap.hy)
        if outline is not None:
            handles.append(outline)
        ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(0.0, -0.12), ncols=2)
        ax.set_xlabel(labels.separation("x"))
        ax.set_ylabel(labels.separation("y"))
        ax.set_aspect("equal")
        unit = "" if labels.distance_unit is None else f" {labels.distance_unit}"
        typical = "" if vmap.spacing is None else f" (typical sample spacing {vmap.spacing:.3g}{unit})"
        style_axes(ax, "Variogram map", f"square cells of {vmap.cell_size:.3g}{unit}{typical}; north is up")
        ax.grid(False)

    return render(draw, size, fmt)
