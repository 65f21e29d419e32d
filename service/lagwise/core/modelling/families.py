"""The one table of variogram model families and of the model-wide parameters.

Each family lists its parameters with their unit kind, documented bounds (what a
caller may give; validation reads them), fit bounds and starting values (what the
least-squares fit searches; :class:`~lagwise.core.modelling.fitting` reads them),
whether it has a sill, the largest dimension in which it is a valid model, and its
formula with the source. Models, fitting, the HTTP layer (request and response
fields, ``GET /v1/model-families``) and the client's generated data module all read
this table; nothing else spells out a family's parameters.

Fit bounds and starts depend on the experimental classes, so they are written as a
factor times a named *fit scale* (:data:`FIT_SCALES`), e.g. ``5 x longest_distance``
for the upper bound of a range. A scale is a ratio (numerator, denominator) that the
fit computes from its classes, and the value is ``factor * numerator / denominator``.

Parameter *slots* say which field of a structure holds the value: ``sill`` (partial
sill, or the slope of ``linear`` and the coefficient of ``power``), ``range``
(practical range) and ``shape`` (smoothness, shape or exponent).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

UNIT_KINDS = {
    "value_squared": "value units squared",
    "value_squared_per_distance": "value units squared per coordinate unit",
    "value_squared_per_distance_power": "value units squared per coordinate unit^exponent",
    "distance": "coordinate units",
    "dimensionless": "dimensionless",
    "degrees": "degrees",
}
SLOTS = ("sill", "range", "shape")
FIT_SCALES = {
    "one": "the number 1",
    "largest_semivariance": "largest experimental semivariance used in the fit",
    "largest_semivariance_per_shortest_distance": "largest semivariance / shortest class distance",
    "largest_semivariance_per_longest_distance": "largest semivariance / longest class distance",
    "shortest_distance": "shortest class distance used in the fit",
    "longest_distance": "longest class distance used in the fit",
    "structural_sill": "starting sill less starting nugget, shared among the structures (0.4, 0.6 when nested)",
    "range_guess": (
        "a starting range: where the classes first reach 95 % of their plateau, a third and two thirds of the "
        "longest distance in turn (a third and 1.5 times the first for nested structures)"
    ),
    "nugget_guess": "the first two classes' line extrapolated to zero distance, within [0, 0.9 x first value]",
    "class_azimuth": "each azimuth of the direction classes in turn",
}


@dataclass(frozen=True)
class Interval:
    """Documented bounds of a parameter (None: unbounded on that side)."""

    minimum: float | None = None
    maximum: float | None = None
    minimum_exclusive: bool = False
    maximum_exclusive: bool = False

    def contains(self, value: float | None) -> bool:
        """Whether ``value`` is a finite number within the bounds."""
        if value is None or not math.isfinite(value):
            return False
        if self.minimum is not None and (value <= self.minimum if self.minimum_exclusive else value < self.minimum):
            return False
        return self.maximum is None or (value < self.maximum if self.maximum_exclusive else value <= self.maximum)

    def requirement(self, kind: str) -> str:
        """The rule in words, e.g. ``must lie in (0, 1]`` or ``must be a positive distance``."""
        if self.maximum is None and self.minimum == 0.0:
            if not self.minimum_exclusive:
                return "must be zero or positive"
            return "must be a positive distance" if kind == "distance" else "must be positive"
        low = "-inf" if self.minimum is None else f"{self.minimum:g}"
        high = "inf" if self.maximum is None else f"{self.maximum:g}"
        opening = "(" if self.minimum_exclusive or self.minimum is None else "["
        closing = ")" if self.maximum_exclusive or self.maximum is None else "]"
        unit = " degrees" if kind == "degrees" else ""
        return f"must lie in {opening}{low}, {high}{closing}{unit}"


@dataclass(frozen=True)
class Scaled:
    """A fit bound or start: ``factor`` times the fit scale ``scale`` (see :data:`FIT_SCALES`)."""

    factor: float
    scale: str

    def value(self, scales: Mapping[str, tuple[float, float]]) -> float:
        """``factor * numerator / denominator`` of the scale's (numerator, denominator)."""
        numerator, denominator = scales[self.scale]
        return self.factor * numerator / denominator

    def as_dict(self) -> dict:
        return {"factor": self.factor, "scale": self.scale}


