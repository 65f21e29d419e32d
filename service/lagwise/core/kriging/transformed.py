"""Kriging in a transformed space: predictions and cross-validation back-transformed, exceedance probabilities.

The samples' values are transformed (:mod:`lagwise.core.data.transforms`; normal scores
with the declustering weights, as analyses build them, so a model fitted by an analysis
replays on the same score table), kriging runs on the transformed values with a model
in transformed units, and estimates and variances are back-transformed to the original
units. Exceedance probabilities are read in the transformed space
(:mod:`.exceedance`).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from functools import cached_property

import numpy as np

from ..data.declustering import Declustering, decluster, weighted_start
from ..data.samples import SampleSet
from ..data.transforms import Transform, fit_transform
from ..errors import InvalidInput
from ..modelling.models import VariogramModel
from .cross_validation import CrossValidation, assess, statistics
from .exceedance import Exceedance, exceedance, reading
from .prediction import PredictionResult
from .systems import KrigingSpec

SILL_FACTOR = 5.0
STANDARDIZED = ("mean_standardized_error", "root_mean_square_standardized_error", "interval_coverage_95", "outliers")


@dataclass(frozen=True)
class Working:
    """The samples in the space where kriging runs.

    Attributes
    ----------
    transform : Transform
    samples : SampleSet
        The samples with transformed values (coordinates unchanged).
    original : SampleSet
        The samples as given.
    """

    transform: Transform
    samples: SampleSet
    original: SampleSet
    known: Declustering | None = None

    @cached_property
    def declustering(self) -> Declustering:
        """Cell declustering of the original values (found on first use unless the transform needed it)."""
        return self.known if self.known is not None else decluster(self.original.coords, self.original.values)

    @property
    def simple_kriging_mean(self) -> float:
        """Default simple-kriging mean in transformed units (declustered when sampling is clustered)."""
        return self.declustering.mean_of(self.samples.values)

    @property
    def reference_variance(self) -> float:
        """Variance of the transformed values (declustered when clustered): what a model's sill should be near."""
        return self.declustering.variance_of(self.samples.values)


def working_samples(samples: SampleSet, kind: str) -> Working:
    """Transform the samples' values (``none``, ``log`` or ``normal_score``); InvalidInput names bad samples.

    Normal scores use the declustering weights, as analyses build them.
    """
    if kind == "normal_score":
        start = weighted_start(samples.coords, samples.values, kind, samples.source_index)
        return Working(start.transform, replace(samples, values=start.values), samples, start.declustering)
    transform = fit_transform(kind, samples.values, samples.source_index)
    working = samples if kind == "none" else replace(samples, values=transform.forward(samples.values))
    return Working(transform, working, samples)


def units_warning(model: VariogramModel, working: Working) -> str | None:
    """A warning when a transform is used and the model's sill is far (a factor of 5) from the transformed variance."""
    kind = working.transform.kind
    sill, reference = model.sill, working.reference_variance
    if kind == "none" or sill is None or not reference > 0:
        return None
    if sill > SILL_FACTOR * reference or sill < reference / SILL_FACTOR:
        space = {"log": "logarithms", "normal_score": "normal scores"}[kind]
        return (
            f"the model's sill ({sill:.4g}) is far from the variance of the {space} of the values "
            f"({reference:.4g}): the model must be in transformed units (fit it with the same transform)"
        )
    return None


@dataclass(frozen=True)
class TransformedPrediction:
    """Kriging in the working space and its back-transform.

    Attributes
    ----------
    result : PredictionResult
        Estimates and variances in transformed units.
    transform : Transform
    estimate, variance : ndarray, shape (m,)
        Original units: the back-transformed mean and variance (NaN where no estimate).
    exceedance : Exceedance or None
        When thresholds were given.
    warnings : tuple of str
    """

    result: PredictionResult
    transform: Transform
    estimate: np.ndarray
    variance: np.ndarray
    exceedance: Exceedance | None
    warnings: tuple[str, ...]


