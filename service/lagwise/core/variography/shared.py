"""Direct experimental variograms of several variables, each with its own classes, with shared pair work.

What it is for: a batch of analyses (one per variable measured at a shared set of
samples) needs each variable's variograms exactly as a single-variable request on
the samples where that variable was measured would give them
(:func:`lagwise.core.variography.experimental.experimental_variogram`): the same
distance classes, pair counts and class uncertainties (the delete-one-block
jackknife of :mod:`lagwise.core.variography.uncertainty`, with the variable's own
blocks), equal to the bit.

How:
* Variables measured at the same samples form a *group*; automatic classes depend on
  the measured locations only, so they are resolved once per group and direction set
  (the count pass of :func:`lagwise.core.variography.experimental._resolve_edges`).
* One sweep over all locations (sorted by x) visits every pair once; each (group,
  direction set, direction) is a *slot* of the class layout with its own edges. A
  pair enters a slot when both ends belong to the slot's group, and is then added to
  the jackknife's sums of every variable of the group, in total and for the spatial
  blocks of its two ends (the variable's own blocks), in the order of the
  single-variable jackknife pass.
* The variograms' own sums come from each variable's single-variable pass
  (:func:`lagwise.core.variography.pairs.accumulate`): its fast kernel visits the pairs
  in an order of its own samples' columns, which one sweep over all locations cannot
  follow for every variable at once.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numba
import numpy as np
from numba import njit, prange

from ..data.declustering import Declustering, decluster
from ..data.samples import SampleSet
from ..data.summary import summarise
from ..deadline import check_deadline
from ..errors import pointers_under
from ..limits import Limits
from . import kernels as K
from .experimental import (
    DEFAULT_MIN_PAIRS,
    Classes,
    ExperimentalVariogram,
    _check_pairs,
    _class_warnings,
    _resolve_edges,
    assembled,
    direction_results,
    experimental_variogram,
    on_classes,
    pair_passes,
    summed_fast,
    validate_options,
)
from .lags import LagRequest
from .pairs import CHUNK_VISITS, PreparedSamples, accumulate, layout, prepare, row_chunks, sweep_visits
from .statistics import ACCUMULATION_MODE
from .uncertainty import UncertaintyPlan, from_block_sums, plan_blocks, spatial_blocks, undefined

SHARED_STATISTICS = tuple(s for s in ACCUMULATION_MODE if s != "semivariance_median")


@dataclass(frozen=True)
class Member:
    """One variable of the batch: its samples (the locations where it was measured) and their declustering.

    Attributes
    ----------
    samples : SampleSet
        Working values; ``rows`` gives their positions among the shared locations.
    rows : ndarray of int, shape (n_v,)
        Row of each sample in the shared coordinates (increasing).
    declustering : Declustering or None
        As for ``experimental_variogram`` (None: found from the values).
    """

    samples: SampleSet
    rows: np.ndarray
    declustering: Declustering | None = None


@njit(parallel=True, cache=True)
def _accumulate_members(
    pts, vals, in_group, slot_group, slot_set, group_start, group_members, dirs, edges, nk, inv_width, max_d2, mode, means,
    table_of, tables, labels, nblocks, owner, nthreads,
):  # fmt: skip
    """Jackknife sums of every pair per variable, slot and *table*, in the order the single-variable
    jackknife pass (:func:`lagwise.core.variography.kernels.accumulate_blocks`) adds them.

    ``vals`` (n, p) centred per variable (anything where not measured); ``in_group`` (n, G)
    1 where the location belongs to group g; ``slot_group`` and ``slot_set`` (S,) each slot's
    group and direction set; ``group_members[group_start[g]:group_start[g + 1]]`` the
    variables of group g; ``table_of`` (n, p, sets) the table that collects the pairs whose
    earlier end is the location (the single-variable kernel's thread and range of rows, see
    :func:`_table_of`); ``labels`` (n, p) the location's spatial block per variable (-1:
    none). Thread t adds the variables with ``owner`` t, every pair in increasing order of
    its earlier end, then of its later end, as the single-variable kernels do per thread.

    Returns the sums (p, tables, S * kmax, ACCUMULATORS) and per-block sums (p, tables, nblocks,
    S * kmax, ACCUMULATORS) as the jackknife pass adds them, and the co-located pairs per variable.
    """
    n = pts.shape[0]
    p = vals.shape[1]
    slots = dirs.shape[0]
    groups = in_group.shape[1]
    kmax = edges.shape[1] - 1
    bins = slots * kmax
    totals = np.zeros((p, tables, bins, K.ACCUMULATORS))
    blocks = np.zeros((p, tables, nblocks, bins, K.ACCUMULATORS))
    colocated = np.zeros(p, dtype=np.int64)
    for t in prange(nthreads):
        for i in range(n):
            xi = pts[i, 0]
            yi = pts[i, 1]
            zi = pts[i, 2]
            for j in range(i + 1, n):
                dx = pts[j, 0] - xi
                if dx * dx > max_d2:
                    break
                dy = pts[j, 1] - yi
                dz = pts[j, 2] - zi
                d2 = dx * dx + dy * dy + dz * dz
                if d2 > max_d2:
                    continue
                if d2 == 0.0:
                    for g in range(groups):
                        if in_group[i, g] * in_group[j, g] != 0.0:
                            for q in range(group_start[g], group_start[g + 1]):
                                if owner[group_members[q]] == t:
                                    colocated[group_members[q]] += 1
                    continue
                d = math.sqrt(d2)
                for k in range(slots):
                    g = slot_group[k]
                    if in_group[i, g] * in_group[j, g] == 0.0:
                        continue
                    c, sign = K.classify(dx, dy, dz, d, dirs, k, edges, nk, inv_width)
                    if c < 0:
                        continue
                    b = k * kmax + c
                    for q in range(group_start[g], group_start[g + 1]):
                        a = group_members[q]
                        if owner[a] != t:
                            continue
                        v = table_of[i, a, slot_set[k]]
                        tail = vals[i, a] if sign > 0 else vals[j, a]
                        head = vals[j, a] if sign > 0 else vals[i, a]
                        K.add_pair(totals[a, v], b, d, tail, head, mode, means[a])
                        li = labels[i, a]
                        lj = labels[j, a]
                        if li >= 0:
                            K.add_pair(blocks[a, v, li], b, d, tail, head, mode, means[a])
                        if lj >= 0 and lj != li:
                            K.add_pair(blocks[a, v, lj], b, d, tail, head, mode, means[a])
    return totals, blocks, colocated


@njit(cache=True)
def _threads_summed(tables):
    """Sum over the first axis, as the single-variable kernels sum their per-thread tables."""
    return tables.sum(axis=0)


@dataclass(frozen=True)
class _Plan:
    """One member's classes over the direction sets, before the pass."""

    prepared: PreparedSamples
    resolved: list[list]
    warnings: list[list[str]]
    edges: list[list[np.ndarray]]
    spacing: list[float | None]
    blocks: list[int]


