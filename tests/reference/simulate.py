"""Gaussian random fields simulated by Cholesky factorisation (scipy.linalg.cholesky)."""

from __future__ import annotations

import numpy as np
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
