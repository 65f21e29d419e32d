"""Fitting a linear model of coregionalisation to direct and cross experimental variograms.

With the structures' families, ranges and anisotropy fixed, the coregionalisation
matrices are fitted by the iterative algorithm of Goulard & Voltz (1992), Math.
Geology 24(3): for each structure s in turn (the nugget is a structure with
g = 1 beyond the origin), every entry (i, j) gets the weighted least-squares sill
of the residual left by the other structures,

    b_s,ij = sum_k w_ij,k g_s(h_ij,k) r_ij,k / sum_k w_ij,k g_s(h_ij,k)^2,
    r_ij,k = gamma_hat_ij(h_ij,k) - sum_{u != s} b_u,ij g_u(h_ij,k),

and the matrix is then replaced by its nearest positive semi-definite matrix (its
negative eigenvalues set to zero), so every matrix is PSD by construction. Sweeps
repeat until the weighted sum of squares S = sum_ij sum_k w_ij,k (gamma_hat - gamma)^2
settles. Each direct and cross variogram keeps its own class distances and pair
counts (heterotopic data: a cross pair's classes count only pairs where both
variables are measured), so the entry-wise update uses each entry's own weights;
with equal weights across entries this is exactly the published algorithm.

Families and ranges: each variable's direct variogram is fitted first
(:func:`~lagwise.core.modelling.fitting.fit_model`); the structures of each
variable's selected model give one candidate set of shared structures, whose
ranges are then refined by a bounded one-dimensional search per range on a
logarithmic scale (the matrices re-fitted at every trial). Candidates are ranked by
AICc as for one variable (Hurvich & Tsai 1989), with p(p + 1)/2 parameters per
matrix plus one per range; exactly one is selected.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np
from scipy.optimize import minimize_scalar

from ..deadline import check_deadline
from ..errors import FieldIssue, InvalidInput
from .coregionalisation import JointModel, JointStructure, project_psd
from .fitting import AUTO_RANGE_REACH, EQUIVALENT, ExperimentalPoints, FitResult, fit_model, points_from_rows
from .models import FAMILIES, Anisotropy

JOINT_WEIGHTINGS = ("pairs", "pairs_over_distance", "uniform")
MAX_SWEEPS = 500
SWEEP_TOLERANCE = 1e-9
RANGE_SEARCH_FACTOR = 3.0
RANGE_SEARCH_ROUNDS = 2
# A cross pair with fewer usable classes than this leaves its cross sills poorly determined.
MIN_CROSS_CLASSES = 3


@dataclass(frozen=True)
class JointExperimental:
    """Direct and cross experimental variograms of p variables.

    Attributes
    ----------
    variables : tuple of str
    points : dict
        (i, j) with i <= j -> :class:`~lagwise.core.modelling.fitting.ExperimentalPoints`;
        (i, i) holds variable i's semivariances, (i, j) the cross-semivariances.
    dimension : int
        Dimension of the samples.
    variances : tuple of float or None
        Each variable's sample variance (the starting sill of its direct fit).
    """

    variables: tuple[str, ...]
    points: dict[tuple[int, int], ExperimentalPoints]
    dimension: int
    variances: tuple[float | None, ...] = field(default=())

    @property
    def size(self) -> int:
        return len(self.variables)


@dataclass(frozen=True)
class JointCandidate:
    """One fitted joint model.

    Attributes
    ----------
    model : JointModel
    label : str
        Plain description, e.g. ``nugget + spherical (structures of lead)``.
    parameters : int
        Fitted parameters: p(p+1)/2 per matrix and one per range.
    weighted_sse : float
        S over every direct and cross class used (weights normalised to mean 1).
    criterion : float
        AICc (lower is better).
    r_squared : float or None
        1 - S / T, T the weighted spread of every entry's classes about that entry's weighted mean.
    sweeps : int
        Goulard-Voltz sweeps of the final fit.
    converged : bool
        The sweeps settled before :data:`MAX_SWEEPS`.
    """

    model: JointModel
    label: str
    parameters: int
    weighted_sse: float
    criterion: float
    sweeps: int
    converged: bool
    r_squared: float | None = None


@dataclass(frozen=True)
class JointFitResult:
    """Ranked joint candidates, the selected one, and the direct fits they came from."""

    best: JointCandidate
    candidates: tuple[JointCandidate, ...]
    experimental: JointExperimental
    direct_fits: tuple[FitResult, ...]
    weighting: str
    warnings: tuple[str, ...] = field(default=())
    fitted: dict[tuple[int, int], np.ndarray] = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        # The selected model's gamma_ij at every class of each entry (i, j), i <= j, of the experimental points.
        fitted = {
            key: self.best.model.semivariance(key[0], key[1], _vectors(points))
            for key, points in self.experimental.points.items()
        }
        object.__setattr__(self, "fitted", fitted)


def _vectors(points: ExperimentalPoints) -> np.ndarray:
    az = np.radians(points.azimuth)
    return np.column_stack([points.distance * np.sin(az), points.distance * np.cos(az)])


@dataclass(frozen=True)
class _Entry:
    i: int
    j: int
    vectors: np.ndarray
    gamma: np.ndarray
    weights: np.ndarray


@dataclass(frozen=True)
class _Shape:
    """A shared structure without its sills (family, range, shape parameter, anisotropy)."""

    family: str
    range: float
    extra: float | None
    anisotropy: Anisotropy

    def values(self, vectors: np.ndarray) -> np.ndarray:
        return JointStructure(self.family, self.range, np.zeros((1, 1)), self.extra, self.anisotropy).shape(vectors)


def _entries(experimental: JointExperimental, weighting: str) -> list[_Entry]:
    raw = []
    for (i, j), points in sorted(experimental.points.items()):
        use = points.usable
        if not use.any():
            continue
        h = points.distance[use]
        pairs = points.pairs[use].astype(float)
        if weighting == "uniform":
            w = np.ones_like(h)
        elif weighting == "pairs_over_distance":
            w = pairs / h**2
        else:
            w = pairs
        az = np.radians(points.azimuth[use])
        raw.append((i, j, np.column_stack([h * np.sin(az), h * np.cos(az)]), points.value[use], w))
    mean = float(np.mean(np.concatenate([w for *_, w in raw]))) if raw else 1.0
    return [_Entry(i, j, v, g, w / mean) for i, j, v, g, w in raw]


def goulard_voltz(
    entries: list[_Entry], shapes: list[_Shape], p: int, with_nugget: bool
) -> tuple[np.ndarray | None, list[np.ndarray], float, int, bool]:
    """Coregionalisation matrices for fixed structures (Goulard & Voltz 1992).

    Returns (nugget matrix or None, one matrix per shape, weighted SSE, sweeps, converged).
    """
    basis = [[np.ones(len(e.gamma)) for e in entries]] if with_nugget else []
    basis += [[shape.values(e.vectors) for e in entries] for shape in shapes]
    q = len(basis)
    matrices = _unconstrained(entries, basis, p)
    sse = _sse(entries, basis, matrices)
    converged = False
    sweeps = 0
    while sweeps < MAX_SWEEPS:
        sweeps += 1
        trial = list(matrices)
        for s in range(q):
            update = np.zeros((p, p))
            for e_index, e in enumerate(entries):
                g = basis[s][e_index]
                residual = e.gamma - sum(trial[u][e.i, e.j] * basis[u][e_index] for u in range(q) if u != s)
                denominator = float(np.sum(e.weights * g * g))
                value = float(np.sum(e.weights * g * residual)) / denominator if denominator > 0 else 0.0
                update[e.i, e.j] = update[e.j, e.i] = value
            trial[s] = project_psd(update)
        trial_sse = _sse(entries, basis, trial)
        if trial_sse >= sse - SWEEP_TOLERANCE * max(sse, 1e-300):
            # No further gain: the sweep settled (a sweep that would add error is not kept).
            if trial_sse < sse:
                matrices, sse = trial, trial_sse
            converged = True
            break
        matrices, sse = trial, trial_sse
    nugget = matrices[0] if with_nugget else None
    return nugget, matrices[1:] if with_nugget else matrices, sse, sweeps, converged


def _unconstrained(entries: list[_Entry], basis: list[list[np.ndarray]], p: int) -> list[np.ndarray]:
    """The start: each entry's sills by weighted least squares on all structures at once, each
    matrix then projected onto the PSD cone (the optimum itself when no projection is needed)."""
    q = len(basis)
    matrices = [np.zeros((p, p)) for _ in range(q)]
    for e_index, e in enumerate(entries):
        root = np.sqrt(e.weights)
        design = np.column_stack([b[e_index] for b in basis]) * root[:, None]
        coefficients = np.linalg.lstsq(design, e.gamma * root, rcond=None)[0]
        for s in range(q):
            matrices[s][e.i, e.j] = matrices[s][e.j, e.i] = coefficients[s]
    return [project_psd(m) for m in matrices]


def _sse(entries: list[_Entry], basis: list[list[np.ndarray]], matrices: list[np.ndarray]) -> float:
    total = 0.0
    for e_index, e in enumerate(entries):
        fitted = sum(m[e.i, e.j] * b[e_index] for m, b in zip(matrices, basis, strict=True))
        total += float(np.sum(e.weights * (e.gamma - fitted) ** 2))
    return total


def _criterion(sse: float, n: int, k: int) -> float:
    """AICc of a weighted least-squares fit (Hurvich & Tsai 1989)."""
    value = n * math.log(max(sse / n, 1e-300)) + 2 * k
    if n - k - 1 > 0:
        value += 2 * k * (k + 1) / (n - k - 1)
    return value


def _refine_ranges(
    entries: list[_Entry], shapes: list[_Shape], p: int, with_nugget: bool, low: float, high: float
) -> list[_Shape]:
    """Bounded search of each range on a log scale, the matrices re-fitted at each trial."""
    shapes = list(shapes)
    for _ in range(RANGE_SEARCH_ROUNDS):
        for s, shape in enumerate(shapes):
            check_deadline()
            lo = math.log(max(low, shape.range / RANGE_SEARCH_FACTOR))
            hi = math.log(min(high, shape.range * RANGE_SEARCH_FACTOR))
            if hi <= lo:
                continue

            def objective(log_range: float, s: int = s) -> float:
                trial = shapes[:s] + [replace(shapes[s], range=math.exp(log_range))] + shapes[s + 1 :]
                return goulard_voltz(entries, trial, p, with_nugget)[2]

            best = minimize_scalar(objective, bounds=(lo, hi), method="bounded", options={"xatol": 1e-3})
            if best.fun < objective(math.log(shape.range)):
                shapes[s] = replace(shape, range=math.exp(float(best.x)))
    return shapes


def _label(shapes: list[_Shape], with_nugget: bool, source: str) -> str:
    parts = (["nugget"] if with_nugget else []) + [s.family for s in shapes]
    return " + ".join(parts) + f" (structures of {source})"


def validate_joint_fit_options(families, nugget, weighting, anisotropy, structures, dimension) -> None:
    """Check the options of a joint fit; raises InvalidInput naming ``/<field>``."""
    issues = []
    if weighting not in JOINT_WEIGHTINGS:
        issues.append(FieldIssue("/weighting", f"a joint fit takes one of {', '.join(JOINT_WEIGHTINGS)}"))
    if not (isinstance(nugget, str) and nugget in ("fit", "none")):
        issues.append(FieldIssue("/nugget", 'a joint fit takes "fit" or "none" (the nugget is a matrix)'))
    if families != "auto":
        for k, name in enumerate(families or []):
            if name in FAMILIES and not FAMILIES[name].bounded:
                issues.append(FieldIssue(f"/families/{k}", f"{name} has no sill; a joint model takes bounded families"))
    if issues:
        raise InvalidInput(issues)


def fit_joint_model(
    experimental: JointExperimental,
    *,
    families: str | list[str] = "auto",
    nugget: str = "fit",
    weighting: str = "pairs",
    anisotropy: str = "none",
    structures: int = 1,
    min_pairs: int = 30,
) -> JointFitResult:
    """Fit and rank linear models of coregionalisation.

    Parameters
    ----------
    experimental : JointExperimental
        Direct variograms of every variable and cross variograms of the pairs (pairs
        without a cross variogram get zero cross sills).
    families, anisotropy, structures
        As for one variable (:func:`~lagwise.core.modelling.fitting.fit_model`); they shape
        the direct fits from which the shared structures are taken.
    nugget : "fit" or "none"
        Whether the joint model has a nugget matrix.
    weighting : str
        One of :data:`JOINT_WEIGHTINGS`.
    min_pairs : int
        The classes' pair floor (cross pairs below it are reported).

    Raises
    ------
    InvalidInput
        Bad options, or a variable whose direct variogram cannot be fitted.
    """
    p = experimental.size
    validate_joint_fit_options(families, nugget, weighting, anisotropy, structures, experimental.dimension)
    notes: list[str] = []
    direct: list[FitResult] = []
    for i, name in enumerate(experimental.variables):
        variance = experimental.variances[i] if i < len(experimental.variances) else None
        try:
            fit = fit_model(
                experimental.points[(i, i)],
                dimension=experimental.dimension,
                families=families,
                nugget=nugget,
                weighting=weighting,
                anisotropy=anisotropy,
                structures=structures,
                sample_variance=variance,
            )
        except InvalidInput as exc:
            raise InvalidInput.at(f"/variables/{i}", f"variable {name!r}: {exc.summary}") from None
        direct.append(fit)
    for i in range(p):
        for j in range(i + 1, p):
            points = experimental.points.get((i, j))
            usable = 0 if points is None else int(points.usable.sum())
            if usable < MIN_CROSS_CLASSES:
                a, b = experimental.variables[i], experimental.variables[j]
                notes.append(
                    f"the cross pair ({a}, {b}) has {usable} classes with at least {min_pairs} pairs where both are "
                    f"measured: its cross sills are poorly determined" + (" and set to zero" if usable == 0 else "")
                )
    entries = _entries(experimental, weighting)
    n = sum(len(e.gamma) for e in entries)
    spread = sum(float(np.sum(e.weights * (e.gamma - np.average(e.gamma, weights=e.weights)) ** 2)) for e in entries)
    distances = np.concatenate([np.linalg.norm(e.vectors, axis=1) for e in entries])
    low, high = 0.1 * float(distances.min()), AUTO_RANGE_REACH * float(distances.max())
    tried: list[tuple] = []
    candidates: list[JointCandidate] = []
    for i, fit in enumerate(direct):
        bounded = [s for s in fit.best.model.structures if FAMILIES[s.family].bounded]
        if not bounded:
            continue
        start = [_Shape(s.family, s.range, s.extra, s.anisotropy) for s in bounded]
        with_nugget = nugget == "fit"
        key = tuple((s.family, round(math.log(s.range), 2), s.extra, s.anisotropy) for s in start)
        if key in tried:
            continue
        tried.append(key)
        shapes = _refine_ranges(entries, start, p, with_nugget, low, high)
        matrix_nugget, sills, sse, sweeps, converged = goulard_voltz(entries, shapes, p, with_nugget)
        model = JointModel(
            experimental.variables,
            matrix_nugget if matrix_nugget is not None else np.zeros((p, p)),
            tuple(
                JointStructure(s.family, s.range, b, s.extra, s.anisotropy) for s, b in zip(shapes, sills, strict=True)
            ),
        )
        k = (len(shapes) + int(with_nugget)) * p * (p + 1) // 2 + len(shapes)
        label = _label(shapes, with_nugget, experimental.variables[i])
        r_squared = 1.0 - sse / spread if spread > 0 else None
        candidates.append(JointCandidate(model, label, k, sse, _criterion(sse, n, k), sweeps, converged, r_squared))
    if not candidates:
        raise InvalidInput.at(
            "/variables",
            "no variable's direct fit has a bounded structure to share: the joint model would be pure nugget",
        )
    ranked = sorted(candidates, key=lambda c: (not c.converged, c.criterion))
    top = ranked[0]
    equivalent = [c for c in ranked if c.converged == top.converged and c.criterion <= top.criterion + EQUIVALENT]
    best = min(equivalent, key=lambda c: (c.parameters, c.criterion))
    return JointFitResult(best, tuple(ranked), experimental, tuple(direct), weighting, tuple(notes))


def joint_points(
    variables: tuple[str, ...],
    direct: dict[str, list],
    cross: dict[tuple[str, str], list],
    *,
    dimension: int,
    min_pairs: int,
    variances: tuple[float | None, ...] = (),
) -> JointExperimental:
    """Joint fit points from class rows (see :func:`~lagwise.core.modelling.fitting.points_from_rows`).

    ``direct`` maps each variable to its rows, ``cross`` each pair (in either order) to its
    cross-semivariance rows; a pair without rows gets none (zero cross sills).
    """
    points = {(i, i): points_from_rows(direct[name], min_pairs) for i, name in enumerate(variables)}
    for (a, b), rows in cross.items():
        i, j = sorted((variables.index(a), variables.index(b)))
        points[(i, j)] = points_from_rows(rows, min_pairs)
    return JointExperimental(variables, points, dimension, variances)


def joint_points_from_variograms(several, *, dimension: int, min_pairs: int) -> JointExperimental:
    """Joint fit points from experimental variograms of several variables computed in one pass.

    ``several`` has ``variables`` (each with ``name`` and ``result``, an
    :class:`~lagwise.core.variography.experimental.ExperimentalVariogram`) and ``cross`` (each
    with ``names`` and ``directions``, direction results whose classes hold cross-semivariances).
    """
    names = tuple(v.name for v in several.variables)
    direct = {
        v.name: [
            (d.direction.azimuth, k, c, row)
            for k, d in enumerate(v.result.directions)
            for c, row in enumerate(d.classes)
        ]
        for v in several.variables
    }
    cross = {
        tuple(pair.names): [
            (d.direction.azimuth, k, c, row) for k, d in enumerate(pair.directions) for c, row in enumerate(d.classes)
        ]
        for pair in several.cross
    }
    variances = tuple(float(v.result.summary.reference_variance) for v in several.variables)
    return joint_points(names, direct, cross, dimension=dimension, min_pairs=min_pairs, variances=variances)
