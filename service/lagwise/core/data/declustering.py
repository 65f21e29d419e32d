"""Cell declustering: weights that undo clustered (preferential) sampling.

Method (Journel 1983; Deutsch 1989, Computers & Geosciences 15(3))
-----------------------------------------------------------------
* For a cell size c and a grid origin, the working coordinates are cut into square
  (1-D: interval, 3-D: cubic) cells of side c. Each occupied cell carries an equal
  share of the total weight, split equally between its samples:
  w_i = 1 / (L n_i), L the occupied cells and n_i the samples in sample i's cell.
  Weights sum to 1.
* The weights of ``ORIGINS`` grid origins are averaged, so the result does not hang
  on where the grid starts. Origins are offset by the first points of the
  unscrambled Halton sequence (``scipy.stats.qmc.Halton``) times c.
* ``CELL_SIZES`` cell sizes are tried, geometrically spaced from half the typical
  spacing (median nearest-neighbour distance) to half the longest side of the
  samples' bounding box. Published rule: when the high values are over-sampled the
  cell size that minimises the declustered mean is kept; when the low values are,
  the one that maximises it. Which case applies is read at the reference cell
  size c_ref = (A / n)^(1/d) (the spacing of n samples spread evenly over the hull of
  size A): equal weight to equal areas lowering the mean means high values are
  over-sampled.
* Declustered mean and variance: sum w_i z_i and sum w_i (z_i - m_w)^2.

When is sampling clustered? Declustering is for clustered (preferential) sampling
(common practice): on a homogeneous design (a regular grid, with or without gaps, or a
random pattern) every sample stands for the same share of the domain and the weights
must stay 1/n, however much a cell weighting would move the mean. Two pieces of
geometric evidence decide; the values play no part:

* the nearest-neighbour ratio R = observed mean nearest-neighbour distance / its
  expectation for a random (Poisson) pattern of the same density, with its z-score
  (Clark & Evans 1954, Ecology 35(4)); in d dimensions the Poisson nearest-neighbour
  distance has mean (V_d rho)^(-1/d) Gamma(1 + 1/d) and variance
  (V_d rho)^(-2/d) (Gamma(1 + 2/d) - Gamma(1 + 1/d)^2), V_d the unit-ball volume
  (d = 2 gives Clark and Evans' 0.5 / sqrt(rho) and 0.26136 / sqrt(rho)). No edge
  correction: edges lengthen observed distances, so the test errs toward "not
  clustered";
* the evenness of the cell weights at the test cell size c_test = (4 A / n)^(1/d)
  (cells holding four samples on average): the effective sample fraction
  f = 1 / (n sum w_i^2) (1 for equal weights), set against its value for
  ``NULL_DESIGNS`` random (Poisson) patterns of the same n drawn uniformly over the
  samples' convex hull, cut by the same cells. A density that changes over the domain
  (a dense patch over a sparse background, two grids of different spacing) lowers f
  below the random designs' f; a regular design raises it above (a full grid gives
  about 0.98 for the random designs' 0.85). At c_ref, where cells hold about one
  sample, Poisson noise in the counts hides a fourfold density contrast, hence the
  larger test cell.

Sampling counts as clustered, and the weights are used, when R lies significantly
below 1 (z < ``RATIO_Z``) or the weights are uneven beyond chance and materially so:
f below the random designs' mean by more than ``EVENNESS_Z`` of their standard
deviations and by more than a fraction ``EVENNESS_LOSS`` of it. Otherwise every sample
keeps the weight 1/n. The shift of the mean, (m_w - m) against its standard error if
values were assigned to locations at random, s sqrt(n / (n - 1) sum (w_i - 1/n)^2)
(moments of a random permutation), is reported but does not decide: on a smooth
field neighbouring values are alike, so that null is far too narrow, and the cell
size that moves the mean most is picked from ``CELL_SIZES``, so any cell weighting of a
regular grid shifts the mean by "many standard errors".
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, replace

import numpy as np
from scipy.spatial import ConvexHull, Delaunay, QhullError
from scipy.special import gamma
from scipy.stats import qmc

from .spacing import nearest_distances
from .transforms import Transform, fit_transform

CELL_SIZES = 24
ORIGINS = 8
RATIO_Z = -2.58
EVENNESS_Z = -3.0
EVENNESS_LOSS = 0.05
NULL_DESIGNS = 39
TEST_CELL_SAMPLES = 4.0
MIN_SAMPLES = 10
SEARCH_SUBSET = 5_000
DENSE_KEYS = 4_000_000
_UNIT_BALL = {1: 2.0, 2: math.pi, 3: 4.0 * math.pi / 3.0}


def distinct_figures(before: float, after: float, digits: int = 4) -> tuple[str, str]:
    """Two numbers written with ``digits`` significant digits, or as many more (up to 17) as make them
    differ when they do: a mean of 1e12 moved by 1e4 reads 1.00000001e+12, not 1e+12 twice."""
    for precision in range(digits, 18):
        pair = f"{before:.{precision}g}", f"{after:.{precision}g}"
        if pair[0] != pair[1] or before == after:
            return pair
    return pair


@dataclass(frozen=True)
class Declustering:
    """Result of :func:`decluster`.

    Attributes
    ----------
    weights : ndarray, shape (n,)
        Cell-declustering weights at the chosen cell size (sum 1), in sample order.
    cell_size : float or None
        Chosen cell size, coordinate units (None when too few samples or no extent).
    clustered : bool
        Sampling judged clustered (see the module docstring); only then are the
        weights used (:attr:`used_weights`).
    mean, variance : float
        Plain mean and variance (divisor N), value units and squared units.
    declustered_mean, declustered_variance : float
        Mean and variance under :attr:`weights`.
    over_sampled : str or None
        ``high`` (the mean was minimised) or ``low`` (maximised).
    nearest_neighbour_ratio, ratio_z : float or None
        Clark and Evans' ratio R and its z-score.
    shift_z : float or None
        Declustered minus plain mean in permutation standard errors (reported, not deciding).
    effective_fraction : float or None
        Effective sample fraction 1 / (n sum w_i^2) of the weights at the test cell size.
    random_fraction : float or None
        Mean of that fraction over the random designs (module docstring).
    evenness_z : float or None
        ``effective_fraction`` minus ``random_fraction`` in standard deviations of the random designs.
    reason : str or None
        Why no cell size was chosen.
    """

    weights: np.ndarray
    cell_size: float | None
    clustered: bool
    mean: float
    variance: float
    declustered_mean: float
    declustered_variance: float
    over_sampled: str | None = None
    nearest_neighbour_ratio: float | None = None
    ratio_z: float | None = None
    shift_z: float | None = None
    effective_fraction: float | None = None
    random_fraction: float | None = None
    evenness_z: float | None = None
    reason: str | None = None

    @property
    def used_weights(self) -> np.ndarray:
        """The weights downstream statistics use: the declustering weights if clustered, else 1/n."""
        if self.clustered:
            return self.weights
        return np.full(self.weights.size, 1.0 / self.weights.size)

    def mean_of(self, values: np.ndarray) -> float:
        """Mean of ``values`` (same order as the samples, e.g. transformed values) under :attr:`used_weights`."""
        return float(np.dot(self.used_weights, values))

    def variance_of(self, values: np.ndarray) -> float:
        """Variance of ``values`` under :attr:`used_weights` (weights sum to 1, so the divisor is N)."""
        w = self.used_weights
        m = float(np.dot(w, values))
        return float(np.dot(w, (values - m) ** 2))

    @property
    def warning(self) -> str | None:
        """Plain-language warning when sampling is clustered."""
        if not self.clustered:
            return None
        evidence = []
        if self.nearest_neighbour_ratio is not None and self.ratio_z is not None and self.ratio_z < RATIO_Z:
            evidence.append(
                f"nearest neighbours are {self.nearest_neighbour_ratio:.2f} times as far apart as in a random pattern"
            )
        if _uneven(self.effective_fraction, self.random_fraction, self.evenness_z):
            evidence.append(
                f"the samples are unevenly spread: cell weights count as {self.effective_fraction:.0%} of them, "
                f"{self.random_fraction:.0%} for a random pattern"
            )
        if self.over_sampled is not None:
            evidence.append(f"the {self.over_sampled} values are over-sampled")
        return (
            f"sampling is clustered ({'; '.join(evidence)}): cell declustering (cell size {self.cell_size:.4g}) "
            f"moves the mean from {' to '.join(distinct_figures(self.mean, self.declustered_mean))} and the variance "
            f"from {' to '.join(distinct_figures(self.variance, self.declustered_variance))}; declustering weights "
            "are used for the "
            "summary, the normal-score table, the sill reference and the simple-kriging mean"
        )

    def as_dict(self) -> dict:
        """Figures for the audit trail (the weights themselves are not included)."""
        return {
            "method": f"cell declustering, weights averaged over {ORIGINS} grid origins; cell size minimising the "
            "declustered mean when high values are over-sampled, maximising it when low values are",
            "cell_size": self.cell_size,
            "clustered": self.clustered,
            "weights_used": self.clustered,
            "over_sampled": self.over_sampled,
            "nearest_neighbour_ratio": self.nearest_neighbour_ratio,
            "nearest_neighbour_z": self.ratio_z,
            "mean_shift_z": self.shift_z,
            "effective_sample_fraction": self.effective_fraction,
            "random_pattern_fraction": self.random_fraction,
            "evenness_z": self.evenness_z,
            "reason": self.reason,
        }


def cell_weights(coords: np.ndarray, cell_size: float, origins: int = ORIGINS) -> np.ndarray:
    """Cell-declustering weights (sum 1) for one cell size, averaged over ``origins`` grid origins.

    Parameters
    ----------
    coords : ndarray, shape (n, d)
        Working coordinates.
    cell_size : float
        Cell side, coordinate units (> 0).
    origins : int
        Grid origins averaged (Halton offsets in [0, 1)^d times the cell size).
    """
    n, d = coords.shape
    low = coords.min(axis=0)
    offsets = _offsets(d, origins)
    total = np.zeros(n)
    scaled = (coords - low) / cell_size
    span = np.floor(scaled.max(axis=0) + 1.0) + 1.0  # cells per axis, counted in floating point (no overflow)
    for offset in offsets:
        total += _one_grid(np.floor(scaled + offset), span)
    return total / origins


@functools.lru_cache(maxsize=8)
def _offsets(dimension: int, origins: int) -> np.ndarray:
    """The first ``origins`` points of the unscrambled Halton sequence in [0, 1)^dimension."""
    offsets = qmc.Halton(dimension, scramble=False).random(origins)
    offsets.flags.writeable = False
    return offsets


def _one_grid(cells: np.ndarray, span: np.ndarray) -> np.ndarray:
    """w_i = 1 / (L n_i) for whole-number cell indexes (n, d), held as floats, below ``span`` on each axis.

    Indexes become integers only on the dense path (fewer than :data:`DENSE_KEYS` cells); a grid of
    more cells (samples spread over 1e19 cells, say) is keyed by the float indexes themselves.
    """
    if float(np.prod(span)) <= DENSE_KEYS:
        key = np.ravel_multi_index(tuple(cells.astype(np.int64).T), tuple(int(s) for s in span))
        counts = np.bincount(key)
        return 1.0 / (counts[key] * np.count_nonzero(counts))
    _, inverse, counts = np.unique(cells, axis=0, return_inverse=True, return_counts=True)
    return 1.0 / (counts[inverse.reshape(-1)] * counts.size)


def _hull_size(coords: np.ndarray) -> float:
    """Length (1-D), area (2-D) or volume (3-D) of the samples' convex hull (bounding box if flat)."""
    if coords.shape[1] == 1:
        return float(np.ptp(coords[:, 0]))
    try:
        return float(ConvexHull(coords).volume)
    except (QhullError, ValueError):
        return float(np.prod(np.ptp(coords, axis=0)))


