"""Value transforms applied before variograms, fits and kriging, and their back-transforms.

``log``
    z' = ln z (positive values only). A kriging estimate y with kriging variance s^2 in log
    space back-transforms to the lognormal mean exp(y + s^2 / 2) with variance
    exp(2 y + s^2) (exp(s^2) - 1) (Aitchison & Brown 1957; the moments of a lognormal
    variable). This is the simple-kriging form; for ordinary kriging it omits the Lagrange
    term of Journel (1980), a small bias where the neighbourhood is sparse.
``normal_score``
    Each value maps to the standard normal quantile of its plotting position
    p = (r - 1/2) / n, r its rank (Hazen 1914); tied values share the mean of their
    positions. With declustering weights w (sum 1; :mod:`lagwise.core.data.declustering`)
    the position is the weighted form, p = W_below + w_tie / 2, W_below the weight of
    the smaller values and w_tie that of the tied group (equal weights 1/n give
    Hazen's positions back), so the score table follows the declustered distribution. Back-transform: linear interpolation in the table of (score, value)
    pairs; beyond the extreme scores the data's minimum and maximum are kept (no
    extrapolation of the tails). A Gaussian estimate y with variance s^2 back-transforms
    to the mean and variance of the back-transformed N(y, s^2), averaged over 100
    equal-probability points y + s z_k, z_k = Phi^-1((k - 1/2)/100) (robust to the kinks of
    the piecewise-linear table; about 0.1 % on the mean and 2 % on the variance).
``none``
    Values as given.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import ndtri
from scipy.stats import rankdata

from ..errors import FieldIssue, InvalidInput

TRANSFORMS = ("none", "log", "normal_score")
_QUANTILES = ndtri((np.arange(100) + 0.5) / 100)
_CHUNK = 50_000


@dataclass(frozen=True)
class Transform:
    """A fitted transform: the kind and, for normal scores, the score table.

    Attributes
    ----------
    kind : str
        ``none``, ``log`` or ``normal_score``.
    scores, values : ndarray or None
        Sorted normal scores and the data values they stand for (normal_score only).
    weighted : bool
        The plotting positions used declustering weights.
    """

    kind: str
    scores: np.ndarray | None = None
    values: np.ndarray | None = None
    weighted: bool = False

    def _table(self) -> tuple[np.ndarray, np.ndarray]:
        """The (scores, values) table of a normal-score transform."""
        if self.scores is None or self.values is None:
            raise TypeError("a normal-score transform needs its score table")
        return self.scores, self.values

    def forward(self, z: np.ndarray) -> np.ndarray:
        """Transform data values (those the transform was built from, for normal scores)."""
        if self.kind == "log":
            return np.log(z)
        if self.kind == "normal_score":
            scores, values = self._table()
            return np.interp(z, values, scores)
        return np.asarray(z, dtype=np.float64)

    def backward(self, y: np.ndarray) -> np.ndarray:
        """Back-transform values (not estimates: see :meth:`back_estimate`)."""
        if self.kind == "log":
            return np.exp(y)
        if self.kind == "normal_score":
            scores, values = self._table()
            return np.interp(y, scores, values)
        return np.asarray(y, dtype=np.float64)

    def back_estimate(self, estimate: np.ndarray, variance: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Mean and variance in original units of estimates with kriging variances in transformed units."""
        estimate = np.asarray(estimate, dtype=np.float64)
        variance = np.maximum(np.asarray(variance, dtype=np.float64), 0.0)
        if self.kind == "log":
            mean = np.exp(estimate + variance / 2.0)
            return mean, np.exp(2.0 * estimate + variance) * np.expm1(variance)
        if self.kind == "normal_score":
            # E[g(Y)], Y ~ N(y, s^2), as the mean of g over equal-probability points.
            mean, spread = np.empty_like(estimate), np.empty_like(estimate)
            for start in range(0, estimate.size, _CHUNK):
                part = slice(start, start + _CHUNK)
                values = self.backward(estimate[part, None] + np.sqrt(variance[part])[:, None] * _QUANTILES)
                mean[part] = values.mean(axis=1)
                spread[part] = np.maximum((values**2).mean(axis=1) - mean[part] ** 2, 0.0)
            return mean, spread
        return estimate, variance

    def as_dict(self) -> dict:
        descriptions = {
            "none": "values as given",
            "log": "natural logarithm; estimates back-transformed as exp(y + s^2/2), variances as exp(2y + s^2)(exp(s^2) - 1)",
            "normal_score": "normal scores of Hazen plotting positions (r - 1/2)/n, ties averaged; back-transform by linear "
            "interpolation of the score table, tails held at the data's extremes; estimates averaged over 100 "
            "equal-probability points of their Gaussian distribution",
        }
        method = descriptions[self.kind]
        if self.weighted:
            method += "; plotting positions weighted by the declustering weights (W_below + w_tie / 2)"
        return {"kind": self.kind, "method": method}


def fit_transform(
    kind: str, values: np.ndarray, source_index: np.ndarray | None = None, weights: np.ndarray | None = None
) -> Transform:
    """Build a transform from the data values; raises InvalidInput naming bad samples.

    ``weights`` (one per value, positive; normalised here) are declustering weights
    for the normal-score plotting positions; None or equal weights give Hazen's.
    """
    if kind not in TRANSFORMS:
        raise InvalidInput.at("/transform", f"must be one of {', '.join(TRANSFORMS)}")
    values = np.asarray(values, dtype=np.float64)
    if kind == "log":
        bad = np.flatnonzero(values <= 0)
        if bad.size:
            index = source_index if source_index is not None else np.arange(values.size)
            raise InvalidInput(
                [
                    FieldIssue(f"/samples/values/{int(index[i])}", "the log transform needs positive values")
                    for i in bad[:20]
                ]
            )
        return Transform("log")
    if kind == "normal_score":
        n = values.size
        order = np.argsort(values, kind="stable")
        unique_values, first = np.unique(values[order], return_index=True)
        equal = weights is None or np.ptp(weights) <= 1e-12 * np.max(weights)
        if equal:
            positions = (rankdata(values, method="average") - 0.5) / n  # Hazen (1914), mid-ranks for ties
            return Transform("normal_score", ndtri(positions[order])[first], unique_values)
        w = np.asarray(weights, dtype=np.float64)[order]
        w = w / w.sum()
        group = np.add.reduceat(w, first)  # weight of each tied group
        below = np.concatenate([[0.0], np.cumsum(group)[:-1]])
        return Transform("normal_score", ndtri(below + 0.5 * group), unique_values, weighted=True)
    return Transform("none")