def _groups(members: list[Member], n: int) -> tuple[np.ndarray, list[list[int]]]:
    """(n, G) group membership of every location and the members of each group (same measured rows)."""
    keys: dict[bytes, int] = {}
    lists: list[list[int]] = []
    for a, member in enumerate(members):
        mask = np.zeros(n, dtype=bool)
        mask[member.rows] = True
        g = keys.setdefault(np.packbits(mask).tobytes(), len(lists))
        if g == len(lists):
            lists.append([])
        lists[g].append(a)
    in_group = np.zeros((n, len(lists)))
    for g, group in enumerate(lists):
        in_group[members[group[0]].rows, g] = 1.0
    return in_group, lists


def shared_variograms(
    coords: np.ndarray,
    members: list[Member],
    direction_sets: list[list | None],
    *,
    lags: LagRequest = LagRequest(),
    statistic: str = "semivariance",
    min_pairs: int = DEFAULT_MIN_PAIRS,
    limits: Limits = Limits(),
    pointers: tuple[str, ...] = (),
) -> list[list[ExperimentalVariogram]] | None:
    """The experimental variogram of every member for every direction set, in one pass over the pairs.

    Parameters
    ----------
    coords : ndarray, shape (n, d)
        Every location (working coordinates); members index them.
    members : list of Member
    direction_sets : list of (list of DirectionClass or None)
        Direction classes of each variogram (None: one omnidirectional class).
    lags, statistic, min_pairs, limits
        As for :func:`lagwise.core.variography.experimental.experimental_variogram`
        (``statistic`` one of :data:`SHARED_STATISTICS`); its checks and limits apply to
        each member.
    pointers : tuple of str
        Error pointer base per direction set (e.g. ``/variogram``), empty for none.

    Returns
    -------
    list of list of ExperimentalVariogram, or None
        ``result[a][s]``: member a, direction set s; None when the pass's tables would not
        fit half of ``limits.memory_budget_bytes`` (compute the variograms one by one).

    Raises
    ------
    InvalidInput, LimitExceeded
    """
    if statistic not in SHARED_STATISTICS:
        raise ValueError(f"the shared pass computes {', '.join(SHARED_STATISTICS)}")
    bases = pointers or ("",) * len(direction_sets)
    in_group, groups = _groups(members, coords.shape[0])
    declusterings = [m.declustering or decluster(m.samples.coords, m.samples.values) for m in members]
    summaries = [summarise(m.samples.coords, m.samples.values, w) for m, w in zip(members, declusterings, strict=True)]
    plans: list[_Plan | None] = [None] * len(members)
    for group in groups:
        first = members[group[0]]
        prepared = prepare(first.samples.coords, first.samples.values)
        resolved, warnings, edges, spacing = [], [], [], []
        for directions, base in zip(direction_sets, bases, strict=True):
            with pointers_under(base):
                limits.check_samples(first.samples.size)
                found, notes = validate_options(first.samples, statistic, min_pairs, directions)
                passes = pair_passes(lags, statistic, False, summed_fast(found, lags))
                e, s = _resolve_edges(
                    first.samples, summaries[group[0]], prepared, lags, found, min_pairs, limits, passes
                )
                packed = layout(found, e)
                passes = pair_passes(lags, statistic, False, packed.fast)
                _check_pairs(first.samples, prepared, packed.search_radius, len(found), passes, limits)
            resolved.append(found)
            warnings.append(notes)
            edges.append(e)
            spacing.append(s)
        for a in group:
            member = members[a]
            with pointers_under(bases[0]):
                validate_options(member.samples, statistic, min_pairs, direction_sets[0])
            shapes = [(len(r), max(len(x) - 1 for x in e)) for r, e in zip(resolved, edges, strict=True)]
            blocks = [plan_blocks(statistic, member.samples.size, shape, None)[0] for shape in shapes]
            own = prepare(member.samples.coords, member.samples.values)
            plans[a] = _Plan(own, resolved, warnings, edges, spacing, blocks)

    def alone(a: int, s: int) -> ExperimentalVariogram:
        with pointers_under(bases[s]):
            return experimental_variogram(
                members[a].samples, lags=lags, directions=direction_sets[s], statistic=statistic,
                min_pairs=min_pairs, limits=limits, declustering=declusterings[a],
            )  # fmt: skip

    context = _Context(summaries, declusterings, statistic, min_pairs, lags, limits)
    return _swept(coords, members, groups, in_group, plans, context, alone)