def nearest_neighbour_ratio(coords: np.ndarray, spacing_mean: float, size: float) -> tuple[float, float] | None:
    """Clark and Evans' ratio R and its z-score for a mean nearest-neighbour distance (module docstring)."""
    n, d = coords.shape
    if size <= 0 or n < 2:
        return None
    rho = n / size
    scale = (_UNIT_BALL[d] * rho) ** (-1.0 / d)
    expected = scale * gamma(1.0 + 1.0 / d)
    sd = scale * math.sqrt(gamma(1.0 + 2.0 / d) - gamma(1.0 + 1.0 / d) ** 2)
    return spacing_mean / expected, (spacing_mean - expected) / (sd / math.sqrt(n))


def effective_fraction(weights: np.ndarray) -> float:
    """Effective sample fraction 1 / (n sum w_i^2) of weights summing to 1 (1 when all equal 1/n)."""
    return float(1.0 / (weights.size * np.sum(weights**2)))


def _uneven(fraction: float | None, random: float | None, z: float | None) -> bool:
    """The clustering rule's evenness half (module docstring): uneven beyond chance and materially."""
    if fraction is None or random is None or z is None:
        return False
    return z < EVENNESS_Z and fraction < (1.0 - EVENNESS_LOSS) * random


def random_designs(coords: np.ndarray, count: int, rng: np.random.Generator) -> list[np.ndarray]:
    """``count`` patterns of n points drawn uniformly over the convex hull of ``coords`` (n, d).

    The hull's vertices are triangulated (``scipy.spatial.Delaunay``); each point falls in a simplex
    chosen with probability proportional to its volume, at flat Dirichlet barycentric coordinates
    (uniform within the simplex). 1-D samples and flat hulls use the bounding box.
    """
    n, d = coords.shape
    wanted = count * n
    corners: np.ndarray | None = None
    if d > 1:
        try:
            triangulation = Delaunay(coords[ConvexHull(coords).vertices])
            corners = triangulation.points[triangulation.simplices]  # (m, d + 1, d)
        except (QhullError, ValueError):
            corners = None
    volumes = np.zeros(1) if corners is None else np.abs(np.linalg.det(corners[:, 1:] - corners[:, :1]))
    if corners is None or volumes.sum() <= 0:
        return list(rng.uniform(coords.min(axis=0), coords.max(axis=0), (wanted, d)).reshape(count, n, d))
    chosen = rng.choice(volumes.size, wanted, p=volumes / volumes.sum())
    barycentric = rng.dirichlet(np.ones(d + 1), wanted)
    points = np.einsum("ij,ijk->ik", barycentric, corners[chosen])
    return list(points.reshape(count, n, d))


