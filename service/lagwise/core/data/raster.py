"""Gridded samples (rasters): a regular 2-D grid of nodes, some of them missing.

Conventions
-----------
* ``origin`` (x0, y0) is the node of column 0, row 0; ``spacing`` (dx, dy) > 0 the
  distance between neighbouring nodes along x and y (planar coordinates, any
  consistent length unit); ``shape`` (nx, ny) the nodes along x and along y.
* ``values`` run x fastest: entry ``i + nx * j`` is the value at node
  (x0 + i dx, y0 + j dy). A missing cell is NaN here (``null`` in JSON).
* The separation of two nodes is computed from their indexes, (di dx, dj dy), so
  class membership of a raster's pairs does not depend on rounding of coordinates.
* Input hash: SHA-256 over the little-endian float64 bytes of origin, spacing,
  shape and values (missing cells as NaN), in that order.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.spatial import ConvexHull, QhullError
from scipy.spatial.distance import pdist

from ..errors import FieldIssue, InvalidInput
from ..limits import Limits
from .identifiers import IntegerIds
from .samples import MAX_SPREAD, MIN_SPREAD, SampleSet, build_sample_set, input_hash
from .summary import Summary

BASE = "/samples/raster"


@dataclass(frozen=True)
class Raster:
    """A validated raster.

    Attributes
    ----------
    origin, spacing : tuple of float
        Node (0, 0) and node spacing (dx, dy), coordinate units.
    shape : tuple of int
        (nx, ny) nodes along x and y.
    grid : ndarray, shape (ny, nx)
        Values by row (y) and column (x); NaN for missing cells.
    input_hash : str
        See the module conventions.
    present : ndarray of bool, shape (ny, nx)
        The cells that hold a value.
    moments : tuple of float
        Mean, variance (divisor N), minimum and maximum of the present cells' values.
    """

    origin: tuple[float, float]
    spacing: tuple[float, float]
    shape: tuple[int, int]
    grid: np.ndarray
    input_hash: str
    present: np.ndarray
    moments: tuple[float, float, float, float]
    warnings: tuple[str, ...] = field(default=())

    @property
    def dimension(self) -> int:
        """Coordinate axes: a raster is 2-D."""
        return 2

    @property
    def size(self) -> int:
        """Number of cells holding a value."""
        return int(np.count_nonzero(self.present))


def build_raster(origin, spacing, shape, values) -> Raster:
    """Validate a raster; ``values`` (nx * ny,) x fastest with NaN for missing cells.

    Raises
    ------
    InvalidInput
        Naming ``/samples/raster/<field>`` (and the cell index for values).
    """
    issues: list[FieldIssue] = []
    origin = tuple(float(v) for v in origin)
    spacing = tuple(float(v) for v in spacing)
    shape = tuple(int(v) for v in shape)
    if len(origin) != 2 or not all(np.isfinite(origin)) or max(map(abs, origin), default=0.0) > MAX_SPREAD:
        issues.append(FieldIssue(f"{BASE}/origin", f"must be two finite numbers [x0, y0] within {MAX_SPREAD:g}"))
    if len(spacing) != 2:
        issues.append(FieldIssue(f"{BASE}/spacing", "must be two numbers [dx, dy]"))
    else:
        for a, s in enumerate(spacing):
            if not (np.isfinite(s) and s > 0):
                issues.append(FieldIssue(f"{BASE}/spacing/{a}", "must be a positive distance"))
    if len(shape) != 2:
        issues.append(FieldIssue(f"{BASE}/shape", "must be two whole numbers [nx, ny]"))
    else:
        for a, n in enumerate(shape):
            if n < 1:
                issues.append(FieldIssue(f"{BASE}/shape/{a}", "must be at least 1"))
    if issues:
        raise InvalidInput(issues)
    values = np.asarray(values, dtype=np.float64)
    nx, ny = shape
    if values.size != nx * ny:
        raise InvalidInput.at(
            f"{BASE}/values", f"has {values.size} entries but shape {nx} x {ny} needs {nx * ny} (x fastest)"
        )
    reach = max(spacing[0] * (nx - 1), spacing[1] * (ny - 1))
    if reach > MAX_SPREAD:
        raise InvalidInput.at(f"{BASE}/spacing", f"the raster spans more than {MAX_SPREAD:g}; use another unit")
    if 0.0 < reach < MIN_SPREAD:
        raise InvalidInput.at(
            f"{BASE}/spacing",
            f"the raster spans {reach:.3g} (less than {MIN_SPREAD:g}), whose squared distances underflow; use another unit",
        )
    present = ~np.isnan(values)
    count = int(np.count_nonzero(present))
    if count < 2:
        raise InvalidInput.at(f"{BASE}/values", f"needs at least 2 cells with a value, got {count}")
    kept = values[present]
    spread = float(np.ptp(kept))
    if spread > MAX_SPREAD or 0.0 < spread < MIN_SPREAD:
        where = int(np.flatnonzero(present)[int(np.argmax(kept))])
        raise InvalidInput.at(f"{BASE}/values/{where}", f"values span {spread:.3g}; rescale the values (another unit)")
    digest = input_hash([np.asarray(origin), np.asarray(spacing), np.asarray(shape, dtype=np.float64), values])
    warnings = () if count == values.size else (f"{values.size - count} of {values.size} raster cells are missing",)
    mean = float(kept.mean())
    moments = (mean, float(np.mean((kept - mean) ** 2)), float(kept.min()), float(kept.max()))
    return Raster(
        origin,  # type: ignore[arg-type]
        spacing,  # type: ignore[arg-type]
        shape,  # type: ignore[arg-type]
        values.reshape(ny, nx),
        digest,
        present.reshape(ny, nx),
        moments,
        warnings,
    )


def raster_points(raster: Raster, limits: Limits = Limits()) -> SampleSet:
    """The raster's present cells as samples (for endpoints that need points), within the sample limit."""
    limits.check_samples(raster.size)
    rows, columns = np.nonzero(raster.present)
    x = raster.origin[0] + columns * raster.spacing[0]
    y = raster.origin[1] + rows * raster.spacing[1]
    samples = build_sample_set(raster.grid[rows, columns], x, y)
    cells = rows * raster.shape[0] + columns
    return SampleSet(
        coords=samples.coords,
        values=samples.values,
        ids=IntegerIds(cells),
        source_index=cells,
        coordinates="planar",
        input_hash=raster.input_hash,
        duplicates=samples.duplicates,
        warnings=samples.warnings + raster.warnings,
    )


