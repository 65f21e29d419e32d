"""Variogram models evaluated locally in pure Python (no numpy), for plotting and checks.

The formulas and the practical-range convention are those of the service
(``GET /v1/model-families``): a bounded structure reaches 95 % of its partial sill
at its range (its whole sill for spherical, cubic, pentaspherical and circular).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Any

from .families import FAMILIES, RANGE, family

PRACTICAL = 0.95


def _bessel_k(nu: float, x: float) -> float:
    """K_nu(x) by the trapezoidal rule on K_nu(x) = int_0^inf exp(-x cosh t) cosh(nu t) dt,
    which converges geometrically for this smooth, doubly exponentially decaying integrand."""
    step = 0.02
    total = 0.5 * math.exp(-x)
    t = step
    while True:
        term = math.exp(-x * math.cosh(t) + nu * t) * 0.5 * (1.0 + math.exp(-2.0 * nu * t))
        total += term
        if term < 1e-18 * total:
            return total * step
        t += step


def _matern_rho(u: float, nu: float) -> float:
    if u < 1e-9:
        return 1.0
    if u > 700.0:
        return 0.0
    return 2.0 ** (1.0 - nu) / math.gamma(nu) * u**nu * _bessel_k(nu, u)


def _bisect(f, low: float, high: float) -> float:
    for _ in range(200):
        mid = 0.5 * (low + high)
        if f(low) * f(mid) <= 0:
            high = mid
        else:
            low = mid
        if high - low < 1e-13 * max(1.0, high):
            break
    return 0.5 * (low + high)


@lru_cache(maxsize=64)
def _matern_factor(nu: float) -> float:
    return _bisect(lambda u: _matern_rho(u, nu) - (1.0 - PRACTICAL), 1e-6, 200.0)


@lru_cache(maxsize=1)
def _sine_factor() -> float:
    return _bisect(lambda u: 1.0 - math.sin(u) / u - PRACTICAL, 0.5, math.pi)


def _unit(name: str, h: float, a: float, extra: float | None) -> float:
    """Semivariance of a structure with unit magnitude at isotropic distance ``h``, range ``a``."""
    shape = family(name).shape  # raises for a family this client does not know, naming the known ones
    if shape and extra is None:
        raise ValueError(f"the {name} family needs its {shape}")
    e = 0.0 if extra is None else float(extra)  # read only by families with a shape parameter
    if name == "linear":
        return h
    if name == "power":
        return h**e
    r = h / a
    if name == "exponential":
        return 1.0 - math.exp(-3.0 * r)
    if name == "gaussian":
        return 1.0 - math.exp(-3.0 * r * r)
    if name == "stable":
        return 1.0 - math.exp(-3.0 * r**e)
    if name == "matern":
        return 1.0 - _matern_rho(h * _matern_factor(e) / a, e)
    if name == "cardinal_sine":
        u = h * _sine_factor() / a
        return 0.0 if u < 1e-12 else 1.0 - math.sin(u) / u
    if r >= 1.0:
        return 1.0
    if name == "spherical":
        return 1.5 * r - 0.5 * r**3
    if name == "cubic":
        return 7 * r**2 - 35 / 4 * r**3 + 7 / 2 * r**5 - 3 / 4 * r**7
    if name == "pentaspherical":
        return 15 / 8 * r - 5 / 4 * r**3 + 3 / 8 * r**5
    if name == "circular":
        return 1.0 - (2 / math.pi) * math.acos(r) + (2 / math.pi) * r * math.sqrt(1.0 - r * r)
    raise ValueError(f"the client has no formula for the {name} family; update lagwise-client")


@dataclass(frozen=True)
class ModelStructure:
    """One structure as the service describes it (see ``GET /v1/model-families``).

    ``partial_sill`` holds the family's magnitude (partial sill, or slope for ``linear``,
    coefficient for ``power``) and ``extra`` its shape parameter (smoothness, shape,
    exponent), whatever the family calls them; :mod:`lagwise_client.families` has the names.
    ``raw`` keeps the structure as the service sent it, so that a family this client does not
    know yet is sent back unchanged.
    """

    family: str
    partial_sill: float = 0.0
    range: float = 1.0
    extra: float | None = None
    azimuth: float = 0.0
    ratio: float = 1.0
    vertical_ratio: float = 1.0
    raw: Mapping[str, Any] = field(default_factory=dict, repr=False, compare=False)

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> ModelStructure:
        name = d.get("family")
        if not isinstance(name, str):
            raise ValueError(f"a structure needs a family name, got {name!r}")
        aniso = d.get("anisotropy") or {}
        geometry = dict(
            azimuth=aniso.get("azimuth", 0.0),
            ratio=aniso.get("ratio", 1.0),
            vertical_ratio=aniso.get("vertical_ratio", 1.0),
        )
        known = FAMILIES.get(name)
        if known is None:
            return cls(name, **geometry, raw=dict(d))
        return cls(
            name,
            d.get(known.magnitude, 0.0),
            d.get(RANGE, 1.0) if known.has_range else 1.0,
            d.get(known.shape) if known.shape else None,
            **geometry,
            raw=dict(d),
        )

    def to_dict(self) -> dict:
        """The structure as the service reads it."""
        known = FAMILIES.get(self.family)
        if known is None:
            if self.raw:
                return dict(self.raw)
            known = family(self.family)  # raises, naming the known families
        entry: dict[str, Any] = {"family": self.family, known.magnitude: self.partial_sill}
        if known.has_range:
            entry[RANGE] = self.range
        if known.shape:
            entry[known.shape] = self.extra
        if (self.azimuth, self.ratio, self.vertical_ratio) != (0.0, 1.0, 1.0):
            entry["anisotropy"] = {"azimuth": self.azimuth, "ratio": self.ratio, "vertical_ratio": self.vertical_ratio}
        return entry

    def check(self, dimension: int | None = None) -> ModelStructure:
        """Raise ValueError naming the first parameter outside its family's bounds; returns self.

        ``dimension`` (1, 2 or 3), when given, is checked against the family's validity.
        """
        known = family(self.family)
        values: dict[str, float | None] = {known.magnitude: self.partial_sill, RANGE: self.range}
        if known.shape:
            values[known.shape] = self.extra
        for parameter in known.parameters:
            value = values[parameter.name]
            if value is None or not parameter.admits(float(value)):
                raise ValueError(f"{self.family}: {parameter.name} = {value!r} must be {parameter.bounds_text()}")
        if dimension is not None and dimension > known.max_dimension:
            raise ValueError(
                f"{self.family} is a valid model up to {known.max_dimension} dimensions only, not {dimension}"
            )
        return self

    @property
    def bounded(self) -> bool:
        return family(self.family).bounded

    def distance(self, h: float | Sequence[float]) -> float:
        """Rescaled isotropic distance of a distance or a separation vector (x, y[, z])."""
        if isinstance(h, int | float):
            return abs(float(h))
        if len(h) == 1:
            return abs(h[0])
        az = math.radians(self.azimuth)
        along = h[0] * math.sin(az) + h[1] * math.cos(az)
        across = (h[0] * math.cos(az) - h[1] * math.sin(az)) / self.ratio
        vertical = h[2] / self.vertical_ratio if len(h) == 3 else 0.0
        return math.sqrt(along * along + across * across + vertical * vertical)

    def semivariance(self, h) -> float:
        return self.partial_sill * _unit(self.family, self.distance(h), self.range, self.extra)


@dataclass(frozen=True)
class VariogramModel:
    """A fitted or given model: nugget plus structures, evaluated without numpy.

    ``h`` is a distance (isotropic use) or a separation vector (x, y[, z]) in the
    samples' coordinate units. ``transform`` is the one the model was fitted in (``none``,
    ``log``, ``normal_score``; None when not known): sent back with the model, kriging then
    runs in that space and back-transforms.
    """

    nugget: float
    structures: tuple[ModelStructure, ...] = field(default_factory=tuple)
    transform: str | None = None

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> VariogramModel:
        """Read a model (unknown members are ignored)."""
        structures = tuple(ModelStructure.from_dict(s) for s in d.get("structures", []))
        return cls(float(d.get("nugget", 0.0)), structures, d.get("transform"))

    def to_dict(self) -> dict:
        """The model as the service reads it (a request's ``model``)."""
        out: dict[str, Any] = {"nugget": self.nugget, "structures": [s.to_dict() for s in self.structures]}
        if self.transform is not None:
            out["transform"] = self.transform
        return out

    def check(self, dimension: int | None = None) -> VariogramModel:
        """Raise ValueError for a negative nugget or a structure parameter out of bounds; returns self."""
        if not (math.isfinite(self.nugget) and self.nugget >= 0):
            raise ValueError(f"nugget = {self.nugget!r} must be >= 0")
        for structure in self.structures:
            structure.check(dimension)
        return self

    @property
    def sill(self) -> float | None:
        """Nugget plus partial sills; None when a structure has no sill."""
        if not all(s.bounded for s in self.structures):
            return None
        return self.nugget + sum(s.partial_sill for s in self.structures)

    def semivariance(self, h) -> float:
        """gamma(h); 0 at zero separation."""
        length = abs(h) if isinstance(h, int | float) else math.sqrt(sum(c * c for c in h))
        if length == 0:
            return 0.0
        return self.nugget + sum(s.semivariance(h) for s in self.structures)

    def covariance(self, h) -> float:
        """C(h) = sill - gamma(h); ValueError for models without a sill."""
        sill = self.sill
        if sill is None:
            raise ValueError("the model has no sill (linear or power structure): covariances are undefined")
        return sill - self.semivariance(h)
