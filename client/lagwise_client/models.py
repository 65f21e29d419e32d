"""Variogram models evaluated locally in pure Python (no numpy), for plotting and checks.

The formulas and the practical-range convention are those of the service
(``GET /v1/model-families``): a bounded structure reaches 95 % of its partial sill
at its range (its whole sill for spherical, cubic, pentaspherical and circular).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from functools import lru_cache

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


def _unit(family: str, h: float, a: float, extra: float | None) -> float:
    if family == "linear":
        return h
    if family == "power":
        return h**extra
    r = h / a
    if family == "exponential":
        return 1.0 - math.exp(-3.0 * r)
    if family == "gaussian":
        return 1.0 - math.exp(-3.0 * r * r)
    if family == "stable":
        return 1.0 - math.exp(-3.0 * r**extra)
    if family == "matern":
        return 1.0 - _matern_rho(h * _matern_factor(extra) / a, extra)
    if family == "cardinal_sine":
        u = h * _sine_factor() / a
        return 0.0 if u < 1e-12 else 1.0 - math.sin(u) / u
    if r >= 1.0:
        return 1.0
    if family == "spherical":
        return 1.5 * r - 0.5 * r**3
    if family == "cubic":
        return 7 * r**2 - 35 / 4 * r**3 + 7 / 2 * r**5 - 3 / 4 * r**7
    if family == "pentaspherical":
        return 15 / 8 * r - 5 / 4 * r**3 + 3 / 8 * r**5
    if family == "circular":
        return 1.0 - (2 / math.pi) * math.acos(r) + (2 / math.pi) * r * math.sqrt(1.0 - r * r)
    raise ValueError(f"unknown family {family!r}")


@dataclass(frozen=True)
class ModelStructure:
    """One structure as the service describes it (see ``GET /v1/model-families``)."""

    family: str
    partial_sill: float = 0.0
    range: float = 1.0
    extra: float | None = None
    azimuth: float = 0.0
    ratio: float = 1.0
    vertical_ratio: float = 1.0

    @classmethod
    def from_dict(cls, d: dict) -> ModelStructure:
        aniso = d.get("anisotropy") or {}
        sill = d.get("partial_sill", d.get("slope", d.get("coefficient", 0.0)))
        extra = d.get("smoothness", d.get("shape", d.get("exponent")))
        return cls(
            d["family"],
            sill,
            d.get("range", 1.0),
            extra,
            aniso.get("azimuth", 0.0),
            aniso.get("ratio", 1.0),
            aniso.get("vertical_ratio", 1.0),
        )

    @property
    def bounded(self) -> bool:
        return self.family not in ("linear", "power")

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
    samples' coordinate units.
    """

    nugget: float
    structures: tuple[ModelStructure, ...] = field(default_factory=tuple)

    @classmethod
    def from_dict(cls, d: dict) -> VariogramModel:
        return cls(float(d.get("nugget", 0.0)), tuple(ModelStructure.from_dict(s) for s in d.get("structures", [])))

    def to_dict(self) -> dict:
        out = []
        for s in self.structures:
            entry: dict = {"family": s.family}
            if s.family == "linear":
                entry["slope"] = s.partial_sill
            elif s.family == "power":
                entry.update(coefficient=s.partial_sill, exponent=s.extra)
            else:
                entry.update(partial_sill=s.partial_sill, range=s.range)
                if s.family == "matern":
                    entry["smoothness"] = s.extra
                if s.family == "stable":
                    entry["shape"] = s.extra
            if (s.azimuth, s.ratio, s.vertical_ratio) != (0.0, 1.0, 1.0):
                entry["anisotropy"] = {"azimuth": s.azimuth, "ratio": s.ratio, "vertical_ratio": s.vertical_ratio}
            out.append(entry)
        return {"nugget": self.nugget, "structures": out}

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
