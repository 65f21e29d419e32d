"""The plain-language verdict of an analysis: is there anything to map, and can the map be trusted?

Levels (rules applied in this order; the statistics are those of the selected
strategy's cross-validation, in working units):

``no_structure``
    The values are constant; or the pure nugget (no spatial structure) won the
    comparison of strategies; or the selected strategy shows no skill: correlation
    between observations and estimates below :data:`NO_SKILL_CORRELATION` or goodness of
    prediction below :data:`NO_SKILL_GOODNESS`. A map would only show the mean.
``review``
    Something a person must look at before the map is used: the kriging variance does
    not match the errors (RMSSE outside [:data:`RMSSE_LOW`, :data:`RMSSE_HIGH`]), the 95 %
    intervals cover too few or too many samples (outside [:data:`COVERAGE_LOW`,
    :data:`COVERAGE_HIGH`]), a significant trend is left out of the kriging because the
    caller fixed the kriging type, no strategy could be cross-validated, or the null won only
    because every structured strategy was refused as numerically unstable.
``weak``
    Real but weak structure: goodness of prediction below :data:`WEAK_GOODNESS`,
    correlation below :data:`WEAK_CORRELATION`, a nugget above :data:`WEAK_NUGGET_SHARE`
    of the sill, or none of the two shortest experimental classes has its 95 % interval
    below the sill reference (the structure lies within the noise of its classes). The map is honest but close to the mean, its intervals wide.
``usable``
    Otherwise.

``usable`` (the boolean) is true for ``usable`` and ``weak``: the map and its
intervals can be used as they are.
"""

from __future__ import annotations

from dataclasses import dataclass

from .modelling.models import VariogramModel

NO_SKILL_CORRELATION = 0.2
NO_SKILL_GOODNESS = 0.05
RMSSE_LOW, RMSSE_HIGH = 0.8, 1.25
COVERAGE_LOW, COVERAGE_HIGH = 0.88, 0.99
WEAK_GOODNESS = 0.2
WEAK_CORRELATION = 0.45
WEAK_NUGGET_SHARE = 0.75
LEVELS = ("no_structure", "weak", "usable", "review")


@dataclass(frozen=True)
class Verdict:
    """``level`` one of :data:`LEVELS`; ``text`` says why in plain words."""

    usable: bool
    level: str
    text: str

    def as_dict(self) -> dict:
        return {"usable": self.usable, "level": self.level, "text": self.text}


def _describe(model: VariogramModel, label: str) -> str:
    if not model.structures:
        return "a pure nugget"
    structure = max(model.structures, key=lambda s: s.range)
    share = model.nugget / model.sill * 100 if model.sill else 0.0
    aniso = structure.anisotropy
    direction = (
        f", longest continuity along azimuth {aniso.azimuth:.0f} degrees (ratio {aniso.ratio:.2f})"
        if not aniso.isotropic
        else ""
    )
    return f"{label}, practical range {structure.range:.4g}{direction}, nugget {share:.0f} % of the sill"


def judge(
    *,
    constant: bool,
    strategy: str | None,
    model: VariogramModel | None,
    label: str,
    statistics: dict | None,
    ignored_trend: bool = False,
    refused_structure: bool = False,
    unresolved_structure: str | None = None,
    notes: tuple[str, ...] = (),
) -> Verdict:
    """The verdict (see the module's rules).

    Parameters
    ----------
    constant : bool
        Every value is the same.
    strategy : str or None
        Name of the selected strategy (None when none could be cross-validated).
    model : VariogramModel or None
        The selected model.
    label : str
        Its plain description (e.g. ``nugget + spherical``).
    statistics : dict or None
        Cross-validation statistics of the selected strategy.
    ignored_trend : bool
        A significant trend exists and the kriging the caller fixed has no drift.
    refused_structure : bool
        A strategy with spatial structure was refused (singular or unstable kriging systems).
    unresolved_structure : str or None
        Why the shortest experimental classes do not rise above their own noise (their 95 %
        intervals reach the sill reference), or None when they do; such a structure is at
        most ``weak``.
    notes : tuple of str
        Further reasons for review (appended to the text).
    """
    if constant:
        return Verdict(False, "no_structure", "All values are equal: there is no variation to model or map.")
    if strategy is None or model is None or statistics is None:
        return Verdict(
            False,
            "review",
            "No strategy could be cross-validated (see the warnings): the model cannot be checked, so it must be "
            "reviewed before any map is made.",
        )
    if strategy == "pure_nugget" and refused_structure:
        return Verdict(
            False,
            "review",
            "The fitted variogram model could not be used: its kriging systems are singular or unstable (see the "
            "warnings), so only the mean could be checked. Review the model (a nugget, another family) before mapping.",
        )
    if strategy == "pure_nugget":
        return Verdict(
            False,
            "no_structure",
            "No spatial structure: no variogram model predicted held-out samples better than their mean "
            "(cross-validation), so a map would only show the mean.",
        )
    correlation = statistics.get("correlation")
    goodness = statistics.get("goodness_of_prediction")
    rmsse = statistics.get("root_mean_square_standardized_error")
    coverage = statistics.get("interval_coverage_95")
    found = f"Spatial structure found: {_describe(model, label)} ({strategy.replace('_', ' ')} strategy)."
    skill = (
        f"Cross-validation: correlation {correlation if correlation is not None else float('nan'):.2f}, "
        f"goodness of prediction {goodness if goodness is not None else float('nan'):.2f}, "
        f"RMSSE {rmsse if rmsse is not None else float('nan'):.2f}, "
        f"95 % coverage {coverage if coverage is not None else float('nan'):.2f}."
    )
    if correlation is None or goodness is None or correlation < NO_SKILL_CORRELATION or goodness < NO_SKILL_GOODNESS:
        return Verdict(
            False,
            "no_structure",
            f"{found} {skill} The estimates show no skill at held-out samples, so a map would add little to the mean.",
        )
    reasons = list(notes)
    if rmsse is None or not RMSSE_LOW <= rmsse <= RMSSE_HIGH:
        reasons.append("the kriging variances do not match the size of the errors (RMSSE far from 1)")
    if coverage is None or not COVERAGE_LOW <= coverage <= COVERAGE_HIGH:
        reasons.append("the 95 % intervals do not cover about 95 % of the held-out samples")
    if ignored_trend:
        reasons.append("a significant trend is left out of the kriging the request fixed (consider universal kriging)")
    if reasons:
        return Verdict(False, "review", f"{found} {skill} Review before mapping: {'; '.join(reasons)}.")
    share = model.nugget / model.sill if model.sill else 0.0
    weak = goodness < WEAK_GOODNESS or correlation < WEAK_CORRELATION or share > WEAK_NUGGET_SHARE
    if weak or unresolved_structure is not None:
        noise = f" {unresolved_structure}" if unresolved_structure is not None else ""
        return Verdict(
            True,
            "weak",
            f"{found} {skill} The structure is weak: the map is honest but smooth and close to the mean, "
            f"with wide intervals.{noise}",
        )
    return Verdict(
        True, "usable", f"{found} {skill} The model predicts held-out samples honestly and is fit for mapping."
    )
