"""The whole chain in one call, deciding as an expert would when nobody is watching.

1. Every stage's options are validated before any work (:mod:`.stages`).
2. Transform; omnidirectional experimental variogram; automatic fit.
3. Strategies (:mod:`.selection`): the pure nugget (null), the isotropic fit, a
   geometric-anisotropic fit over a fan of direction classes when the fan shows a
   difference in continuity, and universal kriging on the residual variogram of a
   linear (and, with enough samples, quadratic) drift when a trend is significant
   (:mod:`.modelling.trend`). The isotropic and anisotropic strategies each also have
   the best one-structure model refined by restricted likelihood on the samples
   (:mod:`.modelling.likelihood`); the two refinements give the likelihood-ratio test of
   the anisotropy. Each candidate is cross-validated; the selection rule picks one.
4. Predictions with the selected strategy; estimates outside the plausible envelope
   of the data are withheld (null with a reason), never returned silently.
5. Warnings and a verdict (:mod:`.verdict`).

Variograms, fits and cross-validation run on the transformed values (reported in
those units); predictions are back-transformed to the original units (see
:mod:`lagwise.core.data.transforms`).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field, replace

import numpy as np

from .data.declustering import WeightedStart, weighted_start
from .data.samples import SampleSet
from .data.summary import Summary, summarise
from .data.transforms import Transform
from .decisions import Decisions, decide, validate_decisions
from .errors import InvalidInput, SingularSystem, pointers_under
from .kriging.cross_validation import CrossValidation
from .kriging.neighbourhood import Neighbourhood
from .kriging.prediction import PredictionResult
from .kriging.systems import KrigingSpec
from .limits import Limits
from .modelling.fitting import FitResult, FittedCandidate, fit_model, points_from_experimental
from .modelling.likelihood import Refinement, refine
from .modelling.models import Anisotropy as ModelAnisotropy
from .modelling.models import VariogramModel
from .modelling.trend import QUADRATIC_MIN_SAMPLES, ResidualModel, TrendTest, design, residual_model, test_trend
from .selection import Envelope, Selection, Strategy, null_cross_validation, pure_nugget, screen, select
from .stages import (
    ORDINARY,
    CrossValidationOptions,
    FitOptions,
    MapOptions,
    PredictionOptions,
    VariogramOptions,
    fit_sample_minimum,
    run_cross_validation,
    run_fit,
    run_map,
    run_prediction,
    run_variogram,
    validate_stages,
)
from .variography.directions import DirectionClass
from .variography.experimental import ExperimentalVariogram
from .variography.maps import VariogramMap
from .variography.uncertainty import structure_evidence
from .verdict import Verdict, judge

AUTO_FAN = tuple(DirectionClass(a, 15.0) for a in (0.0, 30.0, 60.0, 90.0, 120.0, 150.0))
FAN_DESCRIPTION = (
    "joint fit over 6 direction classes of tolerance 15 degrees (azimuths 0, 30, ..., 150), ranges fitted "
    "direction by direction, and a restricted-likelihood refinement on the samples; the candidate with the "
    "lowest cross-validation error is kept"
)
ANISOTROPY_WORTH_TESTING = 0.85
FEW_SAMPLES = 50
UNIQUE_UP_TO = 1500
CALIBRATED = (0.67, 1.5)
CANDIDATES_SCORED = 3
FAN_FAMILIES = 2
REFINE_MIN_SAMPLES = 30
RATIO_STARTS = (0.3, 0.6)


@dataclass(frozen=True)
class AnalysisOptions:
    """What to run: the transform and one options object per stage (see :mod:`.stages`).

    ``with_map``: compute the variogram map (the ``variogram_map`` figure) by the
    ``variogram_map`` stage's method, of the variogram stage's statistic (:attr:`map_stage`).
    """

    transform: str = "none"
    variogram: VariogramOptions = VariogramOptions()
    fit: FitOptions = FitOptions()
    cross_validation: CrossValidationOptions = CrossValidationOptions()
    prediction: PredictionOptions | None = None
    with_map: bool = False
    variogram_map: MapOptions = MapOptions()

    @property
    def map_stage(self) -> MapOptions:
        """The map stage as run: its method and tolerance, the variogram stage's statistic."""
        return replace(self.variogram_map, statistic=self.variogram.statistic)


