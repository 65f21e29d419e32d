"""Class statistics from pair accumulators (DESIGN section 4, "Statistics").

Notation: for the N pairs of a class, Delta = z(head) - z(tail). Divisors are N.

=========================  ===========================================================
``semivariance``           sum Delta^2 / 2N                      (Matheron 1962)
``semivariance_robust``    [(1/N) sum |Delta|^(1/2)]^4 / (2 (0.457 + 0.494/N))
                           (Cressie & Hawkins 1980, Math. Geology 12(2), eq. 4.6)
``semivariance_median``    2.198 median(|Delta|)^2 / 2            (Dowd 1984)
``madogram``               sum |Delta| / 2N
``covariance``             (1/N) sum z_tail z_head - m_tail m_head
``covariance_noncentered`` (1/N) sum z_tail z_head
``correlogram``            covariance / (s_tail s_head)
``pairwise_relative``      (1/2N) sum [Delta / ((z_tail + z_head)/2)]^2, positive data
=========================  ===========================================================
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from . import kernels as K

STATISTICS = (
    "semivariance",
    "semivariance_robust",
    "semivariance_median",
    "madogram",
    "covariance",
    "covariance_noncentered",
    "correlogram",
    "pairwise_relative",
)
COVARIANCE_TYPE = ("covariance", "covariance_noncentered", "correlogram")
ACCUMULATION_MODE = {
    "semivariance": K.MODE_SQUARE,
    "semivariance_robust": K.MODE_ABSOLUTE,
    "semivariance_median": K.MODE_SQUARE,
    "madogram": K.MODE_ABSOLUTE,
    "covariance": K.MODE_COVARIANCE,
    "covariance_noncentered": K.MODE_COVARIANCE,
    "correlogram": K.MODE_COVARIANCE,
    "pairwise_relative": K.MODE_RELATIVE,
}
# Dowd (1984): 2.198 * median(|Delta|)^2 estimates 2 gamma for Gaussian increments.
DOWD_FACTOR = 2.198
NO_PAIRS = "no pairs in this class"
CONSTANT_ENDS = "tail or head values are constant in this class (zero standard deviation)"
CLASS_REASONS = (NO_PAIRS, CONSTANT_ENDS)


@dataclass(frozen=True)
class ClassValue:
    """Statistic of one class.

    Attributes
    ----------
    value : float or None
        The statistic, or None when undefined.
    reason : str or None
        Why the value is undefined.
    tail_mean, head_mean, tail_sd, head_sd : float or None
        Tail and head means and standard deviations (divisor N), for
        covariance-type statistics only.
    """

    value: float | None
    reason: str | None = None
    tail_mean: float | None = None
    head_mean: float | None = None
    tail_sd: float | None = None
    head_sd: float | None = None


def class_value(statistic: str, row: np.ndarray, mean: float, scale: float, median_abs: float | None) -> ClassValue:
    """Evaluate ``statistic`` for one accumulator row.

    Parameters
    ----------
    row : ndarray, shape (ACCUMULATORS,)
        Sums over the class's pairs of centred values (see :mod:`lagwise.core.variography.kernels`).
    mean : float
        The value the tail and head values were centred on.
    scale : float
        Largest absolute sample value, used to tell a zero standard deviation
        from rounding noise.
    median_abs : float or None
        Median of |Delta| for ``semivariance_median``.
    """
    n = row[K.COUNT]
    if n == 0:
        return ClassValue(None, NO_PAIRS)
    if statistic == "semivariance":
        return ClassValue(row[K.SQUARE] / (2.0 * n))
    if statistic == "semivariance_robust":
        return ClassValue((row[K.ROOT] / n) ** 4 / (2.0 * (0.457 + 0.494 / n)))
    if statistic == "semivariance_median":
        if median_abs is None:
            raise TypeError("semivariance_median needs the median of |Delta|")
        return ClassValue(DOWD_FACTOR * median_abs**2 / 2.0)
    if statistic == "madogram":
        return ClassValue(row[K.ABSOLUTE] / (2.0 * n))
    if statistic == "pairwise_relative":
        return ClassValue(row[K.RELATIVE] / (2.0 * n))
    return _covariance_value(statistic, row, n, mean, scale)


def _covariance_value(statistic: str, row: np.ndarray, n: float, mean: float, scale: float) -> ClassValue:
    tail_c, head_c = row[K.TAIL] / n, row[K.HEAD] / n
    tail_var = max(row[K.TAIL2] / n - tail_c**2, 0.0)
    head_var = max(row[K.HEAD2] / n - head_c**2, 0.0)
    tail_sd, head_sd = math.sqrt(tail_var), math.sqrt(head_var)
    moments = dict(tail_mean=tail_c + mean, head_mean=head_c + mean, tail_sd=tail_sd, head_sd=head_sd)
    centred = row[K.PRODUCT] / n - tail_c * head_c
    if statistic == "covariance":
        return ClassValue(centred, **moments)
    if statistic == "covariance_noncentered":
        # sum (t + m)(h + m) / N with t, h centred on the sample mean m.
        raw = (row[K.PRODUCT] + mean * (row[K.TAIL] + row[K.HEAD])) / n + mean * mean
        return ClassValue(raw, **moments)
    noise = 1e-10 * max(scale, 1e-300)
    if tail_sd <= noise or head_sd <= noise:
        return ClassValue(None, CONSTANT_ENDS, **moments)
    return ClassValue(centred / (tail_sd * head_sd), **moments)