def on_shared_classes(
    coords: np.ndarray,
    members: list[Member],
    classes: Classes,
    *,
    statistic: str = "semivariance",
    min_pairs: int = DEFAULT_MIN_PAIRS,
    lags: LagRequest = LagRequest(),
    limits: Limits = Limits(),
) -> list[ExperimentalVariogram] | None:
    """Every member's experimental variogram on the same classes, resolved and checked beforehand
    (e.g. on every location of a several-variable request), the jackknife's sums from one pass
    over the pairs.

    Each equals :func:`lagwise.core.variography.experimental.on_classes` of the member's samples
    on those classes, class uncertainties included (the member's own blocks), to the bit.

    Parameters
    ----------
    coords : ndarray, shape (n, d)
        Every location (working coordinates); members index them.
    members : list of Member
    classes : Classes
        One direction set and its edges, shared by every member.
    statistic, min_pairs, lags, limits
        As for :func:`shared_variograms`.

    Returns
    -------
    list of ExperimentalVariogram, or None
        In the members' order; None when the pass's tables would not fit half of
        ``limits.memory_budget_bytes``.
    """
    if statistic not in SHARED_STATISTICS:
        raise ValueError(f"the shared pass computes {', '.join(SHARED_STATISTICS)}")
    in_group, groups = _groups(members, coords.shape[0])
    declusterings = [m.declustering or decluster(m.samples.coords, m.samples.values) for m in members]
    summaries = [summarise(m.samples.coords, m.samples.values, w) for m, w in zip(members, declusterings, strict=True)]
    shape = (len(classes.directions), max(len(e) - 1 for e in classes.edges))
    plans: list[_Plan | None] = []
    for member in members:
        own = prepare(member.samples.coords, member.samples.values)
        blocks = plan_blocks(statistic, member.samples.size, shape, None)[0]
        plans.append(
            _Plan(own, [classes.directions], [list(classes.notes)], [classes.edges], [classes.spacing], [blocks])
        )

    def alone(a: int, s: int) -> ExperimentalVariogram:
        member = members[a]
        return on_classes(member.samples, classes, statistic, min_pairs, lags, limits, declusterings[a])

    context = _Context(summaries, declusterings, statistic, min_pairs, lags, limits)
    found = _swept(coords, members, groups, in_group, plans, context, alone)
    return None if found is None else [results[0] for results in found]


