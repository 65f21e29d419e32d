"""Probabilities that a value exceeds a threshold, read from kriging estimates and variances.

Multi-Gaussian reading
----------------------
At each target the unknown Z(x), in the space where kriging ran, is taken as normal
with mean the kriging estimate y and variance the kriging variance s^2, so

    P(Z(x) > t) = 1 - Phi((t' - y) / s)        (``scipy.stats.norm.sf``)

with t' the threshold in that space: t itself without a transform, ln t with ``log``,
and the normal score of t (the score table interpolated) with ``normal_score``.
The transform is monotone increasing, so P(Z > t) = P(Z' > t'). The reading is exact
for simple kriging of a multi-Gaussian field (the conditional distribution is then
normal with exactly these moments); for ordinary and universal kriging, whose
variance also carries the uncertainty of the unknown mean or drift, it is an
approximation (common practice of the trade). With a
normal-score transform, the back-transform holds values at the data's extremes, so a
threshold at or above the largest datum has probability 0 and one below the smallest
has probability 1. Where the variance is zero (at a sample, micro-scale nugget) the
probability is 1 or 0: the value there is known.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy.stats import norm

from ..data.transforms import Transform
from ..errors import FieldIssue, InvalidInput

MAX_THRESHOLDS = 20
READING = (
    "multi-Gaussian reading: at each target the value is normal with the kriging estimate as mean and the kriging "
    "variance as variance, in the space where kriging ran; P(Z > t) = 1 - Phi((t' - estimate') / sd'), t' the "
    "threshold in that space"
)
ASSUMPTION = {
    "simple": "exact under a multi-Gaussian random function with known mean",
    "ordinary": "an approximation: the ordinary-kriging variance also carries the uncertainty of the unknown mean",
    "universal": "an approximation: the universal-kriging variance also carries the uncertainty of the drift",
}


@dataclass(frozen=True)
class Exceedance:
    """P(Z > threshold) at every target, one row per threshold (NaN where there is no estimate).

    Attributes
    ----------
    thresholds : tuple of float
        Original units, as given.
    transformed : tuple of float
        The same thresholds in the space where kriging ran (may be +-inf for normal
        scores outside the data's range).
    probability : ndarray, shape (len(thresholds), m)
    reading : dict
        How the probabilities were found (:func:`reading`), for a response's ``parameters``.
    """

    thresholds: tuple[float, ...]
    transformed: tuple[float, ...]
    probability: np.ndarray
    reading: dict = field(default_factory=dict)


def validate_thresholds(thresholds, transform_kind: str, pointer: str = "/thresholds") -> tuple[float, ...]:
    """Check thresholds: finite numbers, at most :data:`MAX_THRESHOLDS`, in the transform's domain.

    Raises
    ------
    InvalidInput
        Naming ``<pointer>/<index>`` for every bad threshold.
    """
    values = list(thresholds)
    if len(values) > MAX_THRESHOLDS:
        raise InvalidInput.at(pointer, f"give at most {MAX_THRESHOLDS} thresholds")
    issues = []
    out = []
    for i, t in enumerate(values):
        if isinstance(t, bool) or not isinstance(t, (int, float)) or not math.isfinite(t):
            issues.append(FieldIssue(f"{pointer}/{i}", "not a finite number"))
            continue
        if transform_kind == "log" and t <= 0:
            issues.append(FieldIssue(f"{pointer}/{i}", "the log transform needs positive thresholds"))
            continue
        out.append(float(t))
    if issues:
        raise InvalidInput(issues)
    return tuple(out)


def transformed_threshold(transform: Transform, t: float) -> float:
    """The threshold in the space where kriging ran (see the module notes for normal scores)."""
    if transform.kind == "normal_score":
        _, values = transform._table()
        if t >= values[-1]:
            return math.inf
        if t < values[0]:
            return -math.inf
    return float(transform.forward(np.array([t]))[0])


def exceedance(
    estimate: np.ndarray,
    variance: np.ndarray,
    thresholds: tuple[float, ...],
    transform: Transform,
    how: dict | None = None,
) -> Exceedance:
    """P(Z > t) for every threshold from estimates and variances in the transformed space.

    Parameters
    ----------
    estimate, variance : ndarray, shape (m,)
        Kriging estimates and variances where kriging ran (transformed units); NaN where
        a target has no estimate.
    thresholds : tuple of float
        Original units (checked by :func:`validate_thresholds`).
    transform : Transform
        The transform kriging ran in.
    how : dict, optional
        How the estimates and variances were found (:func:`reading`), carried by the result.
    """
    y = np.asarray(estimate, dtype=np.float64)
    sd = np.sqrt(np.maximum(np.asarray(variance, dtype=np.float64), 0.0))
    primes = tuple(transformed_threshold(transform, t) for t in thresholds)
    rows = np.empty((len(thresholds), y.size))
    for r, t_prime in enumerate(primes):
        with np.errstate(divide="ignore", invalid="ignore"):
            z = np.where(sd > 0, (t_prime - y) / np.where(sd > 0, sd, 1.0), np.where(y > t_prime, -np.inf, np.inf))
        p = norm.sf(z)
        p[~np.isfinite(y)] = np.nan
        rows[r] = p
    return Exceedance(tuple(thresholds), primes, rows, {} if how is None else how)


def reading(kriging_type: str, nugget_as: str, support: str = "point") -> dict:
    """How the probabilities were found, for a response's ``parameters``."""
    if support == "block":
        variance = "the block-kriging variance: probabilities are those of the block average exceeding the threshold"
    elif nugget_as == "micro_scale":
        variance = "the kriging variance of the value itself (nugget included)"
    else:
        variance = "the kriging variance of the signal without the measurement error (nugget filtered)"
    return {"reading": READING, "assumption": ASSUMPTION[kriging_type], "variance": variance}


CONFIDENCE = 0.9
CLASS_MEANINGS = {
    "below": "below the limit with at least {c} % probability",
    "uncertain": "uncertain: the probability of exceeding the limit lies between {lo} % and {c} %",
    "above": "above the limit with at least {c} % probability",
}


@dataclass(frozen=True)
class ProbabilityClasses:
    """Targets (points or blocks) of one threshold sorted into three probability classes.

    ``below``: P(exceed) <= 1 - confidence; ``above``: P(exceed) >= confidence; ``uncertain``:
    between. Targets without an estimate are counted in ``unestimated``.
    """

    threshold: float
    confidence: float
    below: int
    uncertain: int
    above: int
    unestimated: int

    def as_dict(self) -> dict:
        c, lo = round(self.confidence * 100), round((1 - self.confidence) * 100)
        total = self.below + self.uncertain + self.above
        rows = []
        for name in ("below", "uncertain", "above"):
            count = getattr(self, name)
            rows.append(
                {
                    "class": name,
                    "meaning": CLASS_MEANINGS[name].format(c=c, lo=lo),
                    "count": count,
                    "share": count / total if total else None,
                }
            )
        return {
            "threshold": self.threshold,
            "confidence": self.confidence,
            "classes": rows,
            "unestimated": self.unestimated,
        }


def classify(threshold: float, probability: np.ndarray, confidence: float = CONFIDENCE) -> ProbabilityClasses:
    """Count targets below / uncertain / above a threshold at the given confidence (probabilities in [0, 1])."""
    p = np.asarray(probability, dtype=np.float64)
    known = np.isfinite(p)
    below = int(np.sum(known & (p <= 1 - confidence)))
    above = int(np.sum(known & (p >= confidence)))
    return ProbabilityClasses(
        threshold, confidence, below, int(known.sum()) - below - above, above, int((~known).sum())
    )
