"""Refining a one-structure model by restricted maximum likelihood on the samples.

A variogram fitted by weighted least squares to experimental classes is a good start
but a blunt estimate of a range or an anisotropy: the classes average pairs and the
fit weights them by count. The samples' Gaussian restricted likelihood uses every
pair jointly (Patterson & Thompson 1971, Biometrika 58(3); for spatial models
Cressie 1993, *Statistics for Spatial Data*, section 2.6.1). With the covariance
K = s2 R(theta), R the correlation matrix of a nugget share ``q`` plus one structure
(share 1 - q), drift functions F (n x p; the constant for a constant mean) and
residuals r = z - F b_gls, the total sill s2 is profiled out analytically and

    -2 l(theta) = (n - p) ln(r' R^-1 r / (n - p)) + ln det R + ln det(F' R^-1 F)   (+ const).

:func:`refine` maximises it over (q, range) and, for an anisotropic model, the azimuth
and ratio, from the least-squares fit, by Nelder-Mead (scipy.optimize.minimize); the
family and its shape are kept. Above :data:`MAX_SAMPLES` samples an evenly spread
subset keeps the cost at a few hundred factorisations of a 300 x 300 matrix.

The refined model is one more *candidate*: the strategies are still compared and
selected by cross-validation (:mod:`lagwise.core.selection`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
from scipy.linalg import LinAlgError, cho_factor, cho_solve
from scipy.optimize import minimize
from scipy.spatial.distance import pdist, squareform

from ..deadline import check_deadline
from .models import Anisotropy, VariogramModel, unit_semivariance

MAX_SAMPLES = 300
EVALUATIONS = 160
MIN_RATIO, MAX_RATIO = 0.05, 1.0
MIN_SHARE = 1e-3
RANGE_REACH = (0.02, 1.5)
TABLE_POINTS = 8193
TABLE_REACH = 100.0
# First simplex steps: logit nugget share, log range, azimuth (degrees), logit ratio.
STEPS = np.array([0.7, 0.35, 25.0, 0.8])


def _rotated(coords: np.ndarray, azimuth: float, ratio: float) -> np.ndarray:
    """Coordinates in which Euclidean distance is the anisotropic distance (2-D)."""
    az = math.radians(azimuth)
    along = coords[:, 0] * math.sin(az) + coords[:, 1] * math.cos(az)
    across = (coords[:, 0] * math.cos(az) - coords[:, 1] * math.sin(az)) / ratio
    return np.column_stack([along, across])


def _profile_parts(R: np.ndarray, z: np.ndarray, F: np.ndarray) -> tuple[float, float, float] | None:
    """(ln det R, ln det F'R^-1F, r'R^-1r) with r the GLS residuals, or None if R is not positive definite."""
    try:
        factor = cho_factor(R, lower=True, overwrite_a=True, check_finite=False)
    except (LinAlgError, ValueError):
        return None
    rf = cho_solve(factor, F, check_finite=False)
    rz = cho_solve(factor, z, check_finite=False)
    gram = F.T @ rf
    try:
        b = np.linalg.solve(gram, F.T @ rz)
        sign, logdet_f = np.linalg.slogdet(gram)
    except np.linalg.LinAlgError:
        return None
    if sign <= 0:
        return None
    quadratic = float(z @ rz - (F.T @ rz) @ b)
    logdet = 2.0 * float(np.sum(np.log(np.diag(factor[0]))))
    return logdet, float(logdet_f), quadratic


def _correlation_table(family: str, extra: float | None):
    """The unit structure's correlation 1 - gamma(r) at reduced distances r = h / range, by interpolation.

    Tabulated once on :data:`TABLE_POINTS` points evenly spaced in sqrt(r) up to
    :data:`TABLE_REACH` (fine near the origin, where smooth families differ), then
    interpolated linearly: a Bessel function per pair (Matérn) at every likelihood
    evaluation would cost more than the factorisation. The grid is uniform, so the
    interval of each distance is found by arithmetic, not by a search.
    """
    step = math.sqrt(TABLE_REACH) / (TABLE_POINTS - 1)
    values = 1.0 - unit_semivariance(family, (step * np.arange(TABLE_POINTS)) ** 2, 1.0, extra)
    values = np.append(values, values[-1])  # the last interval's right end, for r at or beyond the reach
    slopes = np.diff(values)

    def correlation(r: np.ndarray) -> np.ndarray:
        position = np.minimum(np.sqrt(r) / step, TABLE_POINTS - 1)
        index = position.astype(np.intp)
        return values[index] + (position - index) * slopes[index]

    return correlation


def _subset(n: int) -> np.ndarray:
    """An evenly spread, reproducible subset of at most :data:`MAX_SAMPLES` sample indices."""
    if n <= MAX_SAMPLES:
        return np.arange(n)
    return np.sort(np.random.default_rng(0).permutation(n)[:MAX_SAMPLES])


@dataclass(frozen=True)
class Refinement:
    """A refined model and its restricted log-likelihood (sill profiled, constants dropped).

    Log-likelihoods of refinements of the same samples and drift are comparable: twice
    their difference is the restricted likelihood-ratio statistic.
    """

    model: VariogramModel
    log_likelihood: float
    samples: int


def refine(
    starts: list[VariogramModel],
    coords: np.ndarray,
    values: np.ndarray,
    drift: np.ndarray,
    *,
    anisotropic: bool,
    reach: float,
) -> Refinement | None:
    """The restricted-likelihood refinement of one-structure bounded models (module docstring).

    Parameters
    ----------
    starts : list of VariogramModel
        Starting models, each one bounded structure of the same family (anisotropic ones
        give their azimuth and ratio as starts); the likelihood is evaluated at each and
        the search starts from the best.
    coords, values, drift
        Samples (n, d), their values (n,) and the drift functions (n, p).
    anisotropic : bool
        Also refine the azimuth and ratio (2-D samples).
    reach : float
        The largest class distance: ranges are searched within ``RANGE_REACH`` times it.

    Returns
    -------
    Refinement or None
        None when no start is of that form or no evaluation succeeded.
    """
    starts = [m for m in starts if len(m.structures) == 1 and m.bounded and m.sill]
    if not starts or (anisotropic and coords.shape[1] != 2):
        return None
    structure = starts[0].structures[0]
    keep = _subset(coords.shape[0])
    x, z, F = coords[keep] - coords[keep].mean(axis=0), values[keep], drift[keep]
    n, p = F.shape
    low_range, high_range = RANGE_REACH[0] * reach, RANGE_REACH[1] * reach
    distances = None if anisotropic else pdist(x)
    table = _correlation_table(structure.family, structure.extra)

    def unpack(theta: np.ndarray) -> tuple[float, float, float, float]:
        share = 1.0 / (1.0 + math.exp(-float(np.clip(theta[0], -30, 30))))
        a = float(np.clip(math.exp(float(np.clip(theta[1], -50, 50))), low_range, high_range))
        if not anisotropic:
            return max(share, MIN_SHARE), a, 0.0, 1.0
        ratio = MIN_RATIO + (MAX_RATIO - MIN_RATIO) / (1.0 + math.exp(-float(np.clip(theta[3], -30, 30))))
        return max(share, MIN_SHARE), a, float(theta[2]) % 180.0, ratio

    def parts(theta: np.ndarray) -> tuple[float, float, float] | None:
        share, a, azimuth, ratio = unpack(theta)
        h = distances if distances is not None else pdist(_rotated(x, azimuth, ratio))
        R = squareform((1.0 - share) * table(h / a))
        R[np.diag_indices(n)] = 1.0
        return _profile_parts(R, z, F)

    def objective(theta: np.ndarray) -> float:
        found = parts(theta)
        if found is None or found[2] <= 0:
            return math.inf
        logdet, logdet_f, quadratic = found
        return (n - p) * math.log(quadratic / (n - p)) + logdet + logdet_f

    def packed(model: VariogramModel) -> np.ndarray:
        first = model.structures[0]
        share0 = min(max(model.nugget / float(model.sill or 1.0), 0.02), 0.98)
        theta = [math.log(share0 / (1.0 - share0)), math.log(min(max(first.range, low_range), high_range))]
        if anisotropic:
            r0 = min(max(first.anisotropy.ratio, MIN_RATIO + 0.02), MAX_RATIO - 0.02)
            u = (r0 - MIN_RATIO) / (MAX_RATIO - MIN_RATIO)
            theta += [first.anisotropy.azimuth % 180.0, math.log(u / (1.0 - u))]
        return np.array(theta)

    check_deadline()
    scored = [(objective(t), t) for t in (packed(m) for m in starts)]
    value, start = min(scored, key=lambda s: s[0])
    if not math.isfinite(value):
        return None
    simplex = [start] + [start + step for step in np.diag(STEPS[: start.size])]
    result = minimize(
        objective,
        start,
        method="Nelder-Mead",
        options={"maxfev": EVALUATIONS, "xatol": 1e-3, "fatol": 1e-3, "initial_simplex": np.array(simplex)},
    )
    best = result.x if result.fun <= value else start
    found = parts(best)
    if found is None:
        return None
    share, a, azimuth, ratio = unpack(best)
    s2 = found[2] / (n - p)  # the profiled sill at the optimum
    anisotropy = Anisotropy(azimuth, ratio) if anisotropic else Anisotropy()
    model = VariogramModel(
        share * s2, (replace(structure, partial_sill=(1.0 - share) * s2, range=a, anisotropy=anisotropy),)
    )
    return Refinement(model, -0.5 * min(result.fun, value), n)
