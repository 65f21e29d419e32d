"""Axis labels from the variable's name and unit, the coordinates' unit and the transform.

No placeholder units: a label carries a unit only when one is known. Geographic
samples measure distances in metres and draw maps in degrees of longitude and latitude.
"""

from __future__ import annotations

from dataclasses import dataclass

from .style import plain

STATISTIC_NAMES = {
    "semivariance": "semivariance",
    "semivariance_robust": "robust semivariance (Cressie-Hawkins)",
    "semivariance_median": "median semivariance (Dowd)",
}


def _with_unit(text: str, unit: str | None) -> str:
    return text if unit is None else f"{text} ({unit})"


@dataclass(frozen=True)
class Labels:
    """What the numbers on a figure are.

    Attributes
    ----------
    name : str
        Variable name, e.g. ``lead``.
    unit : str or None
        Unit of the values, e.g. ``mg/kg``; None when not given.
    coordinate_unit : str or None
        Unit of planar coordinates and distances; ``m`` for geographic samples.
    transform : {"none", "log", "normal_score"}
        Transform the variogram and cross-validation work in.
    geographic : bool
        Coordinates are longitude and latitude (degrees).
    """

    name: str = "value"
    unit: str | None = None
    coordinate_unit: str | None = None
    transform: str = "none"
    geographic: bool = False

    @property
    def _name(self) -> str:
        return plain(self.name)

    @property
    def _unit(self) -> str | None:
        return None if self.unit is None else plain(self.unit)

    @property
    def distance_unit(self) -> str | None:
        """Unit of distances (None when not given)."""
        return "m" if self.geographic else (None if self.coordinate_unit is None else plain(self.coordinate_unit))

    @property
    def distance(self) -> str:
        """Separation distance axis."""
        return _with_unit("separation distance", self.distance_unit)

    def separation(self, axis: str) -> str:
        """Separation component axis of a variogram map (``x`` east-west or ``y`` north-south)."""
        text = "east-west separation hx" if axis == "x" else "north-south separation hy"
        return _with_unit(text, self.distance_unit)

    def coordinate(self, axis: str) -> str:
        """Map axis: longitude/latitude in degrees, or x/y in the coordinate unit."""
        if self.geographic:
            return "longitude (°)" if axis == "x" else "latitude (°)"
        return _with_unit(axis, self.distance_unit)

    @property
    def value(self) -> str:
        """The variable in its original units (prediction maps)."""
        return _with_unit(self._name, self._unit)

    @property
    def working(self) -> str:
        """The variable as the variogram and cross-validation see it (after the transform)."""
        if self.transform == "log":
            return f"ln {self._name}" + ("" if self._unit is None else f" ({self._name} in {self._unit})")
        if self.transform == "normal_score":
            return f"normal score of {self._name} (dimensionless)"
        return self.value

    @property
    def _working_name(self) -> str:
        return {"log": f"ln {self._name}", "normal_score": f"normal score of {self._name}"}.get(
            self.transform, self._name
        )

    def error(self) -> str:
        """Cross-validation error axis (estimate minus observed, working units)."""
        unit = self._unit if self.transform == "none" else "dimensionless"
        return _with_unit(f"error of {self._working_name}, estimate − observed", unit)

    def gamma(self, statistic: str) -> str:
        """Variogram axis: the statistic of the working variable and its squared unit."""
        name = STATISTIC_NAMES.get(statistic, statistic)
        unit: str | None
        if self.transform != "none":
            unit = "dimensionless"
        else:
            unit = None if self._unit is None else f"({self._unit})²"
        return _with_unit(f"{name} of {self._working_name}", unit)
