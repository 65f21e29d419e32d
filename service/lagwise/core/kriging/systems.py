"""Kriging: simple, ordinary and universal, with unique or moving neighbourhoods.

Notation: samples z_i at x_i, target x_0. The structural covariance is
C_s(h) = c_0 - gamma_s(h) with gamma_s the model without its nugget tau^2 and c_0
its sill (any constant for unbounded models, which only ordinary and universal
kriging accept: the constant cancels under the unbiasedness constraint). Each
system is

    [ K  F ] [lambda]   [k]        K_ij = C_s(x_i - x_j) + tau^2 [i = j]
    [ F' 0 ] [  nu  ] = [f]        k_i  = C_s(x_i - x_0) + tau^2 [x_i = x_0] (micro-scale nugget)

with F the drift functions at the samples (none for simple kriging, the constant 1
for ordinary, 1 and the centred, scaled coordinates -- and for ``quadratic`` their
squares and products -- for universal) and f those at the target. The estimate is
lambda' z (simple: m + lambda'(z - m)); the kriging variance is
k_00 - lambda' k - f' nu, with k_00 = C_s(0) + tau^2 for a micro-scale nugget (so
kriging is exact at the samples and the variance elsewhere includes the nugget)
and C_s(0) when the nugget is measurement error (estimates smoothed, variances of
the noise-free signal). Chilès & Delfiner (2012), sections 3.3-3.4; Cressie (1993),
section 3.2.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np
from scipy.linalg import LinAlgError, LinAlgWarning, lu_factor, lu_solve
from scipy.spatial.distance import cdist

from ..data.samples import SampleSet
from ..deadline import check_deadline
from ..errors import FieldIssue, InvalidInput, LimitExceeded, SingularSystem
from ..limits import Limits
from ..modelling.models import VariogramModel, unit_semivariance, validate_model
from .compiled import compiled_covariances
from .conditioning import RCOND_MIN, covariance_rcond, pivot_ratios
from .cost import BATCH_ENTRIES, batch_rows, query_rows
from .neighbourhood import NO_NEIGHBOURS, Neighbourhood, NeighbourSearch, to_search_space, validate_neighbourhood

KRIGING_TYPES = ("ordinary", "simple", "universal")
DRIFTS = ("linear", "quadratic")
NUGGET_ROLES = ("micro_scale", "measurement_error")
TARGET_CHUNK = 20_000
SINGULAR = "the kriging system is singular for this target's samples"
ILL_CONDITIONED = (
    "the kriging system of this target's samples is ill-conditioned (reciprocal condition below 1e-12): "
    "samples too close together for a model this smooth without a nugget"
)


@dataclass(frozen=True)
class KrigingSpec:
    """Kriging type and options (see the module notation)."""

    type: str = "ordinary"
    mean: float | None = None
    drift: str | None = None
    nugget_as: str = "micro_scale"

    def as_dict(self) -> dict:
        out: dict = {"type": self.type, "nugget_as": self.nugget_as}
        if self.type == "simple":
            out["mean"] = self.mean
        if self.type == "universal":
            out["drift"] = self.drift
        return out


def validate_kriging_options(spec: KrigingSpec) -> None:
    """Check the kriging options that need no model; raises InvalidInput naming ``/kriging/<field>``."""
    issues = []
    if spec.type not in KRIGING_TYPES:
        issues.append(FieldIssue("/kriging/type", f"must be one of {', '.join(KRIGING_TYPES)}"))
    if spec.nugget_as not in NUGGET_ROLES:
        issues.append(FieldIssue("/kriging/nugget_as", f"must be one of {', '.join(NUGGET_ROLES)}"))
    if spec.type == "simple" and (spec.mean is None or not math.isfinite(spec.mean)):
        issues.append(FieldIssue("/kriging/mean", "simple kriging needs the known mean"))
    if spec.type == "universal" and spec.drift not in DRIFTS:
        issues.append(FieldIssue("/kriging/drift", f"universal kriging needs a drift: one of {', '.join(DRIFTS)}"))
    if issues:
        raise InvalidInput(issues)


def validate_spec(spec: KrigingSpec, model: VariogramModel, dimension: int) -> KrigingSpec:
    """Check the kriging options against the model; returns the spec with defaults filled."""
    validate_kriging_options(spec)
    if spec.type == "simple" and not model.bounded:
        raise InvalidInput.at(
            "/model", "simple kriging needs a model with a sill; linear and power structures have none"
        )
    validate_model(model, dimension)
    return spec


@dataclass(frozen=True)
class Frame:
    """Centring and scaling of coordinates for drift terms (numerical conditioning)."""

    centre: np.ndarray
    scale: float

    @classmethod
    def of(cls, coords: np.ndarray) -> Frame:
        centre = coords.mean(axis=0)
        scale = float(np.max(np.abs(coords - centre))) or 1.0
        return cls(centre, scale)

    def drift(self, spec: KrigingSpec, points: np.ndarray) -> np.ndarray:
        """Drift functions at points (..., d): shape (..., p)."""
        if spec.type == "simple":
            return np.zeros(points.shape[:-1] + (0,))
        ones = np.ones(points.shape[:-1] + (1,))
        if spec.type == "ordinary":
            return ones
        u = (points - self.centre) / self.scale
        terms = [ones, u]
        if spec.drift == "quadratic":
            d = u.shape[-1]
            terms.append(np.stack([u[..., a] * u[..., b] for a in range(d) for b in range(a, d)], axis=-1))
        return np.concatenate(terms, axis=-1)


class Covariance:
    """C_s(h) + nugget terms for a model, evaluated on separation vectors of any leading shape."""

    def __init__(self, model: VariogramModel, spec: KrigingSpec):
        self.model = model
        self.structural = VariogramModel(0.0, model.structures)
        self.nugget = model.nugget
        sill = self.structural.sill  # None exactly when a structure is unbounded
        self.c0 = sill if sill is not None else 0.0
        self.micro = spec.nugget_as == "micro_scale"

    def between(self, a: np.ndarray, b: np.ndarray, same: bool = False, nugget: bool = True) -> np.ndarray:
        """Covariance matrix between point sets a (..., m, d) and b (..., q, d).

        ``same``: a and b are the same samples (the nugget sits on the diagonal).
        Otherwise, with a micro-scale nugget, coincident points get the nugget too.
        ``nugget`` False: the continuous part C_s alone (block averages).
        """
        shape = np.broadcast_shapes(a.shape[:-2], b.shape[:-2]) + (a.shape[-2], b.shape[-2])
        compiled = compiled_covariances(a, b, self.structural.structures, self.c0)
        cov = np.full(shape, self.c0) if compiled is None else compiled
        for structure in self.structural.structures if compiled is None else ():
            # Rotate and stretch the points once, then take plain Euclidean distances.
            ta, tb = _search_space(a, structure), _search_space(b, structure)
            h = ta[..., :, None, :] - tb[..., None, :, :]
            distances = np.sqrt(np.einsum("...i,...i->...", h, h))
            with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
                cov -= structure.partial_sill * unit_semivariance(
                    structure.family, distances, structure.range, structure.extra
                )
        _require_finite(cov)
        if same:
            m = shape[-1]
            cov = cov + self.nugget * np.eye(m)
        elif self.micro and self.nugget and nugget:
            h = a[..., :, None, :] - b[..., None, :, :]
            cov = cov + self.nugget * (np.abs(h).sum(axis=-1) == 0)
        return cov

    def matrix(self, coords: np.ndarray, block: int = 1000) -> np.ndarray:
        """The samples' covariance matrix K (n, n), built row block by row block.

        Distances come from ``scipy.spatial.distance.cdist`` in each structure's isotropic
        space, so memory stays near one n x n array however many structures there are.
        Blocks hold at most :data:`BATCH_ENTRIES` entries; the deadline is checked between them.
        """
        n = coords.shape[0]
        K = np.empty((n, n))
        spaces = [to_search_space(coords, s.anisotropy) for s in self.structural.structures]
        block = max(1, min(block, BATCH_ENTRIES // max(n, 1)))
        for start in range(0, n, block):
            check_deadline()
            rows = slice(start, min(n, start + block))
            part = np.full((rows.stop - start, n), self.c0)
            for structure, space in zip(self.structural.structures, spaces, strict=True):
                h = cdist(space[rows], space)
                with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
                    part -= structure.partial_sill * unit_semivariance(
                        structure.family, h, structure.range, structure.extra
                    )
            _require_finite(part)
            K[rows] = part
        K[np.diag_indices(n)] += self.nugget
        return K

    @property
    def target_variance(self) -> float:
        """k_00: covariance of the target with itself."""
        return self.c0 + (self.nugget if self.micro else 0.0)


def _search_space(points: np.ndarray, structure) -> np.ndarray:
    """Points (..., m, d) in a structure's isotropic space (its anisotropy undone)."""
    if structure.anisotropy.isotropic:
        return points
    flat = to_search_space(points.reshape(-1, points.shape[-1]), structure.anisotropy)
    return flat.reshape(points.shape)


