"""Variogram model families, nested models and geometric anisotropy.

Every bounded structure is ``gamma(h) = c * g(h / a)`` with c the partial sill and
a the *practical range*: the distance at which the structure reaches 95 % of c,
or exactly c for families that reach their sill (spherical, cubic,
pentaspherical, circular). Exponential, gaussian and stable use the conventional
factors (scale a/3, a/sqrt(3), a/3^(1/alpha)), reaching 1 - exp(-3) = 95.02 % at a;
matern and cardinal_sine are scaled so that they first reach exactly 95 % at a.
Unbounded: ``linear`` gamma = slope * h, ``power`` gamma = coefficient * h^exponent
(0 < exponent < 2). A model is a nugget plus a sum of structures.

Formulas: Chilès & Delfiner (2012), *Geostatistics: Modeling Spatial Uncertainty*,
2nd ed., section 2.5; Webster & Oliver (2007), *Geostatistics for Environmental
Scientists*, 2nd ed., chapter 6; Matérn (1986), *Spatial Variation*; Stein (1999)
for the Matérn parameterisation used here:
rho(u) = 2^(1 - nu) / Gamma(nu) * u^nu * K_nu(u).

Geometric anisotropy: ``azimuth`` (degrees clockwise from north) is the direction of
the longest continuity; across it the range is ``ratio`` * range, vertically
``vertical_ratio`` * range. Separations are rescaled to the isotropic distance
sqrt((h.u)^2 + (h.p / ratio)^2 + (h_z / vertical_ratio)^2).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np
from scipy.optimize import brentq
from scipy.special import gamma as gamma_function
from scipy.special import kv

from ..errors import FieldIssue, InvalidInput
from .families import ANISOTROPY, BOUNDED_FAMILIES, FAMILIES, NUGGET, Family, Parameter, family_catalogue

__all__ = [
    "BOUNDED_FAMILIES",
    "FAMILIES",
    "PRACTICAL",
    "UNIT_SHAPES",
    "Anisotropy",
    "Family",
    "Structure",
    "VariogramModel",
    "cardinal_sine_factor",
    "family_catalogue",
    "matern_practical_factor",
    "unit_semivariance",
    "validate_model",
]

PRACTICAL = 0.95


def _matern_rho(u: np.ndarray, nu: float) -> np.ndarray:
    u = np.asarray(u, dtype=np.float64)
    out = np.ones_like(u)
    positive = u > 1e-12
    up = u[positive]
    with np.errstate(over="ignore", invalid="ignore", under="ignore"):
        value = (2.0 ** (1.0 - nu) / gamma_function(nu)) * up**nu * kv(nu, up)
    out[positive] = np.where(np.isfinite(value), value, 0.0)
    return out


@lru_cache(maxsize=256)
def matern_practical_factor(nu: float) -> float:
    """u at which the Matérn correlation first falls to 5 % (range / scale)."""
    return float(brentq(lambda u: _matern_rho(np.array([u]), nu)[0] - (1.0 - PRACTICAL), 1e-6, 200.0, xtol=1e-14))


@lru_cache(maxsize=1)
def cardinal_sine_factor() -> float:
    """u at which 1 - sin(u)/u first reaches 95 % (range / scale)."""
    return float(brentq(lambda u: 1.0 - math.sin(u) / u - PRACTICAL, 0.5, math.pi, xtol=1e-15))


def _ratio(h: np.ndarray, a: float) -> tuple[np.ndarray, np.ndarray]:
    """r = h / a and whether each r lies inside the range."""
    r = h / a
    return r, r < 1.0


def _spherical(h, a, extra):
    r, inside = _ratio(h, a)
    rc = np.minimum(r, 1.0)
    return np.where(inside, 1.5 * rc - 0.5 * rc**3, 1.0)


def _exponential(h, a, extra):
    return 1.0 - np.exp(-3.0 * (h / a))


def _gaussian(h, a, extra):
    r = h / a
    return 1.0 - np.exp(-3.0 * r * r)


def _stable(h, a, extra):
    return 1.0 - np.exp(-3.0 * (h / a) ** extra)


def _cubic(h, a, extra):
    r, inside = _ratio(h, a)
    rc = np.minimum(r, 1.0)
    return np.where(inside, 7 * rc**2 - 35 / 4 * rc**3 + 7 / 2 * rc**5 - 3 / 4 * rc**7, 1.0)


def _pentaspherical(h, a, extra):
    r, inside = _ratio(h, a)
    rc = np.minimum(r, 1.0)
    return np.where(inside, 15 / 8 * rc - 5 / 4 * rc**3 + 3 / 8 * rc**5, 1.0)


def _circular(h, a, extra):
    r, inside = _ratio(h, a)
    rc = np.minimum(r, 1.0)
    return np.where(inside, 1.0 - (2 / math.pi) * np.arccos(rc) + (2 / math.pi) * rc * np.sqrt(1.0 - rc * rc), 1.0)


def _matern(h, a, extra):
    return 1.0 - _matern_rho(h * (matern_practical_factor(float(extra)) / a), float(extra))


def _cardinal_sine(h, a, extra):
    u = h * (cardinal_sine_factor() / a)
    safe = np.where(u > 1e-12, u, 1.0)
    return np.where(u > 1e-12, 1.0 - np.sin(safe) / safe, 0.0)


def _linear(h, a, extra):
    return h.copy()


def _power(h, a, extra):
    return h**extra


# The formula of each family named in :data:`FAMILIES` (same names, same order).
UNIT_SHAPES: dict[str, Callable[[np.ndarray, float, float | None], np.ndarray]] = {
    "spherical": _spherical,
    "exponential": _exponential,
    "gaussian": _gaussian,
    "cubic": _cubic,
    "pentaspherical": _pentaspherical,
    "circular": _circular,
    "matern": _matern,
    "stable": _stable,
    "cardinal_sine": _cardinal_sine,
    "linear": _linear,
    "power": _power,
}


def unit_semivariance(family: str, h: np.ndarray, a: float, extra: float | None = None) -> np.ndarray:
    """Semivariance of a structure with unit partial sill (or unit slope/coefficient).

    Parameters
    ----------
    family : str
        A name of :data:`FAMILIES`.
    h : ndarray
        Isotropic (rescaled) distances, >= 0, coordinate units.
    a : float
        Practical range, coordinate units (ignored by ``linear`` and ``power``).
    extra : float, optional
        The family's shape parameter: smoothness (matern), shape (stable) or exponent (power).
    """
    shape = UNIT_SHAPES.get(family)
    if shape is None:
        raise ValueError(f"unknown family {family!r}")
    # h / a can overflow for extreme inputs; most shapes then reach their limit (exp(-inf) = 0),
    # the others give NaN, which callers treat as undefined (kriging refuses non-finite systems).
    with np.errstate(over="ignore", invalid="ignore"):
        return shape(np.asarray(h, dtype=np.float64), a, extra)


@dataclass(frozen=True)
class Anisotropy:
    """Geometric anisotropy (degrees; ratios in (0, 1])."""

    azimuth: float = 0.0
    ratio: float = 1.0
    vertical_ratio: float = 1.0

    @property
    def isotropic(self) -> bool:
        return self.ratio == 1.0 and self.vertical_ratio == 1.0

    def distances(self, h: np.ndarray) -> np.ndarray:
        """Rescaled isotropic distances of separation vectors h, shape (m, d)."""
        h = np.atleast_2d(np.asarray(h, dtype=np.float64))
        if h.shape[1] == 1:
            return np.abs(h[:, 0])
        az = math.radians(self.azimuth)
        along = h[:, 0] * math.sin(az) + h[:, 1] * math.cos(az)
        across = (h[:, 0] * math.cos(az) - h[:, 1] * math.sin(az)) / self.ratio
        total = along * along + across * across
        if h.shape[1] == 3:
            total = total + (h[:, 2] / self.vertical_ratio) ** 2
        return np.sqrt(total)


@dataclass(frozen=True)
class Structure:
    """One nested structure.

    Attributes
    ----------
    family : str
    partial_sill : float
        Sill contribution c (value units squared); for ``linear`` the slope and for
        ``power`` the coefficient.
    range : float
        Practical range, coordinate units (unused by linear and power).
    extra : float or None
        smoothness (matern), shape (stable), exponent (power).
    anisotropy : Anisotropy
    """

    family: str
    partial_sill: float
    range: float = 1.0
    extra: float | None = None
    anisotropy: Anisotropy = field(default_factory=Anisotropy)

    @property
    def bounded(self) -> bool:
        return FAMILIES[self.family].bounded

    def semivariance(self, h: np.ndarray) -> np.ndarray:
        """gamma at separation vectors (m, d) or, if isotropic, at distances (m,)."""
        distances = self.anisotropy.distances(h) if np.ndim(h) == 2 else np.abs(np.asarray(h, dtype=np.float64))
        return self.partial_sill * unit_semivariance(self.family, distances, self.range, self.extra)

    def slot_value(self, slot: str) -> float | None:
        """The value held in a parameter slot (``sill``, ``range`` or ``shape``)."""
        return {"sill": self.partial_sill, "range": self.range, "shape": self.extra}[slot]

    def as_dict(self) -> dict:
        """The structure with its family's parameter names (see :data:`FAMILIES`)."""
        out: dict = {"family": self.family}
        out.update((p.name, self.slot_value(p.slot)) for p in FAMILIES[self.family].parameters)
        if not self.anisotropy.isotropic or self.anisotropy.azimuth != 0.0:
            out["anisotropy"] = {
                "azimuth": self.anisotropy.azimuth,
                "ratio": self.anisotropy.ratio,
                "vertical_ratio": self.anisotropy.vertical_ratio,
            }
        return out


