"""Typical spacing of a sample set: the median distance to the nearest distinct neighbour."""

from __future__ import annotations

import numpy as np
from scipy.spatial import cKDTree


def nearest_distances(coords: np.ndarray) -> np.ndarray:
    """Distance from each sample to its nearest distinct neighbour, coordinate units.

    Uses ``scipy.spatial.cKDTree``; co-located samples (distance 0) look further for
    a distinct neighbour, and samples with none are left out (empty when every
    sample sits at one location).
    """
    n = coords.shape[0]
    if n < 2:
        return np.zeros(0)
    tree = cKDTree(coords)
    k = 2
    while True:
        distances, _ = tree.query(coords, k=k)
        positive = np.where(distances > 0, distances, np.inf).min(axis=1)
        if np.all(np.isfinite(positive)) or k >= n:
            return positive[np.isfinite(positive)]
        k = min(2 * k, n)


def typical_spacing(coords: np.ndarray) -> float:
    """Median of :func:`nearest_distances` (0 when every sample sits at one location)."""
    distances = nearest_distances(coords)
    return float(np.median(distances)) if distances.size else 0.0