@dataclass(frozen=True)
class Parameter:
    """One parameter.

    Attributes
    ----------
    name : str
        Field name in requests and responses.
    slot : str
        Field of the structure that holds it (:data:`SLOTS`); ``""`` for model-wide parameters.
    kind : str
        Unit kind, a key of :data:`UNIT_KINDS`.
    unit : str
        Unit in words.
    bounds : Interval
        Documented bounds, enforced on every given model.
    fit_low, fit_high, start : Scaled or None
        Bounds and starting value searched by the fit (None: not fitted).
    """

    name: str
    slot: str
    kind: str
    unit: str
    bounds: Interval
    fit_low: Scaled | None = None
    fit_high: Scaled | None = None
    start: Scaled | None = None

    def catalogue_entry(self) -> dict:
        """The parameter as listed by ``GET /v1/model-families``."""
        b = self.bounds
        entry: dict = {"name": self.name, "unit": self.unit, "kind": self.kind, "slot": self.slot}
        if b.minimum is not None:
            entry["minimum"] = b.minimum
        if b.maximum is not None:
            entry["maximum"] = b.maximum
        # "exclusive" predates the two precise flags: true when every given end is open.
        entry["exclusive"] = b.minimum_exclusive and (b.maximum is None or b.maximum_exclusive)
        entry["minimum_exclusive"] = b.minimum_exclusive
        entry["maximum_exclusive"] = b.maximum_exclusive
        if self.fit_low is not None and self.fit_high is not None and self.start is not None:
            entry["fit"] = {
                "low": self.fit_low.as_dict(),
                "high": self.fit_high.as_dict(),
                "start": self.start.as_dict(),
            }
        return entry


@dataclass(frozen=True)
class Family:
    """A model family.

    Attributes
    ----------
    name : str
    bounded : bool
        Has a sill (usable for covariances and simple kriging).
    max_dimension : int
        Largest dimension in which it is a valid (conditionally negative definite) model.
    parameters : tuple of Parameter
        In fitting order: the sill slot first, then range, then shape.
    formula : str
        Unit semivariance in words.
    source : str
        Where the formula is published.
    """

    name: str
    bounded: bool
    max_dimension: int
    parameters: tuple[Parameter, ...]
    formula: str
    source: str

    @property
    def description(self) -> str:
        """Formula with its source."""
        return f"{self.formula} ({self.source})"

    def parameter(self, slot: str) -> Parameter | None:
        """The parameter held in ``slot``, or None when the family has none there."""
        return next((p for p in self.parameters if p.slot == slot), None)

    @property
    def sill_parameter(self) -> Parameter:
        """The parameter in the sill slot (partial_sill, slope or coefficient)."""
        found = self.parameter("sill")
        assert found is not None, f"{self.name} has no sill-slot parameter"
        return found

    @property
    def shape_parameter(self) -> Parameter | None:
        """The shape parameter (smoothness, shape, exponent), if any."""
        return self.parameter("shape")

    def catalogue_entry(self) -> dict:
        """The family as listed by ``GET /v1/model-families``."""
        return {
            "name": self.name,
            "bounded": self.bounded,
            "max_dimension": self.max_dimension,
            "parameters": [p.catalogue_entry() for p in self.parameters],
            "formula": self.description,
            "source": self.source,
        }


PARTIAL_SILL = Parameter(
    "partial_sill",
    "sill",
    "value_squared",
    UNIT_KINDS["value_squared"],
    Interval(0.0),
    Scaled(0.0, "one"),
    Scaled(3.0, "largest_semivariance"),
    Scaled(1.0, "structural_sill"),
)
RANGE = Parameter(
    "range",
    "range",
    "distance",
    "coordinate units (practical range)",
    Interval(0.0, minimum_exclusive=True),
    Scaled(1e-3, "shortest_distance"),
    Scaled(5.0, "longest_distance"),
    Scaled(1.0, "range_guess"),
)
SLOPE = Parameter(
    "slope",
    "sill",
    "value_squared_per_distance",
    UNIT_KINDS["value_squared_per_distance"],
    Interval(0.0),
    Scaled(0.0, "one"),
    Scaled(10.0, "largest_semivariance_per_shortest_distance"),
    Scaled(1.0, "largest_semivariance_per_longest_distance"),
)
COEFFICIENT = Parameter(
    "coefficient",
    "sill",
    "value_squared_per_distance_power",
    UNIT_KINDS["value_squared_per_distance_power"],
    Interval(0.0),
    Scaled(0.0, "one"),
    Scaled(10.0, "largest_semivariance"),
    Scaled(1.0, "largest_semivariance_per_longest_distance"),
)
SMOOTHNESS = Parameter(
    "smoothness",
    "shape",
    "dimensionless",
    UNIT_KINDS["dimensionless"],
    Interval(0.05, 20.0, minimum_exclusive=True, maximum_exclusive=True),
    Scaled(0.1, "one"),
    Scaled(10.0, "one"),
    Scaled(1.0, "one"),
)
SHAPE = Parameter(
    "shape",
    "shape",
    "dimensionless",
    UNIT_KINDS["dimensionless"],
    Interval(0.05, 2.0, minimum_exclusive=True),
    Scaled(0.1, "one"),
    Scaled(2.0, "one"),
    Scaled(1.0, "one"),
)
EXPONENT = Parameter(
    "exponent",
    "shape",
    "dimensionless",
    UNIT_KINDS["dimensionless"],
    Interval(0.0, 2.0, minimum_exclusive=True, maximum_exclusive=True),
    Scaled(0.01, "one"),
    Scaled(1.99, "one"),
    Scaled(1.0, "one"),
)

_SILL_RANGE = (PARTIAL_SILL, RANGE)