def raster_summary(raster: Raster) -> Summary:
    """Summary of the present cells; regular sampling, so the declustered moments are the plain ones.

    The largest separation is exact: the convex hull of the present cells is the hull
    of each row's first and last present cell.
    """
    mean, variance, minimum, maximum = raster.moments
    hull = raster_outline(raster)
    return Summary(
        samples=raster.size,
        dimension=2,
        mean=mean,
        variance=variance,
        minimum=minimum,
        maximum=maximum,
        extent={
            "x": [float(hull[:, 0].min()), float(hull[:, 0].max())],
            "y": [float(hull[:, 1].min()), float(hull[:, 1].max())],
        },
        max_distance=float(pdist(hull).max()),
        declustered_mean=mean,
        declustered_variance=variance,
        declustering=None,
    )


def raster_outline(raster: Raster) -> np.ndarray:
    """Coordinates (m, 2) of the convex hull's vertices of the present cells (from each row's first and last)."""
    present = raster.present
    rows = np.flatnonzero(present.any(axis=1))
    first = np.argmax(present[rows], axis=1)
    last = raster.shape[0] - 1 - np.argmax(present[rows, ::-1], axis=1)
    ends = np.concatenate([np.column_stack([first, rows]), np.column_stack([last, rows])]).astype(np.float64)
    ends = np.asarray(raster.origin) + ends * np.asarray(raster.spacing)
    try:
        return ends[ConvexHull(ends).vertices]
    except (QhullError, ValueError):
        return np.unique(ends, axis=0)
