"""Fitting variogram models to experimental classes by bounded weighted least squares.

Residuals r_i = sqrt(w_i) (gamma(h_i; theta) - gamma_hat_i) are minimised with
``scipy.optimize.least_squares`` (trust region reflective, bounds on every
parameter) from several data-driven starting points. Weights (normalised to mean 1):

* ``pairs``: N(h) (common practice);
* ``pairs_over_distance``: N(h) / h^2 (common practice);
* ``cressie``: N(h) / gamma(h; theta)^2, Cressie (1985), Math. Geology 17(5), iterated:
  the weights are recomputed from the last fit until the parameters settle, so that
  at the optimum the objective is sum N(h) [gamma_hat(h) / gamma(h; theta) - 1]^2;
* ``uniform``: 1;
* ``inverse_variance``: 1 / SE(h)^2, SE the class's standard error (delete-one-block
  jackknife, :mod:`lagwise.core.variography.uncertainty`), raised to at least
  ``SE_FLOOR_SHARE`` times the median SE (weighted least squares with known
  variances, common practice; the floor guards against a chance small jackknife SE).

Candidates are ranked by the corrected Akaike information criterion of a weighted
least-squares fit, AICc = n ln(S/n) + 2p + 2p(p+1)/(n-p-1) (Hurvich & Tsai 1989),
with S the weighted residual sum of squares, n the classes used and p the fitted
parameters: extra structures and a nugget must earn their place. Candidates within
``EQUIVALENT`` units of the lowest criterion are treated as equally supported
(Burnham & Anderson 2002, section 2.6); among them the one with the fewest
parameters is selected, then the first in :data:`PREFERENCE` (the most widely used
families first), since an experimental variogram cannot tell, say, a spherical
from a pentaspherical structure.
"""

from __future__ import annotations

import math
import warnings as python_warnings
from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import least_squares

from ..deadline import check_deadline
from ..errors import FieldIssue, InvalidInput
from .families import AZIMUTH, NUGGET, RATIO, Parameter, Scaled
from .models import BOUNDED_FAMILIES, FAMILIES, Anisotropy, Structure, VariogramModel

WEIGHTINGS = ("pairs", "pairs_over_distance", "cressie", "uniform", "inverse_variance")
# inverse_variance: standard errors below this share of their median are raised to it, so that
# one class whose jackknife error is small by chance does not dominate the fit.
SE_FLOOR_SHARE = 0.25
NESTED_FAMILIES = ("spherical", "exponential", "gaussian")
# "auto" tries the monotone bounded families; the hole-effect cardinal_sine fits
# sampling wiggles as often as real periodicity, so it is tried only on request.
AUTO_FAMILIES = tuple(f for f in BOUNDED_FAMILIES if f != "cardinal_sine")
CRESSIE_ITERATIONS = 10
EQUIVALENT = 2.0
# Automatic mode keeps the kriging systems well conditioned and the model within what
# the classes can see (see :func:`fit_model`).
SMOOTH_FAMILIES = ("gaussian", "stable", "cardinal_sine")
SMOOTH_MIN_NUGGET = 0.01
SMOOTH_MAX_SHAPE_WITHOUT_NUGGET = 1.5
AUTO_RANGE_REACH = 1.5
# A fitted range within 1 % of that bound counts as held by it.
AT_RANGE_BOUND = 0.99
DUPLICATE_RANGE_RATIO = 1.25
# Automatic-mode fits stop earlier: on a flat (noise-like) variogram the optimiser otherwise
# wanders to its evaluation limit at tolerances far below what the classes can resolve.
GUARDED_TOLERANCE = 1e-9
GUARDED_EVALUATIONS = 100
# Starts beyond this many (anisotropic fits: ranges x class azimuths x ratios) are ranked by
# their weighted sum of squares and only the best are solved.
SOLVED_STARTS = 4
STRONG_RATIO_START = 0.3
PREFERENCE = (
    "spherical",
    "exponential",
    "gaussian",
    "matern",
    "stable",
    "cubic",
    "pentaspherical",
    "circular",
    "cardinal_sine",
    "linear",
    "power",
)