@dataclass(frozen=True)
class _Context:
    """What the assembly of every member's variograms needs besides the pass's sums."""

    summaries: list
    declusterings: list
    statistic: str
    min_pairs: int
    lags: LagRequest
    limits: Limits


def _swept(coords, members, groups, in_group, plans, context: _Context, alone):
    """Run the pass and assemble ``result[a][s]`` for member a and direction set s (its own sums
    from its single-variable pass); ``alone(a, s)`` computes one by itself when its blocks differ
    from the pass's. None when the pass's tables would not fit half the memory budget."""
    check_deadline()
    swept = _pass(coords, members, groups, in_group, plans, context.statistic, context.limits)
    if swept is None:
        return None
    plain, by_block, colocated, offsets, kmax = swept
    group_of = {a: g for g, group in enumerate(groups) for a in group}
    mode = ACCUMULATION_MODE[context.statistic]
    out = []
    for a, member in enumerate(members):
        plan = plans[a]
        assert plan is not None
        results = []
        for s in range(len(plan.edges)):
            own, _ = accumulate(plan.prepared, layout(plan.resolved[s], plan.edges[s]), mode)
            parts = (own, plain[a, s], by_block[a, s], offsets[group_of[a]][s], kmax, int(colocated[a]))
            found = _variogram(
                member, plan, s, parts, context.summaries[a], context.declusterings[a], context.statistic,
                context.min_pairs, context.lags,
            )  # fmt: skip
            # None: fewer blocks for this set than the pass kept; computed alone (rare: very many classes).
            results.append(alone(a, s) if found is None else found)
        out.append(results)
    return out