def evenness(coords: np.ndarray, cell: float, seed: int = 0) -> tuple[float, float, float]:
    """Effective sample fraction of the cell weights at cell size ``cell`` (coordinate units), its mean
    over :data:`NULL_DESIGNS` random designs over the same hull, and its z-score against them."""
    observed = effective_fraction(cell_weights(coords, cell))
    rng = np.random.default_rng([seed, 1])
    null = np.array([effective_fraction(cell_weights(p, cell)) for p in random_designs(coords, NULL_DESIGNS, rng)])
    spread = float(np.std(null, ddof=1))
    random = float(np.mean(null))
    return observed, random, (observed - random) / spread if spread > 0 else 0.0


def _plain(values: np.ndarray, reason: str) -> Declustering:
    mean = float(np.mean(values))
    variance = float(np.mean((values - mean) ** 2))
    uniform = np.full(values.size, 1.0 / values.size)
    return Declustering(uniform, None, False, mean, variance, mean, variance, reason=reason)


def decluster(coords: np.ndarray, values: np.ndarray, *, seed: int = 0) -> Declustering:
    """Cell declustering of samples (see the module docstring).

    Parameters
    ----------
    coords : ndarray, shape (n, d)
        Working coordinates (distinct locations: duplicates already handled).
    values : ndarray, shape (n,)
        Values the declustered mean is computed from.
    seed : int
        Seed of the subset the cell size is searched on above ``SEARCH_SUBSET`` samples, and of
        the random designs the evenness of the weights is set against.
    """
    coords = np.asarray(coords, dtype=np.float64)
    values = np.asarray(values, dtype=np.float64)
    n, d = coords.shape
    if n < MIN_SAMPLES:
        return _plain(values, f"fewer than {MIN_SAMPLES} samples")
    longest = float(np.ptp(coords, axis=0).max())
    nearest = nearest_distances(coords)
    spacing = float(np.median(nearest)) if nearest.size else 0.0
    if longest <= 0 or spacing <= 0:
        return _plain(values, "the samples have no extent")
    mean = float(np.mean(values))
    variance = float(np.mean((values - mean) ** 2))
    size = _hull_size(coords)
    ratio = nearest_neighbour_ratio(coords, float(np.mean(nearest)), size)
    if variance == 0.0:
        return replace(_plain(values, "all values are equal"), nearest_neighbour_ratio=ratio and ratio[0])
    search = np.arange(n)
    if n > SEARCH_SUBSET:
        search = np.sort(np.random.default_rng(seed).choice(n, SEARCH_SUBSET, replace=False))
    sub_coords, sub_values = coords[search], values[search]
    low, high = 0.5 * spacing, 0.5 * longest
    sizes = np.geomspace(low, max(high, low), CELL_SIZES)
    curve = np.array([np.dot(cell_weights(sub_coords, c), sub_values) for c in sizes])
    sub_mean = float(np.mean(sub_values))
    reference = (size / n) ** (1.0 / d) if size > 0 else spacing
    at_reference = float(np.dot(cell_weights(sub_coords, max(reference, low)), sub_values))
    if at_reference != sub_mean:
        high_over = at_reference < sub_mean
    else:
        high_over = abs(curve.min() - sub_mean) >= abs(curve.max() - sub_mean)
    chosen = float(sizes[np.argmin(curve) if high_over else np.argmax(curve)])
    weights = cell_weights(coords, chosen)
    declustered_mean = float(np.dot(weights, values))
    declustered_variance = float(np.dot(weights, (values - declustered_mean) ** 2))
    spread = math.sqrt(n / (n - 1) * float(np.sum((weights - 1.0 / n) ** 2)))
    shift_z = (declustered_mean - mean) / (math.sqrt(variance) * spread) if spread > 0 else 0.0
    ratio_r, ratio_z = ratio if ratio is not None else (None, None)
    held = TEST_CELL_SAMPLES / search.size  # cells of the searched samples holding four on average
    test_cell = (held * size) ** (1.0 / d) if size > 0 else TEST_CELL_SAMPLES ** (1.0 / d) * spacing
    fraction, random, even_z = evenness(sub_coords, test_cell, seed)
    clustered = bool((ratio_z is not None and ratio_z < RATIO_Z) or _uneven(fraction, random, even_z))
    return Declustering(
        weights=weights,
        cell_size=chosen,
        clustered=clustered,
        mean=mean,
        variance=variance,
        declustered_mean=declustered_mean,
        declustered_variance=declustered_variance,
        over_sampled="high" if high_over else "low",
        nearest_neighbour_ratio=None if ratio_r is None else float(ratio_r),
        ratio_z=None if ratio_z is None else float(ratio_z),
        shift_z=float(shift_z),
        effective_fraction=fraction,
        random_fraction=random,
        evenness_z=float(even_z),
    )


