"""The cost of a whole analysis (:func:`lagwise.core.analysis.analyse`), estimated before any work.

Each stage of an analysis is refused above its own limit, but an analysis runs many
stages: the omnidirectional variogram, the fan of direction classes, the residual
variograms of the drifts, the fits, the likelihood refinements, one cross-validation of
every candidate of every strategy, the prediction, the simulation and the figures. A
request whose stages each pass could still add up to far more than its deadline, so
their sum is estimated from sizes alone (and the candidates the pair kernels will visit) and refused
above ``LAGWISE_MAX_ANALYSIS_SECONDS``; for several variables, the sum over the variables.

The estimate counts the most the chain may run (every strategy that the options allow,
as if the data supported it) and converts each stage's count to seconds of one worker
core on a loaded machine, by the rates the stage limits document:

* pair kernels: :data:`PAIRS_PER_SECOND` (``LAGWISE_MAX_PAIRS``): the candidates each pass's
  kernel visits (the column sweep of the fast path, the sweep along x of the others) and the
  pairs within the search radius per direction class, with the class uncertainties' pass;
* the variogram map: its pairs (exact) or, for the grid method, its FFTs:
  :data:`FFT_UNITS_PER_SECOND` (transforms x points x log2 points of the padded grid);
* kriging operations (multiply-add equivalents, :mod:`.kriging.cost`):
  :data:`OPERATIONS_PER_SECOND` (``LAGWISE_MAX_KRIGING_FLOPS``);
* simulated values: :data:`SIMULATED_PER_SECOND` (``LAGWISE_MAX_SIMULATION_VALUES``);
* figure marks: :data:`SVG_MARKS_PER_SECOND`, 40 times as many in PNG
  (``LAGWISE_MAX_FIGURE_ELEMENTS``);
* a least-squares fit of every family: :data:`FIT_SECONDS`.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from .analysis import (
    AUTO_FAN,
    CANDIDATES_SCORED,
    FAN_FAMILIES,
    REFINE_MIN_SAMPLES,
    AnalysisOptions,
    neighbourhood_for,
)
from .data.samples import SampleSet
from .errors import InvalidInput, LimitExceeded
from .kriging.cost import (
    ENTRY_OPERATIONS,
    block_prediction_flops,
    cross_validation_flops,
    drift_terms,
    prediction_flops,
)
from .limits import PNG_ELEMENT_FACTOR, Limits
from .modelling.likelihood import EVALUATIONS
from .modelling.likelihood import MAX_SAMPLES as LIKELIHOOD_SAMPLES
from .modelling.trend import QUADRATIC_MIN_SAMPLES
from .stages import validate_stages
from .variography.directions import OMNIDIRECTIONAL
from .variography.experimental import pair_passes, resolve_directions, summed_fast
from .variography.lags import validate_lags
from .variography.maps import map_work
from .variography.pairs import X_SWEEP, estimate_pairs_within, pass_visits, prepare
from .variography.uncertainty import plan_blocks

PAIRS_PER_SECOND = 1e8
OPERATIONS_PER_SECOND = 3e9
SIMULATED_PER_SECOND = 1e7
# A grid-method variogram map, whole (binning, transforms, bounds), took 1.8-3.1 ns of CPU per unit
# of transforms x points x log2(points) at 2,000-200,000 samples on the loaded 2-core machine (load
# 9, wall about 3 times the CPU) while it also ran, and counted, 9 transforms of offset moments (since
# removed: the bounds' own time now weighs more per unit); 6.25 ns a unit leaves room for both.
FFT_UNITS_PER_SECOND = 1.6e8
SVG_MARKS_PER_SECOND = 2000.0  # about 0.5 ms per map cell
FIT_SECONDS = 0.7  # one least-squares fit of every family: about 0.6 s of CPU profiled on the loaded 2-core machine
LIKELIHOOD_STARTS = 12  # starts of the anisotropic refinement: up to 4 candidates x 3 ratios
EMBEDDING_FACTOR = 4  # the torus of a circulant embedding is at least twice the grid along each axis
POINTERS = {
    "variograms": "/variogram",
    "variogram_map": "/variogram_map",
    "fits": "/fit",
    "refinements": "/fit",
    "cross_validation": "/cross_validation",
    "prediction": "/prediction",
    "simulation": "/prediction/simulation",
    "figures": "/figures",
}


@dataclass(frozen=True)
class AnalysisCost:
    """Estimated seconds of one analysis, by stage.

    Attributes
    ----------
    stages : dict of str to float
        ``variograms``, ``variogram_map``, ``fits``, ``refinements``, ``cross_validation``,
        ``prediction``, ``simulation`` and ``figures``: seconds of one worker core (see the module docstring).
    """

    stages: dict[str, float]

    @property
    def seconds(self) -> float:
        """The whole analysis (s)."""
        return sum(self.stages.values())


def _pair_seconds(samples: SampleSet, options: AnalysisOptions, variograms: int, fan: tuple) -> float:
    """The pair work of every variogram pass (``LAGWISE_MAX_PAIRS`` units, :meth:`.limits.Limits.check_pairs`):
    the candidates each pass's kernel visits (the column sweep or the sweep along x,
    :func:`.variography.pairs.pass_visits`) plus the pairs within the search radius per direction class,
    and the class uncertainties' per-block pass (the sweep along x) where it runs."""
    stage = options.variogram
    edges = validate_lags(stage.lags)
    coords = samples.coords
    radius = float(edges[-1]) if edges is not None else 0.5 * float(np.linalg.norm(np.ptp(coords, axis=0)))
    prepared = prepare(coords, np.zeros(samples.size))
    within = estimate_pairs_within(coords, radius)
    along_x = pass_visits(prepared, radius, [X_SWEEP])[0][1]
    sets = [([OMNIDIRECTIONAL], variograms)] + (
        [(resolve_directions(list(fan), samples.dimension)[0], 1)] if fan else []
    )
    work = 0
    for directions, count in sets:
        passes = pair_passes(stage.lags, stage.statistic, False, summed_fast(directions, stage.lags))
        visited = sum(v for _, v in pass_visits(prepared, radius, passes))
        _, skipped = plan_blocks(stage.statistic, samples.size, (len(directions), 1), max(within, along_x))
        blocks = 0 if skipped else along_x + within * len(directions)
        work += count * (visited + len(passes) * within * len(directions) + blocks)
    return work / PAIRS_PER_SECOND