@dataclass(frozen=True)
class VariogramModel:
    """A nugget plus nested structures.

    Attributes
    ----------
    nugget : float
        Value units squared; micro-scale variation or measurement error.
    structures : tuple of Structure
    """

    nugget: float
    structures: tuple[Structure, ...]

    @property
    def bounded(self) -> bool:
        """Every structure has a sill."""
        return all(s.bounded for s in self.structures)

    @property
    def sill(self) -> float | None:
        """Total sill (nugget + partial sills), None for unbounded models."""
        return self.nugget + sum(s.partial_sill for s in self.structures) if self.bounded else None

    def semivariance(self, h: np.ndarray) -> np.ndarray:
        """gamma(h): 0 at h = 0, nugget + structures beyond (vectors (m, d) or distances (m,))."""
        h = np.asarray(h, dtype=np.float64)
        lengths = np.linalg.norm(h, axis=1) if h.ndim == 2 else np.abs(h)
        total = np.where(lengths > 0, self.nugget, 0.0)
        for s in self.structures:
            total = total + s.semivariance(h)
        return total

    def covariance(self, h: np.ndarray) -> np.ndarray:
        """C(h) = sill - gamma(h); refused for unbounded models."""
        if not self.bounded:
            raise InvalidInput.at(
                "/model", "the model has no sill (linear or power structure): covariances are undefined"
            )
        return self.sill - self.semivariance(h)

    def as_dict(self) -> dict:
        return {"nugget": self.nugget, "structures": [s.as_dict() for s in self.structures]}


