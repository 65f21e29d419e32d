"""Trends in the coordinates: whether one is significant, and the residual variogram model.

Universal kriging needs the variogram of the residuals from the drift, not of the raw
values (a trend inflates the raw variogram at long lags and the fit mistakes it for a
long-range structure). The drift coefficients themselves depend on the residual
model through generalised least squares, so the two are estimated in turn
(Chilès & Delfiner 2012, *Geostatistics*, 2nd ed., section 5.7; Cressie 1993,
*Statistics for Spatial Data*, section 3.4.3):

1. ordinary least squares drift, residuals r = z - F b;
2. experimental variogram of r, fitted model gamma_r;
3. generalised least squares b = (F' K^-1 F)^-1 F' K^-1 z with K from gamma_r;
4. repeat 2-3 :data:`GLS_ITERATIONS` times.

The significance test is the F test of the drift terms in the ordinary regression
(scipy.stats.f). It ignores spatial correlation, which makes it liberal: it only
decides whether a drift strategy is worth cross-validating, never whether it is used.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
from scipy.linalg import LinAlgError, cho_factor, cho_solve
from scipy.stats import f as f_distribution

from ..data.samples import SampleSet
from ..kriging.systems import Covariance, KrigingSpec
from ..limits import Limits
from ..variography.experimental import ExperimentalVariogram, experimental_variogram
from ..variography.lags import LagRequest
from .fitting import FitResult, fit_model, points_from_experimental
from .models import VariogramModel

GLS_ITERATIONS = 1
GLS_MAX_SAMPLES = 1500
SIGNIFICANCE = 0.01
MIN_SHARE = 0.05
QUADRATIC_MIN_SAMPLES = 150


@dataclass(frozen=True)
class TrendTest:
    """Least-squares trend in the coordinates.

    Attributes
    ----------
    degree : int
        1 (linear) or 2 (quadratic, squares and products of the coordinates).
    share : float
        R^2: the share of the variance the trend explains.
    p_value : float
        F test of the drift terms against a constant mean (against the linear drift for
        ``degree`` 2).
    significant : bool
        ``p_value`` below :data:`SIGNIFICANCE` and ``share`` at least :data:`MIN_SHARE`.
    """

    degree: int
    share: float
    p_value: float
    significant: bool


@dataclass(frozen=True)
class ResidualModel:
    """A drift and the variogram model of its residuals (see the module steps)."""

    degree: int
    coefficients: np.ndarray
    experimental: ExperimentalVariogram
    fit: FitResult

    @property
    def model(self) -> VariogramModel:
        return self.fit.best.model


def design(coords: np.ndarray, degree: int) -> np.ndarray:
    """Drift functions at ``coords`` (n, d): 1, centred and scaled coordinates, and for
    ``degree`` 2 their squares and products (the same terms as universal kriging)."""
    centre = coords.mean(axis=0)
    scale = float(np.max(np.abs(coords - centre))) or 1.0
    u = (coords - centre) / scale
    terms = [np.ones((coords.shape[0], 1)), u]
    if degree == 2:
        d = u.shape[1]
        terms.append(np.stack([u[:, a] * u[:, b] for a in range(d) for b in range(a, d)], axis=1))
    return np.concatenate(terms, axis=1)


def _residual_sum(F: np.ndarray, z: np.ndarray) -> float:
    coefficients, *_ = np.linalg.lstsq(F, z, rcond=None)
    return float(np.sum((z - F @ coefficients) ** 2))


def test_trend(samples: SampleSet, degree: int = 1) -> TrendTest:
    """F test of a ``degree`` drift against the next simpler mean (constant, or linear)."""
    z = samples.values
    n = samples.size
    full = design(samples.coords, degree)
    reduced = design(samples.coords, degree - 1) if degree > 1 else np.ones((n, 1))
    p_full, p_reduced = full.shape[1], reduced.shape[1]
    total = float(np.sum((z - z.mean()) ** 2))
    if total == 0 or n <= p_full + 1:
        return TrendTest(degree, 0.0, 1.0, False)
    rss_full, rss_reduced = _residual_sum(full, z), _residual_sum(reduced, z)
    share = 1.0 - rss_full / total
    denominator = rss_full / (n - p_full)
    if denominator <= 0:
        return TrendTest(degree, share, 0.0, True)
    statistic = ((rss_reduced - rss_full) / (p_full - p_reduced)) / denominator
    p_value = float(f_distribution.sf(statistic, p_full - p_reduced, n - p_full))
    return TrendTest(degree, share, p_value, bool(p_value < SIGNIFICANCE and share >= MIN_SHARE))


def _gls(samples: SampleSet, F: np.ndarray, model: VariogramModel) -> np.ndarray | None:
    """GLS drift coefficients with the covariance of ``model`` (None when K is not positive definite).

    Beyond :data:`GLS_MAX_SAMPLES` samples an evenly spread subset keeps the cost bounded.
    """
    if not model.bounded:
        return None
    n = samples.size
    keep = np.linspace(0, n - 1, min(n, GLS_MAX_SAMPLES)).astype(int)
    z, Fk = samples.values[keep], F[keep]
    K = Covariance(model, KrigingSpec()).matrix(samples.coords[keep])
    try:
        factor = cho_factor(K, lower=True, check_finite=False)
    except (LinAlgError, ValueError):
        return None
    kf = cho_solve(factor, Fk, check_finite=False)
    kz = cho_solve(factor, z, check_finite=False)
    try:
        return np.linalg.solve(Fk.T @ kf, Fk.T @ kz)
    except np.linalg.LinAlgError:
        return None


def residual_model(
    samples: SampleSet,
    degree: int,
    *,
    lags: LagRequest,
    statistic: str,
    min_pairs: int,
    fit_options: dict,
    limits: Limits,
) -> ResidualModel:
    """Drift coefficients and the fitted residual variogram (steps 1-4 of the module)."""
    F = design(samples.coords, degree)
    coefficients, *_ = np.linalg.lstsq(F, samples.values, rcond=None)
    experimental, fit = None, None
    for _ in range(GLS_ITERATIONS + 1):
        residuals = replace(samples, values=samples.values - F @ coefficients)
        experimental = experimental_variogram(
            residuals, lags=lags, statistic=statistic, min_pairs=min_pairs, limits=limits
        )
        fit = fit_model(
            points_from_experimental(experimental, min_pairs),
            dimension=samples.dimension,
            sample_variance=experimental.summary.variance,
            **fit_options,
        )
        updated = _gls(samples, F, fit.best.model)
        if updated is None:
            break
        coefficients = updated
    assert experimental is not None and fit is not None
    return ResidualModel(degree, coefficients, experimental, fit)