@dataclass(frozen=True)
class ExperimentalPoints:
    """Experimental classes to fit (one entry per class).

    Attributes
    ----------
    distance : ndarray
        Mean separation of each class, coordinate units.
    value : ndarray
        Semivariance of each class (value units squared).
    pairs : ndarray of int
    azimuth : ndarray
        Azimuth of the class's direction (degrees; 0 for omnidirectional).
    direction, klass : ndarray of int
        Where each class came from (for the report).
    usable : ndarray of bool
        Has a value and at least ``min_pairs`` pairs.
    """

    distance: np.ndarray
    value: np.ndarray
    pairs: np.ndarray
    azimuth: np.ndarray
    direction: np.ndarray
    klass: np.ndarray
    usable: np.ndarray
    standard_error: np.ndarray | None = None


@dataclass(frozen=True)
class Candidate:
    """One candidate model, fitted or not (a failed fit has no model; see :class:`FittedCandidate`).

    Attributes
    ----------
    model : VariogramModel or None
        None when the fit failed (``note`` says why).
    label : str
        Plain description, e.g. ``nugget + spherical``.
    parameters : int
        Fitted parameters p.
    weighted_sse : float
        S, with weights normalised to mean 1.
    r_squared : float
        1 - S / weighted total sum of squares.
    criterion : float or None
        AICc (lower is better); None when the fit failed.
    converged : bool
    evaluations : int
        Model evaluations used by the optimiser.
    """

    model: VariogramModel | None
    label: str
    parameters: int
    weighted_sse: float | None
    r_squared: float | None
    criterion: float | None
    converged: bool
    evaluations: int
    note: str | None = None
    families: tuple[str, ...] = ()


@dataclass(frozen=True)
class FittedCandidate(Candidate):
    """A candidate whose fit gave a model."""

    model: VariogramModel


@dataclass(frozen=True)
class FitResult:
    """Result of :func:`fit_model`: the best candidate and every candidate, ranked.

    Attributes
    ----------
    families : "auto" or tuple of str
        The families asked for.
    structures : int
        Structures per candidate asked for (explicit family lists).
    fitted_values : ndarray, shape (classes,)
        The best model's semivariance at every class of ``points`` (vectors along each
        class's azimuth), found when the result is made.
    """

    best: FittedCandidate
    candidates: tuple[Candidate, ...]
    points: ExperimentalPoints
    weighting: str
    nugget: str | float
    anisotropy: str
    warnings: tuple[str, ...] = field(default=())
    families: str | tuple[str, ...] = "auto"
    structures: int = 1
    fitted_values: np.ndarray = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        az = np.radians(self.points.azimuth)
        h = self.points.distance
        vectors = np.column_stack([h * np.sin(az), h * np.cos(az)])
        model = self.best.model
        anisotropic = any(not s.anisotropy.isotropic for s in model.structures)
        object.__setattr__(self, "fitted_values", model.semivariance(vectors if anisotropic else h))


@dataclass(frozen=True)
class _Spec:
    families: tuple[str, ...]
    fit_nugget: bool
    fixed_nugget: float
    fit_anisotropy: bool
    guarded: bool = False

    @property
    def label(self) -> str:
        parts = (["nugget"] if self.fit_nugget or self.fixed_nugget > 0 else []) + list(self.families)
        return " + ".join(parts) + (" (anisotropic)" if self.fit_anisotropy else "")