def _map_seconds(samples: SampleSet, options: AnalysisOptions, limits: Limits) -> float:
    """The variogram map's pair work (exact) or its transforms (grid: transforms x points x log2 points),
    by the method the map stage will take (:func:`.variography.maps.map_work`)."""
    if not options.with_map:
        return 0.0
    stage = options.map_stage
    work = map_work(
        samples, statistic=stage.statistic, min_pairs=options.variogram.min_pairs, method=stage.method, limits=limits
    )
    if work is None:
        return 0.0
    transforms = work.transforms * work.points * math.log2(max(work.points, 2))
    return work.pairs / PAIRS_PER_SECOND + transforms / FFT_UNITS_PER_SECOND


def _simulated_seconds(options: AnalysisOptions, n: int, hood, limits: Limits) -> float:
    """Values drawn and the conditioning of a simulation (0 when it would be skipped by its own limit)."""
    stage = options.prediction
    if stage is None or stage.simulation is None or stage.grid is None:
        return 0.0
    m, realisations = stage.grid.size, stage.simulation.realisations
    draws = realisations * m * (1 + EMBEDDING_FACTOR)
    if draws > limits.max_simulation_values:
        return 0.0
    k = n if hood.unique else min(hood.max_points or n, n)
    conditioning = prediction_flops(n, m, hood, 1) + 2.0 * realisations * m * k
    return draws / SIMULATED_PER_SECOND + conditioning / OPERATIONS_PER_SECOND