@dataclass(frozen=True)
class WeightedStart:
    """Declustering and transform of an analysis, found once and shared by its stages.

    Attributes
    ----------
    declustering : Declustering
        Found from the original values.
    transform : Transform
        Fitted with the declustering weights (normal-score plotting positions).
    values : ndarray
        Transformed values, in sample order.
    """

    declustering: Declustering
    transform: Transform
    values: np.ndarray

    @property
    def simple_kriging_mean(self) -> float:
        """Default simple-kriging mean, in transformed units: the (declustered when clustered) mean."""
        return self.declustering.mean_of(self.values)

    @property
    def sill_reference(self) -> float:
        """Sill reference in transformed units: the (declustered when clustered) variance."""
        return self.declustering.variance_of(self.values)


def weighted_start(coords: np.ndarray, values: np.ndarray, transform: str, source_index=None) -> WeightedStart:
    """Hook for the whole-chain analysis: decluster the original values, then fit the transform with the weights.

    Pass ``declustering`` on to ``experimental_variogram`` and ``variogram_map`` (their
    summaries then use the same weights), ``sill_reference`` to the fit as the sample
    variance, and ``simple_kriging_mean`` where simple kriging has no mean.
    """
    declustering = decluster(coords, values)
    fitted = fit_transform(transform, values, source_index, weights=declustering.used_weights)
    return WeightedStart(declustering, fitted, fitted.forward(values))
