"""Summary statistics of a sample set: plain and declustered moments, extent and largest separation."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numba import njit
from scipy.spatial import ConvexHull, QhullError
from scipy.spatial.distance import pdist

from .declustering import Declustering, decluster

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
    declustered_mean, declustered_variance : float or None
        Mean and variance under the cell-declustering weights
        (:mod:`lagwise.core.data.declustering`), reported whether or not sampling is
        judged clustered.
    declustering : dict or None
        Cell size, whether sampling is clustered (and the weights used) and the
        evidence (:meth:`~lagwise.core.data.declustering.Declustering.as_dict`).
    """

    samples: int
    dimension: int
    mean: float
    variance: float
    minimum: float
    maximum: float
    extent: dict
    max_distance: float
    declustered_mean: float | None = None
    declustered_variance: float | None = None
    declustering: dict | None = None

    @property
    def reference_variance(self) -> float:
        """The sill reference: the declustered variance when sampling is clustered, else the plain variance."""
        if (
            self.declustering is not None
            and self.declustering["weights_used"]
            and self.declustered_variance is not None
        ):
            return self.declustered_variance
        return self.variance

    @property
    def reference_mean(self) -> float:
        """The declustered mean when sampling is clustered, else the plain mean (e.g. a simple-kriging mean)."""
        if self.declustering is not None and self.declustering["weights_used"] and self.declustered_mean is not None:
            return self.declustered_mean
        return self.mean

    def as_dict(self) -> dict:
        """Plain dictionary for serialisation."""
        return dict(self.__dict__)


def largest_separation(coords: np.ndarray) -> float:
    """Largest distance between two points: exact, through the convex hull for large sets."""
    if coords.shape[0] <= SMALL_SET or coords.shape[1] == 1:
        if coords.shape[1] == 1:
            return float(np.ptp(coords[:, 0]))
        return float(pdist(coords).max())
    if coords.shape[1] == 2:
        coords = coords[hull_candidates(coords)]
    try:
        hull = ConvexHull(coords)
    except QhullError:
        # Flat (collinear or coplanar) sets: joggled input keeps the extreme points.
        hull = ConvexHull(coords, qhull_options="QJ")
    return float(pdist(coords[hull.vertices]).max())


def hull_candidates(points: np.ndarray) -> np.ndarray:
    """Boolean mask of the 2-D points that may be convex-hull vertices (Akl & Toussaint 1978 throw-away).

    The points extreme along eight directions (every 45 degrees) span a convex polygon;
    a point strictly inside it is no hull vertex, so the hull of the others is the hull of all.
    """
    extreme = _extremes(points)
    corners = points[list(dict.fromkeys(int(e) for e in extreme))]
    if corners.shape[0] < 3:
        return np.ones(points.shape[0], dtype=bool)
    return _outside(points, np.ascontiguousarray(corners))


@njit(cache=True)
def _extremes(points):
    """Index of the point farthest along each of eight directions (every 45 degrees, counter-clockwise)."""
    angles = np.arange(8) * (math.pi / 4.0)
    ux, uy = np.cos(angles), np.sin(angles)
    best = np.full(8, -np.inf)
    index = np.zeros(8, dtype=np.int64)
    for k in range(points.shape[0]):
        for d in range(8):
            p = points[k, 0] * ux[d] + points[k, 1] * uy[d]
            if p > best[d]:
                best[d] = p
                index[d] = k
    return index


@njit(cache=True)
def _outside(points, corners):
    """True for points not strictly inside the counter-clockwise polygon ``corners``."""
    m = corners.shape[0]
    keep = np.zeros(points.shape[0], dtype=np.bool_)
    for k in range(points.shape[0]):
        for e in range(m):
            ax, ay = corners[e, 0], corners[e, 1]
            bx, by = corners[(e + 1) % m, 0], corners[(e + 1) % m, 1]
            if (bx - ax) * (points[k, 1] - ay) - (by - ay) * (points[k, 0] - ax) <= 0.0:
                keep[k] = True
                break
    return keep


def summarise(coords: np.ndarray, values: np.ndarray, declustering: Declustering | None = None) -> Summary:
    """Compute the :class:`Summary` of coordinates (n, d) and values (n,).

    ``declustering`` gives weights found earlier (e.g. on the original values when
    ``values`` are transformed); by default they are found from ``values``. The
    declustered moments use the weights it uses: its cell-declustering weights when the
    sampling is clustered, else equal weights (so they equal the plain moments: a cell
    weighting of a homogeneous design is no estimate anyone should read).
    """
    mean = float(np.mean(values))
    declustering = declustering if declustering is not None else decluster(coords, values)
    weights = declustering.used_weights
    declustered_mean = float(np.dot(weights, values))
    return Summary(
        samples=int(values.size),
        dimension=int(coords.shape[1]),
        mean=mean,
        variance=float(np.mean((values - mean) ** 2)),
        minimum=float(np.min(values)),
        maximum=float(np.max(values)),
        extent={AXES[a]: [float(coords[:, a].min()), float(coords[:, a].max())] for a in range(coords.shape[1])},
        max_distance=largest_separation(coords),
        declustered_mean=declustered_mean,
        declustered_variance=float(np.dot(weights, (values - declustered_mean) ** 2)),
        declustering=declustering.as_dict(),
    )