@dataclass(frozen=True)
class Anisotropy:
    """Anisotropy estimated from a fan of direction classes.

    Attributes
    ----------
    azimuth : float
        Degrees clockwise from north of the longest continuity.
    ratio : float
        Range across / range along, in (0, 1].
    family : str
    supported : bool
        The anisotropic strategy was selected by cross-validation.
    why : str
        The comparison that decided it.
    """

    azimuth: float
    ratio: float
    family: str
    supported: bool = False
    why: str = ""


@dataclass(frozen=True)
class Analysis:
    """Result of :func:`analyse` (models and statistics in working units)."""

    transform: Transform
    summary: Summary
    transformed_summary: Summary
    omnidirectional: ExperimentalVariogram
    directional: ExperimentalVariogram | None
    residual: ExperimentalVariogram | None
    anisotropy: Anisotropy | None
    trend: TrendTest | None
    selection: Selection | None
    fit: FitResult
    model: VariogramModel
    kriging: KrigingSpec
    neighbourhood: Neighbourhood
    cross_validation: CrossValidation | None
    prediction: PredictionResult | None
    back_transformed: tuple[np.ndarray, np.ndarray] | None
    envelope: Envelope
    decisions: Decisions | None = None
    variogram_map: VariogramMap | None = None
    warnings: tuple[str, ...] = field(default=())
    verdict: Verdict = Verdict(False, "review", "")


@dataclass(frozen=True)
class Given:
    """What a batch of analyses computed for one variable before its chain (:mod:`.batch`).

    Attributes
    ----------
    start : WeightedStart
        From :func:`begin` on the variable's samples.
    omnidirectional, fan : ExperimentalVariogram or None
        Its first variogram (the stage's classes: omnidirectional unless given) and the fan
        of :func:`fan_directions` (when :func:`wants_fan`) of the working values; None:
        computed by the chain.
    """

    start: WeightedStart
    omnidirectional: ExperimentalVariogram | None = None
    fan: ExperimentalVariogram | None = None


def begin(samples: SampleSet, options: AnalysisOptions) -> WeightedStart:
    """Validate every stage's options, then decluster and fit the transform (the chain's first step)."""
    # Thresholds and blocks are checked in the analysis's transform.
    prediction = None if options.prediction is None else replace(options.prediction, transform=options.transform)
    if prediction is not None:
        validate_decisions(samples, prediction)
    validate_stages(
        samples,
        [
            ("/variogram", options.variogram),
            ("/fit", options.fit),
            ("/cross_validation", options.cross_validation),
            ("/prediction", prediction),
            ("/variogram_map", options.map_stage if options.with_map else None),
        ],
    )
    start = weighted_start(samples.coords, samples.values, options.transform, samples.source_index)
    fit_sample_minimum(samples, options.variogram.min_pairs, options.fit)
    return start


def fan_directions(options: AnalysisOptions) -> tuple[DirectionClass, ...]:
    """The direction classes of the anisotropy fan: the caller's, else :data:`AUTO_FAN`."""
    given = options.variogram.directions
    return given if isinstance(given, tuple) else AUTO_FAN


def wants_fan(options: AnalysisOptions, dimension: int) -> bool:
    """Whether the chain may look at the fan (it does once the isotropic fit has a structure)."""
    asked = options.variogram.directions is not None or options.fit.anisotropy != "none"
    return dimension >= 2 and asked and options.fit.model is None


def neighbourhood_for(options: AnalysisOptions, samples: SampleSet) -> Neighbourhood:
    """The caller's neighbourhood, else the unique one up to :data:`UNIQUE_UP_TO` samples and 24 points above."""
    given = options.cross_validation.neighbourhood
    if given is not None:
        return given
    return Neighbourhood() if samples.size <= UNIQUE_UP_TO else Neighbourhood(max_points=24, min_points=4)


