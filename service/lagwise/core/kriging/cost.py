"""Cost of kriging work: floating-point operations, memory, and batch sizes under a memory budget.

Every estimate here is made before any system is built, from sizes alone, so a
request is refused up front (``LimitExceeded``) instead of running out of memory or
time. Units: operations (flops) and bytes of float64 arrays.

Moving neighbourhoods solve one small system of size s = k + p per target (k
neighbours, p drift terms); LU factorisation of an s x s matrix costs s^3 / 3
multiply-adds and a solve 2 s^2 (Golub & Van Loan 2013, section 3.2). Building the
system costs more than solving it for every size the service allows: each of the k^2
covariance entries takes separation vectors, a norm and the model's formula through
numpy temporaries, measured at about 120 ns per entry against 0.1 ns per multiply-add
of LAPACK's factorisation on one core
(``tests/reliability/test_kriging_rate.py`` prints the rate), so an entry counts as
:data:`ENTRY_OPERATIONS` operations and each target :data:`TARGET_OPERATIONS` more for
its neighbour search. "Operations" below are these multiply-add equivalents. The batched
solver holds, per system, the separation vectors (k, k, d), a few k x k temporaries
of the covariance evaluation, the bordered matrix and LAPACK's copy of it
(:data:`SYSTEM_WORK_ARRAYS`), so its memory grows as k^2 per target: the batch is
cut to fit ``memory_budget`` bytes, never to the request's size.
"""

from __future__ import annotations

import math

from ..errors import LimitExceeded
from ..limits import Limits
from .neighbourhood import Neighbourhood

FLOAT = 8
SYSTEM_WORK_ARRAYS = 8  # k x k float64 temporaries per system besides the d separation components
QUERY_WORK_ARRAYS = 6  # (targets, candidates) arrays of the neighbour search: distances, indexes, masks, sectors
UNIQUE_PREDICTION_COPIES = 2  # the bordered matrix and its LU factor
UNIQUE_LOO_COPIES = 5  # the kriger's LU factor, the matrix, its Cholesky factor, triangular copy and inverse
ENTRY_OPERATIONS = 1000  # one covariance entry (separations, norm, model formula), in multiply-add equivalents
# Covariance entries built between two deadline checks: about 0.5 s with the costliest families (Matern's
# Bessel function takes about 1 us per entry), so a request past its deadline stops soon after it.
BATCH_ENTRIES = 500_000
TARGET_OPERATIONS = 20_000  # per target: neighbour search, sectors, bookkeeping (about 10 us measured)