def back_transform_prediction(
    working: Working,
    model: VariogramModel,
    spec: KrigingSpec,
    result: PredictionResult,
    thresholds: tuple[float, ...] = (),
) -> TransformedPrediction:
    """Back-transform kriging in the working space; P(Z > t) for each threshold (original units, checked
    beforehand: :func:`.exceedance.validate_thresholds`).

    Raises
    ------
    InvalidInput
        At ``/model`` when back-transformed moments overflow (a model far too large for the
        transformed units).
    """
    transform = working.transform
    y, s2 = result.prediction.estimate, result.prediction.variance
    with np.errstate(over="ignore", invalid="ignore"):
        estimate, variance = transform.back_estimate(y, s2) if transform.kind != "none" else (y, s2)
    _require_finite(y, estimate, variance)
    notes = [w for w in (units_warning(model, working), _range_warning(transform, thresholds)) if w]
    how = reading(spec.type, spec.nugget_as, result.support)
    found = exceedance(y, s2, thresholds, transform, how) if thresholds else None
    return TransformedPrediction(result, transform, estimate, variance, found, tuple(notes))


def _require_finite(y: np.ndarray, estimate: np.ndarray, variance: np.ndarray) -> None:
    """Refuse back-transformed moments that overflow (a model far too large for the transformed units)."""
    with np.errstate(invalid="ignore"):
        broken = np.isfinite(y) & ~(np.isfinite(estimate) & np.isfinite(variance))
    if broken.any():
        raise InvalidInput.at(
            "/model",
            f"back-transformed estimates overflow at {int(broken.sum())} targets (kriging variances too large "
            "for the transformed units): is the model in transformed units?",
        )


def _range_warning(transform: Transform, thresholds: tuple[float, ...]) -> str | None:
    if transform.kind != "normal_score" or not thresholds:
        return None
    low, high = float(transform._table()[1][0]), float(transform._table()[1][-1])
    outside = [t for t in thresholds if t >= high or t < low]
    if not outside:
        return None
    return (
        f"thresholds {', '.join(f'{t:g}' for t in outside)} lie outside the data's range [{low:g}, {high:g}]: the "
        "normal-score back-transform holds values at the data's extremes, so their probabilities are 0 or 1"
    )


def back_transform_cross_validation(
    working: Working, observed: np.ndarray, model: VariogramModel, inner: CrossValidation
) -> CrossValidation:
    """Cross-validation in the working space (``inner``), reported in original units where that reading holds.

    Estimates, standard deviations and errors (and the statistics built on errors: mean,
    absolute and root-mean-square error, correlation, goodness of prediction) are in
    original units: the back-transformed mean and standard deviation of each held-out
    estimate against the ``observed`` value. Standardized errors, their statistics, the
    outlier flags and the 95 % interval coverage are those of the transformed space,
    where the kriging error is read as Gaussian.
    """
    transform = working.transform
    if transform.kind == "none":
        return inner
    note = units_warning(model, working)
    observed = np.asarray(observed, dtype=np.float64)
    with np.errstate(over="ignore", invalid="ignore"):
        mean, var = transform.back_estimate(inner.estimate, inner.standard_deviation**2)
    _require_finite(inner.estimate, mean, var)
    sd = np.sqrt(var)
    error = mean - observed
    stats = statistics(observed, mean, error, sd, inner.standardized_error, inner.outlier)
    stats.update({k: inner.statistics[k] for k in STANDARDIZED})
    return replace(
        inner,
        observed=observed,
        estimate=mean,
        standard_deviation=sd,
        error=error,
        statistics=stats,
        assessment=assess(stats, observed),
        method=inner.method + f"; in the {transform.kind.replace('_', '-')} space, back-transformed",
        warnings=inner.warnings + ((note,) if note else ()),
    )
