"""What an analysis's prediction stage gives a threshold decision.

* Exceedance probabilities at every grid node (or kriged block) under the multi-Gaussian
  reading (:mod:`.kriging.exceedance`), in the space where kriging ran.
* A table of targets by probability class: below the limit with at least 90 %
  probability, uncertain, above it with at least 90 % probability.
* With ``simulation``: conditional simulation (:mod:`.simulation`) with the selected
  model, giving the share of the grid above each threshold across realisations (mean,
  P10, P50, P90) and, with ``block_size``, the exceedance of block averages; the table
  of classes then counts those blocks (the only route to block averages when a
  transform is used).
"""

from __future__ import annotations

from dataclasses import dataclass

from .data.samples import SampleSet
from .data.transforms import Transform
from .errors import InvalidInput, LimitExceeded, pointers_under
from .kriging.exceedance import Exceedance, ProbabilityClasses, classify, exceedance, reading
from .kriging.neighbourhood import Neighbourhood
from .kriging.prediction import PredictionResult
from .kriging.systems import KrigingSpec
from .limits import Limits
from .modelling.models import VariogramModel
from .simulation.simulate import SimulationResult, simulate
from .stages import PredictionOptions


@dataclass(frozen=True)
class Decisions:
    """Exceedance, probability classes and (optionally) simulated shares of the grid above thresholds.

    Attributes
    ----------
    exceedance : Exceedance or None
        Per node (or kriged block), from kriging; None without thresholds.
    classes : tuple of ProbabilityClasses
        One per threshold, from simulated blocks when there are some, else from ``exceedance``.
    classes_support : str
        ``point`` (grid nodes), ``block`` (kriged or simulated blocks).
    classes_method : str
        ``kriging`` or ``simulation``.
    simulation : SimulationResult or None
    warnings : tuple of str
    """

    exceedance: Exceedance | None
    classes: tuple[ProbabilityClasses, ...]
    classes_support: str
    classes_method: str
    simulation: SimulationResult | None
    warnings: tuple[str, ...]


def validate_decisions(samples: SampleSet, stage: PredictionOptions) -> None:
    """The analysis's own checks of its prediction stage (a map and a simulation on a plane), before any
    work, with pointers under ``/prediction``; the stage's options are checked by :meth:`PredictionOptions.validate`."""
    with pointers_under("/prediction"):
        if samples.dimension != 2:
            raise InvalidInput.at(
                "/grid", f"analysis prediction grids need 2-D samples (these are {samples.dimension}-D)"
            )
        if stage.simulation is not None:
            if not stage.thresholds:
                raise InvalidInput.at("/simulation", "a simulation in an analysis needs thresholds")
            if samples.projection is not None:
                raise InvalidInput.at("/simulation", "simulations need planar coordinates")


def decide(
    samples: SampleSet,
    transform: Transform,
    model: VariogramModel,
    spec: KrigingSpec,
    neighbourhood: Neighbourhood,
    prediction: PredictionResult,
    stage: PredictionOptions,
    limits: Limits,
    workers: int = 1,
) -> Decisions:
    """Exceedance and classes from the analysis's prediction; the optional simulation (skipped with a
    warning when the selected strategy or the limits do not allow it)."""
    if not stage.thresholds:
        return Decisions(None, (), prediction.support, "kriging", None, ())
    found = exceedance(
        prediction.prediction.estimate,
        prediction.prediction.variance,
        stage.thresholds,
        transform,
        reading(spec.type, spec.nugget_as, prediction.support),
    )
    classes = tuple(classify(t, row) for t, row in zip(found.thresholds, found.probability, strict=True))
    support, method = prediction.support, "kriging"
    notes: list[str] = []
    simulated = None
    if stage.simulation is not None:
        simulated, why = _simulate(samples, transform, model, spec, neighbourhood, stage, limits, workers)
        if why:
            notes.append(f"the share of the grid above the thresholds was not simulated: {why}")
        if simulated is not None and simulated.blocks is not None:
            classes = tuple(classify(t, p) for t, p in simulated.blocks.exceedance)
            support, method = "block", "simulation"
    return Decisions(found, classes, support, method, simulated, tuple(notes))


def _simulate(samples, transform, model, spec, neighbourhood, stage, limits, workers):
    if spec.type not in ("simple", "ordinary"):
        return None, f"the selected strategy uses {spec.type} kriging; simulations condition by simple or ordinary"
    if not model.structures or not model.bounded:
        return None, "the selected model has no bounded spatial structure"
    options = stage.simulation
    assert options is not None and stage.grid is not None  # an analysis simulates on its prediction grid
    try:
        with pointers_under("/prediction/simulation"):
            result = simulate(
                samples,
                model,
                grid=stage.grid,
                transform=transform.kind,
                spec=spec,
                neighbourhood=neighbourhood,
                realisations=options.realisations,
                seed=options.seed,
                thresholds=stage.thresholds,
                block_size=options.block_size,
                limits=limits,
                workers=workers,
            )
    except LimitExceeded as exc:
        return None, f"{exc.limit} would be exceeded ({exc})"
    return result, None
