"""Cross-validation figure: where the errors are, and whether the stated uncertainty holds.

Left, the errors (estimate minus observed) mapped at the sample locations on a
diverging scale symmetric about zero; samples flagged as outliers are ringed. Right,
the calibration of the kriging intervals: for nominal levels from 50 to 99 %, the
share of samples whose |standardized error| lies within the matching normal quantile,
against the level, with the band that sampling noise alone would give.
"""

from __future__ import annotations

import numpy as np
from matplotlib.colors import Normalize
from scipy.stats import norm

from .labels import Labels
from .style import ERROR_RAMP, PLUM, SLATE, TEAL, render, style_axes

LEVELS = np.arange(50, 100) / 100.0


def interval_coverage(standardized: np.ndarray, levels: np.ndarray = LEVELS) -> np.ndarray:
    """Share of samples inside the central normal interval of each nominal level.

    A sample is inside the level-p interval when |standardized error| ≤ z, with z the
    normal quantile of (1 + p) / 2 (scipy.stats.norm.ppf). With honest variances and
    Gaussian errors the share is about p.
    """
    finite = np.asarray(standardized, dtype=float)
    finite = finite[np.isfinite(finite)]
    if finite.size == 0:
        return np.full(levels.shape, np.nan)
    z = norm.ppf((1.0 + levels) / 2.0)
    return (np.abs(finite)[None, :] <= z[:, None]).mean(axis=1)


def cross_validation(
    cv,
    sample_xy: np.ndarray,
    labels: Labels,
    *,
    size: tuple[int, int] = (800, 500),
    fmt: str = "svg",
) -> str | bytes:
    """Error map and interval calibration of a cross-validation.

    Parameters
    ----------
    cv : CrossValidation
        Per-sample results (estimate, error, standardized error, outlier flags) and statistics.
    sample_xy : ndarray, shape (n, 1) or (n, 2)
        Sample locations in map coordinates (degrees for geographic samples); 1-D
        samples are drawn as errors along x.
    labels : Labels

    Returns
    -------
    str or bytes
        SVG text or PNG bytes; error markers have id ``error-points``, the calibration
        curve ``coverage-curve``.
    """
    ok = np.isfinite(cv.error)
    error = np.asarray(cv.error, dtype=float)[ok]
    where = np.asarray(sample_xy, dtype=float)[ok]
    outlier = np.asarray(cv.outlier, dtype=bool)[ok]
    coverage = interval_coverage(cv.standardized_error)
    count = int(np.isfinite(np.asarray(cv.standardized_error, dtype=float)).sum())
    stats = cv.statistics

    def draw(fig):
        left, right = fig.subplots(1, 2, width_ratios=[1.35, 1])
        reach = float(np.quantile(np.abs(error), 0.98)) if error.size else 1.0
        scale = Normalize(-reach or -1.0, reach or 1.0)
        if where.shape[1] >= 2:
            points = left.scatter(where[:, 0], where[:, 1], c=error, cmap=ERROR_RAMP, norm=scale, s=22,
                                  edgecolors=SLATE, linewidths=0.3, gid="error-points", zorder=3)  # fmt: skip
            left.set_xlabel(labels.coordinate("x"))
            left.set_ylabel(labels.coordinate("y"))
            left.ticklabel_format(useOffset=False, style="plain")
            left.set_aspect("equal" if not labels.geographic else 1.0 / np.cos(np.radians(where[:, 1].mean())))
            bar = fig.colorbar(points, ax=left, orientation="horizontal", shrink=0.85, aspect=35, extend="both")
            bar.set_label(labels.error())
        else:
            left.axhline(0, color=SLATE, linewidth=0.8)
            left.scatter(where[:, 0], error, c=error, cmap=ERROR_RAMP, norm=scale, s=18, edgecolors=SLATE,
                         linewidths=0.3, gid="error-points", zorder=3)  # fmt: skip
            left.set_xlabel(labels.coordinate("x"))
            left.set_ylabel(labels.error())
        if outlier.any():
            y = where[outlier, 1] if where.shape[1] >= 2 else error[outlier]
            left.scatter(where[outlier, 0], y, s=70, facecolors="none", edgecolors=PLUM, linewidths=1.4,
                         gid="outlier-rings", zorder=4)  # fmt: skip
        rmse = stats.get("root_mean_square_error")
        notes = ([] if rmse is None else [f"RMSE {rmse:.3g}"]) + ["blue: estimate too low"]
        if outlier.any():
            notes.append(f"ringed: {int(outlier.sum())} outliers")
        style_axes(left, "Cross-validation errors at the samples", "; ".join(notes))

        percent = LEVELS * 100
        noise = 1.96 * np.sqrt(LEVELS * (1 - LEVELS) / max(count, 1))
        right.fill_between(percent, (LEVELS - noise) * 100, (LEVELS + noise) * 100, color=TEAL, alpha=0.12,
                           linewidth=0, label="sampling noise (95 %)")  # fmt: skip
        right.plot(percent, percent, color=SLATE, linewidth=0.9, linestyle="--", label="stated = observed")
        right.plot(percent, coverage * 100, color=TEAL, linewidth=2, gid="coverage-curve", label="observed")
        right.set_xlim(50, 99)
        right.set_ylim(min(40.0, float(np.nanmin(coverage * 100)) - 5 if count else 40.0), 100.5)
        right.set_xlabel("stated level of the interval (%)")
        right.set_ylabel("samples inside it (%)")
        right.legend(loc="upper left")
        rmsse = stats.get("root_mean_square_standardized_error")
        subtitle = f"{count} samples" + ("" if rmsse is None else f"; RMSSE {rmsse:.2f}")
        style_axes(right, "Do the kriging intervals hold?", subtitle)

    return render(draw, size, fmt)
