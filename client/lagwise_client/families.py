"""The model families the client knows, read from the generated catalogue (``_families.py``).

Each family lists its parameters in the catalogue's order: first the magnitude (``partial_sill``
for bounded families, ``slope`` or ``coefficient`` otherwise), then ``range`` when the family has
one, then at most one shape parameter (``smoothness``, ``shape``, ``exponent``).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from ._families import CATALOGUE

RANGE = "range"


@dataclass(frozen=True)
class Parameter:
    """One parameter of a family.

    Attributes
    ----------
    name : str
    unit : str or None
    minimum, maximum : float or None
        Bounds (None: unbounded on that side).
    exclusive : bool
        The bounds themselves are excluded.
    """

    name: str
    unit: str | None = None
    minimum: float | None = None
    maximum: float | None = None
    exclusive: bool = False

    def admits(self, value: float) -> bool:
        """Whether ``value`` is finite and lies within the bounds."""
        if not math.isfinite(value):
            return False
        if self.minimum is not None and (value <= self.minimum if self.exclusive else value < self.minimum):
            return False
        return not (self.maximum is not None and (value >= self.maximum if self.exclusive else value > self.maximum))

    def bounds_text(self) -> str:
        """The bounds in words, e.g. ``> 0`` or ``in (0, 2)``."""
        low, high = self.minimum, self.maximum
        if low is not None and high is not None:
            left, right = ("(", ")") if self.exclusive else ("[", "]")
            return f"in {left}{low:g}, {high:g}{right}"
        if low is not None:
            return f"{'>' if self.exclusive else '>='} {low:g}"
        if high is not None:
            return f"{'<' if self.exclusive else '<='} {high:g}"
        return "finite"


@dataclass(frozen=True)
class Family:
    """A model family: its parameters, whether it has a sill, where it is valid.

    Attributes
    ----------
    name : str
    bounded : bool
        Has a sill (covariances exist).
    max_dimension : int
        Largest dimension in which it is a valid model.
    parameters : tuple of Parameter
        Magnitude first, then range (bounded families), then the shape parameter if any.
    """

    name: str
    bounded: bool
    max_dimension: int
    parameters: tuple[Parameter, ...]

    @property
    def magnitude(self) -> str:
        """Name of the parameter that scales the structure (partial_sill, slope, coefficient)."""
        return self.parameters[0].name

    @property
    def has_range(self) -> bool:
        return any(p.name == RANGE for p in self.parameters)

    @property
    def shape(self) -> str | None:
        """Name of the shape parameter (smoothness, shape, exponent), None when there is none."""
        rest = [p.name for p in self.parameters[1:] if p.name != RANGE]
        return rest[0] if rest else None

    def parameter(self, name: str) -> Parameter:
        return next(p for p in self.parameters if p.name == name)


def _family(entry: Mapping[str, Any]) -> Family:
    parameters = tuple(
        Parameter(
            name=p["name"],
            unit=p.get("unit"),
            minimum=p.get("minimum"),
            maximum=p.get("maximum"),
            exclusive=bool(p.get("exclusive", False)),
        )
        for p in entry["parameters"]
    )
    return Family(entry["name"], bool(entry["bounded"]), int(entry.get("max_dimension", 3)), parameters)


FAMILIES: dict[str, Family] = {entry["name"]: _family(entry) for entry in CATALOGUE}


def family(name: str) -> Family:
    """The family called ``name``; ValueError naming the known ones otherwise."""
    try:
        return FAMILIES[name]
    except KeyError:
        raise ValueError(f"unknown family {name!r}; the client knows {', '.join(FAMILIES)}") from None
