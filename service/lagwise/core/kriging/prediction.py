"""Kriging predictions at target points or on a regular grid."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..data.samples import MAX_SPREAD, SampleSet
from ..errors import FieldIssue, InvalidInput, LimitExceeded
from ..limits import Limits
from ..modelling.models import VariogramModel
from .blocks import Blocks, BlockSupport, validate_blocks
from .cost import block_prediction_flops, check_kriging, drift_terms
from .neighbourhood import Neighbourhood
from .systems import Kriger, KrigingSpec, Prediction

MAX_WEIGHT_TARGETS = 20


@dataclass(frozen=True)
class Grid:
    """A regular grid: ``origin`` and ``spacing`` per axis (coordinate units, or degrees for
    geographic samples) and ``shape`` (points per axis); points run x fastest."""

    origin: tuple[float, ...]
    spacing: tuple[float, ...]
    shape: tuple[int, ...]

    @property
    def size(self) -> int:
        return math.prod(self.shape)

    def points(self) -> np.ndarray:
        axes = [o + s * np.arange(k) for o, s, k in zip(self.origin, self.spacing, self.shape, strict=True)]
        mesh = np.meshgrid(*axes, indexing="ij")
        # x fastest: iterate the last axis of the transposed mesh first.
        return np.column_stack([m.transpose(tuple(reversed(range(len(axes))))).ravel() for m in mesh])

    def as_dict(self) -> dict:
        return {
            "origin": list(self.origin),
            "spacing": list(self.spacing),
            "shape": list(self.shape),
            "order": "x fastest",
        }


@dataclass(frozen=True)
class PredictionResult:
    """Targets (as given), estimates, variances, reasons for missing values and audit weights.

    ``blocks``: when given, targets are block centres and estimates and variances those of
    the block averages (``support`` "block").
    """

    targets: np.ndarray
    prediction: Prediction
    grid: Grid | None
    blocks: Blocks | None = None

    @property
    def support(self) -> str:
        return "point" if self.blocks is None else "block"


def validate_grid(grid: Grid, dimension: int) -> None:
    """Check a grid against the samples' dimension; raises InvalidInput naming ``/grid/...``."""
    issues = []
    if not (len(grid.origin) == len(grid.spacing) == len(grid.shape) == dimension):
        issues.append(
            FieldIssue(
                "/grid", f"origin, spacing and shape need {dimension} entries each (the samples are {dimension}-D)"
            )
        )
    else:
        for a, s in enumerate(grid.spacing):
            if not (math.isfinite(s) and s > 0):
                issues.append(FieldIssue(f"/grid/spacing/{a}", "must be positive"))
        for a, k in enumerate(grid.shape):
            if k < 1:
                issues.append(FieldIssue(f"/grid/shape/{a}", "must be at least 1"))
    if issues:
        raise InvalidInput(issues)


def _project(samples: SampleSet, targets: np.ndarray) -> np.ndarray:
    if samples.projection is None:
        return targets
    if np.any(np.abs(targets[:, 1]) > 90):
        bad = int(np.flatnonzero(np.abs(targets[:, 1]) > 90)[0])
        raise InvalidInput.at(f"/targets/y/{bad}", "latitude must lie in [-90, 90] degrees")
    x, y = samples.projection.forward(targets[:, 0], targets[:, 1])
    return np.column_stack([x, y] + ([targets[:, 2]] if targets.shape[1] == 3 else []))


def _check_reach(samples: SampleSet, points: np.ndarray, on_grid: bool) -> None:
    """Refuse targets so far from the samples that squared separations overflow float64."""
    centre = 0.5 * (samples.coords.min(axis=0) + samples.coords.max(axis=0))
    with np.errstate(over="ignore", invalid="ignore"):
        far = ~(np.abs(points - centre) <= MAX_SPREAD).all(axis=1)
    if far.any():
        first = int(np.flatnonzero(far)[0])
        pointer = "/grid" if on_grid else f"/targets/x/{first}"
        raise InvalidInput.at(
            pointer,
            f"target {first} lies more than {MAX_SPREAD:g} coordinate units from the samples, "
            "where squared separations overflow; move it nearer",
        )


