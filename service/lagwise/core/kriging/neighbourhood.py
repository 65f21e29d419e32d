"""Moving neighbourhoods: which samples enter each kriging system.

Distances are measured in the isotropic space of the model's longest-range
structure (its anisotropy undone), so neighbours follow the direction of
continuity. ``radius`` is in that space (coordinate units along the major axis).
With ``sectors`` (2-D and 3-D horizontal), the plane around a target is split into
equal angular sectors starting at north (at the major axis when the model is
anisotropic), and each sector keeps at most
ceil(max_points / sectors) of its nearest samples, chosen among the
2 x sectors x max_points samples nearest to the target.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.spatial import cKDTree

from ..errors import FieldIssue, InvalidInput
from ..modelling.models import Anisotropy, VariogramModel

NO_NEIGHBOURS = "fewer than min_points samples within the search radius"


@dataclass(frozen=True)
class Neighbourhood:
    """A moving neighbourhood (``max_points=None`` means all samples: the unique neighbourhood).

    Attributes
    ----------
    max_points : int or None
        Most samples per system.
    min_points : int
        Fewest samples for an estimate; targets with fewer get no estimate.
    radius : float or None
        Search radius (coordinate units along the major axis of anisotropy); None: no limit.
    sectors : int or None
        Angular sectors (1 to 8) with at most ceil(max_points / sectors) samples each.
    """

    max_points: int | None = None
    min_points: int = 1
    radius: float | None = None
    sectors: int | None = None

    @property
    def unique(self) -> bool:
        return self.max_points is None

    def as_dict(self) -> dict:
        if self.unique:
            return {"kind": "unique (all samples)"}
        return {
            "max_points": self.max_points,
            "min_points": self.min_points,
            "radius": self.radius,
            "sectors": self.sectors,
        }


def validate_neighbourhood(n: Neighbourhood, dimension: int = 2) -> None:
    """Raises InvalidInput naming ``/neighbourhood/<field>``."""
    issues = []
    if n.max_points is not None and not 1 <= n.max_points <= 500:
        issues.append(FieldIssue("/neighbourhood/max_points", "must be from 1 to 500"))
    if n.min_points < 1:
        issues.append(FieldIssue("/neighbourhood/min_points", "must be at least 1"))
    if n.max_points is not None and n.min_points > n.max_points:
        issues.append(FieldIssue("/neighbourhood/min_points", f"must not exceed max_points ({n.max_points})"))
    if n.radius is not None and not (math.isfinite(n.radius) and n.radius > 0):
        issues.append(FieldIssue("/neighbourhood/radius", "must be a positive distance"))
    if n.sectors is not None and not 1 <= n.sectors <= 8:
        issues.append(FieldIssue("/neighbourhood/sectors", "must be from 1 to 8"))
    if n.sectors is not None and n.max_points is None:
        issues.append(FieldIssue("/neighbourhood/sectors", "needs max_points"))
    if n.sectors is not None and dimension < 2:
        issues.append(FieldIssue("/neighbourhood/sectors", "angular sectors need 2-D or 3-D samples"))
    if issues:
        raise InvalidInput(issues)


def search_anisotropy(model: VariogramModel) -> Anisotropy:
    """Anisotropy of the structure with the longest range (isotropic if none)."""
    bounded = [s for s in model.structures if s.family not in ("linear", "power")]
    if not bounded:
        return model.structures[0].anisotropy if model.structures else Anisotropy()
    return max(bounded, key=lambda s: s.range).anisotropy


def to_search_space(coords: np.ndarray, anisotropy: Anisotropy) -> np.ndarray:
    """Rotate and stretch coordinates (n, d) so that Euclidean distance is the model's rescaled distance."""
    if coords.shape[1] == 1 or (anisotropy.ratio == 1.0 and anisotropy.vertical_ratio == 1.0):
        return coords
    az = math.radians(anisotropy.azimuth)
    along = coords[:, 0] * math.sin(az) + coords[:, 1] * math.cos(az)
    across = (coords[:, 0] * math.cos(az) - coords[:, 1] * math.sin(az)) / anisotropy.ratio
    columns = [along, across]
    if coords.shape[1] == 3:
        columns.append(coords[:, 2] / anisotropy.vertical_ratio)
    return np.column_stack(columns)


class NeighbourSearch:
    """k-d tree over the samples in the model's search space."""

    def __init__(self, coords: np.ndarray, model: VariogramModel, neighbourhood: Neighbourhood):
        self.anisotropy = search_anisotropy(model)
        self.space = to_search_space(coords, self.anisotropy)
        self.tree = cKDTree(self.space)
        self.coords = coords
        self.n = neighbourhood

    def candidates(self, leave_one_out: bool = False) -> int:
        """Samples the search looks at per target (the k of the k-d tree query)."""
        n = self.n
        total = self.space.shape[0]
        base = min(n.max_points, total)
        wanted = base * n.sectors * 2 if n.sectors else base
        return min(total, wanted + (1 if leave_one_out else 0))

    def query(
        self, targets: np.ndarray, exclude: np.ndarray | None = None, workers: int = 1
    ) -> tuple[np.ndarray, np.ndarray]:
        """Neighbour indices (m, k) and validity mask (m, k) for each target (m, d).

        ``exclude`` gives, per target, one sample index to leave out (leave-one-out).
        Rows are padded with index 0 where invalid; a target whose valid count is
        below ``min_points`` gets an all-false row.
        """
        n = self.n
        base = min(n.max_points, self.space.shape[0])
        k = self.candidates(exclude is not None)
        space_targets = to_search_space(targets, self.anisotropy)
        upper = n.radius if n.radius is not None else np.inf
        dist, idx = self.tree.query(space_targets, k=k, distance_upper_bound=upper, workers=workers)
        dist, idx = dist.reshape(len(targets), k), idx.reshape(len(targets), k)
        valid = np.isfinite(dist)
        if exclude is not None:
            valid &= idx != exclude[:, None]
        if n.sectors:
            valid &= self._sector_mask(space_targets, idx, valid)
        order = np.argsort(~valid, axis=1, kind="stable")
        idx = np.take_along_axis(np.where(valid, idx, 0), order, axis=1)[:, :base]
        valid = np.take_along_axis(valid, order, axis=1)[:, :base]
        valid &= valid.sum(axis=1, keepdims=True) >= n.min_points
        return idx, valid

    def _sector_mask(self, space_targets, idx, valid) -> np.ndarray:
        sectors, max_points = self.n.sectors, self.n.max_points
        if sectors is None or max_points is None:
            raise TypeError("a sector search needs a sector count and max_points")
        per_sector = -(-max_points // sectors)
        safe = np.where(valid, idx, 0)
        offset = self.space[safe][..., :2] - space_targets[:, None, :2]
        angle = np.mod(np.arctan2(offset[..., 0], offset[..., 1]), 2 * np.pi)
        sector = np.minimum((angle / (2 * np.pi / sectors)).astype(np.int64), sectors - 1)
        sector = np.where(valid, sector, sectors)
        keep = np.zeros_like(valid)
        for s in range(sectors):
            in_sector = sector == s
            rank = np.cumsum(in_sector, axis=1)
            keep |= in_sector & (rank <= per_sector)
        return keep