def _variogram(
    samples: SampleSet, stage: VariogramOptions, limits: Limits, directions=None, declustering=None
) -> ExperimentalVariogram:
    with pointers_under("/variogram"):
        return run_variogram(samples, stage, limits=limits, directions=directions, declustering=declustering)


def _fit(points, samples: SampleSet, stage: FitOptions, variance: float, **overrides) -> FitResult:
    """The fit stage; isotropic unless ``overrides`` say otherwise (the stage's ``anisotropy`` decides
    whether an anisotropic strategy is compared, not the shape of this fit)."""
    with pointers_under("/fit"):
        return run_fit(points, samples.dimension, variance, stage, **{"anisotropy": "none", **overrides})


def _single_families(isotropic: FitResult, count: int) -> list[str]:
    """The families of the best-ranked converged one-structure isotropic candidates (at most ``count``)."""
    families: list[str] = []
    for candidate in (isotropic.best, *isotropic.candidates):
        if (
            isinstance(candidate, FittedCandidate)
            and candidate.converged
            and len(candidate.model.structures) == 1
            and candidate.model.bounded
            and candidate.model.structures[0].family not in families
        ):
            families.append(candidate.model.structures[0].family)
    return families[:count]


def _anisotropic_fit(
    working: SampleSet,
    options: AnalysisOptions,
    isotropic: FitResult,
    variance: float,
    limits: Limits,
    declustering,
    fan: ExperimentalVariogram | None = None,
):
    """The fan (or the given direction classes) and a joint one-structure anisotropic fit.

    The families are those of the :data:`FAN_FAMILIES` best one-structure isotropic
    candidates (a nested anisotropic model is poorly identified by a fan of classes).
    """
    stage = options.variogram
    if fan is None:
        fan = _variogram(working, stage, limits, fan_directions(options), declustering=declustering)
    points = points_from_experimental(fan, stage.min_pairs)
    best = isotropic.best.model
    families = _single_families(isotropic, FAN_FAMILIES) or [s.family for s in best.structures][:1]
    if len(np.unique(points.azimuth[points.usable])) < 2 or not best.structures:
        return fan, None
    nugget = "fit" if best.nugget > 0 and options.fit.nugget == "fit" else options.fit.nugget
    try:
        fit = _fit(
            points,
            working,
            options.fit,
            variance,
            families=families,
            nugget=nugget,
            anisotropy="fit",
            structures=1,
            guarded=True,
        )
    except InvalidInput:
        return fan, None
    return fan, fit


def _reach(omni: ExperimentalVariogram) -> float:
    """The largest mean class distance of the omnidirectional variogram (coordinate units)."""
    distances = [r.mean_distance for r in omni.directions[0].classes if r.mean_distance]
    return float(max(distances)) if distances else 1.0


def _refined_isotropic(working: SampleSet, isotropic: FitResult, reach: float) -> Refinement | None:
    """The best one-structure isotropic candidate refined by restricted likelihood (:mod:`.modelling.likelihood`)."""
    start = _single_model(isotropic)
    if start is None or working.size < REFINE_MIN_SAMPLES:
        return None
    return refine([start], working.coords, working.values, design(working.coords, 0), anisotropic=False, reach=reach)


def _refined_anisotropic(
    working: SampleSet, isotropic: Refinement, candidates: list[VariogramModel], reach: float
) -> Refinement | None:
    """The refined isotropic model given an anisotropy, refined by restricted likelihood.

    Starts: the refined isotropic model with the azimuth and ratio of each anisotropic
    candidate (the joint fan fits and the directional-range ellipse), each with its own
    ratio and with :data:`RATIO_STARTS`; the search starts from the most likely.
    """
    base = isotropic.model.structures[0]
    starts = []
    for model in candidates:
        anisotropy = model.structures[0].anisotropy
        for ratio in (anisotropy.ratio, *RATIO_STARTS):
            starts.append(
                VariogramModel(isotropic.model.nugget, (replace(base, anisotropy=replace(anisotropy, ratio=ratio)),))
            )
    return refine(starts, working.coords, working.values, design(working.coords, 0), anisotropic=True, reach=reach)


