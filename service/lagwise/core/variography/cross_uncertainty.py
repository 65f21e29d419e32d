"""Class standard errors of the cross-semivariance: the jackknife of one variable, over the samples of a pair.

The cross-semivariance of (a, b) sums (a_j - a_i)(b_j - b_i) over the pairs of samples where
a and b are both measured at both ends, so its samples are the locations measuring both.
They are split into spatial blocks by the rule of one variable
(:func:`lagwise.core.variography.uncertainty.spatial_blocks`, as many blocks as
:func:`lagwise.core.variography.uncertainty.plan_blocks` gives for that many samples);
deleting a block deletes every pair that touches it, and the spread of the recomputed
statistics gives the standard error, as for a direct variogram (delete-one-block jackknife,
Kuensch 1989, Annals of Statistics 17(3)). Where a and b are measured at the same samples,
these are the blocks of their own direct variograms. The pairs of variables measured at the
same samples share one pass of :func:`lagwise.core.variography.kernels.accumulate_cross_blocks`
over those samples alone, so each pass's sweep is bounded by the single-variable rule.

The 95 % interval is theta +- t SE, t the 97.5 % quantile of Student's t with B - 1 degrees
of freedom: a cross-semivariance may be negative, so the log-scale form of the direct
semivariances does not apply.

Undefined (null, with the reason) under the rules of one variable (too few samples measuring
both, more than ``MAX_UNCERTAINTY_PAIRS`` pairs, too many classes), when the request's budget of
jackknife work is spent (a set of samples costs its sweep once, whatever pairs it serves), and when the per-block
sums of the pairs of variables would not fit half the memory budget.
"""

from __future__ import annotations

import types

import numba
import numpy as np

from ..limits import Limits
from . import kernels as K
from .pairs import ClassLayout, PreparedVariables, accumulate_cross_by_block, sweep_visits
from .uncertainty import ClassUncertainty, UncertaintyPlan, from_block_sums, plan_blocks, spatial_blocks, undefined

BUDGET_SPENT = (
    "skipped: the request's pair work for class standard errors is spent by the variables and pairs before "
    "this one; send the two variables alone for them"
)
TOO_LARGE = "skipped: the per-block sums of the pairs of variables would exceed half the memory budget"

Found = tuple[list[list[ClassUncertainty]], UncertaintyPlan | None]


def cross_uncertainties(
    prepared: PreparedVariables,
    coords: np.ndarray,
    classes: ClassLayout,
    counts: np.ndarray,
    limits: Limits,
    budget: int,
) -> dict[tuple[int, int], Found]:
    """Class uncertainties of the cross-semivariance of every pair of variables (a < b).

    Parameters
    ----------
    prepared : PreparedVariables
        The samples laid out for the kernels.
    coords : ndarray, shape (n, d)
        Working coordinates in input order (blocks are built from them).
    classes : ClassLayout
    counts : ndarray, shape (ndir, kmax, p, p)
        Pairs of each class per pair of variables (the cost rule of one variable).
    limits : Limits
    budget : int
        Pair work left for these jackknifes: in the pairs' order, a set of samples whose
        pass would exceed what is left gets none (:data:`BUDGET_SPENT`).

    Returns
    -------
    dict
        ``(a, b)``: (rows[k][c] for direction k and class c, the blocks used or None).
    """
    p = prepared.values.shape[1]
    shape = (classes.table.shape[0], classes.kmax)
    measured = np.zeros(prepared.measured.shape, dtype=bool)
    measured[prepared.order] = prepared.measured != 0.0  # input order
    out: dict[tuple[int, int], Found] = {}
    sets: dict[bytes, list[tuple[int, int]]] = {}  # the samples measuring both: the pairs they serve
    for a in range(p):
        for b in range(a + 1, p):
            both = measured[:, a] & measured[:, b]
            xs = np.sort(coords[both, 0])
            work = max(int(counts[:, :, a, b].sum()), int(sweep_visits(xs, classes.search_radius).sum()))
            reason = plan_blocks("semivariance", xs.size, shape, work)[1]
            key = np.packbits(both).tobytes()
            if reason is None and key not in sets:
                if work > budget:
                    reason = BUDGET_SPENT
                else:
                    budget -= work
            if reason is None:
                sets.setdefault(key, []).append((a, b))
            else:
                out[(a, b)] = undefined(reason, shape), None
    for key, pairs in sets.items():
        both = np.unpackbits(np.frombuffer(key, dtype=np.uint8), count=coords.shape[0]).astype(bool)
        out.update(_one_set(prepared, coords, classes, both, pairs, limits))
    return out


def _one_set(prepared: PreparedVariables, coords, classes: ClassLayout, both: np.ndarray, pairs, limits) -> dict:
    """The pairs of variables measured together at the samples ``both`` (input order): one pass over
    those samples alone, whose sweep the single-variable rule has bounded."""
    shape = (classes.table.shape[0], classes.kmax)
    bins = shape[0] * shape[1]
    blocks = plan_blocks("semivariance", int(both.sum()), shape, None)[0]
    if 8 * (numba.get_num_threads() + 1) * (blocks + 1) * bins * 3 * len(pairs) > limits.memory_budget_bytes // 2:
        return {pair: (undefined(TOO_LARGE, shape), None) for pair in pairs}
    inside = both[prepared.order]  # x-sorted: a subsequence stays sorted
    rank = np.cumsum(both) - 1  # position of an input row among the samples measuring both
    labels = spatial_blocks(coords[both], blocks)[rank[prepared.order[inside]]]
    subset = PreparedVariables(
        points=np.ascontiguousarray(prepared.points[inside]),
        values=np.ascontiguousarray(prepared.values[inside]),
        measured=np.ascontiguousarray(prepared.measured[inside]),
        means=prepared.means,
        scales=prepared.scales,
        order=np.flatnonzero(inside),
    )
    total, by_block = accumulate_cross_by_block(subset, classes, np.array(pairs, dtype=np.int64), labels)
    moments = types.SimpleNamespace(mean=0.0, scale=0.0)  # the semivariance reads neither
    out = {}
    for s, pair in enumerate(pairs):
        whole = np.zeros((bins, K.ACCUMULATORS))
        parts = np.zeros((blocks, bins, K.ACCUMULATORS))
        for column, source in ((K.COUNT, K.MULTI_COUNT), (K.DISTANCE, K.MULTI_DISTANCE), (K.SQUARE, K.MULTI_SQUARE)):
            whole[:, column] = total[:, source, s]
            parts[:, :, column] = by_block[:, :, source, s]
        out[pair] = from_block_sums("semivariance", whole, parts, moments, shape, signed=True), UncertaintyPlan(blocks)
    return out
