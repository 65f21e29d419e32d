"""Summary statistics of a sample set: moments, extent and largest separation."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.spatial import ConvexHull, QhullError
from scipy.spatial.distance import pdist

AXES = ("x", "y", "z")
SMALL_SET = 3000


@dataclass(frozen=True)
class Summary:
    """Summary of the samples used in a computation (after duplicate handling).

    Attributes
    ----------
    samples : int
        Number of samples.
    dimension : int
        Coordinate axes (1, 2 or 3).
    mean, variance : float
        Mean and variance of the values (divisor N), in value units and squared units.
    minimum, maximum : float
        Smallest and largest value.
    extent : dict
        ``{axis: [min, max]}`` of the working coordinates (metres for geographic sets).
    max_distance : float
        Largest separation between two samples, in coordinate units.
    """

    samples: int
    dimension: int
    mean: float
    variance: float
    minimum: float
    maximum: float
    extent: dict
    max_distance: float

    def as_dict(self) -> dict:
        """Plain dictionary for serialisation."""
        return dict(self.__dict__)


def largest_separation(coords: np.ndarray) -> float:
    """Largest distance between two points: exact, through the convex hull for large sets."""
    if coords.shape[0] <= SMALL_SET or coords.shape[1] == 1:
        if coords.shape[1] == 1:
            return float(np.ptp(coords[:, 0]))
        return float(pdist(coords).max())
    try:
        hull = ConvexHull(coords)
    except QhullError:
        # Flat (collinear or coplanar) sets: joggled input keeps the extreme points.
        hull = ConvexHull(coords, qhull_options="QJ")
    return float(pdist(coords[hull.vertices]).max())


def summarise(coords: np.ndarray, values: np.ndarray) -> Summary:
    """Compute the :class:`Summary` of coordinates (n, d) and values (n,)."""
    mean = float(np.mean(values))
    return Summary(
        samples=int(values.size),
        dimension=int(coords.shape[1]),
        mean=mean,
        variance=float(np.mean((values - mean) ** 2)),
        minimum=float(np.min(values)),
        maximum=float(np.max(values)),
        extent={AXES[a]: [float(coords[:, a].min()), float(coords[:, a].max())] for a in range(coords.shape[1])},
        max_distance=largest_separation(coords),
    )