def _as_candidate(fit: FitResult, model: VariogramModel) -> tuple[VariogramModel, FitResult]:
    """A refined model as a candidate of ``fit`` (its label says how it was refined)."""
    parts = (["nugget"] if model.nugget > 0 else []) + [st.family for st in model.structures]
    anisotropic = any(not st.anisotropy.isotropic for st in model.structures)
    how = ("anisotropic, " if anisotropic else "") + "refined by restricted likelihood"
    label = f"{' + '.join(parts)} ({how})"
    return model, replace(fit, best=replace(fit.best, model=model, label=label))


def _cross_validate(model, spec, working, hood, options, limits, workers) -> CrossValidation:
    with pointers_under("/cross_validation"):
        return run_cross_validation(
            working, model, options.cross_validation, kriging=spec, neighbourhood=hood, limits=limits, workers=workers
        )


def _calibrated(cv: CrossValidation) -> bool:
    rmsse = cv.statistics["root_mean_square_standardized_error"]
    return rmsse is not None and CALIBRATED[0] <= rmsse <= CALIBRATED[1]


def _score(
    name: str,
    candidates: Sequence[tuple[VariogramModel, FitResult | None]],
    spec: KrigingSpec,
    working: SampleSet,
    hood: Neighbourhood,
    options: AnalysisOptions,
    limits: Limits,
    workers: int,
) -> Strategy:
    """Cross-validate a strategy's candidate models and keep the best one.

    The best is the lowest cross-validation mean squared error among candidates whose
    RMSSE lies within :data:`CALIBRATED` (honest variances); when none does, the one with
    RMSSE closest to 1. A candidate whose systems are singular is skipped.
    """
    scored: list[tuple[VariogramModel, FitResult | None, CrossValidation]] = []
    refusals = []
    for model, fit in candidates:
        try:
            scored.append((model, fit, _cross_validate(model, spec, working, hood, options, limits, workers)))
        except SingularSystem as exc:
            refusals.append(exc.summary)
    if not scored:
        model, fit = candidates[0]
        return Strategy(
            name, model, spec, fit, None, refused=f"kriging systems cannot be solved reliably: {refusals[0]}"
        )

    def mse(cv: CrossValidation) -> float:
        rmse = cv.statistics["root_mean_square_error"]
        return math.inf if rmse is None else rmse * rmse

    honest = [s for s in scored if _calibrated(s[2])]
    if honest:
        model, fit, cv = min(honest, key=lambda s: mse(s[2]))
    else:
        model, fit, cv = min(
            scored, key=lambda s: abs(math.log(s[2].statistics["root_mean_square_standardized_error"] or 1e-300))
        )
    return Strategy(name, model, spec, fit, cv)


def _ranked_models(fit: FitResult, count: int) -> list[tuple[VariogramModel, FitResult]]:
    """The ``count`` best-ranked fitted candidates of distinct form, each as the fit's selection."""
    chosen = [fit.best]
    for candidate in fit.candidates:
        if len(chosen) >= count:
            break
        if (
            isinstance(candidate, FittedCandidate)
            and candidate.converged
            and candidate.label not in {c.label for c in chosen}
        ):
            chosen.append(candidate)
    return [(c.model, replace(fit, best=c)) for c in chosen]


