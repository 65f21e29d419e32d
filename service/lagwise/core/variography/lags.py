"""Distance classes (lags).

Classes are half-open, [lower, upper), in coordinate units (metres for geographic
sets). Three ways to ask for them:

* ``width`` and ``count``: [0, w), [w, 2w), ..., [(k-1)w, kw);
* ``edges``: [e_i, e_(i+1)), edges strictly increasing and non-negative;
* ``auto``: the largest distance is half the field's extent in the class direction
  (a rule of thumb of the trade: beyond about half the field fewer and fewer
  samples take part) -- half the largest separation for the omnidirectional class,
  half the spread of the samples' projections on the class line otherwise.

  ``equal_width`` (the default) resolves the shortest spacing the data support: the
  width w is the typical sample spacing, the median distance from a sample to its
  nearest neighbour (:func:`lagwise.core.data.spacing.typical_spacing`), or ``largest / AUTO_MAX_SPACING_CLASSES``
  when that is larger. Classes are centred on multiples of w, edges
  0, w/2, 3w/2, 5w/2, ... up to the largest distance, so the nearest-neighbour pairs
  sit in the middle of a class rather than on an edge (on a regular grid they would
  otherwise straddle it). Classes with fewer than ``min_pairs`` pairs are then merged
  with the next one (the last with the one before), by exact counts from a counting
  pass, until every class holds ``min_pairs`` pairs or one class is left.

  ``equal_pairs`` uses the largest class count, up to ``AUTO_MAX_CLASSES``, for which
  every class holds at least ``min_pairs`` pairs (one class when none does), and
  places edges at pair-count quantiles read from a first counting pass on
  ``AUTO_FINE_BINS`` fine classes, so quantile edges are resolved to
  1/``AUTO_FINE_BINS`` of the largest distance.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import FieldIssue, InvalidInput

AUTO_METHODS = ("equal_width", "equal_pairs")
AUTO_MAX_CLASSES = 15
AUTO_MAX_SPACING_CLASSES = 40
AUTO_FINE_BINS = 300
# A direction along which the samples' extent is below this share of their largest separation has
# none: the projection on a unit vector of rounded sine and cosine (cos 90 degrees is 6e-17, not 0)
# leaves about 1e-16 of the extent across it.
NO_EXTENT = 1e-12
MAX_CLASSES = 1000


@dataclass(frozen=True)
class LagRequest:
    """How the caller asked for distance classes (exactly one way)."""

    width: float | None = None
    count: int | None = None
    edges: tuple[float, ...] | None = None
    auto: str | None = None

    @property
    def method(self) -> str:
        """``width``, ``edges``, ``equal_width`` or ``equal_pairs``."""
        if self.edges is not None:
            return "edges"
        if self.width is not None:
            return "width"
        return self.auto or "equal_width"


def validate_lags(request: LagRequest) -> np.ndarray | None:
    """Check an explicit request and return its edges, or None for ``auto``.

    Raises :class:`InvalidInput` naming ``/lags/<field>``.
    """
    given = [
        request.edges is not None,
        request.width is not None or request.count is not None,
        request.auto is not None,
    ]
    if sum(given) > 1:
        raise InvalidInput.at("/lags", "give exactly one of: width and count, edges, or auto")
    if request.edges is not None:
        return _validate_edges(request.edges)
    if request.width is not None or request.count is not None:
        issues = []
        if request.width is None or not request.width > 0:
            issues.append(FieldIssue("/lags/width", "must be a positive distance"))
        if request.count is None or not 1 <= request.count <= MAX_CLASSES:
            issues.append(FieldIssue("/lags/count", f"must be a whole number from 1 to {MAX_CLASSES}"))
        elif request.width is not None and not math.isfinite(request.width * request.count):
            issues.append(FieldIssue("/lags/width", "width x count must be a finite distance"))
        if issues:
            raise InvalidInput(issues)
        assert request.width is not None and request.count is not None  # a missing one is an issue above
        return request.width * np.arange(request.count + 1, dtype=np.float64)
    if request.auto is not None and request.auto not in AUTO_METHODS:
        raise InvalidInput.at("/lags/auto", f"must be one of {', '.join(AUTO_METHODS)}")
    return None


def _validate_edges(edges: tuple[float, ...]) -> np.ndarray:
    e = np.asarray(edges, dtype=np.float64)
    if e.size < 2 or e.size > MAX_CLASSES + 1:
        raise InvalidInput.at("/lags/edges", f"needs from 2 to {MAX_CLASSES + 1} edges")
    issues = [FieldIssue(f"/lags/edges/{i}", "must be a finite number") for i in np.flatnonzero(~np.isfinite(e))]
    if e[0] < 0:
        issues.append(FieldIssue("/lags/edges/0", "must not be negative"))
    for i in np.flatnonzero(np.diff(e) <= 0):
        issues.append(FieldIssue(f"/lags/edges/{i + 1}", "edges must increase strictly (unsorted or repeated edge)"))
    if issues:
        raise InvalidInput(issues[:20])
    return e


def quantile_edges(largest: float, fine_counts: np.ndarray, min_pairs: int) -> np.ndarray:
    """``equal_pairs`` edges from pair counts on ``len(fine_counts)`` equal fine classes up to ``largest``.

    Returns strictly increasing edges starting at 0 and ending at ``largest``.
    """
    fine = len(fine_counts)
    cumulative = np.concatenate([[0.0], np.cumsum(fine_counts, dtype=np.float64)])
    fine_edges = np.linspace(0.0, largest, fine + 1)
    total = cumulative[-1]
    for k in range(AUTO_MAX_CLASSES, 0, -1):
        edges = np.interp(np.linspace(0.0, total, k + 1), cumulative, fine_edges)
        edges[0], edges[-1] = 0.0, largest
        edges = np.unique(edges)
        in_class = np.diff(np.interp(edges, fine_edges, cumulative))
        if len(edges) == k + 1 and in_class.min() >= min_pairs:
            return edges
    return np.array([0.0, largest])


def spacing_width(largest: float, spacing: float) -> float:
    """Class width of the ``equal_width`` rule: the spacing, at least ``largest / AUTO_MAX_SPACING_CLASSES``."""
    return max(spacing, largest / AUTO_MAX_SPACING_CLASSES)


def spacing_edges(largest: float, width: float) -> np.ndarray:
    """Candidate edges 0, w/2, 3w/2, ... ending at ``largest`` (a last part shorter than w/2 joins its neighbour)."""
    inner = np.arange(0.5, largest / width, 1.0) * width
    inner = inner[inner <= largest - 0.5 * width]
    if inner.size == 0:
        return np.array([0.0, largest])
    return np.concatenate([[0.0], inner, [largest]])


def merge_sparse(edges: np.ndarray, counts: np.ndarray, min_pairs: int) -> np.ndarray:
    """Merge classes with fewer than ``min_pairs`` pairs into the next (the last into the one before).

    ``counts`` are the exact pairs of each class [edges[i], edges[i+1]). Returns the
    kept edges; a single class remains when no merge meets ``min_pairs``.
    """
    kept = list(np.asarray(edges, dtype=np.float64))
    pair_counts = list(np.asarray(counts, dtype=np.float64))
    i = 0
    while len(pair_counts) > 1 and i < len(pair_counts):
        if pair_counts[i] >= min_pairs:
            i += 1
            continue
        if i == len(pair_counts) - 1:
            # The last class joins the one before it.
            pair_counts[i - 1] += pair_counts.pop(i)
            kept.pop(i)
            i -= 1
        else:
            pair_counts[i] += pair_counts.pop(i + 1)
            kept.pop(i + 1)
    return np.array(kept)
