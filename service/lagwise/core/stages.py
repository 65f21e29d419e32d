"""Stage contracts: the options of each stage of the chain, checked before any work, and
the one entry point that runs each stage.

The separate endpoints take a stage's options at the top of their request; the analysis
request nests them under ``/variogram``, ``/fit``, ``/cross_validation`` and
``/prediction``. Each ``validate`` raises :class:`~lagwise.core.errors.InvalidInput`
with pointers relative to its stage; :func:`validate_stages` moves them under the stage
(:func:`~lagwise.core.errors.pointers_under`) so every pointer is right for the request
it came from. Checks that need the data's values (e.g. positivity for a log transform)
run in the stage itself, under the same pointer base.

The ``run_*`` functions take options that :func:`validate_stages` has accepted: the
analysis (:mod:`.analysis`) and the separate endpoints run every stage through them.
Analyses keep cross-validation and predictions in the working (transformed) units; a
separate endpoint back-transforms them (``run_transformed_*``).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from functools import partial
from typing import Protocol

import numpy as np

from .data.declustering import Declustering
from .data.samples import SampleSet
from .errors import FieldIssue, InvalidInput, pointers_under
from .kriging.blocks import Blocks
from .kriging.cross_validation import (
    DEFAULT_OUTLIER_THRESHOLD,
    CrossValidation,
    Scheme,
    cross_validate,
    validate_scheme,
)
from .kriging.exceedance import validate_thresholds
from .kriging.neighbourhood import Neighbourhood, validate_neighbourhood
from .kriging.prediction import Grid, PredictionResult, predict, validate_targets
from .kriging.systems import KrigingSpec, validate_kriging_options, validate_spec
from .kriging.transformed import (
    TransformedPrediction,
    Working,
    back_transform_cross_validation,
    back_transform_prediction,
)
from .limits import Limits
from .modelling.fitting import (
    SEMIVARIANCE_STATISTICS,
    ExperimentalPoints,
    FitResult,
    fewest_classes,
    fit_model,
    points_from_experimental,
    validate_fit_options,
)
from .modelling.models import VariogramModel, validate_model
from .variography.bounds import BOUND_STATISTICS
from .variography.directions import DirectionClass
from .variography.experimental import ExperimentalVariogram, ScatterRequest, experimental_variogram
from .variography.experimental import validate_options as validate_variogram_options
from .variography.gridded import DEFAULT_TOLERANCE, METHODS
from .variography.lags import LagRequest, validate_lags
from .variography.maps import VariogramMap, variogram_map

ANISOTROPY_CHOICES = ("auto", "none", "fit")
ORDINARY = KrigingSpec()
BLOCKS_NEED_SIMULATION = (
    "block kriging runs without a transform: the back-transform of a block estimate is not the block's average; "
    "block averages of transformed values come from simulations (POST /v1/simulations with blocks; in an "
    "analysis, prediction.simulation with blocks)"
)


class Stage(Protocol):
    """What :func:`validate_stages` checks: a stage's options."""

    def validate(self, samples: SampleSet) -> None: ...


def _collect(checks: Iterable[Callable[[], object]]) -> None:
    """Run every check, then raise one :class:`InvalidInput` with all their issues (if any)."""
    issues: list[FieldIssue] = []
    for check in checks:
        try:
            check()
        except InvalidInput as exc:
            issues.extend(exc.issues)
    if issues:
        raise InvalidInput(issues)