def _directional_ellipse(
    fan: ExperimentalVariogram, best: VariogramModel, working: SampleSet, options
) -> VariogramModel | None:
    """Geometric anisotropy from ranges fitted direction by direction (common practice).

    Each direction class of the fan is fitted alone with the isotropic winner's family,
    nugget and partial sill fixed to the isotropic values' family and nugget; the major
    axis is the direction of the longest range and the ratio is the range perpendicular
    to it over that longest range. ``best`` is the one-structure isotropic model.
    """
    if len(best.structures) != 1 or not best.structures[0].bounded:
        return None
    structure = best.structures[0]
    ranges: dict[float, float] = {}
    for direction in fan.directions:
        points = points_from_experimental(replace(fan, directions=(direction,)), options.variogram.min_pairs)
        if int(points.usable.sum()) < 3:
            continue
        try:
            fit = fit_model(
                points,
                dimension=working.dimension,
                families=[structure.family],
                nugget=best.nugget,
                weighting=options.fit.weighting,
                sample_variance=fan.summary.variance,
                guarded=True,
            )
        except InvalidInput:
            continue
        if fit.best.model is not None and fit.best.model.structures:
            ranges[direction.direction.azimuth % 180.0] = fit.best.model.structures[0].range
    if len(ranges) < 2:
        return None
    major = max(ranges, key=lambda a: ranges[a])
    across = min(ranges, key=lambda a: abs(((a - major) % 180.0) - 90.0))
    ratio = float(np.clip(ranges[across] / ranges[major], 0.05, 1.0))
    return VariogramModel(
        best.nugget,
        (replace(structure, range=ranges[major], anisotropy=ModelAnisotropy(major, ratio)),),
    )


def _anisotropic_strategy(
    working, options, isotropic, anisotropic, fan, refined, base, hood, limits, workers, reach
) -> Strategy | None:
    """The anisotropic strategy: joint fan fits, the directional-range ellipse and their likelihood refinement.

    Scored when the caller asks for it (``fit.anisotropy: "fit"``) or when a candidate's
    ratio is below :data:`ANISOTROPY_WORTH_TESTING`. With a refined isotropic model, the
    refined anisotropic model's restricted likelihood-ratio statistic against it is kept
    for the selection rule (:mod:`.selection`).
    """
    compare = options.fit.compare
    candidates = _ranked_models(anisotropic, FAN_FAMILIES if compare else 1)
    single = _single_model(isotropic)
    ellipse = _directional_ellipse(fan, single, working, options) if compare and single is not None else None
    if ellipse is not None:
        candidates.append((ellipse, anisotropic))
    ratio = min(m.structures[0].anisotropy.ratio for m, _ in candidates)
    if options.fit.anisotropy != "fit" and ratio >= ANISOTROPY_WORTH_TESTING:
        return None
    ratio_statistic = None
    if refined is not None:
        found = _refined_anisotropic(working, refined, [m for m, _ in candidates], reach)
        if found is not None:
            candidates.append(_as_candidate(anisotropic, found.model))
            ratio_statistic = max(0.0, 2.0 * (found.log_likelihood - refined.log_likelihood))
    strategy = _score("anisotropic", candidates, base, working, hood, options, limits, workers)
    return replace(strategy, likelihood_ratio=ratio_statistic)


def _single_model(isotropic: FitResult) -> VariogramModel | None:
    """The best-ranked one-structure bounded isotropic model."""
    families = _single_families(isotropic, 1)
    return next(
        (
            c.model
            for c in (isotropic.best, *isotropic.candidates)
            if isinstance(c, FittedCandidate)
            and families
            and len(c.model.structures) == 1
            and c.model.structures[0].family == families[0]
        ),
        None,
    )


