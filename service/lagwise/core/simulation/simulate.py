"""Gaussian conditional simulation on a regular 2-D grid.

Method
------
1. The values are transformed (normal scores by default, with declustering weights
   when sampling is clustered; :mod:`lagwise.core.data.transforms`); the model is in
   transformed units. Simple kriging's mean defaults to the (declustered) mean of the
   transformed values.
2. Unconditional fields of the model's continuous part are drawn on a lattice with the
   grid's spacing that covers the grid and every sample (with a window around it), by
   circulant embedding (:mod:`.embedding`); the field at the samples themselves is
   drawn jointly from the lattice (:mod:`.points`); the nugget is added as independent
   point-scale noise at every node and sample (a sample on a node shares that node's
   noise), so realisations are point-support values whose variogram is the whole model.
3. Each realisation is conditioned by kriging its residuals at the samples
   (:mod:`.conditioning`), back-transformed node by node, and summarised
   (:mod:`.summaries`).

Memory and streaming
--------------------
No realisation is held whole unless ``return_realisations``: each field is drawn,
the grid rows of the current *pass* and its values at the samples are kept, and the
field is dropped. The pass's nodes x realisations values (8 bytes each) must fit half
of ``LAGWISE_MEMORY_BUDGET_BYTES`` after the fixed arrays (embedding, kriging matrix);
when they do not, the grid is cut into passes of whole block rows and every pass
draws the same realisations again from the same seed (same stream, same fields), so
per-node quantiles stay exact order statistics; at most :data:`MAX_PASSES` passes.
The deadline is checked between realisations and between chunks.

Reproducibility: one ``numpy.random.Generator`` (PCG64) seeded with ``seed`` draws, per
pair of realisations, the embedding's 2 M normal numbers, then for each of the two
fields the sample draws (n) and the nugget draws (nodes + samples); the same seed and
request give the same bytes.
"""

from __future__ import annotations

import math
import sys
from dataclasses import dataclass, replace

import numpy as np

from ..data.declustering import weighted_start
from ..data.samples import SampleSet
from ..data.transforms import TRANSFORMS, Transform
from ..deadline import check_deadline
from ..errors import FieldIssue, InvalidInput, LimitExceeded
from ..kriging.cost import ENTRY_OPERATIONS, check_kriging, drift_terms, prediction_flops
from ..kriging.neighbourhood import Neighbourhood, validate_neighbourhood
from ..kriging.prediction import Grid, validate_grid
from ..kriging.systems import KrigingSpec
from ..limits import Limits
from ..modelling.models import VariogramModel, validate_model
from .conditioning import ResidualKriging
from .embedding import Embedding, embed, embedding_bytes, smallest_torus
from .points import EARLIER, WINDOW, PointDraw, prepare, window_origin
from .summaries import QUANTILES, Accumulator, BlockLayout, Fraction

SIMULATION_KRIGING = ("simple", "ordinary")
MAX_REALISATIONS = 10_000
MAX_PASSES = 8
SILL_TOLERANCE = 1.5
FLOAT = 8


@dataclass(frozen=True)
class BlockSummary:
    """Block averages over the realisations.

    Attributes
    ----------
    grid : Grid
        Block centres (origin, spacing = block size, shape = blocks per axis).
    mean : ndarray, shape (blocks,)
        Mean over realisations of each block's average (original units), x fastest.
    exceedance : list of (float, ndarray)
        Per threshold, the share of realisations whose block average exceeds it.
    """

    grid: Grid
    mean: np.ndarray
    exceedance: list[tuple[float, np.ndarray]]


