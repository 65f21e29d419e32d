"""Block kriging: estimates and variances of the average of the value over a block.

Each target is the centre of a block of ``size`` (coordinate units per axis). The block
V is discretised by the centres of n_1 x ... x n_d equal sub-cells (``discretisation``),
x_l, l = 1..q. The kriging system keeps the samples' matrix as for points (nugget on its
diagonal); the right-hand side and the target's variance use block averages of the
continuous (structural) part C_s of the covariance (the nugget is point-scale variation
that averages out over a block):

    k_i  = C_s(x_i, V)  = (1/q) sum_l C_s(x_i - x_l)
    f    = (1/q) sum_l f(x_l)                       (drift functions averaged over the block)
    k_00 = C_s(V, V)    = (1/q^2) sum_l sum_l' C_s(x_l - x_l')     (all pairs, l = l' included)

and the block-kriging variance is k_00 - lambda' k - f' nu (Journel & Huijbregts 1978,
Mining Geostatistics, ch. V). The estimate is
lambda' z (simple kriging: m + lambda'(z - m)). With a unique neighbourhood this equals
the mean of the point estimates at the discretisation points (kriging is linear in the
right-hand side), except where a discretisation point falls on a sample (the point
estimate there takes the nugget, the block does not).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.spatial.distance import cdist

from ..errors import FieldIssue, InvalidInput
from ..modelling.models import unit_semivariance
from .neighbourhood import to_search_space
from .systems import Covariance, Frame, KrigingSpec, PointSupport

MAX_POINTS_PER_AXIS = 32
MAX_POINTS = 1024
DEFAULT_POINTS_PER_AXIS = 4


@dataclass(frozen=True)
class Blocks:
    """Block size (coordinate units per axis) and discretisation (sub-cells per axis)."""

    size: tuple[float, ...]
    discretisation: tuple[int, ...]

    @property
    def points(self) -> int:
        """q: the number of discretisation points per block."""
        return math.prod(self.discretisation)

    def offsets(self) -> np.ndarray:
        """Discretisation points relative to the block centre, shape (q, d), x fastest.

        The centre of sub-cell i along an axis of size b cut in n is (i + 1/2) b / n - b / 2.
        """
        axes = [(np.arange(n) + 0.5) * (b / n) - b / 2 for b, n in zip(self.size, self.discretisation, strict=True)]
        mesh = np.meshgrid(*reversed(axes), indexing="ij")
        return np.column_stack([m.ravel() for m in reversed(mesh)])

    def as_dict(self) -> dict:
        return {
            "size": list(self.size),
            "discretisation": list(self.discretisation),
            "points": self.points,
            "convention": "each target is a block centre; discretisation points are the centres of equal sub-cells; "
            "point-to-block and within-block covariances average the model without its nugget over all points "
            "(and all pairs, a point with itself included); the samples' matrix keeps the nugget",
        }


def validate_blocks(blocks: Blocks, dimension: int, pointer: str = "/blocks") -> None:
    """Check a block request against the samples' dimension; raises InvalidInput naming ``<pointer>/...``."""
    issues = []
    for name, values in (("size", blocks.size), ("discretisation", blocks.discretisation)):
        if len(values) != dimension:
            issues.append(FieldIssue(f"{pointer}/{name}", f"needs {dimension} entries (the samples are {dimension}-D)"))
    for a, b in enumerate(blocks.size):
        if isinstance(b, bool) or not isinstance(b, (int, float)) or not (math.isfinite(b) and b > 0):
            issues.append(FieldIssue(f"{pointer}/size/{a}", "must be a positive length"))
    for a, n in enumerate(blocks.discretisation):
        if isinstance(n, bool) or not isinstance(n, int) or not 1 <= n <= MAX_POINTS_PER_AXIS:
            issues.append(
                FieldIssue(f"{pointer}/discretisation/{a}", f"must be an integer from 1 to {MAX_POINTS_PER_AXIS}")
            )
    if not issues and blocks.points > MAX_POINTS:
        issues.append(
            FieldIssue(f"{pointer}/discretisation", f"at most {MAX_POINTS} points per block (asked {blocks.points})")
        )
    if issues:
        raise InvalidInput(issues)


class BlockSupport(PointSupport):
    """Right-hand sides and target variance of block kriging for a kriger's covariance and drift
    (the members of :class:`lagwise.core.kriging.systems.PointSupport`, for blocks)."""

    def __init__(self, blocks: Blocks, cov: Covariance, frame: Frame, spec: KrigingSpec):
        super().__init__(cov, frame, spec)
        self.blocks = blocks
        self.offsets = blocks.offsets()
        self.points = blocks.points
        # C_s(V, V): translation-invariant, the same for every block.
        self._within = float(cov.between(self.offsets, self.offsets, nugget=False).mean())

    def _expand(self, centres: np.ndarray) -> np.ndarray:
        """Discretisation points of blocks centred at ``centres`` (..., m, d): shape (..., m * q, d)."""
        points = centres[..., :, None, :] + self.offsets
        return points.reshape(centres.shape[:-2] + (-1, centres.shape[-1]))

    def covariance(self, pts: np.ndarray, centres: np.ndarray) -> np.ndarray:
        """C_s(x_i, V_j) for samples (..., k, d) and block centres (..., m, d): shape (..., k, m)."""
        expanded = self._expand(centres)
        if pts.ndim == 2:
            cov = self._continuous(pts, expanded)
        else:
            cov = self.cov.between(pts, expanded, nugget=False)
        return cov.reshape(cov.shape[:-1] + (centres.shape[-2], self.points)).mean(axis=-1)

    def _continuous(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        """C_s between two point sets (k, d) and (r, d), distances by ``scipy.spatial.distance.cdist`` in
        each structure's isotropic space (as the samples' matrix is built)."""
        out = np.full((a.shape[0], b.shape[0]), self.cov.c0)
        for structure in self.cov.structural.structures:
            h = cdist(to_search_space(a, structure.anisotropy), to_search_space(b, structure.anisotropy))
            with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
                out -= structure.partial_sill * unit_semivariance(structure.family, h, structure.range, structure.extra)
        if not np.isfinite(out).all():
            return self.cov.between(a, b, nugget=False)  # raises the model's non-finite-covariance problem
        return out

    def drift(self, centres: np.ndarray) -> np.ndarray:
        """Drift functions averaged over each block, shape (..., m, p)."""
        f = self.frame.drift(self.spec, self._expand(centres))
        return f.reshape(centres.shape[:-1] + (self.points, f.shape[-1])).mean(axis=-2)

    @property
    def variance(self) -> float:
        """C_s(V, V), the covariance of the block average with itself."""
        return self._within