def _table_of(plans, positions, n: int, threads: int) -> tuple[np.ndarray, int]:
    """(n, p, sets) table of each location per variable and direction set, and the tables per variable.

    A single-variable pass over member a's samples (sorted by x) splits its rows into
    ranges of about :data:`CHUNK_VISITS` visited pairs, and within a range deals blocks of
    ``ROW_BLOCK`` rows to ``threads`` threads in turn; table (set, range, thread)
    collects each of those partial sums. ``positions[a]`` holds the shared sorted
    position of each of member a's rows in its own sorted order.
    """
    sets = len(plans[0].edges)
    ranges = [
        [row_chunks(sweep_visits(plan.prepared.points[:, 0], float(max(e[-1] for e in edges))), CHUNK_VISITS)
         for edges in plan.edges]
        for plan in plans
    ]  # fmt: skip
    most = max(len(r) for per_set in ranges for r in per_set)
    table_of = np.zeros((n, len(plans), sets), dtype=np.int64)
    for a, at in enumerate(positions):
        for s in range(sets):
            for c, (first, last) in enumerate(ranges[a][s]):
                rank = np.arange(first, last)
                table_of[at[rank], a, s] = (s * most + c) * threads + ((rank - first) // K.ROW_BLOCK) % threads
    return table_of, sets * most * threads


def _pass(coords, members, groups, in_group, plans, statistic, limits: Limits):
    """Run the sweep over every slot; returns, per member, the jackknife's sums and block sums as its
    single-variable pass would hold them, the co-located pairs, each group's first slot per
    direction set and the layout's largest class count (None when the tables would not fit
    half the memory budget)."""
    slot_dirs: list = []
    slot_edges: list = []
    slot_group: list[int] = []
    slot_set: list[int] = []
    offsets: list[list[int]] = []
    for g, group in enumerate(groups):
        plan = plans[group[0]]
        starts = []
        for s, (resolved, edges) in enumerate(zip(plan.resolved, plan.edges, strict=True)):
            starts.append(len(slot_dirs))
            slot_dirs.extend(resolved)
            slot_edges.extend(edges)
            slot_group.extend([g] * len(resolved))
            slot_set.extend([s] * len(resolved))
        offsets.append(starts)
    classes = layout(slot_dirs, slot_edges)
    p, n, sets = len(members), coords.shape[0], len(plans[0].edges)
    threads = numba.get_num_threads()
    located = prepare(coords, np.zeros(n))
    rank = np.empty_like(located.order)
    rank[located.order] = np.arange(n)
    vals = np.zeros((n, p))
    labels = np.full((n, p), -1, dtype=np.int64)
    positions = []
    nblocks = max(1, max(max(plan.blocks) for plan in plans))
    for a, member in enumerate(members):
        plan = plans[a]
        shared = rank[member.rows]
        vals[shared, a] = member.samples.values - plan.prepared.mean
        positions.append(shared[plan.prepared.order])
        if max(plan.blocks) > 0:
            labels[shared, a] = spatial_blocks(member.samples.coords, max(plan.blocks))
    table_of, tables = _table_of(plans, positions, n, threads)
    bins = classes.table.shape[0] * classes.kmax
    if 8 * p * tables * (1 + nblocks) * bins * K.ACCUMULATORS > limits.memory_budget_bytes // 2:
        return None
    members_flat = np.array([a for group in groups for a in group], dtype=np.int64)
    group_start = np.cumsum([0] + [len(group) for group in groups]).astype(np.int64)
    load = np.zeros(threads)
    owner = np.zeros(p, dtype=np.int64)
    for a in np.argsort([-m.rows.size for m in members], kind="stable"):
        owner[a] = int(np.argmin(load))
        load[owner[a]] += members[a].rows.size
    radius = classes.search_radius
    check_deadline()
    totals, blocks, colocated = _accumulate_members(
        located.points, vals, in_group[located.order], np.array(slot_group, dtype=np.int64),
        np.array(slot_set, dtype=np.int64), group_start,
        members_flat, classes.table, classes.edges, classes.counts, classes.inv_width, radius * radius,
        ACCUMULATION_MODE[statistic], np.array([q.prepared.mean for q in plans]), table_of, tables, labels, nblocks,
        owner, threads,
    )  # fmt: skip
    check_deadline()
    most = tables // (sets * threads)
    plain = np.zeros((p, sets, bins, K.ACCUMULATORS))
    by_block = np.zeros((p, sets, nblocks, bins, K.ACCUMULATORS))
    for a in range(p):
        for s in range(sets):
            for c in range(most):
                first = (s * most + c) * threads
                plain[a, s] += _threads_summed(totals[a, first : first + threads])
                by_block[a, s] += _threads_summed(blocks[a, first : first + threads])
    return plain, by_block, colocated, offsets, classes.kmax


def _variogram(member, plan, s, parts, summary, declustering, statistic, min_pairs, lags):
    """Member's variogram for direction set s from its own pass's table (ndir, classes, ACCUMULATORS),
    the jackknife's sums and block sums, its first slot, the layout's largest class count and co-located
    pairs (``parts``); None when its blocks differ from the pass's."""
    table, plain, by_block, start, kmax, colocated = parts
    resolved, edges = plan.resolved[s], plan.edges[s]
    own = max(len(e) - 1 for e in edges)
    shape = (len(resolved), own)
    slots = [slice((start + k) * kmax, (start + k) * kmax + own) for k in range(len(resolved))]
    jackknifed = np.concatenate([plain[at] for at in slots])
    blocked = np.concatenate([by_block[:, at] for at in slots], axis=1)
    pairs = int(table[:, :, K.COUNT].sum())
    reach = float(max(e[-1] for e in edges))
    work = max(pairs, int(sweep_visits(plan.prepared.points[:, 0], reach).sum()))
    blocks, reason = plan_blocks(statistic, member.samples.size, shape, work)
    if reason is None and blocks != max(plan.blocks):
        return None
    if reason is None:
        uncertain, uncertainty = (
            from_block_sums(statistic, jackknifed, blocked[:blocks], plan.prepared, shape),
            UncertaintyPlan(blocks),
        )
    else:
        uncertain, uncertainty = undefined(reason, shape), None
    medians = np.full((len(resolved), own), np.nan)
    results = direction_results(statistic, table, edges, medians, min_pairs, plan.prepared, uncertain, resolved)
    samples = member.samples
    notes = [*samples.warnings, *plan.warnings[s], *_class_warnings(results, min_pairs, summary)]
    if declustering.warning:
        notes.append(declustering.warning)
    return assembled(results, summary, statistic, min_pairs, lags, colocated, plan.spacing[s], uncertainty, notes)
