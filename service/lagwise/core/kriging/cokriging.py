"""Cokriging of a primary variable from itself and secondary variables (joint model).

Notation: variables v = 0 (the primary), 1, ..., q - 1 (secondaries); an *entry* e is
one measured value z_e of variable v_e at x_e (heterotopic data: only measured
values enter a system). With the joint model's covariances C_uv
(:mod:`lagwise.core.modelling.coregionalisation`), the system of a target x_0 is

    [ K  F ] [lambda]   [k]       K_ef = C_{v_e v_f}(x_e - x_f)   (nugget N_{v_e v_f} where x_e = x_f)
    [ F' 0 ] [  nu  ] = [f]       k_e  = C_{v_e 0}(x_e - x_0)     (nugget N_{v_e 0} where x_e = x_0,
                                                                   micro-scale nugget)

* ordinary cokriging: F_ev = [v_e = v] and f = (1, 0, ..., 0): the primary's weights
  sum to 1 and each secondary's weights sum to 0; the estimate is lambda' z;
* simple cokriging (known means m_v): no constraints; the estimate is
  m_0 + sum_e lambda_e (z_e - m_{v_e}).

The cokriging variance is C_00(0) - lambda' k - nu' f, with C_00(0) the primary's
sill plus its nugget (micro-scale) or without it (measurement error). Wackernagel
(2003), *Multivariate Geostatistics*, 3rd ed., ch. 24-25; Chilès & Delfiner (2012),
section 5.4. A secondary without entries in a target's neighbourhood drops its
constraint (its weights are then all zero).

Moving neighbourhoods take, per variable, up to ``max_points`` nearest measured
values (``min_points`` counts the primary's), in the search space of the joint
model's longest-range structure (:mod:`.neighbourhood`). Systems of one batch share
their layout: a variable with fewer neighbours than the batch's width gets inert
padding entries (unit row, zero right-hand side, zero weight).
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy.linalg import LinAlgError, LinAlgWarning, lu_factor, lu_solve
from scipy.spatial.distance import cdist

from ..deadline import check_deadline
from ..errors import FieldIssue, InvalidInput, LimitExceeded, SingularSystem
from ..limits import Limits
from ..modelling.coregionalisation import JointModel, require_variables, validate_joint_model
from ..modelling.models import unit_semivariance
from .conditioning import RCOND_MIN, covariance_rcond, pivot_ratios
from .cost import batch_rows, query_rows
from .neighbourhood import NO_NEIGHBOURS, Neighbourhood, NeighbourSearch, to_search_space, validate_neighbourhood
from .systems import ILL_CONDITIONED, NUGGET_ROLES, SINGULAR, TARGET_CHUNK, _batched_solve

COKRIGING_TYPES = ("ordinary", "simple")


@dataclass(frozen=True)
class VariableColumns:
    """Samples of several variables at shared locations.

    Attributes
    ----------
    coords : ndarray, shape (n, d)
        Working coordinates.
    names : tuple of str
        Variable names, one per column of ``values``.
    values : ndarray, shape (n, p)
        Measured values; NaN where a variable was not measured at a sample.
    ids : sequence of str
        Sample identifiers.
    """

    coords: np.ndarray
    names: tuple[str, ...]
    values: np.ndarray
    ids: Sequence[str]

    def column(self, name: str) -> np.ndarray:
        return self.values[:, self.names.index(name)]


@dataclass(frozen=True)
class CokrigingSpec:
    """Cokriging type and options.

    Attributes
    ----------
    type : {"ordinary", "simple"}
    primary : str
        The variable estimated.
    means : dict or None
        Simple cokriging: the known mean of every variable of the joint model.
    nugget_as : {"micro_scale", "measurement_error"}
    """

    type: str
    primary: str
    means: dict | None = None
    nugget_as: str = "micro_scale"

    def as_dict(self) -> dict:
        out: dict = {"type": self.type, "primary": self.primary, "nugget_as": self.nugget_as}
        if self.type == "simple":
            out["means"] = dict(self.means or {})
        return out


def validate_cokriging(spec: CokrigingSpec, model: JointModel, columns: VariableColumns) -> JointModel:
    """Check the options against the joint model and the samples; returns the model with the primary first.

    Raises
    ------
    InvalidInput
        Naming ``/kriging/...``, ``/primary`` or ``/model/...``.
    """
    issues = []
    if spec.type not in COKRIGING_TYPES:
        issues.append(FieldIssue("/kriging/type", f"cokriging is one of {', '.join(COKRIGING_TYPES)}"))
    if spec.nugget_as not in NUGGET_ROLES:
        issues.append(FieldIssue("/kriging/nugget_as", f"must be one of {', '.join(NUGGET_ROLES)}"))
    if issues:
        raise InvalidInput(issues)
    validate_joint_model(model, columns.coords.shape[1])
    require_variables(model, columns.names)
    if spec.primary not in model.variables:
        raise InvalidInput.at(
            "/primary",
            f"the primary {spec.primary!r} is not a variable of the joint model ({', '.join(model.variables)})",
        )
    if spec.type == "simple":
        means = spec.means or {}
        missing = [v for v in model.variables if v not in means or not math.isfinite(means[v])]
        if missing:
            raise InvalidInput.at("/kriging/means", f"simple cokriging needs the mean of {', '.join(missing)}")
    for name in model.variables:
        measured = int(np.isfinite(columns.column(name)).sum())
        if measured < 2:
            raise InvalidInput.at(
                f"/samples/variables/{name}", f"variable {name!r} has {measured} measured values; at least 2 are needed"
            )
    order = (spec.primary,) + tuple(v for v in model.variables if v != spec.primary)
    return model.subset(order)


@dataclass(frozen=True)
class CokrigingPrediction:
    """Cokriging estimates and variances of the primary at targets (NaN where none; see ``reasons``)."""

    estimate: np.ndarray
    variance: np.ndarray
    reasons: dict


def distinct_locations(rows: np.ndarray, points: np.ndarray, valid: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The distinct locations of each system's entries.

    Parameters
    ----------
    rows : ndarray of int, shape (b, k)
        Sample row of each entry (entries of one row share its coordinates).
    points : ndarray, shape (b, k, d)
        Coordinates of each entry.
    valid : ndarray of bool, shape (b, k)
        Entries taking part; the inert ones share one location of their own.

    Returns
    -------
    local : ndarray of int, shape (b, k)
        Each entry's location among its system's.
    places : ndarray, shape (b, u, d)
        Coordinates of the locations (u the most any system has; unused slots repeat a used one).
    """
    keyed = np.where(valid, rows, -1)
    order = np.argsort(keyed, axis=1, kind="stable")
    ordered = np.take_along_axis(keyed, order, axis=1)
    first = np.ones(keyed.shape, dtype=bool)
    first[:, 1:] = ordered[:, 1:] != ordered[:, :-1]
    rank = np.cumsum(first, axis=1) - 1
    local = np.empty_like(rank)
    np.put_along_axis(local, order, rank, axis=1)
    places = np.repeat(points[:, :1, :], int(rank[:, -1].max()) + 1, axis=1)
    system, slot = np.nonzero(first)
    places[system, rank[system, slot]] = points[system, order[system, slot]]
    return local, places