@dataclass(frozen=True)
class SimulationResult:
    """An ensemble of conditional realisations, summarised.

    Attributes
    ----------
    grid : Grid
        The simulation grid (nodes x fastest).
    mean, variance : ndarray, shape (m,)
        Per node, the e-type mean (original units) and variance (divisor R, squared units).
    quantiles : dict of str to ndarray
        ``p10``, ``p50``, ``p90`` per node (original units).
    exceedance : list of (float, ndarray)
        Per threshold t, the share of realisations above t at each node.
    blocks : BlockSummary or None
    above : list of (float, Fraction)
        Per threshold, the share of the grid above it over the realisations.
    realisations : ndarray or None, shape (R, m)
        Every realisation (original units, x fastest), when asked for.
    transform : Transform
        The fitted transform.
    spec : KrigingSpec
        The kriging used, with its mean filled in.
    embedding : Embedding
        The circulant embedding used.
    passes : int
        Passes over the realisations (see the module docstring).
    warnings : tuple of str
    """

    grid: Grid
    mean: np.ndarray
    variance: np.ndarray
    quantiles: dict[str, np.ndarray]
    exceedance: list[tuple[float, np.ndarray]]
    blocks: BlockSummary | None
    above: list[tuple[float, Fraction]]
    realisations: np.ndarray | None
    transform: Transform
    spec: KrigingSpec
    embedding: Embedding
    passes: int
    warnings: tuple[str, ...]

    @property
    def method(self) -> dict:
        """How the realisations were made, for the response's ``method``."""
        return {
            "unconditional": "circulant embedding of the model's continuous part on a lattice of the grid's "
            "spacing covering the grid and the samples (Dietrich & Newsam 1997)",
            "at_samples": f"drawn jointly with the lattice: each sample given the {WINDOW} x {WINDOW} lattice "
            f"nodes around it and up to {EARLIER} nearby samples drawn before it (Gaussian conditional "
            "distribution); a sample on a node takes the node's value",
            "nugget": "independent point-scale noise at every node and sample; realisations are point-support "
            "values whose variogram is the whole model",
            "conditioning": "kriging of the residuals at the samples (Journel 1974), weights found once and "
            "applied to every realisation",
            "back_transform": "each realisation node by node, "
            + ("by the normal-score table" if self.transform.kind == "normal_score" else self.transform.kind),
            "quantiles": "order statistics with linear interpolation (Hyndman & Fan 1996, definition 7)",
            "variance_divisor": "R (number of realisations)",
            "passes": self.passes,
            "embedding": self.embedding.as_dict(),
            "random_generator": "numpy PCG64",
        }


