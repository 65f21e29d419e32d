"""Joint models of several variables: the linear model of coregionalisation.

A joint model of p variables is a nugget matrix N and structures s = 1..S, each a
bounded family g_s (unit sill, practical range, anisotropy; :mod:`.models`) with a
p x p *coregionalisation matrix* B_s of sills:

    gamma_ij(h) = N_ij [h != 0] + sum_s B_s,ij g_s(h)           (semivariances, i = j)
    C_ij(h)     = N_ij [h == 0] + sum_s B_s,ij (1 - g_s(h))      (covariances)

for every pair of variables (i, j); gamma_ij with i != j is the cross-semivariance
(1/2) E[(Z_i(x+h) - Z_i(x)) (Z_j(x+h) - Z_j(x))]. The model is valid (every
cokriging variance is non-negative) when N and every B_s are symmetric positive
semi-definite (Wackernagel 2003, *Multivariate Geostatistics*, 3rd ed., ch. 25;
Journel & Huijbregts 1978, *Mining Geostatistics*, section III.B). Joint models
take the bounded families only: cokriging needs covariances.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import FieldIssue, InvalidInput
from .families import ANISOTROPY, FAMILIES
from .models import Anisotropy, Structure, VariogramModel, unit_semivariance

# A matrix is accepted as positive semi-definite when its smallest eigenvalue is at
# least -PSD_TOLERANCE x its largest absolute eigenvalue (rounding of given decimals).
PSD_TOLERANCE = 1e-10
SYMMETRY_TOLERANCE = 1e-10


@dataclass(frozen=True)
class JointStructure:
    """One shared structure of a joint model.

    Attributes
    ----------
    family : str
        A bounded family of :data:`~lagwise.core.modelling.families.FAMILIES`.
    range : float
        Practical range, coordinate units (shared by every variable).
    sills : ndarray, shape (p, p)
        Coregionalisation matrix: partial sills (diagonal, value units squared) and
        cross partial sills (off-diagonal, product of the two variables' units).
    extra : float or None
        The family's shape parameter (matern smoothness, stable shape).
    anisotropy : Anisotropy
    """

    family: str
    range: float
    sills: np.ndarray
    extra: float | None = None
    anisotropy: Anisotropy = field(default_factory=Anisotropy)

    def unit(self, partial_sill: float = 1.0) -> Structure:
        """The structure of one variable with ``partial_sill``."""
        return Structure(self.family, partial_sill, self.range, self.extra, self.anisotropy)

    def shape(self, h: np.ndarray) -> np.ndarray:
        """g_s at separation vectors (m, d), or at isotropic distances (m,)."""
        distances = self.anisotropy.distances(h) if np.ndim(h) == 2 else np.abs(np.asarray(h, dtype=np.float64))
        return unit_semivariance(self.family, distances, self.range, self.extra)

    def as_dict(self) -> dict:
        out = self.unit().as_dict()
        out.pop(_sill_name(self.family), None)
        out["sills"] = self.sills.tolist()
        return out


def _sill_name(family: str) -> str:
    return FAMILIES[family].sill_parameter.name


@dataclass(frozen=True)
class JointModel:
    """Nugget matrix and shared structures of p named variables.

    Attributes
    ----------
    variables : tuple of str
        Names, in the order of the matrices' rows and columns.
    nugget : ndarray, shape (p, p)
        Nugget matrix (value units squared on the diagonal).
    structures : tuple of JointStructure
    """

    variables: tuple[str, ...]
    nugget: np.ndarray
    structures: tuple[JointStructure, ...]

    @property
    def size(self) -> int:
        return len(self.variables)

    def index(self, name: str) -> int:
        return self.variables.index(name)

    def direct(self, i: int) -> VariogramModel:
        """The variogram model of variable i alone (diagonal entries)."""
        return VariogramModel(float(self.nugget[i, i]), tuple(s.unit(float(s.sills[i, i])) for s in self.structures))

    def shared(self) -> VariogramModel:
        """The structures with unit sills (neighbour searches follow their anisotropy)."""
        return VariogramModel(0.0, tuple(s.unit() for s in self.structures))

    def sill(self) -> np.ndarray:
        """C(0) without the nugget: sum_s B_s (p, p)."""
        total = np.zeros((self.size, self.size))
        for s in self.structures:
            total = total + s.sills
        return total

    def semivariance(self, i: int, j: int, h: np.ndarray) -> np.ndarray:
        """gamma_ij at separation vectors (m, d) or distances (m,): the cross-semivariance when i != j."""
        h = np.asarray(h, dtype=np.float64)
        lengths = np.linalg.norm(h, axis=1) if h.ndim == 2 else np.abs(h)
        total = np.where(lengths > 0, self.nugget[i, j], 0.0)
        for s in self.structures:
            total = total + s.sills[i, j] * s.shape(h)
        return total

    def subset(self, names: tuple[str, ...]) -> JointModel:
        """The joint model of ``names`` only (rows and columns picked, in that order)."""
        pick = [self.index(n) for n in names]
        grid = np.ix_(pick, pick)
        return JointModel(
            tuple(names),
            self.nugget[grid].copy(),
            tuple(
                JointStructure(s.family, s.range, s.sills[grid].copy(), s.extra, s.anisotropy) for s in self.structures
            ),
        )

    def as_dict(self) -> dict:
        return {
            "variables": list(self.variables),
            "nugget": self.nugget.tolist(),
            "structures": [s.as_dict() for s in self.structures],
        }


def smallest_eigenvalue(matrix: np.ndarray) -> float:
    """The smallest eigenvalue of a symmetric matrix (``numpy.linalg.eigvalsh``)."""
    return float(np.linalg.eigvalsh(0.5 * (matrix + matrix.T))[0])


def project_psd(matrix: np.ndarray) -> np.ndarray:
    """The nearest (Frobenius) symmetric positive semi-definite matrix: negative eigenvalues set to 0.

    Higham (1988), Linear Algebra Appl. 103; the step of Goulard & Voltz (1992).
    """
    symmetric = 0.5 * (matrix + matrix.T)
    values, vectors = np.linalg.eigh(symmetric)
    out = (vectors * np.maximum(values, 0.0)) @ vectors.T
    return 0.5 * (out + out.T)


def _matrix_issues(pointer: str, matrix: np.ndarray, p: int, what: str) -> list[FieldIssue]:
    if matrix.shape != (p, p):
        return [FieldIssue(pointer, f"must be a {p} x {p} matrix (one row and column per variable)")]
    if not np.isfinite(matrix).all():
        row, column = (int(v) for v in np.argwhere(~np.isfinite(matrix))[0])
        return [FieldIssue(f"{pointer}/{row}/{column}", "not a finite number")]
    scale = float(np.abs(matrix).max()) or 1.0
    asymmetry = np.abs(matrix - matrix.T)
    if asymmetry.max() > SYMMETRY_TOLERANCE * scale:
        row, column = (int(v) for v in np.unravel_index(int(np.argmax(asymmetry)), matrix.shape))
        return [
            FieldIssue(
                f"{pointer}/{row}/{column}",
                f"the {what} matrix must be symmetric: entry ({row}, {column}) is {matrix[row, column]:.6g} "
                f"but ({column}, {row}) is {matrix[column, row]:.6g}",
            )
        ]
    diagonal = np.diag(matrix)
    if np.any(diagonal < 0):
        i = int(np.argmin(diagonal))
        return [FieldIssue(f"{pointer}/{i}/{i}", f"a sill of the {what} matrix must be zero or positive")]
    lowest = smallest_eigenvalue(matrix)
    largest = float(np.abs(np.linalg.eigvalsh(matrix)).max())
    if lowest < -PSD_TOLERANCE * max(largest, 1e-300):
        return [
            FieldIssue(
                pointer,
                f"the {what} matrix is not positive semi-definite: its smallest eigenvalue is {lowest:.6g} "
                "(a cross sill too large for the two variables' sills: |b_ij| must not exceed sqrt(b_ii b_jj), "
                "and the whole matrix must have no negative eigenvalue)",
            )
        ]
    return []


def validate_joint_model(model: JointModel, dimension: int, pointer: str = "/model") -> None:
    """Check names, matrix shapes, symmetry and positive semi-definiteness, and each structure's parameters.

    Raises
    ------
    InvalidInput
        Naming each offending field below ``pointer``; a matrix that is not positive
        semi-definite names its structure (``/model/structures/1/sills``) and its smallest
        eigenvalue.
    """
    issues: list[FieldIssue] = []
    p = model.size
    if p < 1:
        raise InvalidInput.at(f"{pointer}/variables", "name at least one variable")
    seen: set[str] = set()
    for k, name in enumerate(model.variables):
        if name in seen:
            issues.append(FieldIssue(f"{pointer}/variables/{k}", f"variable {name!r} is named twice"))
        seen.add(name)
    issues += _matrix_issues(f"{pointer}/nugget", np.asarray(model.nugget, dtype=np.float64), p, "nugget")
    if not model.structures and not issues and np.all(np.diag(model.nugget) <= 0):
        issues.append(FieldIssue(f"{pointer}/structures", "a joint model needs a structure or a positive nugget"))
    for k, s in enumerate(model.structures):
        base = f"{pointer}/structures/{k}"
        family = FAMILIES.get(s.family)
        if family is None:
            issues.append(FieldIssue(f"{base}/family", f"unknown family {s.family!r}; valid: {', '.join(FAMILIES)}"))
            continue
        if not family.bounded:
            issues.append(
                FieldIssue(f"{base}/family", f"{family.name} has no sill; a joint model takes bounded families only")
            )
            continue
        if dimension > family.max_dimension:
            issues.append(
                FieldIssue(
                    f"{base}/family",
                    f"{family.name} is a valid model only up to {family.max_dimension}-D; the samples are {dimension}-D",
                )
            )
        for parameter in family.parameters:
            if parameter.slot == "sill":
                continue
            value = s.range if parameter.slot == "range" else s.extra
            if not parameter.bounds.contains(value):
                rule = parameter.bounds.requirement(parameter.kind)
                issues.append(
                    FieldIssue(f"{base}/{parameter.name}", rule if value is not None else f"is required and {rule}")
                )
        for parameter in ANISOTROPY:
            value = getattr(s.anisotropy, parameter.name)
            if not parameter.bounds.contains(value):
                issues.append(
                    FieldIssue(f"{base}/anisotropy/{parameter.name}", parameter.bounds.requirement(parameter.kind))
                )
        issues += _matrix_issues(f"{base}/sills", np.asarray(s.sills, dtype=np.float64), p, f"structure {k} sills")
    if issues:
        raise InvalidInput(issues)


def require_variables(model: JointModel, available: tuple[str, ...], pointer: str = "/model/variables") -> None:
    """Refuse a joint model that names variables the samples lack."""
    missing = [(k, name) for k, name in enumerate(model.variables) if name not in available]
    if missing:
        raise InvalidInput(
            [
                FieldIssue(
                    f"{pointer}/{k}",
                    f"the samples have no variable {name!r} (they have {', '.join(available) or 'none'})",
                )
                for k, name in missing
            ]
        )


def correlation_at_origin(model: JointModel) -> np.ndarray:
    """Correlation matrix of the variables at zero distance: C(0) / sqrt(diag C(0) diag C(0)')."""
    total = model.sill() + model.nugget
    scale = np.sqrt(np.clip(np.diag(total), 0.0, None))
    with np.errstate(invalid="ignore", divide="ignore"):
        out = total / np.outer(scale, scale)
    return np.where(np.isfinite(out), out, 0.0)
