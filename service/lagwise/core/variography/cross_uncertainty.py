"""Class standard errors of the cross-semivariance: the jackknife of one variable, over the samples of a pair.

The cross-semivariance of (a, b) sums (a_j - a_i)(b_j - b_i) over the pairs of samples where
a and b are both measured at both ends, so its samples are the locations measuring both.
They are split into spatial blocks by the rule of one variable
(:func:`lagwise.core.variography.uncertainty.spatial_blocks`, as many blocks as
:func:`lagwise.core.variography.uncertainty.plan_blocks` gives for that many samples);
deleting a block deletes every pair that touches it, and the spread of the recomputed
statistics gives the standard error, as for a direct variogram (delete-one-block jackknife,
Kuensch 1989, Annals of Statistics 17(3)). Where a and b are measured at the same samples,
these are the blocks of their own direct variograms.

The 95 % interval is theta +- t SE, t the 97.5 % quantile of Student's t with B - 1 degrees
of freedom: a cross-semivariance may be negative, so the log-scale form of the direct
semivariances does not apply.

Undefined (null, with the reason) under the rules of one variable (too few samples measuring
both, more than ``MAX_UNCERTAINTY_PAIRS`` pairs, too many classes), and when the per-block
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

TOO_LARGE = "skipped: the per-block sums of the pairs of variables would exceed half the memory budget"

Found = tuple[list[list[ClassUncertainty]], UncertaintyPlan | None]


def cross_uncertainties(
    prepared: PreparedVariables, coords: np.ndarray, classes: ClassLayout, counts: np.ndarray, limits: Limits
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
    chosen: list[tuple[int, int]] = []
    sets: dict[tuple[bytes, int], int] = {}  # (samples measuring both, blocks): column of the labels
    set_of: list[int] = []
    blocks_of: list[int] = []
    for a in range(p):
        for b in range(a + 1, p):
            both = measured[:, a] & measured[:, b]
            xs = np.sort(coords[both, 0])
            work = max(int(counts[:, :, a, b].sum()), int(sweep_visits(xs, classes.search_radius).sum()))
            blocks, reason = plan_blocks("semivariance", xs.size, shape, work)
            if reason is not None:
                out[(a, b)] = undefined(reason, shape), None
                continue
            key = (np.packbits(both).tobytes(), blocks)
            set_of.append(sets.setdefault(key, len(sets)))
            blocks_of.append(blocks)
            chosen.append((a, b))
    if not chosen:
        return out
    nblocks = max(blocks_of)
    bins = shape[0] * shape[1]
    if 8 * (numba.get_num_threads() + 1) * (nblocks + 1) * bins * 3 * len(chosen) > limits.memory_budget_bytes // 2:
        for pair in chosen:
            out[pair] = undefined(TOO_LARGE, shape), None
        return out
    labels = np.full((coords.shape[0], len(sets)), -1, dtype=np.int64)
    for (mask_bytes, blocks), s in sets.items():
        both = np.unpackbits(np.frombuffer(mask_bytes, dtype=np.uint8), count=coords.shape[0]).astype(bool)
        labels[both, s] = spatial_blocks(coords[both], blocks)
    total, by_block = accumulate_cross_by_block(
        prepared, classes, np.array(chosen, dtype=np.int64), np.array(set_of, dtype=np.int64), labels[prepared.order]
    )
    moments = types.SimpleNamespace(mean=0.0, scale=0.0)  # the semivariance reads neither
    for s, (pair, blocks) in enumerate(zip(chosen, blocks_of, strict=True)):
        whole = np.zeros((bins, K.ACCUMULATORS))
        parts = np.zeros((blocks, bins, K.ACCUMULATORS))
        for column, source in ((K.COUNT, K.MULTI_COUNT), (K.DISTANCE, K.MULTI_DISTANCE), (K.SQUARE, K.MULTI_SQUARE)):
            whole[:, column] = total[:, source, s]
            parts[:, :, column] = by_block[:blocks, :, source, s]
        rows = from_block_sums("semivariance", whole, parts, moments, shape, signed=True)
        out[pair] = rows, UncertaintyPlan(blocks)
    return out
