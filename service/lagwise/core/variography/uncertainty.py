"""How sure is each class? A delete-one-block jackknife over spatial blocks of samples.

Why this method: the pairs of a class are not independent -- a sample takes part in
many pairs and nearby pairs share the field's local fluctuations -- so the spread of
the pairs' squared differences divided by sqrt(N) understates the error. The
samples are split into B spatial blocks of nearly equal counts (recursive halving
of the longest side at the median); dropping one block at a time removes every pair
that touches it, and the spread of the B recomputed statistics gives the standard
error (block jackknife for dependent data: Kuensch 1989, Annals of Statistics 17(3))

    SE = sqrt((B - 1) / B * sum_b (theta_(b) - mean_b theta_(b))^2).

It is cheap: one extra pass of the pair kernel keeps per-block accumulators (each
pair is added to the blocks of its two ends), and theta_(b) is the class statistic
of the total sums minus block b's sums, so no pass is repeated.

The 95 % interval is theta * exp(+-t SE / theta) (a normal interval for log theta
by the delta method; semivariances are positive and right-skewed), t the 97.5 %
quantile of Student's t with B - 1 degrees of freedom. Covariance-type statistics
can be negative and get the symmetric interval theta +- t SE.

Undefined (null, with a reason): classes without pairs, classes whose pairs touch
fewer than ``MIN_BLOCKS_TOUCHED`` blocks or vanish when one block is dropped, the
median-based statistic (no pair sums to subtract), sets too small for
``MIN_BLOCKS`` blocks of ``SAMPLES_PER_BLOCK`` samples, and passes over
``MAX_UNCERTAINTY_PAIRS`` pairs (the pass is skipped, not refused, to bound its cost;
it runs in ranges of rows with the request's deadline checked between them).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.stats import t as student_t

from . import kernels as K
from .pairs import accumulate_by_block, sweep_visits
from .statistics import ACCUMULATION_MODE, COVARIANCE_TYPE, class_value

MAX_BLOCKS = 8
MIN_BLOCKS = 6
SAMPLES_PER_BLOCK = 6
MIN_BLOCKS_TOUCHED = 5
MAX_UNCERTAINTY_PAIRS = 50_000_000
MAX_BLOCK_CELLS = 4_000_000
LOG_RATIO_CAP = 30.0
METHOD = (
    "delete-one-block jackknife over spatial blocks of samples (Kuensch 1989); 95 % interval "
    "theta * exp(+-t SE / theta), t of Student with blocks - 1 degrees of freedom (theta +- t SE for covariances)"
)


@dataclass(frozen=True)
class ClassUncertainty:
    """Uncertainty of one class statistic.

    Attributes
    ----------
    standard_error : float or None
        Jackknife standard error, units of the statistic.
    interval_95 : tuple of float or None
        (lower, upper) 95 % interval.
    reason : str or None
        Why the uncertainty is undefined.
    """

    standard_error: float | None
    interval_95: tuple[float, float] | None
    reason: str | None = None


@dataclass(frozen=True)
class UncertaintyPlan:
    """The blocks used (for the audit trail)."""

    blocks: int
    method: str = METHOD


def spatial_blocks(coords: np.ndarray, count: int) -> np.ndarray:
    """Block label (0 .. count - 1) of each sample: recursive median halving of the longest side.

    Parts get sample counts in proportion to their share of ``count`` blocks, so
    blocks hold nearly equal numbers of samples.
    """
    labels = np.empty(coords.shape[0], dtype=np.int64)
    stack = [(np.arange(coords.shape[0]), count, 0)]
    while stack:
        index, k, first = stack.pop()
        if k == 1:
            labels[index] = first
            continue
        part = coords[index]
        axis = int(np.argmax(np.ptp(part, axis=0)))
        order = index[np.argsort(part[:, axis], kind="stable")]
        left = k // 2
        cut = int(round(index.size * left / k))
        stack.append((order[:cut], left, first))
        stack.append((order[cut:], k - left, first + left))
    return labels


def block_count(samples: int) -> int:
    """Blocks for a set of ``samples``: at most ``MAX_BLOCKS``, at least ``SAMPLES_PER_BLOCK`` samples each."""
    return min(MAX_BLOCKS, samples // SAMPLES_PER_BLOCK)


def undefined(reason: str, shape: tuple[int, int]) -> list[list[ClassUncertainty]]:
    """The same undefined uncertainty for every class of ``shape`` (directions, classes)."""
    return [[ClassUncertainty(None, None, reason) for _ in range(shape[1])] for _ in range(shape[0])]


def class_uncertainties(
    statistic: str, prepared, classes, coords: np.ndarray, pairs_in_classes: int
) -> tuple[list[list[ClassUncertainty]], UncertaintyPlan | None]:
    """Uncertainty of every class of every direction (see the module docstring).

    Parameters
    ----------
    statistic : str
        The class statistic.
    prepared : PreparedSamples
        Samples laid out for the kernels.
    classes : ClassLayout
        Direction and distance classes.
    coords : ndarray, shape (n, d)
        Working coordinates in input order (blocks are built from them).
    pairs_in_classes : int
        Pairs counted in the classes over all directions; with the pairs the x-sorted
        sweep visits, it bounds the pass's cost (skipped above ``MAX_UNCERTAINTY_PAIRS``).

    Returns
    -------
    (rows, plan)
        rows[k][c] for direction k and class c; plan is None when no pass ran.
    """
    shape = (classes.table.shape[0], classes.kmax)
    work = max(pairs_in_classes, int(sweep_visits(prepared.points[:, 0], classes.search_radius).sum()))
    blocks, reason = plan_blocks(statistic, coords.shape[0], shape, work)
    if reason is not None:
        return undefined(reason, shape), None
    labels = spatial_blocks(coords, blocks)[prepared.order]
    total, by_block = accumulate_by_block(prepared, classes, ACCUMULATION_MODE[statistic], labels, blocks)
    return from_block_sums(statistic, total, by_block, prepared, shape), UncertaintyPlan(blocks)


def plan_blocks(statistic: str, samples: int, shape: tuple[int, int], work: int | None) -> tuple[int, str | None]:
    """Blocks for the jackknife of ``samples`` samples and ``shape`` (directions, classes), or why there are none.

    ``work`` is the larger of the pairs in the classes and the pairs the sweep visits
    (None when not known yet: only the block count is decided then).
    """
    blocks = block_count(samples)
    if statistic == "semivariance_median":
        return 0, "not available for the median-based statistic (no pair sums to leave out)"
    if blocks < MIN_BLOCKS:
        return 0, f"too few samples for {MIN_BLOCKS} spatial blocks of {SAMPLES_PER_BLOCK} samples"
    if work is not None and work > MAX_UNCERTAINTY_PAIRS:
        return 0, f"skipped: more than {MAX_UNCERTAINTY_PAIRS:.0e} pairs in the classes"
    while blocks > MIN_BLOCKS and blocks * shape[0] * shape[1] > MAX_BLOCK_CELLS:
        blocks //= 2
    if blocks * shape[0] * shape[1] > MAX_BLOCK_CELLS:
        return 0, "skipped: too many classes for the per-block sums"
    return blocks, None


def from_block_sums(
    statistic: str, total: np.ndarray, by_block: np.ndarray, prepared, shape: tuple[int, int], signed: bool = False
) -> list[list[ClassUncertainty]]:
    """Class uncertainties from the total sums (bins, ACCUMULATORS) and per-block sums (blocks, bins,
    ACCUMULATORS), bin = direction x ``shape[1]`` + class; ``prepared`` gives the mean and scale.
    ``signed``: the statistic may take either sign (a cross-semivariance), so the interval is
    theta +- t SE whatever the statistic."""
    factor = float(student_t.ppf(0.975, by_block.shape[0] - 1))
    rows = []
    for k in range(shape[0]):
        row = []
        for c in range(shape[1]):
            b = k * shape[1] + c
            row.append(_one_class(statistic, total[b], by_block[:, b], prepared, factor, signed))
        rows.append(row)
    return rows


def _one_class(statistic, total, by_block, prepared, factor, signed=False) -> ClassUncertainty:
    if total[K.COUNT] == 0:
        return ClassUncertainty(None, None, "no pairs in this class")
    touched = int(np.count_nonzero(by_block[:, K.COUNT]))
    if touched < MIN_BLOCKS_TOUCHED:
        return ClassUncertainty(
            None, None, f"the class's pairs touch only {touched} spatial blocks (fewer than {MIN_BLOCKS_TOUCHED})"
        )
    full = class_value(statistic, total, prepared.mean, prepared.scale, None).value
    replicates = []
    for b in range(by_block.shape[0]):
        left = total - by_block[b]
        value = class_value(statistic, left, prepared.mean, prepared.scale, None).value if left[K.COUNT] > 0 else None
        if value is None:
            return ClassUncertainty(None, None, "the statistic is undefined once one spatial block is left out")
        replicates.append(value)
    if full is None:
        return ClassUncertainty(None, None, "the statistic is undefined for this class")
    spread = np.array(replicates)
    blocks = spread.size
    se = math.sqrt((blocks - 1) / blocks * float(np.sum((spread - spread.mean()) ** 2)))
    if signed or statistic in COVARIANCE_TYPE or full <= 0.0:
        return ClassUncertainty(se, (full - factor * se, full + factor * se))
    ratio = factor * se / full
    if ratio > LOG_RATIO_CAP:
        # Far too uncertain for the log-scale form to stay finite: from zero to the symmetric upper bound.
        return ClassUncertainty(se, (0.0, full + factor * se))
    return ClassUncertainty(se, (full * math.exp(-ratio), full * math.exp(ratio)))


@dataclass(frozen=True)
class StructureEvidence:
    """Whether the short classes show a structure beyond their own noise.

    Attributes
    ----------
    resolved : bool
        Each of the first ``checked`` classes with an interval has its whole 95 %
        interval below the sill reference.
    below : int
        How many of those classes lie wholly below it.
    checked : int
        Classes looked at (fewer than asked when intervals are missing).
    text : str
        One plain sentence for a verdict.
    """

    resolved: bool
    below: int
    checked: int
    text: str


def structure_evidence(classes, reference: float, leading: int = 2) -> StructureEvidence:
    """Do the ``leading`` shortest classes lie below the sill reference beyond their noise?

    Parameters
    ----------
    classes : sequence of ClassRow
        Classes of one direction (semivariance-type statistic), shortest first.
    reference : float
        Sill reference (the declustered variance when sampling is clustered), squared value units.
    leading : int
        Classes that must each have a 95 % interval wholly below ``reference``
        (two by default: a single class falls below by chance about 1 time in 40).

    Spatial continuity means close samples differ less than the field as a whole, so
    the shortest classes sit below the sill; when their intervals reach the sill,
    the structure is inside the noise of its classes.
    """
    rows = [r for r in classes if r.interval_95 is not None and not r.sparse][:leading]
    below = sum(r.interval_95[1] < reference for r in rows)
    resolved = len(rows) == leading and below == leading
    if resolved:
        text = f"the {leading} shortest classes lie below the sill reference beyond their 95 % intervals"
    elif len(rows) < leading:
        text = f"fewer than {leading} short classes carry an uncertainty, so the structure cannot be told from noise"
    else:
        text = (
            f"{below} of the {leading} shortest classes lie below the sill reference beyond their 95 % intervals: "
            "the structure is inside the noise of its classes"
        )
    return StructureEvidence(resolved, below, len(rows), text)