def _require_finite(cov: np.ndarray) -> None:
    """Refuse a model whose covariances overflow for these separations (e.g. a range of 1e-320)."""
    if not np.isfinite(cov).all():
        raise InvalidInput.at(
            "/model",
            "the model gives non-finite covariances at these separations; check that every range is a "
            "sensible distance in the samples' unit",
        )


class PointSupport:
    """Right-hand sides and target variance of point kriging (see the module notation).

    :class:`lagwise.core.kriging.blocks.BlockSupport` has the same members for blocks.
    """

    points = 1

    def __init__(self, cov: Covariance, frame: Frame, spec: KrigingSpec):
        self.cov, self.frame, self.spec = cov, frame, spec

    def covariance(self, pts: np.ndarray, targets: np.ndarray) -> np.ndarray:
        """k: covariances of samples (..., k, d) with targets (..., m, d), shape (..., k, m)."""
        return self.cov.between(pts, targets)

    def drift(self, targets: np.ndarray) -> np.ndarray:
        """f: drift functions at targets (..., m, d), shape (..., m, p)."""
        return self.frame.drift(self.spec, targets)

    @property
    def variance(self) -> float:
        """k_00."""
        return self.cov.target_variance


@dataclass(frozen=True)
class Prediction:
    """Kriging estimates at targets.

    Attributes
    ----------
    estimate, variance : ndarray, shape (m,)
        NaN where no estimate could be made (see ``reasons``).
    reasons : dict
        Target index -> why it has no estimate.
    weights : list of dict
        For the targets asked for: sample indexes, weights and Lagrange multipliers.
    """

    estimate: np.ndarray
    variance: np.ndarray
    reasons: dict
    weights: list


