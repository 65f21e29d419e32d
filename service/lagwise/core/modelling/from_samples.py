"""From samples to a fitted model: the experimental variogram, then the ranked fit."""

from __future__ import annotations

from dataclasses import dataclass

from ..data.samples import SampleSet
from ..errors import InvalidInput
from ..limits import Limits
from ..variography.directions import DirectionClass
from ..variography.experimental import ExperimentalVariogram, experimental_variogram
from ..variography.lags import LagRequest
from .fitting import SEMIVARIANCE_STATISTICS, FitResult, fit_model, points_from_experimental


@dataclass(frozen=True)
class SampleFit:
    """A fit made from samples: the experimental variogram used and the fit."""

    experimental: ExperimentalVariogram
    fit: FitResult


def fit_samples(
    samples: SampleSet,
    *,
    lags: LagRequest = LagRequest(),
    directions: list[DirectionClass] | None = None,
    statistic: str = "semivariance",
    min_pairs: int = 30,
    limits: Limits = Limits(),
    **fit_options,
) -> SampleFit:
    """Compute the experimental variogram of ``samples`` and fit models to it.

    ``fit_options`` are those of :func:`lagwise.core.modelling.fitting.fit_model`
    (families, nugget, weighting, anisotropy, structures).
    """
    if statistic not in SEMIVARIANCE_STATISTICS:
        raise InvalidInput.at(
            "/statistic", f"models are fitted to semivariances: use one of {', '.join(SEMIVARIANCE_STATISTICS)}"
        )
    experimental = experimental_variogram(
        samples, lags=lags, directions=directions, statistic=statistic, min_pairs=min_pairs, limits=limits
    )
    points = points_from_experimental(experimental, min_pairs)
    fit = fit_model(
        points, dimension=samples.dimension, sample_variance=experimental.summary.reference_variance, **fit_options
    )
    return SampleFit(experimental, fit)