class _Entries:
    """Measured values of every variable of the (reordered) joint model."""

    def __init__(self, columns: VariableColumns, model: JointModel):
        self.rows = [np.flatnonzero(np.isfinite(columns.column(v))) for v in model.variables]
        self.coords = [columns.coords[r] for r in self.rows]
        self.values = [columns.column(v)[r] for v, r in zip(model.variables, self.rows, strict=True)]

    @property
    def total(self) -> int:
        return sum(len(r) for r in self.rows)

    def stacked(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """All entries: coordinates (n_e, d), values (n_e,), variable of each (n_e,)."""
        labels = np.concatenate([np.full(len(r), v) for v, r in enumerate(self.rows)])
        return np.concatenate(self.coords), np.concatenate(self.values), labels


class Cokriger:
    """Cokriging of the primary with one joint model, specification and neighbourhood."""

    def __init__(
        self,
        columns: VariableColumns,
        model: JointModel,
        spec: CokrigingSpec,
        neighbourhood: Neighbourhood,
        *,
        max_unique: int = Limits.max_unique_samples,
        memory_budget: int = Limits.memory_budget_bytes,
    ):
        validate_neighbourhood(neighbourhood, columns.coords.shape[1])
        self.model = validate_cokriging(spec, model, columns)
        self.spec = spec
        self.neighbourhood = neighbourhood
        self.memory_budget = memory_budget
        self.q = self.model.size
        self.entries = _Entries(columns, self.model)
        self.micro = spec.nugget_as == "micro_scale"
        sill = self.model.sill()
        self.target_variance = float(sill[0, 0] + (self.model.nugget[0, 0] if self.micro else 0.0))
        self.pad = float(np.max(np.diag(sill + self.model.nugget))) or 1.0
        if spec.type == "simple":
            means = spec.means or {}
            self.means = np.array([float(means[v]) for v in self.model.variables])
        self.constraints = self.q if spec.type == "ordinary" else 0
        if neighbourhood.unique:
            if self.entries.total > max_unique:
                raise LimitExceeded(
                    "LAGWISE_MAX_UNIQUE_SAMPLES",
                    max_unique,
                    self.entries.total,
                    "The unique neighbourhood factorises one matrix of all measured values of every variable; "
                    'give a moving neighbourhood, e.g. {"max_points": 24}.',
                    "/neighbourhood",
                )
        else:
            shared = self.model.shared()
            self.searches = [
                NeighbourSearch(
                    coords,
                    shared,
                    Neighbourhood(
                        neighbourhood.max_points,
                        neighbourhood.min_points if v == 0 else 1,
                        neighbourhood.radius,
                        neighbourhood.sectors,
                    ),
                )
                for v, coords in enumerate(self.entries.coords)
            ]

    # ---- covariances ---------------------------------------------------------

    def _unit_covariances(self, h: np.ndarray) -> tuple[list[np.ndarray], np.ndarray]:
        """1 - g_s at separation vectors h (..., d), one array per structure, and the lengths |h|.

        Isotropic structures use the Euclidean length directly (computed once).
        """
        length = np.sqrt(np.einsum("...d,...d->...", h, h))
        out = []
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            for s in self.model.structures:
                if s.anisotropy.isotropic:
                    distances = length
                else:
                    distances = s.anisotropy.distances(h.reshape(-1, h.shape[-1])).reshape(length.shape)
                out.append(1.0 - unit_semivariance(s.family, distances, s.range, s.extra))
        return out, length

    def _block(self, h: np.ndarray, at: np.ndarray, labels: np.ndarray, cov: np.ndarray) -> None:
        """C between entries, with the nugget where they share a location, written into ``cov``.

        ``h`` holds the separations of distinct locations (..., d), ``at`` (..., k, k) the flat
        position in ``h[..., 0]`` of each entry pair's separation, ``labels`` (k,) the entries'
        variables; ``cov`` (..., k, k) receives the covariances.
        """
        units, length = self._unit_covariances(h)
        picked = np.empty(at.shape)
        cov[...] = 0.0
        for s, unit in zip(self.model.structures, units, strict=True):
            np.multiply(s.sills[np.ix_(labels, labels)], unit.take(at, out=picked), out=picked)
            cov += picked
        np.multiply(self.model.nugget[np.ix_(labels, labels)], (length == 0).take(at), out=picked)
        cov += picked
        if not np.isfinite(cov).all():
            raise InvalidInput.at(
                "/model", "the joint model gives non-finite covariances at these separations; check its ranges"
            )

    # ---- unique neighbourhood ------------------------------------------------

    def system_matrix(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """The bordered matrix of all entries, their coordinates, values and variable labels."""
        coords, values, labels = self.entries.stacked()
        n = len(values)
        K = np.zeros((n, n))
        for s in self.model.structures:
            space = to_search_space(coords, s.anisotropy)
            with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
                # Distances in the structure's isotropic space are its rescaled distances.
                unit = 1.0 - s.unit().semivariance(cdist(space, space).ravel()).reshape(n, n)
            K += s.sills[np.ix_(labels, labels)] * unit
        same = cdist(coords, coords) == 0
        K += self.model.nugget[np.ix_(labels, labels)] * same
        if not np.isfinite(K).all():
            raise InvalidInput.at("/model", "the joint model gives non-finite covariances; check its ranges")
        c = self.constraints
        A = np.zeros((n + c, n + c))
        A[:n, :n] = K
        if c:
            F = (labels[:, None] == np.arange(c)[None, :]).astype(float)
            A[:n, n:] = F
            A[n:, :n] = F.T
        return A, coords, values, labels

    def _check_unique(self, A: np.ndarray, n: int) -> None:
        rcond = covariance_rcond(A[:n, :n])
        if rcond < RCOND_MIN:
            raise SingularSystem.at(
                "/model",
                f"the cokriging matrix of the measured values is ill-conditioned (reciprocal condition {rcond:.1e} < "
                f"{RCOND_MIN:g}): values too close together for this joint model, or variables it makes perfectly "
                "correlated at one location; add a nugget",
            )

    def _rhs(self, coords: np.ndarray, labels: np.ndarray, targets: np.ndarray) -> np.ndarray:
        """[k; f] for targets (m, d): shape (n + c, m)."""
        h = coords[:, None, :] - targets[None, :, :]
        units, length = self._unit_covariances(h)
        cov = np.zeros(h.shape[:-1])
        for s, unit in zip(self.model.structures, units, strict=True):
            cov += s.sills[labels, 0][:, None] * unit
        if self.micro:
            cov += self.model.nugget[labels, 0][:, None] * (length == 0)
        f = np.zeros((self.constraints, targets.shape[0]))
        if self.constraints:
            f[0] = 1.0
        return np.concatenate([cov, f], axis=0)

    def _centred(self, values: np.ndarray, labels: np.ndarray) -> np.ndarray:
        return values - self.means[labels] if self.spec.type == "simple" else values

    def _finish(self, lam: np.ndarray, nu: np.ndarray, k: np.ndarray, f: np.ndarray, z: np.ndarray):
        """Estimates and variances from weights (n, m), multipliers (c, m) and centred values (n,)."""
        est = np.einsum("nm,n->m", lam, z)
        if self.spec.type == "simple":
            est = est + self.means[0]
        var = self.target_variance - np.einsum("nm,nm->m", lam, k) - np.einsum("cm,cm->m", nu, f)
        return est, np.maximum(var, 0.0)

    def _predict_unique(self, targets: np.ndarray) -> CokrigingPrediction:
        A, coords, values, labels = self.system_matrix()
        n = len(values)
        self._check_unique(A, n)
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", LinAlgWarning)
                factor = lu_factor(A, check_finite=True)
        except (LinAlgError, ValueError) as exc:
            raise SingularSystem.at("/model", f"the cokriging matrix cannot be factorised: {exc}") from None
        z = self._centred(values, labels)
        m = targets.shape[0]
        estimate, variance = np.empty(m), np.empty(m)
        step = max(1, min(TARGET_CHUNK, 2_000_000 // max(n, 1)))
        for start in range(0, m, step):
            check_deadline()
            chunk = targets[start : start + step]
            rhs = self._rhs(coords, labels, chunk)
            solution = lu_solve(factor, rhs)
            est, var = self._finish(solution[:n], solution[n:], rhs[:n], rhs[n:], z)
            estimate[start : start + len(chunk)] = est
            variance[start : start + len(chunk)] = var
        return CokrigingPrediction(estimate, variance, {})

    def leave_one_out_unique(self) -> tuple[np.ndarray, np.ndarray]:
        """Closed-form leave-one-out of every primary value (Dubrule 1983, Math. Geology 15(6)).

        With B the inverse of the bordered matrix of all entries and b = [z; 0] (centred
        for simple cokriging), the error of primary entry e estimated from the others is
        z_e - z_hat_(-e) = (B b)_e / B_ee and its variance 1 / B_ee: removing one row and
        column of a bordered system, whatever the other variables. Secondary values
        measured at the left-out sample stay in the system.

        Returns estimates and error standard deviations of the primary values, in their order.
        """
        A, _, values, labels = self.system_matrix()
        n = len(values)
        self._check_unique(A, n)
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", LinAlgWarning)
                B = np.linalg.inv(A)
        except np.linalg.LinAlgError:
            raise SingularSystem.at("/model", "the cokriging matrix of the measured values is singular") from None
        z = self._centred(values, labels)
        primary = np.flatnonzero(labels == 0)
        diagonal = np.diag(B)[primary]
        if np.any(diagonal <= 0):
            raise SingularSystem.at("/model", "the cokriging matrix is not positive definite: check the joint model")
        full = np.concatenate([z, np.zeros(self.constraints)])
        residual = (B[primary] @ full) / diagonal
        return values[primary] - residual, np.sqrt(1.0 / diagonal)

    # ---- moving neighbourhood ------------------------------------------------

    def _predict_moving(self, targets: np.ndarray, exclude: np.ndarray | None, workers: int) -> CokrigingPrediction:
        m = targets.shape[0]
        estimate, variance = np.full(m, np.nan), np.full(m, np.nan)
        reasons: dict = {}
        widths = [min(self.neighbourhood.max_points or 0, len(r)) for r in self.entries.rows]
        total = sum(widths)
        candidates = sum(s.candidates(exclude is not None) for s in self.searches)
        step = min(TARGET_CHUNK, query_rows(candidates, self.memory_budget))
        batch = batch_rows(total, self.constraints, targets.shape[1], self.memory_budget)
        labels = np.concatenate([np.full(w, v) for v, w in enumerate(widths)])
        for start in range(0, m, step):
            check_deadline()
            stop = min(m, start + step)
            found = [
                search.query(
                    targets[start:stop], exclude[start:stop] if exclude is not None and v == 0 else None, workers
                )
                for v, search in enumerate(self.searches)
            ]
            idx = np.concatenate([i for i, _ in found], axis=1)
            valid = np.concatenate([ok for _, ok in found], axis=1)
            points = np.concatenate([self.entries.coords[v][i] for v, (i, _) in enumerate(found)], axis=1)
            rows_of = np.concatenate([self.entries.rows[v][i] for v, (i, _) in enumerate(found)], axis=1)
            values = np.concatenate([self.entries.values[v][i] for v, (i, _) in enumerate(found)], axis=1)
            primary = valid[:, : widths[0]].any(axis=1)
            for t in np.flatnonzero(~primary):
                reasons[start + int(t)] = NO_NEIGHBOURS
            rows = np.flatnonzero(primary)
            del idx
            for first in range(0, len(rows), batch):
                check_deadline()
                group = rows[first : first + batch]
                self._solve_group(
                    targets[start:stop][group],
                    points[group],
                    rows_of[group],
                    values[group],
                    valid[group],
                    labels,
                    start + group,
                    estimate,
                    variance,
                    reasons,
                )
        return CokrigingPrediction(estimate, variance, reasons)

    def _solve_group(
        self, targets, points, rows, values, valid, labels, positions, estimate, variance, reasons
    ) -> None:
        """Solve the padded systems of a batch of targets at once.

        Covariances are evaluated once per pair of distinct locations of a system (variables
        measured at one sample share its location) and picked per pair of entries.
        """
        b, k = valid.shape
        c = self.constraints
        local, places = distinct_locations(rows, points, valid)
        u = places.shape[1]
        start = np.arange(b)[:, None] * u
        h = places[:, :, None, :] - places[:, None, :, :]
        A = np.zeros((b, k + c, k + c))
        K = A[:, :k, :k]
        self._block(h, (start[:, :, None] + local[:, :, None]) * u + local[:, None, :], labels, K)
        np.copyto(K, 0.0, where=~(valid[:, :, None] & valid[:, None, :]))
        K[:, np.arange(k), np.arange(k)] = np.where(valid, K[:, np.arange(k), np.arange(k)], self.pad)
        del h
        rhs = np.zeros((b, k + c))
        units, length = self._unit_covariances(places - targets[:, None, :])
        at = start + local
        cov = np.zeros((b, k))
        for s, unit in zip(self.model.structures, units, strict=True):
            cov += s.sills[labels, 0][None, :] * unit.take(at)
        if self.micro:
            cov += self.model.nugget[labels, 0][None, :] * (length == 0).take(at)
        rhs[:, :k] = np.where(valid, cov, 0.0)
        if c:
            F = (labels[None, :, None] == np.arange(c)[None, None, :]) & valid[:, :, None]
            A[:, :k, k:] = F
            A[:, k:, :k] = np.swapaxes(F, 1, 2)
            # A secondary without neighbours: its constraint row becomes nu_v = 0.
            empty = ~F.any(axis=1)
            for v in range(c):
                A[empty[:, v], k + v, k + v] = 1.0
            rhs[:, k] = 1.0
        solution, ok = _batched_solve(A, rhs)
        conditioned = pivot_ratios(K) >= RCOND_MIN
        lam, nu = solution[:, :k], solution[:, k:]
        z = np.where(valid, values, 0.0)
        if self.spec.type == "simple":
            z = np.where(valid, values - self.means[labels][None, :], 0.0)
        est = np.einsum("mk,mk->m", lam, z) + (self.means[0] if self.spec.type == "simple" else 0.0)
        var = self.target_variance - np.einsum("mk,mk->m", lam, rhs[:, :k]) - np.einsum("mc,mc->m", nu, rhs[:, k:])
        for r in np.flatnonzero(~ok):
            reasons[int(positions[r])] = SINGULAR
        for r in np.flatnonzero(ok & ~conditioned):
            reasons[int(positions[r])] = ILL_CONDITIONED
        ok &= conditioned
        estimate[positions[ok]] = est[ok]
        variance[positions[ok]] = np.maximum(var[ok], 0.0)

    # ---- public --------------------------------------------------------------

    @property
    def primary_rows(self) -> np.ndarray:
        """Sample rows where the primary is measured."""
        return self.entries.rows[0]

    def predict(
        self, targets: np.ndarray, *, exclude: np.ndarray | None = None, workers: int = 1
    ) -> CokrigingPrediction:
        """Estimates and cokriging variances of the primary at targets (m, d), working coordinates.

        ``exclude`` (moving neighbourhoods) names, per target, one primary value (its position
        among the primary's measured values) to leave out: leave-one-out at the samples.
        """
        targets = np.asarray(targets, dtype=np.float64)
        if self.neighbourhood.unique:
            if exclude is not None:
                raise ValueError("leaving values out of the unique neighbourhood uses leave_one_out_unique")
            return self._predict_unique(targets)
        return self._predict_moving(targets, exclude, workers)