def _check_cost(
    samples: SampleSet, m: int, neighbourhood: Neighbourhood, spec: KrigingSpec, limits: Limits, points: int = 1
) -> None:
    """Refuse over-limit work; blocks add q covariance evaluations per sample and target (q points per block)."""
    limits.check_samples(samples.size)
    if m > limits.max_targets:
        raise LimitExceeded(
            "LAGWISE_MAX_TARGETS", limits.max_targets, m, "Predict on a coarser grid or in several requests.", "/grid"
        )
    p = drift_terms(spec.type, spec.drift, samples.dimension)
    flops = block_prediction_flops(samples.size, m, neighbourhood, p, points)
    check_kriging(limits, samples.size, m, neighbourhood, p, flops=flops, what="prediction")


def validate_targets(
    samples: SampleSet,
    targets: np.ndarray | None,
    grid: Grid | None,
    blocks: Blocks | None = None,
    weights_for: tuple[int, ...] = (),
) -> int:
    """Check what a prediction is asked for against the samples; returns the number of targets.

    Raises
    ------
    InvalidInput
        Naming ``/targets``, ``/grid/...``, ``/blocks/...`` or ``/return_weights``.
    """
    if blocks is not None:
        validate_blocks(blocks, samples.dimension)
        if samples.projection is not None:
            raise InvalidInput.at(
                "/blocks", "blocks need planar coordinates (their size is a length); project the samples first"
            )
    if (targets is None) == (grid is None):
        raise InvalidInput.at("/targets", "give either targets or grid")
    if grid is not None:
        validate_grid(grid, samples.dimension)
        m = grid.size
    else:
        points = np.asarray(targets, dtype=np.float64)
        if points.ndim != 2 or points.shape[1] != samples.dimension:
            raise InvalidInput.at(
                "/targets", f"targets need {samples.dimension} coordinates (the samples are {samples.dimension}-D)"
            )
        if points.shape[0] == 0:
            raise InvalidInput.at("/targets", "give at least one target")
        m = points.shape[0]
    if len(weights_for) > MAX_WEIGHT_TARGETS:
        raise InvalidInput.at("/return_weights", f"weights are returned for at most {MAX_WEIGHT_TARGETS} targets")
    bad = [t for t in weights_for if not 0 <= t < m]
    if bad:
        raise InvalidInput.at("/return_weights", f"target index {bad[0]} is outside 0..{m - 1}")
    return m


def predict(
    samples: SampleSet,
    model: VariogramModel,
    *,
    spec: KrigingSpec = KrigingSpec(),
    neighbourhood: Neighbourhood = Neighbourhood(),
    targets: np.ndarray | None = None,
    grid: Grid | None = None,
    weights_for: tuple[int, ...] = (),
    blocks: Blocks | None = None,
    limits: Limits = Limits(),
    workers: int = 1,
) -> PredictionResult:
    """Kriging estimates and variances at ``targets`` (m, d) or on ``grid``.

    Targets are in the samples' input coordinates (degrees for geographic samples).
    ``weights_for`` lists up to 20 target indexes whose kriging weights are returned.
    ``blocks``: block kriging of blocks centred at the targets (:mod:`.blocks`); planar
    coordinates only (block sizes are lengths).
    """
    m = validate_targets(samples, targets, grid, blocks, weights_for)
    _check_cost(samples, m, neighbourhood, spec, limits, 1 if blocks is None else blocks.points)
    points = grid.points() if grid is not None else np.asarray(targets, dtype=np.float64)
    projected = _project(samples, points)
    _check_reach(samples, projected, grid is not None)
    kriger = Kriger(
        samples,
        model,
        spec,
        neighbourhood,
        max_unique=limits.max_unique_samples,
        memory_budget=limits.memory_budget_bytes,
    )
    support = None if blocks is None else BlockSupport(blocks, kriger.cov, kriger.frame, kriger.spec)
    prediction = kriger.predict(projected, weights_for=tuple(weights_for), workers=workers, support=support)
    return PredictionResult(points, prediction, grid, blocks)