def drift_terms(kriging_type: str, drift: str | None, dimension: int) -> int:
    """Number p of drift functions: 0 (simple), 1 (ordinary), 1 + d (linear), 1 + d + d(d+1)/2 (quadratic)."""
    if kriging_type == "simple":
        return 0
    if kriging_type != "universal":
        return 1
    return 1 + dimension + (dimension * (dimension + 1) // 2 if drift == "quadratic" else 0)


def system_bytes(k: int, p: int, dimension: int, points: int = 1) -> int:
    """Working memory of one moving-neighbourhood system with k neighbours (bytes); ``points``
    discretisation points per block add their (k, points, d) separations and covariances."""
    s = k + p
    block = k * points * (dimension + 2) + points * (dimension + p) if points > 1 else 0
    return FLOAT * (k * k * (dimension + SYSTEM_WORK_ARRAYS) + 3 * s * s + 4 * s + block)


def batch_rows(k: int, p: int, dimension: int, memory_budget: int, points: int = 1) -> int:
    """How many systems with k neighbours one batched solve may hold within ``memory_budget`` bytes and
    :data:`BATCH_ENTRIES` covariance entries (>= 1)."""
    return max(1, min(memory_budget // system_bytes(k, p, dimension, points), BATCH_ENTRIES // (k * k + k * points)))


def query_rows(candidates: int, memory_budget: int) -> int:
    """How many targets one neighbour search may handle when each looks at ``candidates`` samples (>= 1)."""
    return max(1, memory_budget // (FLOAT * QUERY_WORK_ARRAYS * max(candidates, 1)))


def unique_bytes(n: int, p: int, copies: int) -> int:
    """Memory of ``copies`` dense bordered matrices of n samples and p drift terms (bytes)."""
    return FLOAT * copies * (n + p) ** 2


def prediction_flops(n: int, m: int, neighbourhood: Neighbourhood, p: int) -> float:
    """Operations to krige m targets from n samples.

    Unique neighbourhood: the n x n covariance matrix, one factorisation, and per
    target n covariances and a solve. Moving: per target a k x k matrix and k
    covariances, a factorisation and a solve.
    """
    if neighbourhood.max_points is None:  # unique neighbourhood
        s = n + p
        return ENTRY_OPERATIONS * n * n + s**3 / 3 + m * (TARGET_OPERATIONS + ENTRY_OPERATIONS * n + 2.0 * s * s)
    k = min(neighbourhood.max_points, n)
    s = k + p
    return m * (TARGET_OPERATIONS + ENTRY_OPERATIONS * (k * k + k) + s**3 / 3 + 2.0 * s * s)


def block_prediction_flops(n: int, m: int, neighbourhood: Neighbourhood, p: int, points: int) -> float:
    """Operations to krige m blocks of ``points`` discretisation points each (``points`` 1: m points):
    :func:`prediction_flops` plus the point-to-block and within-block covariance averages."""
    if points <= 1:
        return prediction_flops(n, m, neighbourhood, p)
    k = n if neighbourhood.unique else min(neighbourhood.max_points or n, n)
    return prediction_flops(n, m, neighbourhood, p) + ENTRY_OPERATIONS * (m * k * (points - 1) + points**2)


def cross_validation_flops(n: int, folds: int | None, neighbourhood: Neighbourhood, p: int) -> float:
    """Operations of leave-one-out (``folds`` None) or k-fold cross-validation of n samples.

    Leave-one-out with the unique neighbourhood is the closed form: the n x n matrix,
    one factorisation and one triangular inverse, about (n + p)^3 operations (Golub &
    Van Loan 2013).
    """
    if folds is None:
        if neighbourhood.unique:
            return float(ENTRY_OPERATIONS * n * n + (n + p) ** 3)
        return prediction_flops(n, n, neighbourhood, p)
    held = -(-n // folds)
    return folds * prediction_flops(n - n // folds, held, neighbourhood, p)


def check_kriging(
    limits: Limits,
    n: int,
    m: int,
    neighbourhood: Neighbourhood,
    drift_terms: int,
    *,
    flops: float | None = None,
    unique_copies: int = UNIQUE_PREDICTION_COPIES,
    what: str = "kriging",
) -> None:
    """Refuse kriging work above ``LAGWISE_MAX_KRIGING_FLOPS`` or, for the unique
    neighbourhood, dense matrices above ``LAGWISE_MEMORY_BUDGET_BYTES``.

    ``flops`` overrides :func:`prediction_flops` (cross-validation passes its own count).
    """
    work = prediction_flops(n, m, neighbourhood, drift_terms) if flops is None else flops
    if work > limits.max_kriging_flops:
        raise LimitExceeded(
            "LAGWISE_MAX_KRIGING_FLOPS",
            limits.max_kriging_flops,
            work,
            f"The {what} would take about {work:.3g} floating-point operations; use fewer targets or folds, "
            "fewer neighbours (max_points) or fewer samples.",
            "/neighbourhood",
        )
    if neighbourhood.unique:
        need = unique_bytes(n, drift_terms, unique_copies)
        if need > limits.memory_budget_bytes:
            raise LimitExceeded(
                "LAGWISE_MEMORY_BUDGET_BYTES",
                limits.memory_budget_bytes,
                need,
                f"The unique neighbourhood holds {unique_copies} dense matrices of {n} samples "
                f"({math.ceil(need / 2**20)} MiB); give a moving neighbourhood, e.g. "
                '{"max_points": 24}, or fewer samples.',
                "/neighbourhood",
            )
