"""Strategies compared by cross-validation, and the rule that selects one.

A strategy is a variogram model with a kriging set-up: the pure nugget (the null: no
spatial structure, every estimate is the mean of the other samples), the best
isotropic model, the best geometric-anisotropic model, and universal kriging with a
drift on the residual variogram. Each is cross-validated with the same scheme and
neighbourhood.

Selection rule (documented in the API):

1. A strategy is *refused* when its kriging systems are singular or ill-conditioned,
   when a cross-validation estimate falls outside the plausible envelope of the data
   (:class:`Envelope`), or when it estimates fewer samples than the null.
2. Strategies are taken in order of complexity (null, isotropic, anisotropic, drift).
   Starting from the null, a strategy replaces the one selected so far when its
   cross-validation mean squared error is lower by at least :data:`MIN_GAIN` (2 %) and
   the gain is significant for the squared-error differences d_i = e_i(selected)^2 -
   e_i(challenger)^2: either the paired statistic t = mean(d) / (sd(d) / sqrt(n)) is at
   least :data:`MIN_T` (2, about a one-sided 2.3 % level; Diebold & Mariano 1995,
   J. Business & Economic Statistics 13(3)), or the one-sided Wilcoxon signed-rank test
   of d (Wilcoxon 1945; scipy.stats.wilcoxon) gives p <= :data:`MAX_P` (0.025). The rank
   test keeps the rule sensitive on skewed data, where a few large errors make t small.
3. The anisotropic strategy is compared with the isotropic one only (a direction of
   continuity needs continuity first: it never replaces the pure nugget directly). When
   its candidates include a likelihood refinement, significance is the restricted
   likelihood-ratio test of the nested hypothesis "ratio 1" instead of the paired tests:
   twice the gain in restricted log-likelihood when the likelihood-refined isotropic model
   is given an azimuth and a ratio must be at least :data:`LIKELIHOOD_RATIO_CRITICAL`
   (the chi-square quantile with 2 degrees of freedom at :data:`LIKELIHOOD_RATIO_LEVEL`,
   1 %; Cressie 1993, *Statistics for Spatial Data*, section 2.6.1; scipy.stats.chi2).
   Squared-error differences of correlated leave-one-out errors test a covariance
   parameter weakly, and the best of several anisotropic candidates by cross-validation
   is optimistic; the likelihood uses every pair of samples and tests the anisotropy
   itself. The mean squared error must still fall by :data:`MIN_GAIN`.
   A more complex strategy must earn its place.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
from scipy.stats import chi2, wilcoxon

from .kriging.cross_validation import DEFAULT_OUTLIER_THRESHOLD, CrossValidation, summarise
from .kriging.systems import KrigingSpec
from .modelling.fitting import FitResult
from .modelling.models import VariogramModel

STRATEGY_NAMES = ("pure_nugget", "isotropic", "anisotropic", "linear_drift", "quadratic_drift", "given")
MIN_GAIN = 0.02
MIN_T = 2.0
MAX_P = 0.025
LIKELIHOOD_RATIO_LEVEL = 0.01
LIKELIHOOD_RATIO_CRITICAL = float(chi2.isf(LIKELIHOOD_RATIO_LEVEL, 2))
RULE = (
    "Strategies in order of complexity (pure nugget, isotropic, anisotropic, drift); one replaces the strategy "
    "selected so far when its cross-validation mean squared error is at least 2 % lower and the gain is significant: "
    "paired t statistic of the squared-error differences at least 2, or one-sided Wilcoxon signed-rank p <= 0.025. The anisotropic strategy is compared with the isotropic one only; when its candidates include a likelihood refinement its gain is significant when the restricted likelihood-ratio statistic of the anisotropy is at least 9.21 (chi-square, 2 degrees of freedom, 1 %). Strategies with singular or ill-conditioned kriging systems, "
    "estimates outside the plausible envelope, or fewer samples estimated than the null are refused."
)
ENVELOPE_MARGIN = 0.5


@dataclass(frozen=True)
class Envelope:
    """The plausible envelope of estimates: the data range widened by half of it each side.

    Kriging estimates are weighted averages of the data; weights that are not all positive
    let them stray a little beyond the data's range, never by half of it unless the
    system is numerically unstable or a drift is extrapolated far from the samples.
    """

    low: float
    high: float

    @classmethod
    def of(cls, values: np.ndarray) -> Envelope:
        lo, hi = float(np.min(values)), float(np.max(values))
        margin = ENVELOPE_MARGIN * (hi - lo)
        return cls(lo - margin, hi + margin)

    def outside(self, estimates: np.ndarray) -> np.ndarray:
        """Boolean mask of finite estimates outside the envelope."""
        with np.errstate(invalid="ignore"):
            return np.isfinite(estimates) & ((estimates < self.low) | (estimates > self.high))

    def as_dict(self) -> dict:
        return {
            "low": self.low,
            "high": self.high,
            "rule": f"data range widened by {ENVELOPE_MARGIN:g} x the range on each side (working units)",
        }


@dataclass(frozen=True)
class Strategy:
    """One candidate strategy and its cross-validation.

    Attributes
    ----------
    name : str
        ``pure_nugget``, ``isotropic``, ``anisotropic``, ``linear_drift``, ``quadratic_drift``
        or ``given``.
    model : VariogramModel
        In working (transformed) units.
    kriging : KrigingSpec
    fit : FitResult or None
        The fit that produced the model (None for the null and a given model).
    cross_validation : CrossValidation or None
        None when the strategy was refused before it could be scored.
    refused : str or None
        Why the strategy cannot be used.
    selected : bool
    why : str
        Why it was or was not selected.
    likelihood_ratio : float or None
        For the anisotropic strategy: twice the gain in restricted log-likelihood of the
        samples when the likelihood-refined isotropic model is given an anisotropy (see
        :mod:`lagwise.core.modelling.likelihood`); None when not computed.
    """

    name: str
    model: VariogramModel
    kriging: KrigingSpec
    fit: FitResult | None
    cross_validation: CrossValidation | None
    refused: str | None = None
    selected: bool = False
    why: str = ""
    likelihood_ratio: float | None = None

    @property
    def mean_squared_error(self) -> float | None:
        rmse = None if self.cross_validation is None else self.cross_validation.statistics["root_mean_square_error"]
        return None if rmse is None else rmse * rmse


@dataclass(frozen=True)
class Selection:
    """The strategies compared (in order of complexity), one of them selected."""

    strategies: tuple[Strategy, ...]
    reason: str

    @property
    def selected(self) -> Strategy:
        return next(s for s in self.strategies if s.selected)

    def named(self, name: str) -> Strategy | None:
        return next((s for s in self.strategies if s.name == name), None)


def null_cross_validation(
    values: np.ndarray, *, outlier_threshold: float = DEFAULT_OUTLIER_THRESHOLD
) -> CrossValidation:
    """Leave-one-out of the pure nugget model with ordinary kriging, in closed form.

    With K = tau^2 I every weight is 1/(n - 1): the estimate is the mean of the other
    samples and the kriging variance tau^2 n / (n - 1), with tau^2 the variance of the
    values (common practice: ordinary kriging with a pure nugget is the sample mean).
    """
    z = np.asarray(values, dtype=np.float64)
    n = z.size
    estimate = (z.sum() - z) / (n - 1)
    tau2 = float(np.var(z))
    sd = np.full(n, math.sqrt(tau2 * n / (n - 1)))
    return summarise(z, estimate, sd, outlier_threshold, {}, "leave-one-out, closed form (pure nugget)")


def pure_nugget(values: np.ndarray) -> VariogramModel:
    """The null model: a nugget equal to the variance of the values (divisor N)."""
    return VariogramModel(float(np.var(values)), ())


def screen(strategy: Strategy, envelope: Envelope, estimated_by_null: int) -> Strategy:
    """Refuse a scored strategy whose estimates leave the envelope or that estimates too few samples."""
    cv = strategy.cross_validation
    if strategy.refused is not None or cv is None:
        return strategy
    stray = int(envelope.outside(cv.estimate).sum())
    if stray:
        return replace(
            strategy,
            refused=f"{stray} cross-validation estimates fall outside the plausible envelope "
            f"[{envelope.low:.4g}, {envelope.high:.4g}]: the kriging systems are unstable",
        )
    if cv.statistics["count"] < estimated_by_null:
        missing = estimated_by_null - cv.statistics["count"]
        return replace(strategy, refused=f"{missing} samples could not be estimated (see cross_validation.unestimated)")
    return strategy


def _significance(incumbent: CrossValidation, challenger: CrossValidation) -> tuple[float, float]:
    """(paired t, one-sided Wilcoxon p) of the squared-error differences, positive when the challenger is better."""
    both = np.isfinite(incumbent.error) & np.isfinite(challenger.error)
    d = incumbent.error[both] ** 2 - challenger.error[both] ** 2
    if d.size < 3 or not np.any(d):
        return 0.0, 1.0
    spread = float(np.std(d, ddof=1))
    t = math.inf if spread == 0 else float(d.mean() / (spread / math.sqrt(d.size)))
    p = float(wilcoxon(d, alternative="greater", zero_method="wilcox").pvalue)
    return t, p


def select(strategies: list[Strategy]) -> Selection:
    """Apply the module's rule; ``strategies`` in order of complexity, the first is the baseline."""
    usable = [i for i, s in enumerate(strategies) if s.refused is None and s.mean_squared_error is not None]
    if not usable:
        raise ValueError("no strategy could be scored")
    chosen = usable[0]
    notes: dict[int, str] = {}
    for i in usable[1:]:
        incumbent, challenger = strategies[chosen], strategies[i]
        mse_in, mse_ch = incumbent.mean_squared_error, challenger.mean_squared_error
        assert mse_in is not None and mse_ch is not None and incumbent.cross_validation and challenger.cross_validation
        gain = 1.0 - mse_ch / mse_in if mse_in > 0 else 0.0
        t, p = _significance(incumbent.cross_validation, challenger.cross_validation)
        test = f"paired t = {t:.1f}, Wilcoxon p = {p:.3g}"
        if challenger.name == "anisotropic" and incumbent.name != "isotropic":
            notes[i] = (
                f"not compared: {incumbent.name} is selected over the isotropic strategy, and a direction of "
                "continuity needs spatial continuity first"
            )
            continue
        ratio = challenger.likelihood_ratio if challenger.name == "anisotropic" else None
        if ratio is not None:
            test = f"likelihood ratio {ratio:.1f}; {test}"
            significant = ratio >= LIKELIHOOD_RATIO_CRITICAL
        else:
            significant = t >= MIN_T or p <= MAX_P
        if gain >= MIN_GAIN and significant:
            notes[i] = (
                f"lowers the cross-validation mean squared error of {incumbent.name} by {gain * 100:.1f} % ({test})"
            )
            chosen = i
        else:
            needs = (
                f"a likelihood ratio >= {LIKELIHOOD_RATIO_CRITICAL:.2f}"
                if ratio is not None
                else f"t >= {MIN_T:g} or p <= {MAX_P:g}"
            )
            notes[i] = (
                f"against {incumbent.name}: mean squared error {'-' if gain >= 0 else '+'}{abs(gain) * 100:.1f} % "
                f"({test}); a more complex strategy needs at least {MIN_GAIN * 100:g} % and {needs}"
            )
    out = []
    for i, s in enumerate(strategies):
        if s.refused is not None:
            why = f"refused: {s.refused}"
        elif i == chosen:
            why = "selected: " + (notes.get(i) or "the simplest strategy that could be scored; no other beat it")
        else:
            why = notes.get(i) or "superseded by a strategy that beat it"
            if i in notes and chosen != i and notes[i].startswith("lowers"):
                why = "superseded: it " + notes[i] + f", but {strategies[chosen].name} did better still"
        out.append(replace(s, selected=i == chosen, why=why))
    winner = out[chosen]
    reason = (
        f"{winner.name} selected by leave-one-out cross-validation among {len(strategies)} strategies: {winner.why}"
    )
    return Selection(tuple(out), reason)
