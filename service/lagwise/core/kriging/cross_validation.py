"""Cross-validation of a kriging set-up: leave-one-out and k-fold.

Leave-one-out with the unique neighbourhood uses the closed form of Dubrule (1983),
Math. Geology 15(6): with B the inverse of the bordered kriging matrix of all
samples and b = [z; 0] (z - m for simple kriging), the error of the estimate of z_i
from the other samples is z_i - z_hat_(-i) = (B b)_i / B_ii and its variance is
1 / B_ii -- one factorisation instead of n. The inverse's sample block is formed
through the Schur complement of a Cholesky factor when the covariance matrix is
positive definite (bounded models): K = U'U, diag(K^-1) is the row norms of U^-1,
otherwise through LU.

Reported per sample (DESIGN conventions): error = estimate - observed; the standard
deviation is that of this error (it includes the nugget whatever its role, since
an observation is compared), standardized error = error / standard deviation.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.linalg import LinAlgError, cho_factor, cho_solve, inv
from scipy.linalg.lapack import dpocon, dtrtri

from ..data.samples import SampleSet
from ..deadline import check_deadline
from ..errors import InvalidInput, SingularSystem
from ..limits import Limits
from ..modelling.models import VariogramModel
from .conditioning import RCOND_MIN
from .cost import UNIQUE_LOO_COPIES, UNIQUE_PREDICTION_COPIES, check_kriging, cross_validation_flops, drift_terms
from .neighbourhood import Neighbourhood
from .systems import Kriger, KrigingSpec

Z95 = 1.959963984540054  # scipy.stats.norm.ppf(0.975)
DEFAULT_OUTLIER_THRESHOLD = 2.5
SCHEMES = ("leave_one_out", "k_fold")


@dataclass(frozen=True)
class Scheme:
    """``leave_one_out`` or ``k_fold`` with ``folds`` and ``seed``."""

    type: str = "leave_one_out"
    folds: int = 10
    seed: int = 1

    def as_dict(self) -> dict:
        return (
            {"type": self.type}
            if self.type == "leave_one_out"
            else {"type": self.type, "folds": self.folds, "seed": self.seed}
        )


@dataclass(frozen=True)
class CrossValidation:
    """Per-sample results (arrays in sample order; NaN where no estimate), statistics and warnings
    (e.g. a model that looks untransformed for a transformed cross-validation)."""

    observed: np.ndarray
    estimate: np.ndarray
    standard_deviation: np.ndarray
    error: np.ndarray
    standardized_error: np.ndarray
    outlier: np.ndarray
    statistics: dict
    assessment: str
    reasons: dict
    method: str
    warnings: tuple[str, ...] = ()


def _inverse_blocks(kriger: Kriger, rhs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """diag(B)[:n] and (B [rhs; 0])[:n] for the bordered matrix B^-1 of all samples."""
    A = kriger.system_matrix()
    n = kriger.samples.size
    K, F = A[:n, :n], A[:n, n:]
    try:
        if not kriger.model.bounded:
            raise LinAlgError("unbounded model: the covariance block is not positive definite")
        factor = cho_factor(K, lower=False, check_finite=False)
        rcond, _ = dpocon(factor[0], float(np.abs(K).sum(axis=0).max()))
        if rcond < RCOND_MIN:
            raise SingularSystem.at(
                "/model",
                f"the samples' covariance matrix is ill-conditioned (reciprocal condition {rcond:.1e} < {RCOND_MIN:g}): "
                "samples too close together for a model this smooth without a nugget; add a nugget or use another family",
            )
        # K = U'U, so K^-1 = U^-1 U^-T and diag(K^-1)_i is the squared norm of row i of U^-1.
        u_inv, info = dtrtri(np.triu(factor[0]), lower=0)
        if info != 0:
            raise LinAlgError("dtrtri failed")
        k_inv_diag = np.einsum("ij,ij->i", u_inv, u_inv)
        del u_inv
        base = cho_solve(factor, rhs, check_finite=False)
        if F.shape[1] == 0:
            return k_inv_diag, base
        kf = cho_solve(factor, F, check_finite=False)
        schur = F.T @ kf
        s_inv = np.linalg.inv(schur)
        diag = k_inv_diag - np.einsum("ip,pq,iq->i", kf, s_inv, kf)
        return diag, base - kf @ (s_inv @ (F.T @ base))
    except (LinAlgError, np.linalg.LinAlgError):
        if kriger.model.bounded:
            raise SingularSystem.at(
                "/model",
                "the samples' covariance matrix is not positive definite in floating point (singular or ill-conditioned)",
            ) from None
        B = inv(A, check_finite=False)
        full = np.concatenate([rhs, np.zeros(F.shape[1])])
        return np.diag(B)[:n].copy(), (B @ full)[:n]


def _leave_one_out_unique(kriger: Kriger) -> tuple[np.ndarray, np.ndarray]:
    z = kriger.values
    rhs = z - kriger.spec.mean if kriger.spec.type == "simple" else z
    diag, bz = _inverse_blocks(kriger, rhs)
    if np.any(diag <= 0):
        raise SingularSystem.at(
            "/model", "the kriging matrix is not positive definite on the samples' span: check the model"
        )
    residual = bz / diag  # z_i - z_hat_(-i), Dubrule (1983)
    return z - residual, np.sqrt(1.0 / diag)


def _observation_sd(kriger: Kriger, variance: np.ndarray) -> np.ndarray:
    extra = kriger.model.nugget if kriger.spec.nugget_as == "measurement_error" else 0.0
    return np.sqrt(variance + extra)


def _check_cost(n: int, dimension: int, spec: KrigingSpec, hood: Neighbourhood, scheme: Scheme, limits: Limits) -> None:
    """Refuse cross-validation above the kriging limits (operations and dense-matrix memory)."""
    p = drift_terms(spec.type, spec.drift, dimension)
    folds = None if scheme.type == "leave_one_out" else scheme.folds
    check_kriging(
        limits,
        n,
        n,
        hood,
        p,
        flops=cross_validation_flops(n, folds, hood, p),
        unique_copies=UNIQUE_LOO_COPIES if folds is None else UNIQUE_PREDICTION_COPIES,
        what="cross-validation",
    )


def validate_scheme(scheme: Scheme, samples: int, outlier_threshold: float = DEFAULT_OUTLIER_THRESHOLD) -> None:
    """Check a scheme against the number of samples; raises InvalidInput naming ``/scheme/...``."""
    if scheme.type not in SCHEMES:
        raise InvalidInput.at("/scheme/type", f"must be one of {', '.join(SCHEMES)}")
    if scheme.type == "k_fold" and not 2 <= scheme.folds <= samples:
        raise InvalidInput.at("/scheme/folds", f"must be from 2 to the number of samples ({samples})")
    if not (math.isfinite(outlier_threshold) and outlier_threshold > 0):
        raise InvalidInput.at("/outlier_threshold", "must be positive")


def cross_validate(
    samples: SampleSet,
    model: VariogramModel,
    spec: KrigingSpec = KrigingSpec(),
    neighbourhood: Neighbourhood = Neighbourhood(),
    scheme: Scheme = Scheme(),
    *,
    outlier_threshold: float = DEFAULT_OUTLIER_THRESHOLD,
    limits: Limits = Limits(),
    workers: int = 1,
) -> CrossValidation:
    """Cross-validate kriging with ``model`` on ``samples``.

    Parameters
    ----------
    scheme : Scheme
        ``leave_one_out`` (closed form for the unique neighbourhood) or ``k_fold``.
    outlier_threshold : float
        Samples with |standardized error| above it are flagged (default 2.5).

    Raises
    ------
    InvalidInput
        Bad scheme, model, kriging options or neighbourhood.
    """
    limits.check_samples(samples.size)
    validate_scheme(scheme, samples.size, outlier_threshold)
    n = samples.size
    _check_cost(n, samples.dimension, spec, neighbourhood, scheme, limits)
    estimate, sd = np.full(n, np.nan), np.full(n, np.nan)
    reasons: dict = {}
    if scheme.type == "leave_one_out":
        kriger = Kriger(
            samples,
            model,
            spec,
            neighbourhood,
            max_unique=limits.max_unique_samples,
            memory_budget=limits.memory_budget_bytes,
            factorise=not (neighbourhood.unique and model.bounded),
        )
        if neighbourhood.unique:
            estimate, sd = _leave_one_out_unique(kriger)
            method = "leave-one-out, closed form (Dubrule 1983)"
        else:
            result = kriger.predict(samples.coords, exclude=np.arange(n), workers=workers)
            estimate, sd = result.estimate, _observation_sd(kriger, result.variance)
            reasons = result.reasons
            method = "leave-one-out, moving neighbourhood"
    else:
        folds = np.array_split(np.random.default_rng(scheme.seed).permutation(n), scheme.folds)
        for fold in folds:
            check_deadline()
            keep = np.ones(n, dtype=bool)
            keep[fold] = False
            kriger = Kriger(
                samples.subset(keep),
                model,
                spec,
                neighbourhood,
                max_unique=limits.max_unique_samples,
                memory_budget=limits.memory_budget_bytes,
            )
            result = kriger.predict(samples.coords[fold], workers=workers)
            estimate[fold], sd[fold] = result.estimate, _observation_sd(kriger, result.variance)
            reasons.update({int(fold[t]): why for t, why in result.reasons.items()})
        method = f"{scheme.folds}-fold (seed {scheme.seed})"
    return summarise(samples.values, estimate, sd, outlier_threshold, reasons, method)


def summarise(observed, estimate, sd, threshold, reasons, method) -> CrossValidation:
    """Errors, statistics and the plain-language assessment."""
    error = estimate - observed
    with np.errstate(invalid="ignore", divide="ignore"):
        standardized = np.where(sd > 0, error / sd, np.nan)
    outlier = np.abs(np.nan_to_num(standardized)) > threshold
    stats = statistics(observed, estimate, error, sd, standardized, outlier)
    return CrossValidation(
        observed, estimate, sd, error, standardized, outlier, stats, assess(stats, observed), reasons, method
    )


def _mean(a):
    return float(np.mean(a)) if a.size else None


def statistics(observed, estimate, error, sd, standardized, outlier) -> dict:
    """Cross-validation statistics (names as in the API); None where undefined."""
    ok = np.isfinite(estimate)
    e, z, zh = error[ok], observed[ok], estimate[ok]
    s = standardized[ok & np.isfinite(standardized)]
    spread = float(np.sum((z - z.mean()) ** 2)) if z.size else 0.0
    correlation = None
    if z.size > 1 and np.std(z) > 0 and np.std(zh) > 0:
        correlation = float(np.corrcoef(z, zh)[0, 1])
    covered = np.abs(e) <= Z95 * sd[ok]
    return {
        "count": int(ok.sum()),
        "mean_error": _mean(e),
        "mean_absolute_error": _mean(np.abs(e)),
        "root_mean_square_error": math.sqrt(_mean(e * e)) if e.size else None,
        "mean_standardized_error": _mean(s),
        "root_mean_square_standardized_error": math.sqrt(_mean(s * s)) if s.size else None,
        "correlation": correlation,
        "goodness_of_prediction": 1.0 - float(np.sum(e * e)) / spread if spread > 0 else None,
        "interval_coverage_95": _mean(covered.astype(float)),
        "outliers": int(outlier.sum()),
    }


def assess(stats: dict, observed: np.ndarray) -> str:
    """A short plain-language reading of the statistics."""
    if not stats["count"]:
        return "No sample could be estimated: widen the neighbourhood."
    parts = []
    sd = float(np.std(observed)) or 1.0
    bias = stats["mean_error"] / sd
    if abs(bias) < 0.05:
        parts.append("No notable bias (mean error under 5 % of the data's standard deviation).")
    else:
        parts.append(
            f"Estimates are on average {'higher' if bias > 0 else 'lower'} than the observations by {abs(stats['mean_error']):.4g} ({abs(bias) * 100:.0f} % of the data's standard deviation)."
        )
    rmsse = stats["root_mean_square_standardized_error"]
    if rmsse is None:
        parts.append("Standardized errors are undefined (zero kriging variances).")
    elif rmsse > 1.2:
        parts.append(
            f"RMSSE is {rmsse:.2f}: errors are larger than the kriging variance says, so the model understates the uncertainty (sill or nugget too small)."
        )
    elif rmsse < 0.8:
        parts.append(
            f"RMSSE is {rmsse:.2f}: errors are smaller than the kriging variance says, so the model overstates the uncertainty."
        )
    else:
        parts.append(f"RMSSE is {rmsse:.2f}: the kriging variance matches the size of the errors.")
    outside = 1.0 - stats["interval_coverage_95"]
    parts.append(f"{outside * 100:.1f} % of samples fall outside their 95 % interval (about 5 % expected).")
    if stats["outliers"]:
        parts.append(f"{stats['outliers']} samples are flagged as outliers; check them for errors.")
    return " ".join(parts)