FAMILIES: dict[str, Family] = {
    f.name: f
    for f in [
        Family(
            "spherical",
            True,
            3,
            _SILL_RANGE,
            "c (1.5 r - 0.5 r^3) for r = h/a < 1, c beyond",
            "Chilès & Delfiner 2012, eq. 2.47",
        ),
        Family("exponential", True, 3, _SILL_RANGE, "c (1 - exp(-3 h/a))", "Webster & Oliver 2007, eq. 6.14"),
        Family("gaussian", True, 3, _SILL_RANGE, "c (1 - exp(-3 (h/a)^2))", "Webster & Oliver 2007, eq. 6.16"),
        Family(
            "cubic",
            True,
            3,
            _SILL_RANGE,
            "c (7 r^2 - 35/4 r^3 + 7/2 r^5 - 3/4 r^7) for r < 1",
            "Chilès & Delfiner 2012, eq. 2.50",
        ),
        Family(
            "pentaspherical",
            True,
            3,
            _SILL_RANGE,
            "c (15/8 r - 5/4 r^3 + 3/8 r^5) for r < 1",
            "Webster & Oliver 2007, eq. 6.12",
        ),
        Family(
            "circular",
            True,
            2,
            _SILL_RANGE,
            "c (1 - (2/pi) arccos r + (2 r/pi) sqrt(1 - r^2)) for r < 1; 1-D and 2-D only",
            "Webster & Oliver 2007, eq. 6.10",
        ),
        Family(
            "matern",
            True,
            3,
            (*_SILL_RANGE, SMOOTHNESS),
            "c (1 - 2^(1-nu)/Gamma(nu) u^nu K_nu(u)), u = h/s, s set so that 95 % is reached at a",
            "Stein 1999",
        ),
        Family(
            "stable",
            True,
            3,
            (*_SILL_RANGE, SHAPE),
            "c (1 - exp(-3 (h/a)^alpha)), 0 < alpha <= 2",
            "Chilès & Delfiner 2012, eq. 2.55",
        ),
        Family(
            "cardinal_sine",
            True,
            3,
            _SILL_RANGE,
            "c (1 - sin(u)/u), u = h/s, s set so that 95 % is first reached at a; hole effect",
            "Chilès & Delfiner 2012, eq. 2.58",
        ),
        Family("linear", False, 3, (SLOPE,), "slope * h, no sill", "Chilès & Delfiner 2012, section 2.5"),
        Family(
            "power",
            False,
            3,
            (COEFFICIENT, EXPONENT),
            "coefficient * h^exponent, 0 < exponent < 2, no sill",
            "Chilès & Delfiner 2012, section 2.5",
        ),
    ]
}
BOUNDED_FAMILIES = tuple(name for name, f in FAMILIES.items() if f.bounded)

NUGGET = Parameter(
    "nugget",
    "",
    "value_squared",
    UNIT_KINDS["value_squared"],
    Interval(0.0),
    Scaled(0.0, "one"),
    Scaled(1.5, "largest_semivariance"),
    Scaled(1.0, "nugget_guess"),
)
# Ratios far below any real anisotropy would stretch separations past the float range.
MIN_RATIO = 1e-6
# A fitted anisotropy searches azimuths modulo 180 degrees (an axis, not a heading).
AZIMUTH = Parameter(
    "azimuth",
    "",
    "degrees",
    "degrees clockwise from north",
    Interval(0.0, 360.0, maximum_exclusive=True),
    Scaled(0.0, "one"),
    Scaled(180.0, "one"),
    Scaled(1.0, "class_azimuth"),
)
RATIO = Parameter(
    "ratio",
    "",
    "dimensionless",
    UNIT_KINDS["dimensionless"],
    Interval(MIN_RATIO, 1.0),
    Scaled(0.05, "one"),
    Scaled(1.0, "one"),
    Scaled(0.6, "one"),
)
VERTICAL_RATIO = Parameter("vertical_ratio", "", "dimensionless", UNIT_KINDS["dimensionless"], Interval(MIN_RATIO, 1e6))
ANISOTROPY = (AZIMUTH, RATIO, VERTICAL_RATIO)


def structure_parameters() -> dict[str, Parameter]:
    """Every structure parameter name once, with its definition.

    A name means the same thing (unit kind and bounds) in every family that has it;
    request and response fields are built from this list.
    """
    out: dict[str, Parameter] = {}
    for family in FAMILIES.values():
        for p in family.parameters:
            if out.setdefault(p.name, p) != p:
                raise ValueError(f"parameter {p.name!r} is defined twice with different bounds or units")
    return out


def family_catalogue() -> list[dict]:
    """Every family with its parameters (units, bounds, fit bounds and starts) and validity."""
    return [f.catalogue_entry() for f in FAMILIES.values()]


def model_parameter_catalogue() -> list[dict]:
    """The model-wide parameters (nugget, anisotropy), listed like a family's."""
    return [p.catalogue_entry() for p in (NUGGET, *ANISOTROPY)]
