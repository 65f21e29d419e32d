"""How far a kriging system can be trusted: condition of the samples' covariance matrix.

A covariance matrix K whose reciprocal condition number rcond = 1 / (|K| |K^-1|) is
near machine precision (2.2e-16) gives weights dominated by rounding: estimates can
land far outside the data although LAPACK returns numbers. This happens with very
smooth models (gaussian, stable of shape near 2, cardinal sine) without a nugget on
samples much closer than the range. Kriging refuses systems with rcond below
:data:`RCOND_MIN` (weights then keep about four significant digits; Golub & Van Loan
2013, *Matrix Computations*, 4th ed., section 2.6: a relative error of about
cond(K) x machine precision).

* Unique neighbourhood: rcond estimated by LAPACK ``dpocon`` from the Cholesky factor
  (1-norm, Higham 2002, *Accuracy and Stability of Numerical Algorithms*, ch. 15).
* Moving neighbourhoods (many small systems): the Cholesky pivot ratio
  min(L_ii^2) / max(L_ii^2). Pivots of a symmetric positive definite matrix lie
  between its extreme eigenvalues, so the ratio bounds rcond (2-norm) from above:
  a ratio below :data:`RCOND_MIN` proves the system ill-conditioned.

Only bounded models have a positive definite K; for linear and power structures
the bordered system's LU pivots are checked instead (see :mod:`.systems`).
"""

from __future__ import annotations

import numpy as np
from scipy.linalg import LinAlgError, cho_factor
from scipy.linalg.lapack import dpocon

RCOND_MIN = 1e-12


def covariance_rcond(K: np.ndarray) -> float:
    """Reciprocal condition number (1-norm estimate) of a covariance matrix; 0 if not positive definite."""
    try:
        factor, _ = cho_factor(K, lower=False, check_finite=False)
    except (LinAlgError, ValueError):
        return 0.0
    rcond, info = dpocon(factor, float(np.abs(K).sum(axis=0).max()))
    return float(rcond) if info == 0 else 0.0


def pivot_ratios(K: np.ndarray) -> np.ndarray:
    """Cholesky pivot ratio of each matrix of a stack (m, k, k); 0 where not positive definite."""
    try:
        L = np.linalg.cholesky(K)
    except np.linalg.LinAlgError:
        return np.array([pivot_ratios(k[None])[0] if _positive_definite(k) else 0.0 for k in K])
    pivots = np.diagonal(L, axis1=-2, axis2=-1) ** 2
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = pivots.min(axis=-1) / pivots.max(axis=-1)
    return np.nan_to_num(ratio, nan=0.0)


def _positive_definite(K: np.ndarray) -> bool:
    try:
        np.linalg.cholesky(K)
    except np.linalg.LinAlgError:
        return False
    return True