@dataclass(frozen=True)
class VariogramOptions:
    """Experimental variogram stage.

    ``directions``: None (omnidirectional; in an analysis a fan of direction classes is
    added when the fit considers anisotropy), ``"auto"`` (the same fan, always computed)
    or explicit classes. ``for_fit``: the classes are fitted (analyses, model fits), so
    the statistic must be a semivariance. ``pairs_for_class``, ``method`` and
    ``tolerance``: the h-scattergram and pair engine of the experimental endpoint.
    """

    lags: LagRequest = LagRequest()
    directions: tuple[DirectionClass, ...] | str | None = None
    statistic: str = "semivariance"
    min_pairs: int = 30
    pairs_for_class: ScatterRequest | None = None
    method: str = "exact"
    tolerance: float = DEFAULT_TOLERANCE
    for_fit: bool = True

    @property
    def classes(self) -> list[DirectionClass] | None:
        """The explicit direction classes, or None (omnidirectional or ``auto``)."""
        return list(self.directions) if isinstance(self.directions, tuple) else None

    def validate(self, samples: SampleSet) -> None:
        if self.for_fit and self.statistic not in SEMIVARIANCE_STATISTICS:
            raise InvalidInput.at(
                "/statistic", f"models are fitted to semivariances: use one of {', '.join(SEMIVARIANCE_STATISTICS)}"
            )
        if self.method not in METHODS:
            raise InvalidInput.at("/method", f"must be one of {', '.join(METHODS)}")
        if not 0.0 < self.tolerance < 1.0:
            raise InvalidInput.at("/tolerance", "must lie strictly between 0 and 1")
        if self.pairs_for_class is not None and self.method == "grid":
            raise InvalidInput.at("/pairs_for_class", "h-scattergrams need method 'exact'")
        validate_lags(self.lags)
        if isinstance(self.directions, str) and self.directions != "auto":
            raise InvalidInput.at("/directions", 'must be "auto" or a list of direction classes')
        validate_variogram_options(samples, self.statistic, self.min_pairs, self.classes)


@dataclass(frozen=True)
class MapOptions:
    """Variogram map stage (an analysis's ``variogram_map`` figure).

    ``method`` and ``tolerance`` as for ``POST /v1/variogram-maps``
    (:func:`~lagwise.core.variography.maps.variogram_map`): ``auto`` (default) takes the
    exact path unless its pair work would exceed ``LAGWISE_MAX_PAIRS``. ``statistic`` is the
    statistic mapped; an analysis maps its variogram stage's
    (:meth:`lagwise.core.analysis.AnalysisOptions.map_stage`).
    """

    method: str = "auto"
    tolerance: float = DEFAULT_TOLERANCE
    statistic: str = "semivariance"

    def validate(self, samples: SampleSet) -> None:
        if self.method not in METHODS:
            raise InvalidInput.at("/method", f"must be one of {', '.join(METHODS)}")
        if not 0.0 < self.tolerance < 1.0:
            raise InvalidInput.at("/tolerance", "must lie strictly between 0 and 1")
        if self.method != "grid":
            return
        if samples.dimension != 2:
            raise InvalidInput.at("/method", "the grid method needs 2-D samples")
        if self.statistic not in BOUND_STATISTICS:
            raise InvalidInput.at(
                "/method",
                f"the grid method bounds its error for {', '.join(BOUND_STATISTICS)} only, not the variogram "
                f"statistic {self.statistic!r}; use method 'exact' or 'auto'",
            )


@dataclass(frozen=True)
class FitOptions:
    """Model-fitting stage (``model``: a given model, which skips fitting).

    ``anisotropy``: ``auto`` (analyses: an anisotropic strategy is compared when the fan
    of direction classes shows a difference in continuity), ``none`` or ``fit`` (one
    geometric anisotropy fitted jointly to the direction classes; analyses always fit
    and compare it). ``compare``: compare strategies by cross-validation (default) or
    use the fitted model alone.
    """

    families: str | tuple[str, ...] = "auto"
    nugget: str | float = "fit"
    weighting: str = "pairs"
    anisotropy: str = "auto"
    structures: int = 1
    model: VariogramModel | None = None
    compare: bool = True

    def validate(self, samples: SampleSet) -> None:
        self.validate_in(samples.dimension)

    def validate_in(self, dimension: int) -> None:
        """Check the options for samples of ``dimension`` (a fit to a given experimental variogram has no samples)."""
        families = self.families if self.families == "auto" else list(self.families)
        if self.anisotropy not in ANISOTROPY_CHOICES:
            raise InvalidInput.at("/anisotropy", f"must be one of {', '.join(ANISOTROPY_CHOICES)}")
        if self.anisotropy == "fit" and dimension < 2:
            raise InvalidInput.at("/anisotropy", "anisotropy needs 2-D or 3-D samples")
        validate_fit_options(families, self.nugget, self.weighting, "none", self.structures, dimension)
        if self.model is not None:
            validate_model(self.model, dimension)


