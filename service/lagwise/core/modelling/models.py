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
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np
from scipy.optimize import brentq
from scipy.special import gamma as gamma_function
from scipy.special import kv

from ..errors import FieldIssue, InvalidInput

PRACTICAL = 0.95


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
    extra : str or None
        Name of the family's shape parameter (``smoothness``, ``shape``, ``exponent``).
    extra_bounds : tuple of float
        Open/closed bounds of that parameter (low, high) as documented.
    description : str
        Formula in words with its source.
    """

    name: str
    bounded: bool
    max_dimension: int
    extra: str | None
    extra_bounds: tuple[float, float] | None
    description: str


FAMILIES = {
    f.name: f
    for f in [
        Family(
            "spherical",
            True,
            3,
            None,
            None,
            "c (1.5 r - 0.5 r^3) for r = h/a < 1, c beyond (Chilès & Delfiner 2012, eq. 2.47)",
        ),
        Family("exponential", True, 3, None, None, "c (1 - exp(-3 h/a)) (Webster & Oliver 2007, eq. 6.14)"),
        Family("gaussian", True, 3, None, None, "c (1 - exp(-3 (h/a)^2)) (Webster & Oliver 2007, eq. 6.16)"),
        Family(
            "cubic",
            True,
            3,
            None,
            None,
            "c (7 r^2 - 35/4 r^3 + 7/2 r^5 - 3/4 r^7) for r < 1 (Chilès & Delfiner 2012, eq. 2.50)",
        ),
        Family(
            "pentaspherical",
            True,
            3,
            None,
            None,
            "c (15/8 r - 5/4 r^3 + 3/8 r^5) for r < 1 (Webster & Oliver 2007, eq. 6.12)",
        ),
        Family(
            "circular",
            True,
            2,
            None,
            None,
            "c (1 - (2/pi) arccos r + (2 r/pi) sqrt(1 - r^2)) for r < 1; 1-D and 2-D only (Webster & Oliver 2007, eq. 6.10)",
        ),
        Family(
            "matern",
            True,
            3,
            "smoothness",
            (0.05, 20.0),
            "c (1 - 2^(1-nu)/Gamma(nu) u^nu K_nu(u)), u = h/s, s set so that 95 % is reached at a (Stein 1999)",
        ),
        Family(
            "stable",
            True,
            3,
            "shape",
            (0.05, 2.0),
            "c (1 - exp(-3 (h/a)^alpha)), 0 < alpha <= 2 (Chilès & Delfiner 2012, eq. 2.55)",
        ),
        Family(
            "cardinal_sine",
            True,
            3,
            None,
            None,
            "c (1 - sin(u)/u), u = h/s, s set so that 95 % is first reached at a; hole effect (Chilès & Delfiner 2012, eq. 2.58)",
        ),
        Family("linear", False, 3, None, None, "slope * h (no sill)"),
        Family("power", False, 3, "exponent", (0.0, 2.0), "coefficient * h^exponent, 0 < exponent < 2 (no sill)"),
    ]
}
BOUNDED_FAMILIES = tuple(name for name, f in FAMILIES.items() if f.bounded)


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


def unit_semivariance(family: str, h: np.ndarray, a: float, extra: float | None = None) -> np.ndarray:
    """Semivariance of a structure with unit partial sill (or unit slope/coefficient).

    Parameters
    ----------
    family : str
    h : ndarray
        Isotropic (rescaled) distances, >= 0, coordinate units.
    a : float
        Practical range (ignored by ``linear`` and ``power``).
    extra : float, optional
        smoothness (matern), shape (stable) or exponent (power).
    """
    h = np.asarray(h, dtype=np.float64)
    if family == "linear":
        return h.copy()
    if family == "power":
        return h**extra
    r = h / a
    inside = r < 1.0
    rc = np.minimum(r, 1.0)
    if family == "spherical":
        return np.where(inside, 1.5 * rc - 0.5 * rc**3, 1.0)
    if family == "exponential":
        return 1.0 - np.exp(-3.0 * r)
    if family == "gaussian":
        return 1.0 - np.exp(-3.0 * r * r)
    if family == "stable":
        return 1.0 - np.exp(-3.0 * r**extra)
    if family == "cubic":
        return np.where(inside, 7 * rc**2 - 35 / 4 * rc**3 + 7 / 2 * rc**5 - 3 / 4 * rc**7, 1.0)
    if family == "pentaspherical":
        return np.where(inside, 15 / 8 * rc - 5 / 4 * rc**3 + 3 / 8 * rc**5, 1.0)
    if family == "circular":
        return np.where(inside, 1.0 - (2 / math.pi) * np.arccos(rc) + (2 / math.pi) * rc * np.sqrt(1.0 - rc * rc), 1.0)
    if family == "matern":
        return 1.0 - _matern_rho(h * (matern_practical_factor(float(extra)) / a), float(extra))
    if family == "cardinal_sine":
        u = h * (cardinal_sine_factor() / a)
        safe = np.where(u > 1e-12, u, 1.0)
        return np.where(u > 1e-12, 1.0 - np.sin(safe) / safe, 0.0)
    raise ValueError(f"unknown family {family!r}")


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

    def as_dict(self) -> dict:
        out: dict = {"family": self.family}
        if self.family == "linear":
            out["slope"] = self.partial_sill
        elif self.family == "power":
            out.update(coefficient=self.partial_sill, exponent=self.extra)
        else:
            out.update(partial_sill=self.partial_sill, range=self.range)
            if self.family == "matern":
                out["smoothness"] = self.extra
            if self.family == "stable":
                out["shape"] = self.extra
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


def validate_model(model: VariogramModel, dimension: int, pointer: str = "/model") -> None:
    """Check parameters and validity in ``dimension``; raises InvalidInput naming the fields."""
    issues = []
    if not (math.isfinite(model.nugget) and model.nugget >= 0):
        issues.append(FieldIssue(f"{pointer}/nugget", "must be zero or positive"))
    if not model.structures and model.nugget <= 0:
        issues.append(FieldIssue(f"{pointer}/structures", "a model needs a structure or a positive nugget"))
    for k, s in enumerate(model.structures):
        base = f"{pointer}/structures/{k}"
        family = FAMILIES.get(s.family)
        if family is None:
            issues.append(FieldIssue(f"{base}/family", f"unknown family {s.family!r}; valid: {', '.join(FAMILIES)}"))
            continue
        if not (math.isfinite(s.partial_sill) and s.partial_sill >= 0):
            name = {"linear": "slope", "power": "coefficient"}.get(s.family, "partial_sill")
            issues.append(FieldIssue(f"{base}/{name}", "must be zero or positive"))
        if family.bounded and not (math.isfinite(s.range) and s.range > 0):
            issues.append(FieldIssue(f"{base}/range", "must be a positive distance"))
        if family.extra is not None:
            low, high = family.extra_bounds
            value = s.extra
            closed_high = family.name == "stable"
            ok = value is not None and low < value and (value <= high if closed_high else value < high)
            if not ok:
                bracket = "]" if closed_high else ")"
                issues.append(
                    FieldIssue(f"{base}/{family.extra}", f"is required and must lie in ({low:g}, {high:g}{bracket}")
                )
        a = s.anisotropy
        if not (0 < a.ratio <= 1):
            issues.append(FieldIssue(f"{base}/anisotropy/ratio", "must lie in (0, 1]"))
        if not (0 < a.vertical_ratio <= 1e6):
            issues.append(FieldIssue(f"{base}/anisotropy/vertical_ratio", "must be positive"))
        if not (0 <= a.azimuth < 360):
            issues.append(FieldIssue(f"{base}/anisotropy/azimuth", "must lie in [0, 360) degrees"))
        if dimension > family.max_dimension:
            issues.append(
                FieldIssue(
                    f"{base}/family",
                    f"{family.name} is a valid model only up to {family.max_dimension}-D; the samples are {dimension}-D",
                )
            )
    if issues:
        raise InvalidInput(issues)


def family_catalogue() -> list[dict]:
    """Every family with its parameters (units, bounds) and validity, for people and clients."""
    catalogue = []
    for f in FAMILIES.values():
        if f.name == "linear":
            params = [{"name": "slope", "unit": "value units squared per coordinate unit", "minimum": 0.0}]
        elif f.name == "power":
            params = [
                {"name": "coefficient", "unit": "value units squared per coordinate unit^exponent", "minimum": 0.0},
                {"name": "exponent", "unit": "dimensionless", "minimum": 0.0, "maximum": 2.0, "exclusive": True},
            ]
        else:
            params = [
                {"name": "partial_sill", "unit": "value units squared", "minimum": 0.0},
                {"name": "range", "unit": "coordinate units (practical range)", "minimum": 0.0, "exclusive": True},
            ]
            if f.extra is not None:
                low, high = f.extra_bounds
                params.append(
                    {
                        "name": f.extra,
                        "unit": "dimensionless",
                        "minimum": low,
                        "maximum": high,
                        "exclusive": f.name != "stable",
                    }
                )
        catalogue.append(
            {
                "name": f.name,
                "bounded": f.bounded,
                "max_dimension": f.max_dimension,
                "parameters": params,
                "formula": f.description,
            }
        )
    return catalogue
