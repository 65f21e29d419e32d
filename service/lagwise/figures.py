"""Figures for analyses (matplotlib, Agg backend): SVG text or PNG bytes.

Style: our own quiet palette -- slate text and axes, teal for data, amber for models,
plum for warnings -- with units and the statistic's name on every axis. Point groups
carry SVG ids (``experimental-points``, ``sample-points``...) so that tests and
clients can find them.
"""

from __future__ import annotations

import io
import math

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

FIGURES = ("variogram", "variogram_map", "cross_validation", "prediction_map")
FORMATS = ("svg", "png")
SLATE, TEAL, AMBER, PLUM, MIST = "#2f3e46", "#1b7f79", "#d68c15", "#8e4a7d", "#e9eef0"
DIRECTION_COLOURS = (TEAL, "#3d5a80", "#b5651d", PLUM, "#7a8b2f", "#a23b3b")
STATISTIC_NAMES = {
    "semivariance": "semivariance",
    "semivariance_robust": "robust semivariance (Cressie-Hawkins)",
    "semivariance_median": "median semivariance (Dowd)",
}


def _style(ax, title: str) -> None:
    ax.set_title(title, color=SLATE, fontsize=11, loc="left")
    ax.set_facecolor("white")
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        ax.spines[side].set_color(SLATE)
    ax.tick_params(colors=SLATE, labelsize=8)
    ax.xaxis.label.set_color(SLATE)
    ax.yaxis.label.set_color(SLATE)
    ax.grid(color=MIST, linewidth=0.8)
    ax.set_axisbelow(True)


def _render(fig, fmt: str) -> str | bytes:
    buffer = io.BytesIO()
    fig.savefig(buffer, format=fmt, facecolor="white")
    plt.close(fig)
    return buffer.getvalue().decode("utf-8") if fmt == "svg" else buffer.getvalue()


def _figure(size: tuple[int, int]):
    dpi = 100
    return plt.figure(figsize=(size[0] / dpi, size[1] / dpi), dpi=dpi)


def variogram(analysis, units: dict, size=(800, 500), fmt="svg"):
    """Experimental classes (marker area by pair count, counts labelled) and the fitted model."""
    fig = _figure(size)
    ax = fig.add_subplot()
    experimental = analysis.directional or analysis.omnidirectional
    top = 0.0
    for k, d in enumerate(experimental.directions):
        rows = [r for r in d.classes if r.value is not None and r.pairs > 0]
        if not rows:
            continue
        h = np.array([r.mean_distance for r in rows])
        g = np.array([r.value for r in rows])
        n = np.array([r.pairs for r in rows])
        label = (
            "all directions"
            if d.direction.tolerance >= 90
            else f"azimuth {d.direction.azimuth:g}° ± {d.direction.tolerance:g}°"
        )
        colour = DIRECTION_COLOURS[k % len(DIRECTION_COLOURS)]
        ax.scatter(
            h,
            g,
            s=12 + 60 * np.sqrt(n / n.max()),
            color=colour,
            alpha=0.9,
            label=label,
            gid="experimental-points" if k == 0 else f"experimental-points-{k}",
            zorder=3,
        )
        if len(experimental.directions) == 1:
            for x, y, count in zip(h, g, n, strict=True):
                ax.annotate(
                    str(count), (x, y), textcoords="offset points", xytext=(0, 7), ha="center", fontsize=6, color=SLATE
                )
        top = max(top, float(h.max()))
    model = analysis.fit.best.model
    if top > 0:
        grid = np.linspace(0.0, top * 1.05, 200)
        ax.plot(
            grid[1:],
            model.semivariance(grid[1:]),
            color=AMBER,
            linewidth=2,
            label=f"model: {analysis.fit.best.label}",
            gid="model-curve",
        )
    statistic = STATISTIC_NAMES.get(experimental.statistic, experimental.statistic)
    ax.set_xlabel(f"separation distance ({units['distance']})")
    ax.set_ylabel(f"{statistic} ({units['gamma']})")
    ax.set_xlim(left=0)
    ax.set_ylim(bottom=0)
    _style(ax, "Experimental variogram and fitted model (labels: pairs per class)")
    ax.legend(frameon=False, fontsize=8, labelcolor=SLATE)
    fig.tight_layout()
    return _render(fig, fmt)


