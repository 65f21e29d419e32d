"""Stage contracts: the options of each stage of the chain, checked before any work.

The separate endpoints take a stage's options at the top of their request; the analysis
request nests them under ``/variogram``, ``/fit``, ``/cross_validation`` and
``/prediction``. Each ``validate`` raises :class:`~lagwise.core.errors.InvalidInput`
with pointers relative to its stage; :func:`validate_stages` moves them under the stage
(:func:`~lagwise.core.errors.pointers_under`) so every pointer is right for the request
it came from. Checks that need the data's values (e.g. positivity for a log transform)
run in the stage itself, under the same pointer base.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from functools import partial

from .data.samples import SampleSet
from .errors import FieldIssue, InvalidInput, pointers_under
from .kriging.blocks import Blocks, validate_blocks
from .kriging.cross_validation import DEFAULT_OUTLIER_THRESHOLD, Scheme, validate_scheme
from .kriging.neighbourhood import Neighbourhood, validate_neighbourhood
from .kriging.prediction import Grid, validate_grid
from .kriging.systems import KrigingSpec, validate_kriging_options
from .modelling.fitting import SEMIVARIANCE_STATISTICS, validate_fit_options
from .modelling.models import VariogramModel, validate_model
from .variography.directions import DirectionClass
from .variography.experimental import validate_options as validate_variogram_options
from .variography.lags import LagRequest, validate_lags

ANISOTROPY_CHOICES = ("auto", "none", "fit")


@dataclass(frozen=True)
class VariogramOptions:
    """Experimental variogram stage.

    ``directions``: None (omnidirectional; a fan of direction classes is added when the
    fit considers anisotropy), ``"auto"`` (the same fan, always computed) or explicit classes.
    """

    lags: LagRequest = LagRequest()
    directions: tuple[DirectionClass, ...] | str | None = None
    statistic: str = "semivariance"
    min_pairs: int = 30

    def validate(self, samples: SampleSet) -> None:
        if self.statistic not in SEMIVARIANCE_STATISTICS:
            raise InvalidInput.at(
                "/statistic", f"models are fitted to semivariances: use one of {', '.join(SEMIVARIANCE_STATISTICS)}"
            )
        validate_lags(self.lags)
        explicit = list(self.directions) if isinstance(self.directions, tuple) else None
        if isinstance(self.directions, str) and self.directions != "auto":
            raise InvalidInput.at("/directions", 'must be "auto" or a list of direction classes')
        validate_variogram_options(samples, self.statistic, self.min_pairs, explicit)


@dataclass(frozen=True)
class FitOptions:
    """Model-fitting stage (``model``: a given model, which skips fitting).

    ``anisotropy``: ``auto`` (an anisotropic strategy is compared when the fan of
    direction classes shows a difference in continuity), ``none`` or ``fit`` (always
    fitted and compared). ``compare``: compare strategies by cross-validation (default)
    or use the fitted model alone.
    """

    families: str | tuple[str, ...] = "auto"
    nugget: str | float = "fit"
    weighting: str = "pairs"
    anisotropy: str = "auto"
    structures: int = 1
    model: VariogramModel | None = None
    compare: bool = True

    def validate(self, samples: SampleSet) -> None:
        families = self.families if self.families == "auto" else list(self.families)
        if self.anisotropy not in ANISOTROPY_CHOICES:
            raise InvalidInput.at("/anisotropy", f"must be one of {', '.join(ANISOTROPY_CHOICES)}")
        if self.anisotropy == "fit" and samples.dimension < 2:
            raise InvalidInput.at("/anisotropy", "anisotropy needs 2-D or 3-D samples")
        validate_fit_options(families, self.nugget, self.weighting, "none", self.structures, samples.dimension)
        if self.model is not None:
            validate_model(self.model, samples.dimension)


@dataclass(frozen=True)
class CrossValidationOptions:
    """Kriging and cross-validation stage (``kriging`` None: automatic, see :mod:`.analysis`)."""

    kriging: KrigingSpec | None = None
    neighbourhood: Neighbourhood | None = None
    scheme: Scheme = Scheme()
    outlier_threshold: float = DEFAULT_OUTLIER_THRESHOLD

    def validate(self, samples: SampleSet) -> None:
        issues: list[FieldIssue] = []
        checks: list[Callable[[], object]] = []
        if self.kriging is not None:
            checks.append(partial(validate_kriging_options, self.kriging))
        if self.neighbourhood is not None:
            checks.append(partial(validate_neighbourhood, self.neighbourhood, samples.dimension))
        checks.append(partial(validate_scheme, self.scheme, samples.size, self.outlier_threshold))
        for check in checks:
            try:
                check()
            except InvalidInput as exc:
                issues.extend(exc.issues)
        if issues:
            raise InvalidInput(issues)


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
    """Prediction stage: a grid (analyses) in the samples' input coordinates.

    ``thresholds`` (original units): exceedance probabilities and their classes;
    ``blocks``: block kriging (no transform); ``simulation``: conditional simulation
    for the share of the grid above each threshold (and simulated block averages).
    """

    grid: Grid
    thresholds: tuple[float, ...] = ()
    blocks: Blocks | None = None
    simulation: AreaSimulation | None = None

    def validate(self, samples: SampleSet) -> None:
        if samples.dimension != 2:
            raise InvalidInput.at(
                "/grid", f"analysis prediction grids need 2-D samples (these are {samples.dimension}-D)"
            )
        validate_grid(self.grid, samples.dimension)
        if self.blocks is not None:
            validate_blocks(self.blocks, samples.dimension)
        if self.simulation is not None and not 1 <= self.simulation.realisations <= 10_000:
            raise InvalidInput.at("/simulation/realisations", "must be from 1 to 10000")


def validate_stages(samples: SampleSet, stages: dict[str, object]) -> None:
    """Validate every stage (``{"/variogram": VariogramOptions(...), ...}``), collecting all issues.

    Raises one :class:`InvalidInput` listing the issues of every stage, each pointer under
    its stage, before any stage runs.
    """
    issues: list[FieldIssue] = []
    for base, stage in stages.items():
        if stage is None:
            continue
        try:
            with pointers_under(base):
                stage.validate(samples)  # type: ignore[attr-defined]
        except InvalidInput as exc:
            issues.extend(exc.issues)
    if issues:
        raise InvalidInput(issues)