def estimate(
    samples: SampleSet,
    options: AnalysisOptions,
    limits: Limits,
    *,
    figure_marks: int = 0,
    figure_format: str = "svg",
) -> AnalysisCost:
    """Estimate the seconds of :func:`~lagwise.core.analysis.analyse` on ``samples`` with ``options``.

    ``figure_marks``: the marks of the requested figures (grid cells and sample markers).
    The counts assume every strategy the options allow is scored with all its candidates.
    Options the analysis would refuse cost nothing here: the analysis's own validation
    reports them, before any work, with the pointers of its stages.
    """
    try:
        validate_stages(samples, [("/variogram", options.variogram), ("/cross_validation", options.cross_validation)])
    except InvalidInput:
        return AnalysisCost({})
    n, d = samples.size, samples.dimension
    fit, cv = options.fit, options.cross_validation
    hood = neighbourhood_for(options, samples)
    fixed = cv.kriging
    universal_only = fixed is not None and fixed.type == "universal"
    folds = None if cv.scheme.type == "leave_one_out" else cv.scheme.folds
    refinable = fit.compare and fit.nugget == "fit" and n >= REFINE_MIN_SAMPLES
    wants_fan = fit.model is None and d >= 2 and (options.variogram.directions is not None or fit.anisotropy != "none")
    fan = options.variogram.directions if isinstance(options.variogram.directions, tuple) else AUTO_FAN
    fan_classes = len(fan)
    drifts: list[int] = []
    if fit.model is None and (fixed is None or universal_only) and (fit.compare or universal_only):
        degrees = [1, 2] if fixed is None else [2 if fixed.drift == "quadratic" else 1]
        drifts = [g for g in degrees if g == 1 or n >= QUADRATIC_MIN_SAMPLES or fixed is not None]
    # cross-validations: (count, drift terms) per strategy
    base = drift_terms("ordinary" if fixed is None or universal_only else fixed.type, None, d)
    runs: list[tuple[int, int]] = []
    if fit.model is not None:
        runs.append((1, base))
    elif not universal_only:
        runs.append(((CANDIDATES_SCORED if fit.compare else 1) + int(refinable), base))
        if wants_fan:
            runs.append(((FAN_FAMILIES + 1 if fit.compare else 1) + int(refinable), base))
    for degree in drifts:
        runs.append((1, drift_terms("universal", "linear" if degree == 1 else "quadratic", d)))
    validations = sum(count * cross_validation_flops(n, folds, hood, p) for count, p in runs)
    m = min(n, LIKELIHOOD_SAMPLES)
    evaluation = ENTRY_OPERATIONS * m * m + m**3 / 3
    refinements = int(refinable) * (1 + EVALUATIONS + int(wants_fan) * (LIKELIHOOD_STARTS + EVALUATIONS))
    prediction = 0.0
    if options.prediction is not None and options.prediction.grid is not None:
        points = 1 if options.prediction.blocks is None else options.prediction.blocks.points
        p = max([base] + [p for _, p in runs])
        prediction = block_prediction_flops(n, options.prediction.grid.size, hood, p, points)
    fits = 1 + wants_fan * (1 + (fan_classes if fit.compare else 0)) + len(drifts)
    rate = SVG_MARKS_PER_SECOND * (PNG_ELEMENT_FACTOR if figure_format == "png" else 1)
    return AnalysisCost(
        {
            "variograms": _pair_seconds(samples, options, 1 + len(drifts), fan if wants_fan else ()),
            "variogram_map": _map_seconds(samples, options, limits),
            "fits": FIT_SECONDS * fits,
            "refinements": refinements * evaluation / OPERATIONS_PER_SECOND,
            "cross_validation": validations / OPERATIONS_PER_SECOND,
            "prediction": prediction / OPERATIONS_PER_SECOND,
            "simulation": _simulated_seconds(options, n, hood, limits),
            "figures": figure_marks / rate,
        }
    )


def check(costs: Sequence[AnalysisCost], limits: Limits, names: Sequence[str] = ()) -> None:
    """Refuse analyses whose estimated seconds, summed, exceed ``LAGWISE_MAX_ANALYSIS_SECONDS``.

    ``names``: the variables of a batch, one per cost (their shares are named in the advice).
    """
    total = sum(c.seconds for c in costs)
    if total <= limits.max_analysis_seconds:
        return
    stages: dict[str, float] = {}
    for cost in costs:
        for stage, seconds in cost.stages.items():
            stages[stage] = stages.get(stage, 0.0) + seconds
    largest = sorted(stages.items(), key=lambda item: -item[1])[:3]
    shares = ", ".join(f"{stage} {seconds:.3g} s" for stage, seconds in largest)
    batch = f" over {len(costs)} variables ({', '.join(names)})" if len(costs) > 1 else ""
    raise LimitExceeded(
        "LAGWISE_MAX_ANALYSIS_SECONDS",
        limits.max_analysis_seconds,
        round(total, 1),
        f"The whole analysis{batch} would take about {total:.3g} s of one core; the largest stages: {shares}. "
        "Use fewer samples, a moving neighbourhood with fewer points (cross_validation.neighbourhood), k-fold "
        "cross-validation, fit.compare false or fit.anisotropy none (fewer strategies), a coarser prediction "
        "grid, fewer realisations, fewer figures, or fewer variables per request.",
        POINTERS[largest[0][0]],
    )