def _strategies(working, options, hood, limits, workers, omni, declustering=None, given_fan=None):
    """Build and score the strategies; returns (strategies, isotropic fit, fan, anisotropic fit, trend, residuals)."""
    fit_stage, cv_stage = options.fit, options.cross_validation
    fixed = cv_stage.kriging
    base = fixed if fixed is not None and fixed.type != "universal" else ORDINARY
    points = points_from_experimental(omni, options.variogram.min_pairs)
    variance = omni.summary.reference_variance
    strategies: list[Strategy] = []
    if fit_stage.compare:
        null = pure_nugget(working.values)
        strategies.append(
            Strategy(
                "pure_nugget",
                null,
                ORDINARY,
                None,
                null_cross_validation(working.values, outlier_threshold=cv_stage.outlier_threshold),
            )
        )
    if fit_stage.model is not None:
        isotropic = _fit(points, working, fit_stage, variance)
        strategies.append(_score("given", [(fit_stage.model, None)], base, working, hood, options, limits, workers))
        return strategies, isotropic, None, None, None, None
    isotropic = _fit(points, working, fit_stage, variance)
    universal_only = fixed is not None and fixed.type == "universal"
    scored_candidates = CANDIDATES_SCORED if fit_stage.compare else 1
    iso_candidates = _ranked_models(isotropic, scored_candidates)
    # The refinement fits a nugget: only when the caller lets the fit choose it.
    refinable = fit_stage.compare and fit_stage.nugget == "fit"
    refined = _refined_isotropic(working, isotropic, _reach(omni)) if refinable else None
    if refined is not None:
        iso_candidates.append(_as_candidate(isotropic, refined.model))
    if not universal_only:
        strategies.append(_score("isotropic", iso_candidates, base, working, hood, options, limits, workers))
    fan, anisotropic = None, None
    if wants_fan(options, working.dimension) and isotropic.best.model.structures:
        fan, anisotropic = _anisotropic_fit(working, options, isotropic, variance, limits, declustering, given_fan)
    if anisotropic is not None and fan is not None and fit_stage.anisotropy != "none" and not universal_only:
        strategy = _anisotropic_strategy(
            working, options, isotropic, anisotropic, fan, refined, base, hood, limits, workers, _reach(omni)
        )
        if strategy is not None:
            strategies.append(strategy)
    trend, residuals = None, None
    drift_allowed = fixed is None or universal_only
    if drift_allowed and working.dimension >= 1 and (fit_stage.compare or universal_only):
        trend, residuals = _drift_strategies(working, options, hood, limits, workers, strategies, fixed, isotropic)
    return strategies, isotropic, fan, anisotropic, trend, residuals


def _residual_families(options: AnalysisOptions, isotropic: FitResult | None) -> list[str] | str:
    """Families tried on the residuals: the caller's list, else the isotropic winner's and the
    two most used bounded families (a residual variogram is shorter, not of another kind)."""
    if options.fit.families != "auto":
        return list(options.fit.families)
    if isotropic is None:
        return "auto"
    winners = [s.family for s in isotropic.best.model.structures]
    return list(dict.fromkeys([*winners, "spherical", "exponential"]))


def _drift_strategies(working, options, hood, limits, workers, strategies, fixed, isotropic=None):
    """Universal kriging on residual models, for the drifts the data support (or the one asked for)."""
    degrees = [1, 2] if fixed is None else [2 if fixed.drift == "quadratic" else 1]
    trend = test_trend(working, 1)
    residuals: ResidualModel | None = None
    for degree in degrees:
        test = test_trend(working, degree)
        if fixed is None and (not test.significant or (degree == 2 and working.size < QUADRATIC_MIN_SAMPLES)):
            continue
        if fixed is None and degree == 2 and not trend.significant:
            continue
        stage = options.variogram
        model = residual_model(
            working,
            degree,
            lags=stage.lags,
            statistic=stage.statistic,
            min_pairs=stage.min_pairs,
            fit_options={
                "families": _residual_families(options, isotropic),
                "nugget": options.fit.nugget,
                "weighting": options.fit.weighting,
            },
            limits=limits,
        )
        residuals = residuals or model
        spec = KrigingSpec(
            type="universal",
            drift="linear" if degree == 1 else "quadratic",
            nugget_as=(fixed or ORDINARY).nugget_as,
        )
        name = "linear_drift" if degree == 1 else "quadratic_drift"
        strategies.append(_score(name, _ranked_models(model.fit, 1), spec, working, hood, options, limits, workers))
    return trend, residuals


