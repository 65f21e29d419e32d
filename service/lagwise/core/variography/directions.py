"""Direction classes: which pairs belong to a direction, and how each pair is oriented.

Conventions (all angles in degrees)
-----------------------------------
* ``azimuth`` clockwise from north (+y); a pair and its reverse are the same pair,
  so azimuths are folded into [0, 180).
* ``tolerance`` is the half-angle of the class, in (0, 90]; 90 takes every
  horizontal direction (the omnidirectional class).
* ``bandwidth`` is the largest horizontal perpendicular offset of a pair from the
  class line (``None``: no limit), in coordinate units.
* 3-D only: ``dip`` in [-90, 90], degrees below horizontal (positive downward);
  ``dip_tolerance`` in (0, 90] (90: any dip); ``vertical_bandwidth`` the largest
  offset of a pair from the class line within the vertical plane of the azimuth.
* A pair with no horizontal component passes the horizontal tests.
* Orientation: each pair is oriented so that its separation h points along the
  azimuth (h . u >= 0); ties go toward azimuth + 90 degrees, then upward. Tail is
  the start and head the end of the oriented pair.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import FieldIssue, InvalidInput

# Columns of the per-direction parameter table handed to the pair kernels.
UX, UY, COS_TOL, BAND2, HAS_DIP, DIP, DIP_TOL, WX, WY, WZ, VBAND2, COS2_TOL = range(12)
DIRECTION_COLUMNS = 12


@dataclass(frozen=True)
class DirectionClass:
    """One direction class (see the module conventions for units and meaning)."""

    azimuth: float = 0.0
    tolerance: float = 90.0
    bandwidth: float | None = None
    dip: float = 0.0
    dip_tolerance: float = 90.0
    vertical_bandwidth: float | None = None

    @property
    def omnidirectional(self) -> bool:
        """True when every pair passes the angle tests."""
        return self.tolerance >= 90.0 and self.bandwidth is None and self.dip_tolerance >= 90.0

    def unit_vector(self, dimension: int) -> np.ndarray:
        """Unit vector of the class line in the working coordinates (length = dimension)."""
        az, dip = math.radians(self.azimuth), math.radians(self.dip)
        vector = np.array([math.sin(az) * math.cos(dip), math.cos(az) * math.cos(dip), -math.sin(dip)])
        if dimension == 1:
            return np.array([1.0])
        if dimension == 2:
            return vector[:2] / np.linalg.norm(vector[:2])
        return vector

    def as_dict(self, dimension: int) -> dict:
        """Resolved parameters for the audit trail (null = no limit)."""
        out = {"azimuth": self.azimuth, "tolerance": self.tolerance, "bandwidth": self.bandwidth}
        if dimension == 3:
            out.update(dip=self.dip, dip_tolerance=self.dip_tolerance, vertical_bandwidth=self.vertical_bandwidth)
        return out


OMNIDIRECTIONAL = DirectionClass()


def validate_direction(raw: DirectionClass, index: int, dimension: int) -> tuple[DirectionClass, list[str]]:
    """Check one direction class and fold its azimuth into [0, 180).

    Returns the resolved class and warnings (dip fields ignored for 2-D data).
    Raises :class:`InvalidInput` naming ``/directions/<index>/<field>``.
    """
    base = f"/directions/{index}"
    issues = []
    if not 0.0 <= raw.azimuth < 360.0:
        issues.append(FieldIssue(f"{base}/azimuth", "must lie in [0, 360) degrees"))
    if not 0.0 < raw.tolerance <= 90.0:
        issues.append(FieldIssue(f"{base}/tolerance", "must lie in (0, 90] degrees"))
    if raw.bandwidth is not None and not raw.bandwidth > 0.0:
        issues.append(FieldIssue(f"{base}/bandwidth", "must be positive (or null for no limit)"))
    if not -90.0 <= raw.dip <= 90.0:
        issues.append(FieldIssue(f"{base}/dip", "must lie in [-90, 90] degrees"))
    if not 0.0 < raw.dip_tolerance <= 90.0:
        issues.append(FieldIssue(f"{base}/dip_tolerance", "must lie in (0, 90] degrees"))
    if raw.vertical_bandwidth is not None and not raw.vertical_bandwidth > 0.0:
        issues.append(FieldIssue(f"{base}/vertical_bandwidth", "must be positive (or null for no limit)"))
    if issues:
        raise InvalidInput(issues)
    warnings = []
    resolved = DirectionClass(
        azimuth=raw.azimuth % 180.0,
        tolerance=raw.tolerance,
        bandwidth=raw.bandwidth,
        dip=raw.dip,
        dip_tolerance=raw.dip_tolerance,
        vertical_bandwidth=raw.vertical_bandwidth,
    )
    if dimension < 3 and (raw.dip != 0.0 or raw.dip_tolerance != 90.0 or raw.vertical_bandwidth is not None):
        warnings.append(
            f"direction {index}: dip, dip_tolerance and vertical_bandwidth apply to 3-D samples only; ignored"
        )
        resolved = DirectionClass(resolved.azimuth, resolved.tolerance, resolved.bandwidth)
    if dimension == 1 and (raw.tolerance != 90.0 or raw.bandwidth is not None):
        warnings.append(f"direction {index}: 1-D samples have one direction; azimuth, tolerance and bandwidth ignored")
        resolved = OMNIDIRECTIONAL
    return resolved, warnings


def _square(bandwidth: float | None) -> float:
    """A band's square; no band, or one too wide to square in float64 (no limit either way), is infinite."""
    if bandwidth is None or bandwidth > 1e150:
        return math.inf
    return bandwidth * bandwidth


def direction_table(directions: list[DirectionClass]) -> np.ndarray:
    """Pack direction classes into the float64 table read by the pair kernels.

    The angle test |h . u| >= |h_horizontal| cos(tolerance) is made slightly
    generous (1e-12) so that tolerance 90 admits exactly perpendicular pairs.
    """
    table = np.zeros((len(directions), DIRECTION_COLUMNS))
    for k, d in enumerate(directions):
        az, dip = math.radians(d.azimuth), math.radians(d.dip)
        table[k, UX], table[k, UY] = math.sin(az), math.cos(az)
        table[k, COS_TOL] = math.cos(math.radians(d.tolerance)) - 1e-12
        table[k, BAND2] = _square(d.bandwidth)
        table[k, HAS_DIP] = 1.0 if d.dip_tolerance < 90.0 else 0.0
        table[k, DIP], table[k, DIP_TOL] = dip, math.radians(d.dip_tolerance) + 1e-12
        table[k, WX], table[k, WY], table[k, WZ] = (
            math.sin(az) * math.sin(dip),
            math.cos(az) * math.sin(dip),
            math.cos(dip),
        )
        table[k, VBAND2] = _square(d.vertical_bandwidth)
        # Squared cosine for the fast kernel's test proj^2 >= |h|^2 cos^2 (0 admits every pair).
        table[k, COS2_TOL] = table[k, COS_TOL] ** 2 if table[k, COS_TOL] > 0.0 else 0.0
    return table