def fit_sample_minimum(samples: SampleSet, min_pairs: int, fit: FitOptions) -> None:
    """Refuse, at ``/samples``, fewer samples than a fit to an omnidirectional variogram can use.

    The smallest candidate needs k usable classes (:func:`.modelling.fitting.fewest_classes`,
    3 by default) of at least ``min_pairs`` pairs each, and n samples make n (n - 1) / 2
    pairs, each in at most one class of an omnidirectional variogram: with fewer than the
    least n for which n (n - 1) / 2 >= k min_pairs no model can be fitted, whatever the
    layout. Constant values need one class (their model is a zero pure nugget). Nothing is
    checked for a given model. Call it after :func:`validate_stages`.
    """
    if fit.model is not None or samples.size == 0:
        return
    constant = bool(np.all(samples.values == samples.values[0]))
    classes = 1 if constant else fewest_classes(fit.families, fit.nugget, fit.structures, samples.dimension)
    pairs = classes * min_pairs
    needed = (1 + math.isqrt(8 * pairs + 1)) // 2
    while needed * (needed - 1) // 2 < pairs:
        needed += 1
    if samples.size < needed:
        raise InvalidInput.at(
            "/samples",
            f"fitting a model needs at least {needed} samples, got {samples.size}: the smallest candidate needs "
            f"{classes} distance classes of at least min_pairs ({min_pairs}) pairs, {pairs} pairs in all, and "
            f"{samples.size} samples make {samples.size * (samples.size - 1) // 2} (send more samples or lower "
            "min_pairs)",
        )


def _validate_given(model: VariogramModel | None, kriging: KrigingSpec | None, dimension: int) -> None:
    """A given model against the kriging options (``/model/...``); nothing when either is not given."""
    if model is not None and kriging is not None:
        validate_spec(kriging, model, dimension)


@dataclass(frozen=True)
class CrossValidationOptions:
    """Kriging and cross-validation stage.

    ``kriging`` None: automatic (analyses, see :mod:`.analysis`). ``neighbourhood`` None:
    the caller's default (analyses: unique up to 1500 samples, else 24 neighbours; the
    separate endpoint: unique). ``model``: the given model of the separate endpoint
    (analyses cross-validate their strategies' models).
    """

    kriging: KrigingSpec | None = None
    neighbourhood: Neighbourhood | None = None
    scheme: Scheme = Scheme()
    outlier_threshold: float = DEFAULT_OUTLIER_THRESHOLD
    model: VariogramModel | None = None

    def validate(self, samples: SampleSet) -> None:
        checks: list[Callable[[], object]] = []
        if self.kriging is not None:
            checks.append(partial(validate_kriging_options, self.kriging))
        if self.neighbourhood is not None:
            checks.append(partial(validate_neighbourhood, self.neighbourhood, samples.dimension))
        checks.append(partial(validate_scheme, self.scheme, samples.size, self.outlier_threshold))
        _collect(checks)
        _validate_given(self.model, self.kriging, samples.dimension)


@dataclass(frozen=True)
class AreaSimulation:
    """Conditional simulation within an analysis (see :mod:`lagwise.core.simulation`): the share of
    the grid above each threshold with its spread, and block averages when ``block_size`` is given."""

    realisations: int = 100
    seed: int = 1
    block_size: tuple[float, ...] | None = None

    def as_dict(self) -> dict:
        return {
            "realisations": self.realisations,
            "seed": self.seed,
            "block_size": None if self.block_size is None else list(self.block_size),
        }