def _candidate_specs(families, nugget, anisotropy, structures, dimension, guarded) -> list[_Spec]:
    fit_nugget = nugget == "fit"
    fixed = float(nugget) if isinstance(nugget, int | float) and not isinstance(nugget, bool) else 0.0
    auto = families == "auto"
    nugget_options = [True, False] if fit_nugget and auto else [fit_nugget]
    names = [f for f in AUTO_FAMILIES if dimension <= FAMILIES[f].max_dimension] if auto else list(families)
    specs = []
    for with_nugget in nugget_options:
        for name in names:
            specs.append(_Spec((name,), with_nugget, fixed, anisotropy == "fit", guarded))
        nested = NESTED_FAMILIES if auto else (names if structures == 2 else ())
        for name in nested:
            if FAMILIES[name].bounded:
                specs.append(_Spec((name, name), with_nugget, fixed, anisotropy == "fit", guarded))
    if guarded:
        # A gaussian structure without a nugget makes kriging systems of close samples
        # numerically singular (its covariance is analytic at the origin).
        specs = [s for s in specs if s.fit_nugget or fixed > 0 or "gaussian" not in s.families]
    return specs


_SLOT_PREFIX = {"sill": "c", "range": "a", "shape": "e"}


def _fit_rule(parameter: Parameter, which: str) -> Scaled:
    """A parameter's fit bound or start from the family table (fitted parameters have all three)."""
    rule = getattr(parameter, which)
    if rule is None:
        raise ValueError(f"{parameter.name} is not a fitted parameter")
    return rule


def _guard(problem: _Problem, spec: _Spec) -> None:
    """Automatic-mode bounds: ranges within what the classes see, smooth families kept stable.

    * Practical ranges at most :data:`AUTO_RANGE_REACH` x the largest class distance: a
      range the classes cannot see is not estimated by them.
    * A smooth structure (gaussian, stable, cardinal sine) with a fitted nugget keeps a
      nugget of at least :data:`SMOOTH_MIN_NUGGET` x the sill reference; a stable
      structure without a nugget keeps its shape at most
      :data:`SMOOTH_MAX_SHAPE_WITHOUT_NUGGET`. Both keep the kriging matrix of close
      samples well conditioned (see :mod:`lagwise.core.kriging.conditioning`).
    """
    smooth = any(f in SMOOTH_FAMILIES for f in spec.families)
    for i, name in enumerate(problem.names):
        if name[0] == "a" and name[1:].isdigit():
            problem.high[i] = min(problem.high[i], AUTO_RANGE_REACH * problem.hmax)
        elif name == "nugget" and smooth:
            problem.low[i] = min(SMOOTH_MIN_NUGGET * problem.sill0, 0.5 * problem.high[i])
        elif name[0] == "e" and name[1:].isdigit() and not spec.fit_nugget and spec.fixed_nugget == 0:
            k = int(name[1:])
            if spec.families[k] == "stable":
                problem.high[i] = min(problem.high[i], SMOOTH_MAX_SHAPE_WITHOUT_NUGGET)


def _duplicate_structures(model: VariogramModel) -> str | None:
    """Why a nested model's structures are not distinct, or None."""
    if len(model.structures) < 2:
        return None
    first, second = model.structures[:2]
    total = first.partial_sill + second.partial_sill
    if total > 0 and min(first.partial_sill, second.partial_sill) < 0.01 * total:
        return "one structure carries under 1 % of the structured sill: the nested model reduces to one structure"
    if first.family == second.family:
        low, high = sorted((first.range, second.range))
        if high <= DUPLICATE_RANGE_RATIO * low:
            return f"both {first.family} structures have nearly the same range ({low:.4g}, {high:.4g}): they are one structure"
    return None