def _predict(working, transform, strategy: Strategy, hood, options, envelope, limits, workers):
    """Predictions with the selected strategy; estimates outside the envelope withheld."""
    assert options.prediction is not None
    with pointers_under("/prediction"):
        result = run_prediction(
            working,
            strategy.model,
            options.prediction,
            kriging=strategy.kriging,
            neighbourhood=hood,
            limits=limits,
            workers=workers,
        )
    estimate = result.prediction.estimate
    stray = np.flatnonzero(envelope.outside(estimate))
    reasons = dict(result.prediction.reasons)
    for i in stray:
        reasons[int(i)] = (
            f"the estimate ({estimate[i]:.4g}) falls outside the plausible envelope [{envelope.low:.4g}, "
            f"{envelope.high:.4g}] of the data: withheld"
        )
    if stray.size:
        estimate = estimate.copy()
        variance = result.prediction.variance.copy()
        estimate[stray] = np.nan
        variance[stray] = np.nan
        result = replace(
            result, prediction=replace(result.prediction, estimate=estimate, variance=variance, reasons=reasons)
        )
    back = transform.back_estimate(result.prediction.estimate, result.prediction.variance)
    return result, back, int(stray.size)


def analyse(
    samples: SampleSet,
    options: AnalysisOptions = AnalysisOptions(),
    *,
    limits: Limits = Limits(),
    workers: int = 1,
    given: Given | None = None,
) -> Analysis:
    """Run the chain on ``samples`` (see the module docstring); ``given``: its first steps, done by a batch."""
    start = given.start if given is not None else begin(samples, options)
    transform = start.transform
    working = replace(samples, values=start.values)
    envelope = Envelope.of(working.values)
    omni = given.omnidirectional if given is not None else None
    if omni is None:
        omni = _variogram(working, options.variogram, limits, declustering=start.declustering)
    hood = neighbourhood_for(options, samples)
    constant = omni.summary.variance == 0.0
    notes = list(omni.warnings)
    if constant:
        fit = _fit(points_from_experimental(omni, options.variogram.min_pairs), working, options.fit, 0.0)
        return Analysis(
            transform=transform,
            summary=summarise(samples.coords, samples.values, start.declustering),
            transformed_summary=omni.summary,
            omnidirectional=omni,
            directional=None,
            residual=None,
            anisotropy=None,
            trend=None,
            selection=None,
            fit=fit,
            model=fit.best.model,
            kriging=ORDINARY,
            neighbourhood=hood,
            cross_validation=None,
            prediction=None,
            back_transformed=None,
            envelope=envelope,
            warnings=tuple(dict.fromkeys(notes + list(fit.warnings))),
            verdict=judge(constant=True, strategy=None, model=None, label="", statistics=None),
        )
    scored, isotropic, fan, anisotropic, trend, residuals = _strategies(
        working, options, hood, limits, workers, omni, start.declustering, given.fan if given is not None else None
    )
    estimated_by_null = (
        scored[0].cross_validation.statistics["count"] if scored and scored[0].name == "pure_nugget" else 0
    )
    scored = [screen(s, envelope, estimated_by_null) for s in scored]
    selection = select(scored) if any(s.refused is None for s in scored) else None
    chosen = selection.selected if selection is not None else None
    fit = chosen.fit if chosen is not None and chosen.fit is not None else isotropic
    model = chosen.model if chosen is not None else isotropic.best.model
    spec = chosen.kriging if chosen is not None else ORDINARY
    prediction, back, withheld = None, None, 0
    decisions = None
    if chosen is not None and options.prediction is not None:
        prediction, back, withheld = _predict(working, transform, chosen, hood, options, envelope, limits, workers)
        decisions = decide(
            samples, transform, chosen.model, chosen.kriging, hood, prediction, options.prediction, limits, workers
        )
        notes += list(decisions.warnings)
    anisotropy = _anisotropy(anisotropic, selection)
    vmap = None
    if options.with_map and samples.dimension >= 2:
        # Cells from the automatic rule (about the typical sample spacing), as /v1/variogram-maps.
        vmap = run_map(working, options.map_stage, min_pairs=options.variogram.min_pairs, limits=limits)
        if vmap.grid is not None and vmap.grid.flagged:
            notes.append(
                f"{vmap.grid.flagged} variogram map cells have a grid error bound above {vmap.grid.tolerance:g} "
                "(relative; parameters.variogram_map); variogram_map.method 'exact' computes them exactly"
            )
    notes += list(fit.warnings)
    if start.declustering.warning:
        notes.append(start.declustering.warning)
    evidence = structure_evidence(omni.directions[0].classes, omni.summary.reference_variance)
    notes += _warnings(samples, scored, selection, chosen, trend, withheld)
    ignored_trend = bool(
        trend is not None
        and trend.significant
        and options.cross_validation.kriging is not None
        and options.cross_validation.kriging.type != "universal"
    )
    verdict = judge(
        constant=False,
        strategy=chosen.name if chosen is not None else None,
        model=model,
        label=fit.best.label if chosen is not None and chosen.fit is not None else chosen.name if chosen else "",
        statistics=chosen.cross_validation.statistics if chosen is not None and chosen.cross_validation else None,
        ignored_trend=ignored_trend,
        unresolved_structure=None if evidence.below > 0 else evidence.text,
        refused_structure=selection is not None
        and any(s.refused is not None and s.name != "pure_nugget" for s in selection.strategies),
    )
    return Analysis(
        transform=transform,
        summary=summarise(samples.coords, samples.values, start.declustering),
        transformed_summary=omni.summary,
        omnidirectional=omni,
        directional=fan,
        residual=residuals.experimental if residuals is not None else None,
        anisotropy=anisotropy,
        trend=trend,
        selection=selection,
        fit=fit,
        model=model,
        kriging=spec,
        neighbourhood=hood,
        cross_validation=chosen.cross_validation if chosen is not None else None,
        prediction=prediction,
        back_transformed=back,
        envelope=envelope,
        decisions=decisions,
        variogram_map=vmap,
        warnings=tuple(dict.fromkeys(notes)),
        verdict=verdict,
    )