class Kriger:
    """Kriging from one sample set with one model, specification and neighbourhood."""

    def __init__(
        self,
        samples: SampleSet,
        model: VariogramModel,
        spec: KrigingSpec,
        neighbourhood: Neighbourhood,
        *,
        max_unique: int = 10_000,
        memory_budget: int = Limits.memory_budget_bytes,
        factorise: bool = True,
    ):
        """``factorise`` False skips the unique neighbourhood's factorisation (its caller
        factorises the matrix itself, as closed-form leave-one-out does)."""
        validate_neighbourhood(neighbourhood, samples.dimension)
        self.spec = validate_spec(spec, model, samples.dimension)
        self.samples = samples
        self.coords = samples.coords
        self.values = samples.values
        self.model = model
        self.cov = Covariance(model, spec)
        self.frame = Frame.of(samples.coords)
        self.neighbourhood = neighbourhood
        self.memory_budget = memory_budget
        self.drift_terms = self.frame.drift(spec, samples.coords[:1]).shape[-1]
        if neighbourhood.unique:
            if samples.size > max_unique:
                raise LimitExceeded(
                    "LAGWISE_MAX_UNIQUE_SAMPLES",
                    max_unique,
                    samples.size,
                    'The unique neighbourhood factorises one matrix of all samples; give a moving neighbourhood, e.g. {"max_points": 24}.',
                    "/neighbourhood",
                )
            if factorise:
                self._factor = self._factor_unique()
            else:
                self._check_drift_rank(self.frame.drift(spec, samples.coords))
        else:
            self.search = NeighbourSearch(samples.coords, model, neighbourhood)

    # ---- unique neighbourhood ---------------------------------------------

    def system_matrix(self, coords: np.ndarray | None = None) -> np.ndarray:
        """The bordered kriging matrix [[K, F], [F', 0]] of all samples (or of ``coords``)."""
        coords = self.coords if coords is None else coords
        K = self.cov.matrix(coords)
        F = self.frame.drift(self.spec, coords)
        p = F.shape[1]
        n = coords.shape[0]
        A = np.zeros((n + p, n + p))
        A[:n, :n] = K
        A[:n, n:] = F
        A[n:, :n] = F.T
        return A

    def _check_drift_rank(self, F: np.ndarray, pointer: str = "/samples") -> None:
        if F.shape[1] and np.linalg.matrix_rank(F) < F.shape[1]:
            raise SingularSystem.at(
                pointer,
                f"the {self.spec.drift or 'constant'} drift cannot be estimated from these samples "
                f"(all {F.shape[0]} samples lie on a line or plane that the drift terms cannot separate)",
            )

    def _factor_unique(self):
        A = self.system_matrix()
        n = self.samples.size
        self._check_drift_rank(A[:n, n:])
        if self.model.bounded:
            rcond = covariance_rcond(A[:n, :n])
            if rcond < RCOND_MIN:
                raise SingularSystem.at(
                    "/model",
                    f"the samples' covariance matrix is ill-conditioned (reciprocal condition {rcond:.1e} < {RCOND_MIN:g}): "
                    "samples too close together for a model this smooth without a nugget; add a nugget or use another family",
                )
        try:
            with warnings.catch_warnings():
                # An exactly singular factor is reported below, with the sample it is near.
                warnings.simplefilter("ignore", LinAlgWarning)
                factor = lu_factor(A, check_finite=True)
        except (LinAlgError, ValueError) as exc:
            raise SingularSystem.at("/model", f"the kriging matrix cannot be factorised: {exc}") from None
        diagonal = np.abs(np.diag(factor[0]))
        if diagonal.min() <= 1e-13 * diagonal.max():
            worst = int(factor[1][int(np.argmin(diagonal))]) if np.argmin(diagonal) < self.samples.size else None
            who = f" (near sample {self.samples.ids[worst]})" if worst is not None and worst < self.samples.size else ""
            raise SingularSystem.at(
                "/samples",
                f"the kriging matrix is singular{who}: samples too close together for a model without nugget, or a drift the samples cannot support",
            )
        return factor

    def solve_unique(self, rhs: np.ndarray) -> np.ndarray:
        """Solve the unique neighbourhood's bordered system [[K, F], [F', 0]] x = rhs, rhs (n + p, r).

        The factorisation is the one made at construction; conditional simulation applies it
        to the residuals of every realisation.
        """
        return lu_solve(self._factor, rhs)

    def _predict_unique(self, targets: np.ndarray, want_weights: set, support: PointSupport) -> Prediction:
        m = targets.shape[0]
        n = self.samples.size
        estimate, variance = np.empty(m), np.empty(m)
        weights = []
        z = self.values
        # Right-hand sides take n x chunk x q x d separations: keep them near 16 MB.
        step = max(1, min(TARGET_CHUNK, 2_000_000 // max(n * support.points, 1)))
        for start in range(0, m, step):
            check_deadline()
            chunk = targets[start : start + step]
            rhs = np.concatenate([support.covariance(self.coords, chunk), support.drift(chunk).T], axis=0)
            solution = lu_solve(self._factor, rhs)
            lam = solution[:n]
            est, var = self._finish(lam, solution[n:], rhs[:n], rhs[n:], z, support.variance)
            estimate[start : start + len(chunk)] = est
            variance[start : start + len(chunk)] = var
            for t in sorted(i for i in want_weights if start <= i < start + len(chunk)):
                weights.append(
                    {
                        "target": t,
                        "samples": list(range(n)),
                        "weights": lam[:, t - start],
                        "lagrange": solution[n:, t - start],
                    }
                )
        return Prediction(estimate, variance, {}, weights)

    def _finish(self, lam, nu, k, f, z, k00):
        """Estimates and variances from weights (n, m) or (m, k) layouts, with the same rules."""
        if self.spec.type == "simple":
            est = self.spec.mean + np.einsum("nm,n->m", lam, z - self.spec.mean)
        else:
            est = np.einsum("nm,n->m", lam, z)
        var = k00 - np.einsum("nm,nm->m", lam, k) - np.einsum("pm,pm->m", nu, f)
        return est, np.maximum(var, 0.0)

    # ---- moving neighbourhood ---------------------------------------------

    def _predict_moving(
        self,
        targets: np.ndarray,
        want_weights: set,
        support: PointSupport,
        exclude: np.ndarray | None = None,
        workers: int = 1,
    ) -> Prediction:
        m = targets.shape[0]
        estimate = np.full(m, np.nan)
        variance = np.full(m, np.nan)
        reasons: dict = {}
        weights: list[dict] = []
        step = min(TARGET_CHUNK, query_rows(self.search.candidates(exclude is not None), self.memory_budget))
        for start in range(0, m, step):
            check_deadline()
            stop = min(m, start + step)
            ex = None if exclude is None else exclude[start:stop]
            idx, valid = self.search.query(targets[start:stop], ex, workers)
            counts = valid.sum(axis=1)
            for t in np.flatnonzero(counts == 0):
                reasons[start + int(t)] = NO_NEIGHBOURS
            for k in np.unique(counts[counts > 0]):
                group = np.flatnonzero(counts == k)
                batch = batch_rows(int(k), self.drift_terms, self.samples.dimension, self.memory_budget, support.points)
                for first in range(0, len(group), batch):
                    check_deadline()
                    rows = group[first : first + batch]
                    self._solve_group(
                        targets[start:stop],
                        idx[rows, :k],
                        rows,
                        start,
                        estimate,
                        variance,
                        reasons,
                        weights,
                        want_weights,
                        support,
                    )
        return Prediction(estimate, variance, reasons, weights)

    def bordered_systems(self, pts: np.ndarray, covariances: np.ndarray, drift: np.ndarray):
        """Build and solve, as one batch, the bordered systems [[K, F], [F', 0]] x = [c, f].

        Parameters
        ----------
        pts : ndarray, shape (m, k, d)
            Each system's neighbours (coordinate units).
        covariances : ndarray, shape (m, k)
            Covariances between the neighbours and each target (the right-hand side c).
        drift : ndarray, shape (m, p)
            Drift functions at each target (f).

        Returns
        -------
        solution : ndarray, shape (m, k + p)
            Weights then Lagrange multipliers.
        ok : ndarray of bool, shape (m,)
            Systems LAPACK solved.
        K, F, b : ndarray
            The covariance blocks (m, k, k), drift blocks (m, k, p) and right-hand sides (m, k + p).
        """
        k = pts.shape[1]
        K = self.cov.between(pts, pts, same=True)
        F = self.frame.drift(self.spec, pts)
        p = F.shape[-1]
        A = np.zeros((len(pts), k + p, k + p))
        A[:, :k, :k] = K
        A[:, :k, k:] = F
        A[:, k:, :k] = np.swapaxes(F, 1, 2)
        b = np.concatenate([covariances, drift], axis=1)
        solution, ok = _batched_solve(A, b)
        return solution, ok, K, F, b

    def _solve_group(self, targets, idx, rows, start, estimate, variance, reasons, weights, want_weights, support):
        """Solve the systems of targets that have the same number of neighbours, as one batch."""
        pts = self.coords[idx]
        tgt = targets[rows][:, None, :]
        k = idx.shape[1]
        solution, ok, K, F, b = self.bordered_systems(
            pts, support.covariance(pts, tgt)[..., 0], support.drift(tgt)[:, 0, :]
        )
        p = F.shape[-1]
        conditioned = pivot_ratios(K) >= RCOND_MIN if self.model.bounded else np.ones(len(rows), dtype=bool)
        if p > 1:
            # A drift the neighbours cannot separate (e.g. collinear samples for a linear
            # drift) makes the system singular even when LAPACK returns numbers.
            spread = np.linalg.svd(F, compute_uv=False)
            ok &= spread[:, -1] > 1e-9 * spread[:, 0]
        lam, nu = solution[:, :k], solution[:, k:]
        z = self.values[idx]
        if self.spec.type == "simple":
            est = self.spec.mean + np.einsum("mk,mk->m", lam, z - self.spec.mean)
        else:
            est = np.einsum("mk,mk->m", lam, z)
        var = support.variance - np.einsum("mk,mk->m", lam, b[:, :k]) - np.einsum("mp,mp->m", nu, b[:, k:])
        positions = start + rows
        for r in np.flatnonzero(~ok):
            reasons[int(positions[r])] = SINGULAR + " (samples " + ", ".join(self.samples.ids[i] for i in idx[r]) + ")"
        for r in np.flatnonzero(ok & ~conditioned):
            reasons[int(positions[r])] = ILL_CONDITIONED
        ok &= conditioned
        estimate[positions[ok]] = est[ok]
        variance[positions[ok]] = np.maximum(var[ok], 0.0)
        for r, t in enumerate(positions):
            if int(t) in want_weights and ok[r]:
                weights.append({"target": int(t), "samples": idx[r].tolist(), "weights": lam[r], "lagrange": nu[r]})

    # ---- public ------------------------------------------------------------

    def predict(
        self,
        targets: np.ndarray,
        *,
        weights_for: tuple[int, ...] = (),
        exclude: np.ndarray | None = None,
        workers: int = 1,
        support: PointSupport | None = None,
    ) -> Prediction:
        """Estimates and kriging variances at targets (m, d) in the samples' working coordinates.

        ``exclude`` (moving neighbourhoods only) names, per target, one sample to leave out
        of its neighbourhood (leave-one-out at the samples themselves). ``support``: point
        kriging by default, or a :class:`lagwise.core.kriging.blocks.BlockSupport` for
        blocks centred at the targets (neighbours are chosen around the centre).
        """
        targets = np.asarray(targets, dtype=np.float64)
        want = set(weights_for)
        support = PointSupport(self.cov, self.frame, self.spec) if support is None else support
        if self.neighbourhood.unique:
            if exclude is not None:
                raise ValueError(
                    "leaving samples out of the unique neighbourhood uses the closed form (lagwise.core.kriging.cross_validation)"
                )
            return self._predict_unique(targets, want, support)
        return self._predict_moving(targets, want, support, exclude, workers)


def _batched_solve(A: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Solve many small systems at once; singular ones are marked False (and left at 0).

    A solution whose residual is not small against |A| |x| + |b| also counts as singular.
    """
    try:
        x = np.linalg.solve(A, b[..., None])[..., 0]
    except np.linalg.LinAlgError:
        out = np.zeros_like(b)
        ok = np.ones(len(A), dtype=bool)
        for i in range(len(A)):
            try:
                out[i] = np.linalg.solve(A[i], b[i])
            except np.linalg.LinAlgError:
                ok[i] = False
        return out, ok
    residual = np.abs(np.einsum("mij,mj->mi", A, x) - b).max(axis=1)
    size = np.abs(A).max(axis=(1, 2)) * np.abs(x).max(axis=1) + np.abs(b).max(axis=1)
    return x, residual <= 1e-8 * size