class _Problem:
    """Parameter packing, bounds and starting points of one candidate (from the family table)."""

    def __init__(self, spec: _Spec, points: ExperimentalPoints, sample_variance: float | None):
        self.spec = spec
        use = points.usable
        self.h = points.distance[use]
        self.gamma = points.value[use]
        self.pairs = points.pairs[use].astype(float)
        self.standard_error = None if points.standard_error is None else points.standard_error[use]
        az = np.radians(points.azimuth[use])
        self.vectors = np.column_stack([self.h * np.sin(az), self.h * np.cos(az)])
        self.azimuths = np.unique(points.azimuth[use])
        gmax = float(max(self.gamma.max(), 1e-300))
        self.hmin, self.hmax = float(self.h.min()), float(self.h.max())
        tail = self.gamma[np.argsort(self.h)][-max(1, len(self.gamma) // 3) :]
        plateau = float(np.mean(tail))
        self.sill0 = sample_variance if sample_variance and sample_variance > 0 else plateau
        order = np.argsort(self.h)
        hs, gs = self.h[order], self.gamma[order]
        reach = np.flatnonzero(gs >= 0.95 * plateau)
        self.range0 = float(hs[reach[0]]) if reach.size else 0.5 * self.hmax
        self.range0 = max(self.range0, self.hmin)
        if len(hs) >= 2 and hs[1] > hs[0]:
            slope = (gs[1] - gs[0]) / (hs[1] - hs[0])
            self.nugget0 = float(np.clip(gs[0] - slope * hs[0], 0.0, 0.9 * gs[0]))
        else:
            self.nugget0 = 0.0
        self.gmax = gmax
        # Data-driven fit scales of the family table (numerator, denominator).
        self.scales: dict[str, tuple[float, float]] = {
            "one": (1.0, 1.0),
            "largest_semivariance": (gmax, 1.0),
            "largest_semivariance_per_shortest_distance": (gmax, max(self.hmin, 1e-300)),
            "largest_semivariance_per_longest_distance": (gmax, self.hmax),
            "shortest_distance": (self.hmin, 1.0),
            "longest_distance": (self.hmax, 1.0),
        }
        # (name, parameter, structure index or None) in the order of theta.
        self.layout: list[tuple[str, Parameter, int | None]] = []
        if spec.fit_nugget:
            self.layout.append(("nugget", NUGGET, None))
        for k, family in enumerate(spec.families):
            self.layout += [(f"{_SLOT_PREFIX[p.slot]}{k}", p, k) for p in FAMILIES[family].parameters]
        if spec.fit_anisotropy:
            self.layout += [("azimuth", AZIMUTH, None), ("ratio", RATIO, None)]
        self.names = [name for name, _, _ in self.layout]
        self.low = np.array([_fit_rule(p, "fit_low").value(self.scales) for _, p, _ in self.layout])
        self.high = np.array([_fit_rule(p, "fit_high").value(self.scales) for _, p, _ in self.layout])

    @property
    def size(self) -> int:
        return len(self.names)

    def model(self, theta: np.ndarray) -> VariogramModel:
        values = dict(zip(self.names, theta, strict=True))
        anisotropy = (
            Anisotropy(float(values["azimuth"]) % 180.0, float(values["ratio"]))
            if self.spec.fit_anisotropy
            else Anisotropy()
        )
        structures = tuple(
            Structure(
                family,
                float(values[f"c{k}"]),
                float(values.get(f"a{k}", 1.0)),
                (float(values[f"e{k}"]) if f"e{k}" in values else None),
                anisotropy,
            )
            for k, family in enumerate(self.spec.families)
        )
        nugget = float(values["nugget"]) if self.spec.fit_nugget else self.spec.fixed_nugget
        return VariogramModel(nugget, structures)

    def predict(self, theta: np.ndarray) -> np.ndarray:
        model = self.model(theta)
        return model.semivariance(self.vectors if self.spec.fit_anisotropy else self.h)

    def starts(self) -> list[np.ndarray]:
        nugget = self.nugget0 if self.spec.fit_nugget else self.spec.fixed_nugget
        structural = max(self.sill0 - nugget, 0.05 * self.sill0)
        two = len(self.spec.families) == 2
        ranges = (
            [(self.range0 / 3, self.range0 * 1.5)] if two else [(self.range0,), (self.hmax / 3,), (2 * self.hmax / 3,)]
        )
        if not any(p.slot == "range" for _, p, _ in self.layout):
            ranges = ranges[:1]  # the start sets differ only in their ranges
        shares = (0.4, 0.6) if two else (1.0,)
        azimuths = list(self.azimuths) if self.spec.fit_anisotropy else [0.0]
        out = []
        for rs in ranges:
            for az in azimuths:
                scales = {**self.scales, "nugget_guess": (nugget, 1.0), "class_azimuth": (az, 1.0)}
                per_structure = [
                    {**scales, "structural_sill": (structural * share, 1.0), "range_guess": (r, 1.0)}
                    for share, r in zip(shares, rs, strict=True)
                ]
                theta = [
                    _fit_rule(p, "start").value(scales if k is None else per_structure[k]) for _, p, k in self.layout
                ]
                out.append(np.clip(np.array(theta, dtype=float), self.low + 1e-12 * np.abs(self.low), self.high))
        if self.spec.fit_anisotropy:
            # A second ratio start for each: strong anisotropy is a different basin than mild.
            k = self.names.index("ratio")
            for theta in list(out):
                extra = theta.copy()
                extra[k] = float(np.clip(STRONG_RATIO_START, self.low[k], self.high[k]))
                out.append(extra)
        return out

    def cost(self, theta: np.ndarray, weights: np.ndarray) -> float:
        """The weighted sum of squares at ``theta`` (inf when the model overflows)."""
        with np.errstate(over="ignore", invalid="ignore"):
            value = float(np.sum(weights * (self.predict(theta) - self.gamma) ** 2))
        return value if math.isfinite(value) else math.inf


def _weights(weighting: str, problem: _Problem, fitted: np.ndarray | None) -> np.ndarray:
    if weighting == "uniform":
        w = np.ones_like(problem.h)
    elif weighting == "pairs_over_distance":
        w = problem.pairs / problem.h**2
    elif weighting == "cressie":
        base = fitted if fitted is not None else problem.gamma
        w = problem.pairs / np.maximum(base, 1e-9 * problem.gmax) ** 2
    elif weighting == "inverse_variance":
        se = problem.standard_error
        if se is None:
            raise TypeError("inverse_variance weighting needs the classes' standard errors")
        w = 1.0 / np.maximum(se, SE_FLOOR_SHARE * float(np.median(se))) ** 2
    else:
        w = problem.pairs.copy()
    return w / w.mean()


def _solve(problem: _Problem, weights: np.ndarray, start: np.ndarray):
    root = np.sqrt(weights)

    def residuals(theta):
        return root * (problem.predict(theta) - problem.gamma)

    guarded = problem.spec.guarded
    tolerance = GUARDED_TOLERANCE if guarded else 1e-12
    with python_warnings.catch_warnings():
        python_warnings.simplefilter("ignore", RuntimeWarning)
        return least_squares(
            residuals,
            start,
            bounds=(problem.low, problem.high),
            method="trf",
            x_scale="jac",
            max_nfev=(GUARDED_EVALUATIONS if guarded else 400) * problem.size,
            ftol=tolerance,
            xtol=tolerance,
            gtol=tolerance,
        )


def _fit_candidate(spec: _Spec, points: ExperimentalPoints, weighting: str, sample_variance: float | None) -> Candidate:
    problem = _Problem(spec, points, sample_variance)
    if spec.guarded:
        _guard(problem, spec)
    n, p = len(problem.h), problem.size
    if n <= p:
        return Candidate(
            None,
            spec.label,
            p,
            None,
            None,
            None,
            False,
            0,
            f"needs more than {p} usable classes, has {n}",
            spec.families,
        )
    first_weights = _weights("pairs" if weighting == "cressie" else weighting, problem, None)
    best, evaluations = None, 0
    starts = problem.starts()
    if len(starts) > SOLVED_STARTS:
        # Pre-screening: solve only from the starts that already fit best.
        starts = sorted(starts, key=lambda t: problem.cost(t, first_weights))[:SOLVED_STARTS]
    for start in starts:
        check_deadline()
        try:
            result = _solve(problem, first_weights, start)
        except ValueError:
            # least_squares refuses a start whose residuals overflow (classes with extreme values).
            continue
        evaluations += result.nfev
        if best is None or result.cost < best.cost:
            best = result
    if best is None:
        return Candidate(
            None,
            spec.label,
            p,
            None,
            None,
            None,
            False,
            evaluations,
            "the model cannot be evaluated at these classes (values overflow)",
            spec.families,
        )
    theta, converged = best.x, best.status > 0
    if weighting == "cressie":
        for _ in range(CRESSIE_ITERATIONS):
            weights = _weights("cressie", problem, problem.predict(theta))
            result = _solve(problem, weights, theta)
            evaluations += result.nfev
            moved = np.max(np.abs(result.x - theta) / np.maximum(np.abs(theta), 1e-12))
            theta, converged = result.x, result.status > 0
            if moved < 1e-8:
                break
    fitted = problem.predict(theta)
    weights = _weights(weighting, problem, fitted)
    sse = float(np.sum(weights * (fitted - problem.gamma) ** 2))
    mean = np.sum(weights * problem.gamma) / np.sum(weights)
    total = float(np.sum(weights * (problem.gamma - mean) ** 2))
    r2 = 1.0 - sse / total if total > 0 else (1.0 if sse == 0 else 0.0)
    criterion = n * math.log(max(sse / n, 1e-300)) + 2 * p
    if n - p - 1 > 0:
        criterion += 2 * p * (p + 1) / (n - p - 1)
    model = problem.model(theta)
    duplicate = _duplicate_structures(model) if spec.guarded else None
    if duplicate is not None:
        return Candidate(None, spec.label, p, sse, r2, None, False, int(evaluations), duplicate, spec.families)
    return FittedCandidate(
        model,
        spec.label,
        p,
        sse,
        r2,
        criterion,
        bool(converged),
        int(evaluations),
        families=spec.families,
    )


def select(ranked: list[FittedCandidate]) -> FittedCandidate:
    """The selected candidate: fewest parameters, then :data:`PREFERENCE`, among the equally supported."""
    top = ranked[0]
    if not top.converged:
        return top
    if top.criterion is None:
        raise TypeError("the top-ranked candidate has no criterion")
    equivalent = [
        c for c in ranked if c.converged and c.criterion is not None and c.criterion <= top.criterion + EQUIVALENT
    ]
    return min(equivalent, key=lambda c: (c.parameters, [PREFERENCE.index(f) for f in c.families], c.criterion))


def validate_fit_options(families, nugget, weighting, anisotropy, structures, dimension) -> None:
    """Check the fit options that need no data; raises InvalidInput naming ``/<field>``."""
    issues = []
    if weighting not in WEIGHTINGS:
        issues.append(FieldIssue("/weighting", f"must be one of {', '.join(WEIGHTINGS)}"))
    if families != "auto":
        if not families:
            issues.append(FieldIssue("/families", 'give at least one family, or "auto"'))
        for k, name in enumerate(families or []):
            if name not in FAMILIES:
                issues.append(FieldIssue(f"/families/{k}", f"unknown family {name!r}; valid: {', '.join(FAMILIES)}"))
            elif dimension > FAMILIES[name].max_dimension:
                issues.append(
                    FieldIssue(
                        f"/families/{k}",
                        f"{name} is valid only up to {FAMILIES[name].max_dimension}-D; the samples are {dimension}-D",
                    )
                )
    if isinstance(nugget, str) and nugget not in ("fit", "none"):
        issues.append(FieldIssue("/nugget", 'must be "fit", "none" or a fixed non-negative number'))
    elif not isinstance(nugget, str) and not (math.isfinite(nugget) and nugget >= 0):
        issues.append(FieldIssue("/nugget", "a fixed nugget must be zero or positive"))
    if anisotropy not in ("none", "fit"):
        issues.append(FieldIssue("/anisotropy", 'must be "none" or "fit"'))
    if structures not in (1, 2):
        issues.append(FieldIssue("/structures", "must be 1 or 2"))
    if issues:
        raise InvalidInput(issues)


def fit_model(
    points: ExperimentalPoints,
    *,
    dimension: int,
    families: str | list[str] = "auto",
    nugget: str | float = "fit",
    weighting: str = "pairs",
    anisotropy: str = "none",
    structures: int = 1,
    sample_variance: float | None = None,
    guarded: bool | None = None,
) -> FitResult:
    """Fit and rank candidate models.

    Parameters
    ----------
    points : ExperimentalPoints
        Classes; those not ``usable`` (no value, or sparse) are left out and reported.
    dimension : int
        Dimension of the samples (restricts families valid only in lower dimensions).
    families : "auto" or list of str
        ``auto`` tries every monotone bounded family valid in ``dimension`` (all bounded
        families but the hole-effect cardinal_sine) with and without a nugget, and
        nested pairs of spherical, exponential and gaussian structures.
    nugget : "fit", "none" or float
    weighting : str
        One of :data:`WEIGHTINGS`.
    anisotropy : "none" or "fit"
        ``fit`` fits one geometric anisotropy (azimuth, ratio) jointly to all direction classes.
    structures : 1 or 2
        Structures per candidate for an explicit family list.
    sample_variance : float, optional
        Starting sill (and the reference for the smooth families' minimum nugget).
    guarded : bool, optional
        Automatic-mode safeguards (default: on when ``families`` is ``auto``): no
        gaussian structure without a nugget, bounds of :func:`_guard`, and nested
        candidates whose structures are not distinct refused.

    Raises
    ------
    InvalidInput
        Bad options, or fewer usable classes than any candidate's parameters.
    """
    validate_fit_options(families, nugget, weighting, anisotropy, structures, dimension)
    if weighting == "inverse_variance":
        se = points.standard_error
        lacking = (
            int(points.usable.sum())
            if se is None
            else int(np.count_nonzero(points.usable & ~(np.nan_to_num(se, nan=0.0) > 0)))
        )
        if lacking:
            raise InvalidInput(
                FieldIssue(
                    "/weighting",
                    f"inverse_variance needs a positive standard error on every class used; {lacking} lack one "
                    "(see each class's uncertainty_reason)",
                )
            )
    if anisotropy == "fit" and len(np.unique(points.azimuth[points.usable])) < 2:
        raise InvalidInput.at("/anisotropy", "fitting anisotropy needs usable classes in at least 2 direction classes")
    notes = []
    used = int(points.usable.sum())
    left_out = int(points.usable.size - used)
    if left_out:
        notes.append(
            f"{left_out} classes left out of the fit (no pairs, undefined value or fewer than min_pairs pairs)"
        )
    if used == 0:
        raise InvalidInput.at("/experimental", "no class has a value and enough pairs to fit a model")
    if np.all(points.value[points.usable] == 0.0):
        zero = FittedCandidate(VariogramModel(0.0, ()), "pure nugget (zero)", 0, 0.0, 1.0, None, True, 0)
        notes.append("every class has zero semivariance (constant values): the model is a zero pure nugget")
        asked = families if families == "auto" else tuple(families)
        return FitResult(zero, (zero,), points, weighting, nugget, anisotropy, tuple(notes), asked, structures)
    guarded = families == "auto" if guarded is None else guarded
    specs = _candidate_specs(families, nugget, anisotropy, structures, dimension, guarded)
    candidates = [_fit_candidate(spec, points, weighting, sample_variance) for spec in specs]
    # Exactly the candidates with a criterion: a fitted one always has one here (only the zero nugget lacks it).
    feasible = [c for c in candidates if isinstance(c, FittedCandidate)]
    if not feasible:
        needed = min(c.parameters for c in candidates) + 1
        raise InvalidInput.at(
            "/experimental",
            f"{used} usable classes cannot support the candidates: at least {needed} are needed (use narrower or more classes, or lower min_pairs)",
        )
    ordered = sorted(feasible, key=lambda c: (not c.converged, c.criterion))
    ranked: list[Candidate] = [*ordered, *(c for c in candidates if c.criterion is None)]
    best = select(ordered)
    longest = max((st.range for st in best.model.structures if FAMILIES[st.family].bounded), default=0.0)
    reach = float(points.distance[points.usable].max())
    # At or past AUTO_RANGE_REACH x the largest class distance: automatic mode holds ranges at that
    # bound, so a range the classes cannot see ends there (within the optimiser's tolerance).
    if longest >= AT_RANGE_BOUND * AUTO_RANGE_REACH * reach:
        notes.append(
            f"the fitted range ({longest:.4g}) lies far beyond the largest class distance ({reach:.4g}): the variogram "
            "has not levelled off, so the sill and range are uncertain; consider a trend (universal kriging) or an unbounded model"
        )
    if best.r_squared is not None and best.r_squared < 0.3:
        notes.append(
            f"the best model explains little of the experimental variogram (R^2 = {best.r_squared:.2f}); the data may be close to pure nugget"
        )
    asked = families if families == "auto" else tuple(families)
    return FitResult(best, tuple(ranked), points, weighting, nugget, anisotropy, tuple(notes), asked, structures)


def fewest_classes(
    families: str | list[str] | tuple[str, ...], nugget: str | float, structures: int, dimension: int
) -> int:
    """The usable classes the smallest isotropic candidate of :func:`fit_model` needs (its parameters + 1).

    A candidate with p fitted parameters needs more than p usable classes (see
    :func:`_fit_candidate`); this is the least over the candidates the options make.
    """
    families = families if families == "auto" else list(families)
    specs = _candidate_specs(families, nugget, "none", structures, dimension, families == "auto")
    return 1 + min(
        (int(spec.fit_nugget) + sum(len(FAMILIES[family].parameters) for family in spec.families) for spec in specs),
        default=0,
    )


def points_from_experimental(result, min_pairs: int) -> ExperimentalPoints:
    """Flatten an :class:`~lagwise.core.variography.experimental.ExperimentalVariogram` into fit points."""
    rows = [
        (d.direction.azimuth, k, c, row) for k, d in enumerate(result.directions) for c, row in enumerate(d.classes)
    ]
    return points_from_rows(rows, min_pairs)


def points_from_rows(rows, min_pairs: int) -> ExperimentalPoints:
    """Build fit points from (azimuth, direction index, class index, row) with row.mean_distance, value, pairs."""

    def num(v):
        return np.nan if v is None else float(v)

    distance = np.array([num(r.mean_distance) for _, _, _, r in rows])
    value = np.array([num(r.value) for _, _, _, r in rows])
    pairs = np.array([int(r.pairs) for _, _, _, r in rows])
    standard_error = np.array([num(getattr(r, "standard_error", None)) for _, _, _, r in rows])
    usable = np.isfinite(distance) & np.isfinite(value) & (pairs >= min_pairs) & (np.nan_to_num(distance) > 0)
    return ExperimentalPoints(
        distance=np.nan_to_num(distance),
        value=np.nan_to_num(value),
        pairs=pairs,
        azimuth=np.array([float(a) for a, _, _, _ in rows]),
        direction=np.array([k for _, k, _, _ in rows]),
        klass=np.array([c for _, _, c, _ in rows]),
        usable=usable,
        standard_error=standard_error,
    )


SEMIVARIANCE_STATISTICS = ("semivariance", "semivariance_robust", "semivariance_median")