@dataclass(frozen=True)
class PredictionOptions:
    """Prediction stage: ``targets`` (m, d) or a ``grid``, in the samples' input coordinates.

    ``thresholds`` (original units): exceedance probabilities; ``blocks``: block kriging
    (no transform); ``transform``: the transform kriging runs in (the request's), which
    thresholds and blocks depend on; ``weights_for``: target indexes whose weights are
    returned. ``kriging``, ``neighbourhood`` and ``model``: those of the separate endpoint
    (analyses predict with the selected strategy). ``simulation`` (analyses): conditional
    simulation for the share of the grid above each threshold (and simulated block averages).
    """

    grid: Grid | None = None
    targets: np.ndarray | None = None
    thresholds: tuple[float, ...] = ()
    blocks: Blocks | None = None
    transform: str = "none"
    weights_for: tuple[int, ...] = ()
    kriging: KrigingSpec | None = None
    neighbourhood: Neighbourhood | None = None
    model: VariogramModel | None = None
    simulation: AreaSimulation | None = None

    def validate(self, samples: SampleSet) -> None:
        checks: list[Callable[[], object]] = [
            partial(validate_targets, samples, self.targets, self.grid, self.blocks, self.weights_for),
            partial(validate_thresholds, self.thresholds, self.transform),
        ]
        if self.blocks is not None and self.transform != "none":
            checks.append(partial(_refuse, "/blocks", BLOCKS_NEED_SIMULATION))
        if self.kriging is not None:
            checks.append(partial(validate_kriging_options, self.kriging))
        if self.neighbourhood is not None:
            checks.append(partial(validate_neighbourhood, self.neighbourhood, samples.dimension))
        if self.simulation is not None and not 1 <= self.simulation.realisations <= 10_000:
            checks.append(partial(_refuse, "/simulation/realisations", "must be from 1 to 10000"))
        _collect(checks)
        _validate_given(self.model, self.kriging, samples.dimension)


def _refuse(pointer: str, detail: str) -> None:
    raise InvalidInput.at(pointer, detail)


def validate_stages(samples: SampleSet, stages: Iterable[tuple[str, Stage | None]]) -> None:
    """Validate every stage (``[("/variogram", VariogramOptions(...)), ...]``; base ``""`` at the top).

    Raises one :class:`InvalidInput` listing the issues of every stage, each pointer under
    its stage's base, before any stage runs.
    """
    issues: list[FieldIssue] = []
    for base, stage in stages:
        if stage is None:
            continue
        try:
            with pointers_under(base):
                stage.validate(samples)
        except InvalidInput as exc:
            issues.extend(exc.issues)
    if issues:
        raise InvalidInput(issues)


# ---- one entry point per stage -------------------------------------------------------


def run_variogram(
    samples: SampleSet,
    stage: VariogramOptions,
    *,
    limits: Limits,
    directions: tuple[DirectionClass, ...] | None = None,
    declustering: Declustering | None = None,
) -> ExperimentalVariogram:
    """The experimental variogram of ``samples`` (``directions`` replaces the stage's classes: an analysis's fan)."""
    return experimental_variogram(
        samples,
        lags=stage.lags,
        directions=list(directions) if directions is not None else stage.classes,
        statistic=stage.statistic,
        min_pairs=stage.min_pairs,
        pairs_for_class=stage.pairs_for_class,
        limits=limits,
        declustering=declustering,
        method=stage.method,
        tolerance=stage.tolerance,
    )


def run_map(
    samples: SampleSet,
    stage: MapOptions,
    *,
    min_pairs: int,
    limits: Limits,
    declustering: Declustering | None = None,
) -> VariogramMap:
    """The variogram map of ``samples`` by the stage's method (cells by the automatic rule, as
    ``POST /v1/variogram-maps`` without ``cell_size`` and ``cells``)."""
    return variogram_map(
        samples,
        statistic=stage.statistic,
        min_pairs=min_pairs,
        limits=limits,
        declustering=declustering,
        method=stage.method,
        tolerance=stage.tolerance,
    )