def _anisotropy(anisotropic: FitResult | None, selection: Selection | None) -> Anisotropy | None:
    """The anisotropy estimate: the anisotropic strategy's model when it was scored, else the joint fit's."""
    strategy = selection.named("anisotropic") if selection is not None else None
    model = strategy.model if strategy is not None else anisotropic.best.model if anisotropic is not None else None
    if model is None or not model.structures:
        return None
    structure = model.structures[0]
    supported = bool(strategy is not None and strategy.selected)
    why = strategy.why if strategy is not None else "the fan shows no clear difference in continuity between directions"
    return Anisotropy(structure.anisotropy.azimuth, structure.anisotropy.ratio, structure.family, supported, why)


def _warnings(samples, scored, selection, chosen, trend, withheld) -> list[str]:
    notes = []
    if samples.size < FEW_SAMPLES:
        notes.append(f"only {samples.size} samples: fewer than about {FEW_SAMPLES} make variograms unreliable")
    for s in scored:
        if s.refused is not None:
            notes.append(f"strategy {s.name} refused: {s.refused}")
    if selection is None:
        notes.append("no strategy could be cross-validated: every kriging set-up was refused")
    if chosen is not None and chosen.cross_validation is not None and chosen.cross_validation.statistics["outliers"]:
        count = chosen.cross_validation.statistics["outliers"]
        noun = "sample has" if count == 1 else "samples have"
        notes.append(f"{count} {noun} large cross-validation errors (see cross_validation.samples.outlier)")
    if trend is not None and trend.significant and (chosen is None or "drift" not in chosen.name):
        notes.append(
            f"a linear trend in the coordinates explains {trend.share * 100:.0f} % of the variance, "
            "but kriging with a drift did not predict held-out samples better"
        )
    model = chosen.model if chosen is not None else None
    if model is not None and model.structures and model.sill and model.nugget / model.sill > 0.8:
        notes.append(f"the nugget is {model.nugget / model.sill * 100:.0f} % of the sill: the structure is weak")
    if withheld:
        nodes = "prediction node falls" if withheld == 1 else "prediction nodes fall"
        verb = "is" if withheld == 1 else "are"
        notes.append(f"{withheld} {nodes} outside the plausible envelope of the data and {verb} withheld")
    return notes