def _block_layout(grid: Grid, size: tuple[float, ...] | None) -> BlockLayout | None:
    if size is None:
        return None
    if len(size) != 2:
        raise InvalidInput.at("/blocks/size", "give the block size along x and y (2 numbers)")
    issues, nodes = [], []
    for a, (s, d, k) in enumerate(zip(size, grid.spacing, grid.shape, strict=True)):
        count = s / d if math.isfinite(s) and s > 0 else 0.0
        whole = round(count)
        if whole < 1 or abs(count - whole) > 1e-9 * max(count, 1.0):
            issues.append(
                FieldIssue(f"/blocks/size/{a}", f"must be a whole number of grid spacings ({d:g}); got {s:g}")
            )
        elif k % whole:
            issues.append(
                FieldIssue(f"/blocks/size/{a}", f"blocks of {whole} nodes do not tile the grid's {k} nodes exactly")
            )
        nodes.append(whole)
    if issues:
        raise InvalidInput(issues)
    return BlockLayout((nodes[0], nodes[1]), (grid.shape[0] // nodes[0], grid.shape[1] // nodes[1]))


def _validate(samples, model, grid, transform, spec, neighbourhood, realisations, seed, thresholds) -> None:
    issues = []
    if samples.coordinates != "planar":
        issues.append(
            FieldIssue(
                "/coordinates",
                "simulations need planar coordinates: a grid regular in degrees is not regular in distance "
                "(project the samples and the grid first)",
            )
        )
    if samples.dimension != 2:
        issues.append(FieldIssue("/samples", f"simulations are 2-D (x and y); the samples are {samples.dimension}-D"))
    if transform not in TRANSFORMS:
        issues.append(FieldIssue("/transform", f"must be one of {', '.join(TRANSFORMS)}"))
    if spec.type not in SIMULATION_KRIGING:
        issues.append(FieldIssue("/kriging/type", "simulations condition by simple or ordinary kriging"))
    if spec.mean is not None and not math.isfinite(spec.mean):
        issues.append(FieldIssue("/kriging/mean", "must be a finite number"))
    if not 1 <= realisations <= MAX_REALISATIONS:
        issues.append(FieldIssue("/realisations", f"must be from 1 to {MAX_REALISATIONS}"))
    if not 0 <= seed < 2**63:
        issues.append(FieldIssue("/seed", "must be a whole number from 0 to 2^63 - 1"))
    for j, t in enumerate(thresholds):
        if not math.isfinite(t):
            issues.append(FieldIssue(f"/thresholds/{j}", "not a finite number"))
    if not model.bounded:
        issues.append(
            FieldIssue("/model", "simulation needs a model with a sill; linear and power structures have none")
        )
    if issues:
        raise InvalidInput(issues)
    validate_model(model, 2)
    validate_grid(grid, 2)
    validate_neighbourhood(neighbourhood, 2)


@dataclass(frozen=True)
class _Lattice:
    """The physical lattice: its shape (P_x, P_y), the grid's offset in it and the samples' positions (nodes)."""

    shape: tuple[int, int]
    grid_offset: tuple[int, int]
    positions: np.ndarray
    on_node: np.ndarray  # grid node index of each sample sitting on one, else -1


def _lattice(samples: SampleSet, grid: Grid, max_nodes: int) -> _Lattice:
    origin, spacing = np.asarray(grid.origin), np.asarray(grid.spacing)
    with np.errstate(over="ignore", invalid="ignore"):
        u = (samples.coords - origin) / spacing  # fractional grid indexes
        span = np.maximum(np.asarray(grid.shape, dtype=float), u.max(axis=0) + WINDOW) - np.minimum(
            0.0, u.min(axis=0) - WINDOW
        )
    # The torus has at least 2 P nodes per axis: refuse before building anything larger.
    if not np.all(np.isfinite(span)) or 4.0 * float(np.prod(span)) > max_nodes:
        raise LimitExceeded(
            "LAGWISE_MAX_EMBEDDING_NODES",
            max_nodes,
            min(4.0 * float(np.prod(span)), sys.float_info.max) if np.all(np.isfinite(span)) else sys.float_info.max,
            "The simulation lattice has the grid's spacing and covers the grid and every sample; keep the samples "
            "near the grid or use a coarser spacing.",
            "/grid",
        )
    low = np.minimum(0, window_origin(u).min(axis=0))
    high = np.maximum(np.asarray(grid.shape) - 1, (window_origin(u) + WINDOW - 1).max(axis=0))
    shape = (int(high[0] - low[0] + 1), int(high[1] - low[1] + 1))
    nearest = np.rint(u)
    on = np.all(np.abs(u - nearest) <= 1e-9, axis=1) & np.all(nearest >= 0, axis=1)
    on &= (nearest[:, 0] < grid.shape[0]) & (nearest[:, 1] < grid.shape[1])
    node = np.where(on, nearest[:, 1] * grid.shape[0] + nearest[:, 0], -1).astype(np.int64)
    return _Lattice(shape, (int(-low[0]), int(-low[1])), u - low, node)


def _sill_warning(model: VariogramModel, reference: float, transform: str) -> str | None:
    sill = model.sill
    if sill is None or reference <= 0 or 1 / SILL_TOLERANCE <= sill / reference <= SILL_TOLERANCE:
        return None
    units = {"normal_score": "normal scores", "log": "logarithms", "none": "the values"}[transform]
    return (
        f"the model's sill ({sill:.4g}) is far from the variance of {units} ({reference:.4g}): the model must be "
        "in the transformed units (fit it to the transformed values)"
    )


def _check_cost(samples, grid, spec, neighbourhood, realisations, torus, passes, limits: Limits) -> None:
    limits.check_samples(samples.size)
    draws = realisations * (grid.size + torus[0] * torus[1] * passes)
    if draws > limits.max_simulation_values:
        raise LimitExceeded(
            "LAGWISE_MAX_SIMULATION_VALUES",
            limits.max_simulation_values,
            draws,
            f"{realisations} realisations x ({grid.size} grid nodes + {torus[0] * torus[1]} embedding nodes x "
            f"{passes} pass(es)); ask for fewer realisations or a coarser grid.",
            "/realisations",
        )
    n, m, p = samples.size, grid.size, drift_terms(spec.type, None, 2)
    if neighbourhood.unique:
        # the samples' matrix and its factorisation, each node's n covariances, then per
        # realisation and pass one solve and per node n multiply-adds (no per-node solve)
        s = n + p
        flops = ENTRY_OPERATIONS * (n * n + m * n) + s**3 / 3 + 2.0 * realisations * (m * n + passes * s * s)
    else:
        # the systems of a prediction at the nodes, then k multiply-adds per node and realisation
        k = min(neighbourhood.max_points or n, n)
        flops = prediction_flops(n, m, neighbourhood, p) + 2.0 * realisations * m * k
    check_kriging(limits, n, m, neighbourhood, p, flops=flops, what="conditioning")


def _plan_passes(grid, blocks, realisations, fixed, keep, limits: Limits) -> int:
    """Grid rows per pass (a multiple of the block height) so the pass's values fit the memory budget."""
    nx, ny = grid.shape
    unit = blocks.nodes[1] if blocks else 1
    store = limits.memory_budget_bytes // 2 - fixed - (FLOAT * grid.size * realisations if keep else 0)
    row_bytes = FLOAT * nx * realisations
    rows = (max(store, 0) // row_bytes) // unit * unit
    passes = math.ceil(ny / rows) if rows else math.inf
    if passes > (1 if keep else MAX_PASSES):
        need = fixed + FLOAT * grid.size * realisations * (2 if keep else 1 / MAX_PASSES)
        raise LimitExceeded(
            "LAGWISE_MEMORY_BUDGET_BYTES",
            limits.memory_budget_bytes,
            2 * need,
            f"{realisations} realisations of {grid.size} nodes"
            + (" returned whole" if keep else f" in at most {MAX_PASSES} passes")
            + " do not fit the memory budget; ask for fewer realisations or nodes"
            + (", or do not return the realisations." if keep else "."),
            "/realisations",
        )
    return max(1, min(ny, rows))


def simulate(
    samples: SampleSet,
    model: VariogramModel,
    *,
    grid: Grid,
    transform: str = "normal_score",
    spec: KrigingSpec = KrigingSpec(type="simple"),
    neighbourhood: Neighbourhood = Neighbourhood(),
    realisations: int = 100,
    seed: int = 1,
    thresholds: tuple[float, ...] = (),
    block_size: tuple[float, ...] | None = None,
    return_realisations: bool = False,
    limits: Limits = Limits(),
    workers: int = 1,
) -> SimulationResult:
    """Gaussian conditional simulation of the samples' variable on a 2-D grid.

    Parameters
    ----------
    samples : SampleSet
        Planar 2-D samples (original units).
    model : VariogramModel
        Variogram model in transformed units (bounded); its nugget is point-scale variation.
    grid : Grid
        The simulation grid (coordinate units), nodes x fastest.
    transform : str
        ``normal_score`` (default), ``log`` or ``none``.
    spec : KrigingSpec
        ``simple`` (``mean`` in transformed units; None: the declustered mean of the
        transformed values) or ``ordinary``.
    neighbourhood : Neighbourhood
        Unique (default) or moving neighbourhood of the conditioning kriging.
    realisations : int
        Number R of realisations, 1 to :data:`MAX_REALISATIONS`.
    seed : int
        Seed of the random generator (0 to 2^63 - 1).
    thresholds : tuple of float
        Thresholds in original units for exceedance and the share of the grid above.
    block_size : tuple of float, optional
        Block size (bx, by), coordinate units: whole numbers of grid spacings that tile the grid.
    return_realisations : bool
        Keep and return every realisation.
    limits : Limits
        ``LAGWISE_MAX_SIMULATION_VALUES``, ``LAGWISE_MAX_EMBEDDING_NODES``,
        ``LAGWISE_MEMORY_BUDGET_BYTES`` and the kriging limits, checked before any realisation.
    workers : int
        Threads of the Fourier transforms.

    Returns
    -------
    SimulationResult

    Raises
    ------
    InvalidInput
        Naming the offending field.
    LimitExceeded
        Before any realisation is drawn, when the request costs more than a limit allows.
    """
    thresholds = tuple(float(t) for t in thresholds)
    _validate(samples, model, grid, transform, spec, neighbourhood, realisations, seed, thresholds)
    blocks = _block_layout(grid, block_size)
    if realisations * grid.size > limits.max_simulation_values:
        raise LimitExceeded(
            "LAGWISE_MAX_SIMULATION_VALUES",
            limits.max_simulation_values,
            realisations * grid.size,
            f"{realisations} realisations x {grid.size} grid nodes; ask for fewer realisations or a coarser grid.",
            "/realisations",
        )
    if return_realisations and realisations * grid.size > limits.max_returned_values:
        raise LimitExceeded(
            "LAGWISE_MAX_RETURNED_VALUES",
            limits.max_returned_values,
            realisations * grid.size,
            "Returned realisations are about 20 bytes of JSON per value; ask for fewer realisations or nodes, "
            "or use the summaries (mean, quantiles, exceedance) without return_realisations.",
            "/return_realisations",
        )
    lattice = _lattice(samples, grid, limits.max_embedding_nodes)
    torus = smallest_torus(lattice.shape)
    if torus[0] * torus[1] > limits.max_embedding_nodes:
        raise LimitExceeded(
            "LAGWISE_MAX_EMBEDDING_NODES",
            limits.max_embedding_nodes,
            torus[0] * torus[1],
            f"The lattice of {lattice.shape[0]} x {lattice.shape[1]} nodes covers the grid and every sample; use a "
            "coarser grid or keep the samples near the grid.",
            "/grid",
        )
    n = samples.size
    p = drift_terms(spec.type, None, 2)
    fixed = embedding_bytes(torus) + FLOAT * n * (WINDOW**2 * 2 + EARLIER * 3 + 4 * realisations)
    if neighbourhood.unique:
        fixed += FLOAT * 2 * (n + p) ** 2
    rows_per_pass = _plan_passes(grid, blocks, realisations, fixed, return_realisations, limits)
    passes = math.ceil(grid.shape[1] / rows_per_pass)
    _check_cost(samples, grid, spec, neighbourhood, realisations, torus, passes, limits)

    start = weighted_start(samples.coords, samples.values, transform, samples.source_index)
    if spec.type == "simple" and spec.mean is None:
        spec = replace(spec, mean=start.simple_kriging_mean)
    warnings = list(samples.warnings)
    for note in (start.declustering.warning, _sill_warning(model, start.sill_reference, transform)):
        if note:
            warnings.append(note)
    structural = VariogramModel(0.0, model.structures)
    kriging = ResidualKriging(
        replace(samples, values=start.values),
        model,
        spec,
        neighbourhood,
        max_unique=limits.max_unique_samples,
        memory_budget=limits.memory_budget_bytes // 4,
    )
    spacing = (float(grid.spacing[0]), float(grid.spacing[1]))
    embedding = embed(structural, spacing, lattice.shape, max_nodes=limits.max_embedding_nodes, workers=workers)
    draw = prepare(structural, lattice.positions, spacing, lattice.shape)
    accumulator = Accumulator((grid.shape[0], grid.shape[1]), realisations, thresholds, blocks, return_realisations)
    shift = spec.mean if spec.type == "simple" else 0.0
    chunk_rows = max(1, kriging.rows_per_chunk(realisations) // grid.shape[0])
    if blocks is not None:
        chunk_rows = max(blocks.nodes[1], chunk_rows // blocks.nodes[1] * blocks.nodes[1])
    for first_row in range(0, grid.shape[1], rows_per_pass):
        rows = range(first_row, min(grid.shape[1], first_row + rows_per_pass))
        nodes, at_samples = _unconditional(
            embedding, draw, lattice, grid, rows, model.nugget, realisations, seed, workers
        )
        prepared = kriging.prepare(kriging.residuals(at_samples))
        del at_samples
        for chunk_start in range(rows.start, rows.stop, chunk_rows):
            check_deadline()
            chunk = range(chunk_start, min(rows.stop, chunk_start + chunk_rows))
            local = slice((chunk.start - rows.start) * grid.shape[0], (chunk.stop - rows.start) * grid.shape[0])
            points = _node_coordinates(grid, chunk)
            values = nodes[local] + kriging.correction(points, prepared) + shift
            accumulator.add(chunk.start * grid.shape[0], start.transform.backward(values))
        del nodes
    return _result(accumulator, grid, blocks, thresholds, start.transform, spec, embedding, passes, warnings)


def _node_coordinates(grid: Grid, rows: range) -> np.ndarray:
    """Coordinates (c, 2) of the nodes of grid rows ``rows``, x fastest."""
    x = grid.origin[0] + grid.spacing[0] * np.arange(grid.shape[0])
    y = grid.origin[1] + grid.spacing[1] * np.arange(rows.start, rows.stop)
    return np.column_stack([np.tile(x, len(y)), np.repeat(y, grid.shape[0])])


def _unconditional(
    embedding: Embedding,
    draw: PointDraw,
    lattice: _Lattice,
    grid: Grid,
    rows: range,
    nugget: float,
    realisations: int,
    seed: int,
    workers: int,
) -> tuple[np.ndarray, np.ndarray]:
    """Unconditional values at the nodes of ``rows`` (c, R) and at the samples (n, R), nugget included.

    Every call draws the same realisations from ``seed``, whatever ``rows`` are.
    """
    rng = np.random.Generator(np.random.PCG64(seed))
    nx, ny = grid.shape
    ox, oy = lattice.grid_offset
    m, n = grid.size, draw.deviation.size
    first, last = rows.start * nx, rows.stop * nx
    nodes = np.empty((last - first, realisations))
    right = np.empty((n, realisations))
    noise_at_samples = np.zeros((n, realisations))
    scale = math.sqrt(nugget)
    on = lattice.on_node >= 0
    for pair in range(0, realisations, 2):
        check_deadline()
        for r, field in zip(range(pair, pair + 2), embedding.draw_pair(rng, workers), strict=True):
            right_r = draw.draw(field, rng)
            noise = scale * rng.standard_normal(m + n) if nugget else None
            if r >= realisations:
                break
            right[:, r] = right_r
            nodes[:, r] = field[oy + rows.start : oy + rows.stop, ox : ox + nx].ravel()
            if noise is not None:
                nodes[:, r] += noise[first:last]
                at = noise[m:]
                at[on] = noise[lattice.on_node[on]]
                noise_at_samples[:, r] = at
    return nodes, draw.solve(right) + noise_at_samples


def _result(accumulator, grid, blocks, thresholds, transform, spec, embedding, passes, warnings) -> SimulationResult:
    block_summary = None
    if blocks is not None:
        block_grid = Grid(
            tuple(o + (k - 1) / 2 * s for o, k, s in zip(grid.origin, blocks.nodes, grid.spacing, strict=True)),
            tuple(k * s for k, s in zip(blocks.nodes, grid.spacing, strict=True)),
            blocks.shape,
        )
        block_summary = BlockSummary(
            block_grid,
            accumulator.block_mean,
            [(t, accumulator.block_exceedance[j]) for j, t in enumerate(thresholds)],
        )
    names = [f"p{round(100 * q)}" for q in QUANTILES]
    return SimulationResult(
        grid=grid,
        mean=accumulator.mean,
        variance=accumulator.variance,
        quantiles={name: accumulator.quantiles[i] for i, name in enumerate(names)},
        exceedance=[(t, accumulator.exceedance[j]) for j, t in enumerate(thresholds)],
        blocks=block_summary,
        above=list(zip(thresholds, accumulator.fractions(), strict=True)),
        realisations=accumulator.realisations,
        transform=transform,
        spec=spec,
        embedding=embedding,
        passes=passes,
        warnings=tuple(warnings),
    )
