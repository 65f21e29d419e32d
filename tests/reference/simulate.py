"""Gaussian random fields simulated by Cholesky factorisation (scipy.linalg.cholesky)."""

from __future__ import annotations

import numpy as np
from lagwise.core.data.samples import SampleSet, build_sample_set
from lagwise.core.modelling.models import Anisotropy, Structure, VariogramModel
from scipy.linalg import cholesky
from scipy.spatial.distance import cdist


def simulate(model: VariogramModel, coords: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """One realisation with covariance C(h) = sill - gamma(h) at the given points."""
    n = coords.shape[0]
    h = (coords[:, None, :] - coords[None, :, :]).reshape(-1, coords.shape[1])
    cov = model.covariance(h).reshape(n, n)
    return cholesky(cov + 1e-10 * np.eye(n), lower=True) @ rng.standard_normal(n)


def isotropic(family: str, sill: float, range_: float, nugget: float = 0.0) -> VariogramModel:
    return VariogramModel(nugget, (Structure(family, sill, range_),))


def anisotropic(family, sill, range_, azimuth, ratio, nugget=0.0) -> VariogramModel:
    return VariogramModel(nugget, (Structure(family, sill, range_, None, Anisotropy(azimuth, ratio)),))


def distances(coords):
    return cdist(coords, coords)


def smooth_scattered(n: int, seed: int, clustered: bool = False) -> SampleSet:
    """Samples uniform in a 1000 x 1000 square (half in 20 clusters when ``clustered``) of a smooth
    periodic field plus white noise: many pairs per lag vector, for the grid method's bounds."""
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 1000, (n, 2))
    if clustered:
        centres = rng.uniform(100, 900, (20, 2))
        xy[: n // 2] = centres[rng.integers(0, 20, n // 2)] + rng.normal(0, 25, (n // 2, 2))
    values = np.sin(xy[:, 0] / 90.0) + np.cos(xy[:, 1] / 140.0) + 0.4 * rng.normal(size=n) + 3.0
    return build_sample_set(values, xy[:, 0], xy[:, 1])