def _check(issues: list[FieldIssue], pointer: str, parameter: Parameter, value: float | None) -> None:
    if not parameter.bounds.contains(value):
        rule = parameter.bounds.requirement(parameter.kind)
        issues.append(FieldIssue(pointer, rule if value is not None else f"is required and {rule}"))


def validate_model(model: VariogramModel, dimension: int, pointer: str = "/model") -> None:
    """Check parameters (bounds of :data:`FAMILIES`) and validity in ``dimension``.

    Raises
    ------
    InvalidInput
        Naming each offending field below ``pointer``.
    """
    issues: list[FieldIssue] = []
    _check(issues, f"{pointer}/nugget", NUGGET, model.nugget)
    if not model.structures and model.nugget <= 0:
        issues.append(FieldIssue(f"{pointer}/structures", "a model needs a structure or a positive nugget"))
    for k, s in enumerate(model.structures):
        base = f"{pointer}/structures/{k}"
        family = FAMILIES.get(s.family)
        if family is None:
            issues.append(FieldIssue(f"{base}/family", f"unknown family {s.family!r}; valid: {', '.join(FAMILIES)}"))
            continue
        for parameter in family.parameters:
            _check(issues, f"{base}/{parameter.name}", parameter, s.slot_value(parameter.slot))
        for parameter in ANISOTROPY:
            _check(issues, f"{base}/anisotropy/{parameter.name}", parameter, getattr(s.anisotropy, parameter.name))
        if dimension > family.max_dimension:
            issues.append(
                FieldIssue(
                    f"{base}/family",
                    f"{family.name} is a valid model only up to {family.max_dimension}-D; the samples are {dimension}-D",
                )
            )
    if issues:
        raise InvalidInput(issues)