def variogram_map(vmap, units: dict, size=(800, 500), fmt="svg"):
    """Variogram map: the statistic on separation vectors (hx, hy)."""
    fig = _figure(size)
    ax = fig.add_subplot()
    values = np.array([[np.nan if v is None else v for v in row] for row in vmap.values], dtype=float)
    half = vmap.cell_size / 2
    extent = (vmap.hx[0] - half, vmap.hx[-1] + half, vmap.hy[0] - half, vmap.hy[-1] + half)
    image = ax.imshow(values, origin="lower", extent=extent, cmap="cividis", interpolation="nearest", gid="map-cells")
    colourbar = fig.colorbar(image, ax=ax)
    colourbar.set_label(f"{STATISTIC_NAMES.get(vmap.statistic, vmap.statistic)} ({units['gamma']})", color=SLATE)
    ax.set_xlabel(f"hx, east-west separation ({units['distance']})")
    ax.set_ylabel(f"hy, north-south separation ({units['distance']})")
    ax.set_aspect("equal")
    _style(ax, "Variogram map")
    ax.grid(False)
    fig.tight_layout()
    return _render(fig, fmt)


def cross_validation(cv, units: dict, size=(800, 500), fmt="svg"):
    """Estimates against observations with the 1:1 line, and standardized errors."""
    fig = _figure(size)
    left, right = fig.subplots(1, 2)
    ok = np.isfinite(cv.estimate)
    observed, estimate = cv.observed[ok], cv.estimate[ok]
    low, high = float(min(observed.min(), estimate.min())), float(max(observed.max(), estimate.max()))
    left.plot([low, high], [low, high], color=AMBER, linewidth=1.5, label="1:1")
    left.scatter(observed, estimate, s=10, color=np.where(cv.outlier[ok], PLUM, TEAL), gid="sample-points", zorder=3)
    left.set_xlabel(f"observed ({units['value']})")
    left.set_ylabel(f"estimate ({units['value']})")
    _style(left, "Leave-out estimates")
    standardized = cv.standardized_error[np.isfinite(cv.standardized_error)]
    right.hist(standardized, bins=max(5, int(math.sqrt(standardized.size))), color=TEAL, alpha=0.85)
    for edge in (-1.96, 1.96):
        right.axvline(edge, color=AMBER, linewidth=1, linestyle="--")
    right.set_xlabel("standardized error (error / standard deviation)")
    right.set_ylabel("samples")
    rmsse = cv.statistics["root_mean_square_standardized_error"]
    _style(right, f"Standardized errors (RMSSE {rmsse:.2f})" if rmsse is not None else "Standardized errors")
    fig.tight_layout()
    return _render(fig, fmt)


def prediction_map(grid, estimate: np.ndarray, coords: np.ndarray, units: dict, size=(800, 500), fmt="svg"):
    """Kriging estimates on the grid (original units) with the sample locations."""
    fig = _figure(size)
    ax = fig.add_subplot()
    nx, ny = grid.shape[0], grid.shape[1]
    surface = np.asarray(estimate, dtype=float).reshape(ny, nx)
    x = grid.origin[0] + grid.spacing[0] * np.arange(nx)
    y = grid.origin[1] + grid.spacing[1] * np.arange(ny)
    mesh = ax.pcolormesh(x, y, surface, cmap="cividis", shading="nearest")
    colourbar = fig.colorbar(mesh, ax=ax)
    colourbar.set_label(f"estimate ({units['value']})", color=SLATE)
    ax.scatter(coords[:, 0], coords[:, 1], s=6, color="white", edgecolors=SLATE, linewidths=0.4, gid="sample-locations")
    ax.set_xlabel(f"x ({units['coordinate']})")
    ax.set_ylabel(f"y ({units['coordinate']})")
    ax.set_aspect("equal")
    _style(ax, "Kriging estimates and sample locations")
    ax.grid(False)
    fig.tight_layout()
    return _render(fig, fmt)