def run_fit(
    points: ExperimentalPoints, dimension: int, variance: float | None, stage: FitOptions, **overrides
) -> FitResult:
    """Fit and rank models to ``points`` (``overrides``: arguments of :func:`.modelling.fitting.fit_model`
    replacing the stage's, as an analysis's anisotropic and residual fits do)."""
    anisotropy = "fit" if stage.anisotropy == "fit" else "none"
    arguments = {
        "families": stage.families if stage.families == "auto" else list(stage.families),
        "nugget": stage.nugget,
        "weighting": stage.weighting,
        "anisotropy": anisotropy,
        "structures": stage.structures,
        **overrides,
    }
    return fit_model(points, dimension=dimension, sample_variance=variance, **arguments)


@dataclass(frozen=True)
class SampleFit:
    """A fit made from samples: the experimental variogram used and the fit."""

    experimental: ExperimentalVariogram
    fit: FitResult


def run_fit_to_samples(
    samples: SampleSet, variogram: VariogramOptions, fit: FitOptions, *, limits: Limits
) -> SampleFit:
    """The experimental variogram of ``samples``, then the fit to its usable classes."""
    experimental = run_variogram(samples, variogram, limits=limits)
    points = points_from_experimental(experimental, variogram.min_pairs)
    return SampleFit(experimental, run_fit(points, samples.dimension, experimental.summary.reference_variance, fit))


def run_cross_validation(
    samples: SampleSet,
    model: VariogramModel,
    stage: CrossValidationOptions,
    *,
    kriging: KrigingSpec,
    neighbourhood: Neighbourhood,
    limits: Limits,
    workers: int = 1,
) -> CrossValidation:
    """Cross-validate kriging with ``model`` on ``samples`` (in their units) by the stage's scheme."""
    return cross_validate(
        samples,
        model,
        kriging,
        neighbourhood,
        stage.scheme,
        outlier_threshold=stage.outlier_threshold,
        limits=limits,
        workers=workers,
    )


def given_setup(
    stage: CrossValidationOptions | PredictionOptions,
) -> tuple[VariogramModel, KrigingSpec, Neighbourhood]:
    """A separate endpoint's model, kriging (default ordinary) and neighbourhood (default unique)."""
    assert stage.model is not None  # the separate endpoints require their model
    return stage.model, stage.kriging or ORDINARY, stage.neighbourhood or Neighbourhood()


def run_transformed_cross_validation(
    working: Working, stage: CrossValidationOptions, *, limits: Limits, workers: int = 1
) -> CrossValidation:
    """The separate cross-validation: the stage's model and kriging in the working space, reported in
    original units where that reading holds (:func:`.kriging.transformed.back_transform_cross_validation`)."""
    model, kriging, hood = given_setup(stage)
    inner = run_cross_validation(
        working.samples, model, stage, kriging=kriging, neighbourhood=hood, limits=limits, workers=workers
    )
    return back_transform_cross_validation(working, working.original.values, model, inner)


def run_prediction(
    samples: SampleSet,
    model: VariogramModel,
    stage: PredictionOptions,
    *,
    kriging: KrigingSpec,
    neighbourhood: Neighbourhood,
    limits: Limits,
    workers: int = 1,
) -> PredictionResult:
    """Kriging estimates and variances (in the samples' units) at the stage's targets or grid."""
    return predict(
        samples,
        model,
        spec=kriging,
        neighbourhood=neighbourhood,
        targets=stage.targets,
        grid=stage.grid,
        weights_for=stage.weights_for,
        blocks=stage.blocks,
        limits=limits,
        workers=workers,
    )


def run_transformed_prediction(
    working: Working, stage: PredictionOptions, *, limits: Limits, workers: int = 1
) -> TransformedPrediction:
    """The separate prediction: the stage's model and kriging in the working space, back-transformed,
    with exceedance probabilities for the stage's thresholds."""
    model, kriging, hood = given_setup(stage)
    result = run_prediction(
        working.samples, model, stage, kriging=kriging, neighbourhood=hood, limits=limits, workers=workers
    )
    return back_transform_prediction(working, model, kriging, result, stage.thresholds)
