"""Compiled pair kernels (numba): enumerate pairs within a search radius and bin them.

Samples arrive sorted by x, padded to three coordinates. Each sample i visits the
samples j > i whose x lies within the search radius (a sweep over the sorted axis),
so no pair is visited twice and memory never depends on the number of pairs: the
kernels keep per-thread accumulator tables of shape (bins, ACCUMULATORS) and
interleave blocks of rows between threads so that the shorter sweeps near the end
of the x-range are shared evenly. The fast kernel (:func:`accumulate_horizontal`) takes
the samples by columns instead (x cut into columns, y-sorted within each): a sample's
candidates are contiguous runs, nearly all within the radius.

Accumulator columns (sums over the pairs of a bin; tail and head values centred
on the sample mean so that sums of products keep their precision):
``COUNT, DISTANCE, SQUARE, ROOT, ABSOLUTE, TAIL, HEAD, TAIL2, HEAD2, PRODUCT, RELATIVE``.

Where the time goes (:func:`accumulate_horizontal`, 50,000 uniform samples, 15 classes up to
half the side, CPU time on a shared machine, DEVELOPERS.md): the column sweep takes 1.03
candidates per pair in range (the x-sorted sweep took 1.55: its window is a strip, the radius a
disc). Each run of candidates is binned in spans of :data:`SPAN`: one SIMD loop computes
separations, distances (square roots), value differences and equal-width classes (floor division),
with four directions' angle tests in the same loop when there are at most four without band; the
scalar additions into the tables follow. With those four directions a run of a later column is first
cut by the sector edges (:func:`cut_run`): the rows far from every edge's line are certainly in one
sector and skip the angle tests (:func:`bin_piece_one`), about 88 % of them at 50,000 samples. About
12–18 cycles per pair in range omnidirectional and 13.6–14.1 with 4 direction classes (15.6–17.2
before the cut, in the same sessions), from 22–24 and 39 for the x-sorted sweep (one thread, the
kernels alternated in one session; DEVELOPERS.md).
"""

from __future__ import annotations

import math
import os

import numba
import numpy as np
from numba import njit, prange

# The service forks worker processes (gunicorn): GNU OpenMP cannot be used in a
# child once loaded in its parent, while numba's own "workqueue" layer is
# fork-safe. Each sync worker runs one request at a time, so the layer's lack of
# support for concurrent parallel regions from several Python threads is moot.
if not os.environ.get("NUMBA_THREADING_LAYER"):
    numba.config.THREADING_LAYER = "workqueue"  # type: ignore[attr-defined]

COUNT, DISTANCE, SQUARE, ROOT, ABSOLUTE, TAIL, HEAD, TAIL2, HEAD2, PRODUCT, RELATIVE = range(11)
ACCUMULATORS = 11

# Which accumulators a pass fills: counts only, the square difference, absolute
# differences too, the covariance sums, or the pairwise relative sum.
MODE_COUNT, MODE_SQUARE, MODE_ABSOLUTE, MODE_COVARIANCE, MODE_RELATIVE = range(5)

ROW_BLOCK = 64
SPAN = 256  # candidate pairs binned at a time (the scratch columns stay in the L1 cache)
UNSURE = 1e-6  # distances this close to an edge (in class widths) take the exact lookup
COPIES = 4  # interleaved copies of a thread's table (a power of two)
CUT_RUN = 64  # runs of at least this many candidates are cut by the sector edges (cut_run)
# Shorter pieces of one direction take the four tests: the compiled loop without them runs as scalar
# code below about 36 pairs (a threshold of the vectorizer, measured), slower than the four tests.
MIN_PIECE = 40


@njit(cache=True)
def classify(dx, dy, dz, d, dirs, k, edges, nk, inv_width):
    """Class index of a pair in direction k (-1 if not a member) and its orientation (+1/-1).

    Orientation +1 means the pair's tail is the first sample (separation h = x_j - x_i
    points along the azimuth; ties toward azimuth + 90 degrees, then upward).
    """
    ux = dirs[k, 0]
    uy = dirs[k, 1]
    hh2 = dx * dx + dy * dy
    proj = dx * ux + dy * uy
    perp = dx * uy - dy * ux
    if hh2 > 0.0:
        # The fast kernel's angle test, to the bit (:func:`admitted`): proj^2 >= |h|^2 cos^2(tolerance).
        if proj * proj - hh2 * dirs[k, 11] < 0.0:
            return -1, 0
        if perp * perp > dirs[k, 3]:
            return -1, 0
    if proj > 0.0:
        sign = 1
    elif proj < 0.0:
        sign = -1
    elif perp > 0.0:
        sign = 1
    elif perp < 0.0:
        sign = -1
    elif dz >= 0.0:
        sign = 1
    else:
        sign = -1
    if dirs[k, 4] > 0.0:
        if hh2 == 0.0:
            off_dip = 0.5 * math.pi - abs(dirs[k, 5])
        else:
            off_dip = abs(math.atan2(-dz * sign, math.sqrt(hh2)) - dirs[k, 5])
        if off_dip > dirs[k, 6]:
            return -1, 0
    vband2 = dirs[k, 10]
    if vband2 < np.inf:
        offset = dx * dirs[k, 7] + dy * dirs[k, 8] + dz * dirs[k, 9]
        if offset * offset > vband2:
            return -1, 0
    count = nk[k]
    first = edges[k, 0]
    if d < first or d >= edges[k, count]:
        return -1, 0
    if inv_width[k] > 0.0:
        c = int((d - first) * inv_width[k])
        if c >= count:
            c = count - 1
        while c > 0 and d < edges[k, c]:
            c -= 1
        while c < count - 1 and d >= edges[k, c + 1]:
            c += 1
    else:
        lo = 0
        hi = count
        while hi - lo > 1:
            mid = (lo + hi) // 2
            if d >= edges[k, mid]:
                lo = mid
            else:
                hi = mid
        c = lo
    return c, sign


@njit(cache=True)
def sweep_row(pts, i, max_d2, near, sep):
    """The pairs (i, j), j > i, of the x-sorted sweep that lie within sqrt(max_d2) and are not co-located.

    Writes j to ``near[q]`` and (dx, dy, dz, distance) of the separation x_j - x_i to
    ``sep[:, q]`` for q < count; returns (count, co-located pairs passed over).
    """
    n = pts.shape[0]
    xi = pts[i, 0]
    yi = pts[i, 1]
    zi = pts[i, 2]
    count = 0
    zero = 0
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
            zero += 1
            continue
        near[count] = j
        sep[0, count] = dx
        sep[1, count] = dy
        sep[2, count] = dz
        sep[3, count] = math.sqrt(d2)
        count += 1
    return count, zero


@njit(cache=True, inline="always")
def add_to(sums, d, tail, head, mode, mean):
    """Add one oriented pair (centred tail and head values, distance d) to one bin's sums,
    indexed by the accumulator columns (``COUNT`` .. ``RELATIVE``)."""
    sums[COUNT] += 1.0
    sums[DISTANCE] += d
    if mode == MODE_COUNT:
        return
    diff = head - tail
    sums[SQUARE] += diff * diff
    if mode == MODE_ABSOLUTE:
        a = abs(diff)
        sums[ROOT] += math.sqrt(a)
        sums[ABSOLUTE] += a
    elif mode == MODE_COVARIANCE:
        sums[TAIL] += tail
        sums[HEAD] += head
        sums[TAIL2] += tail * tail
        sums[HEAD2] += head * head
        sums[PRODUCT] += tail * head
    elif mode == MODE_RELATIVE:
        r = diff / (0.5 * (tail + head) + mean)
        sums[RELATIVE] += r * r


@njit(cache=True, inline="always")
def add_pair(table, b, d, tail, head, mode, mean):
    """Add one oriented pair to bin b of a table (bins, ACCUMULATORS)."""
    add_to(table[b], d, tail, head, mode, mean)


@njit(parallel=True, cache=True)
def accumulate_classes(pts, vals, mean, max_d2, dirs, edges, nk, inv_width, mode, nthreads, first, last):
    """Accumulate every pair within sqrt(max_d2) whose first sample is in rows [first, last)
    into (direction, class) bins.

    Returns the table of shape (ndir * kmax, ACCUMULATORS), bin = k * kmax + class,
    and the number of co-located (zero-distance) pairs, which fall in no class.
    """
    n = pts.shape[0]
    ndir = dirs.shape[0]
    kmax = edges.shape[1] - 1
    tables = np.zeros((nthreads, ndir * kmax, ACCUMULATORS))
    colocated = np.zeros(nthreads, dtype=np.int64)
    nblocks = (last - first + ROW_BLOCK - 1) // ROW_BLOCK
    for t in prange(nthreads):
        table = tables[t]
        zero_pairs = 0
        near = np.empty(n, dtype=np.int64)
        sep = np.empty((4, n))
        for blk in range(t, nblocks, nthreads):
            for i in range(first + blk * ROW_BLOCK, min(last, first + (blk + 1) * ROW_BLOCK)):
                count, zero = sweep_row(pts, i, max_d2, near, sep)
                zero_pairs += zero
                for q in range(count):
                    j, dx, dy, dz, d = near[q], sep[0, q], sep[1, q], sep[2, q], sep[3, q]
                    for k in range(ndir):
                        c, sign = classify(dx, dy, dz, d, dirs, k, edges, nk, inv_width)
                        if c < 0:
                            continue
                        if sign > 0:
                            add_pair(table, k * kmax + c, d, vals[i], vals[j], mode, mean)
                        else:
                            add_pair(table, k * kmax + c, d, vals[j], vals[i], mode, mean)
        colocated[t] = zero_pairs
    return tables.sum(axis=0), colocated.sum()


@njit(cache=True, inline="always")
def add_oriented(table, b, d, vi, vj, dx, dy, dz, ux, uy, mode, mean):
    """Add a pair to bin b, oriented along the direction (ux, uy) when the statistic needs tail and head."""
    if mode == MODE_COVARIANCE:
        proj = dx * ux + dy * uy
        perp = dx * uy - dy * ux
        forward = (proj > 0.0) | ((proj == 0.0) & ((perp > 0.0) | ((perp == 0.0) & (dz >= 0.0))))
        if forward:
            add_pair(table, b, d, vi, vj, mode, mean)
        else:
            add_pair(table, b, d, vj, vi, mode, mean)
    else:
        add_pair(table, b, d, vi, vj, mode, mean)


@njit(cache=True, inline="always")
def class_of(padded, lut, k, m, d, kmax):
    """Class of distance d in direction k from its fine cell m, or ``kmax`` outside the classes.

    ``lut[k, m]`` is ``searchsorted(edges_k, m * cell, "right") - 1`` for fine cells narrower
    than the narrowest class, so one step up and one step down (against ``padded[k] =
    [-inf, edges_k..., +inf...]``) give exactly ``searchsorted(edges_k, d, "right") - 1``.
    """
    c = lut[k, m]
    c += np.int32(padded[k, c + 2] <= d)
    c -= np.int32(padded[k, c + 1] > d)
    return c if (c >= 0) & (padded[k, c + 2] < np.inf) else kmax


@njit(cache=True, inline="always")
def bin_span_four(
    cols, i, start, stop, q0, q1, max_d2, sectors, padded, lut, inv_cell, origin, inv_step, kmax, scratch, marks
):  # fmt: skip
    """:func:`bin_span` for up to four directions without band sharing equal-width classes, on the
    pairs q0 <= q < q1 of the span [start, stop): the separations, the class (floor division) and the
    four angle tests in one SIMD loop; the exact lookup again where a distance lies within
    :data:`UNSURE` widths of an edge."""
    xi = cols[0, i]
    yi = cols[1, i]
    zi = cols[2, i]
    vi = cols[3, i]
    ux0, uy0, c0 = sectors[0, 0], sectors[1, 0], sectors[2, 0]
    ux1, uy1, c1 = sectors[0, 1], sectors[1, 1], sectors[2, 1]
    ux2, uy2, c2 = sectors[0, 2], sectors[1, 2], sectors[2, 2]
    ux3, uy3, c3 = sectors[0, 3], sectors[1, 3], sectors[2, 3]
    k1, k2, k3, none = np.int32(1), np.int32(2), np.int32(3), np.int32(0)
    stride = np.int32(kmax + 1)
    dropped = np.int32(kmax)
    top = np.float64(kmax)
    # Unsigned indices (pair j = start + q, its scratch column q): no negative-index wrap-around to test.
    first = np.uint64(start + q0)
    at = np.uint64(q0)
    zero = 0
    unsure = 0
    several = 0
    for r in range(q1 - q0):
        j = first + np.uint64(r)
        q = at + np.uint64(r)
        dx = cols[0, j] - xi
        dy = cols[1, j] - yi
        dz = cols[2, j] - zi
        hh2 = dx * dx + dy * dy
        d2 = hh2 + dz * dz
        d = math.sqrt(d2)
        scratch[0, q] = dx
        scratch[1, q] = dy
        scratch[2, q] = d
        scratch[3, q] = cols[3, j] - vi
        zero += np.int32(d2 == 0.0)
        t = (d - origin) * inv_step
        f = np.floor(t)
        frac = t - f
        unsure += np.int32((frac < UNSURE) | (frac > 1.0 - UNSURE))
        a0 = within(dx, dy, hh2, ux0, uy0, c0)
        a1 = within(dx, dy, hh2, ux1, uy1, c1)
        a2 = within(dx, dy, hh2, ux2, uy2, c2)
        a3 = within(dx, dy, hh2, ux3, uy3, c3)
        count = np.int32(a0) + np.int32(a1) + np.int32(a2) + np.int32(a3)
        k = k3 if a3 else (k2 if a2 else (k1 if a1 else none))
        member = (t >= 0.0) & (t < top) & (d2 > 0.0) & (d2 <= max_d2) & (count == 1)
        marks[1, q] = count
        marks[2, q] = k
        marks[0, q] = k * stride + (np.int32(f) if member else dropped)
        several += np.int32(count > 1)
    if unsure > 0:
        last = np.float64(lut.shape[1] - 1)
        for r in range(q1 - q0):
            j = first + np.uint64(r)
            q = at + np.uint64(r)
            dx = cols[0, j] - xi
            dy = cols[1, j] - yi
            dz = cols[2, j] - zi
            d2 = dx * dx + dy * dy + dz * dz
            d = scratch[2, q]
            c = class_of(padded, lut, 0, np.int64(min(d * inv_cell, last)), d, kmax)
            member = (d2 > 0.0) & (d2 <= max_d2) & (marks[1, q] == 1)
            marks[0, q] = marks[2, q] * stride + (np.int32(c) if member else dropped)
    return zero, several


@njit(cache=True)
def bin_span(
    cols, i, start, stop, max_d2, sectors, omni, four, padded, lut, inv_cell, shared, origin, inv_step, kmax, scratch,
    marks,
):  # fmt: skip
    """Bins of the candidate pairs (i, j), j in [start, stop), in loops without branches.

    ``cols`` holds the rows x, y, z and centred value of the samples; ``sectors`` the rows
    ux, uy, cos^2(tolerance), bandwidth^2 of the directions, padded to a multiple of four
    with directions that admit nothing (cos^2 = inf). Fills, for q = j - start: ``scratch[:, q]``
    with dx, dy, the distance and the value difference, and the int32 rows ``marks[0..2][q]``
    with the pair's bin ``best * (kmax + 1) + class``, the directions that admit the pair and
    ``best``, the last of them; the class is ``kmax`` (a dropped bin) when the pair lies outside
    the radius or the classes, is co-located, or is admitted by no direction or by several
    (those take :func:`add_shared_pair`); ``omni`` means one direction that admits every pair,
    ``four`` up to four directions without band sharing equal-width classes (:func:`bin_span_four`).
    Returns the co-located pairs of the span and the pairs admitted by several directions.

    Every loop reads and writes contiguous rows with indices from 0 (the candidates' columns are
    sliced first), so that each compiles to SIMD instructions; the first computes the distance
    and, for equal-width classes, the class by floor division, and the directions are tested four
    to a loop.
    """
    if four:
        return bin_span_four(cols, i, start, stop, 0, stop - start, max_d2, sectors, padded, lut, inv_cell, origin,
                             inv_step, kmax, scratch, marks)  # fmt: skip
    xs, ys, zs, vs = cols[0, start:stop], cols[1, start:stop], cols[2, start:stop], cols[3, start:stop]
    sx, sy, sd, sv = scratch[0], scratch[1], scratch[2], scratch[3]
    bins, passes, best = marks[0], marks[1], marks[2]
    xi = cols[0, i]
    yi = cols[1, i]
    zi = cols[2, i]
    vi = cols[3, i]
    span = stop - start
    last = np.float64(lut.shape[1] - 1)
    dropped = np.int32(kmax)
    zero = 0
    unsure = 1
    if shared and inv_step > 0.0:
        # Equal widths: the class is floor((d - origin) / width) unless d lies within UNSURE
        # (in class widths) of an edge, where the span falls back on the exact lookup.
        unsure = 0
        top = np.float64(kmax)
        for q in range(span):
            dx = xs[q] - xi
            dy = ys[q] - yi
            dz = zs[q] - zi
            d2 = dx * dx + dy * dy + dz * dz
            d = math.sqrt(d2)
            sx[q] = dx
            sy[q] = dy
            sd[q] = d
            sv[q] = vs[q] - vi
            zero += np.int32(d2 == 0.0)
            t = (d - origin) * inv_step
            f = np.floor(t)  # a float (math.floor gives an integer: two conversions per pair)
            frac = t - f
            unsure += np.int32((frac < UNSURE) | (frac > 1.0 - UNSURE))
            member = (t >= 0.0) & (t < top) & (d2 > 0.0) & (d2 <= max_d2)
            bins[q] = np.int32(f) if member else dropped
    else:
        for q in range(span):
            dx = xs[q] - xi
            dy = ys[q] - yi
            dz = zs[q] - zi
            d2 = dx * dx + dy * dy + dz * dz
            sx[q] = dx
            sy[q] = dy
            sd[q] = math.sqrt(d2)
            sv[q] = vs[q] - vi
            zero += np.int32(d2 == 0.0)
    if unsure > 0:
        for q in range(span):
            dx = xs[q] - xi
            dy = ys[q] - yi
            dz = zs[q] - zi
            d2 = dx * dx + dy * dy + dz * dz
            # With shared edges the class is found once here; otherwise bins only marks the pairs
            # within the radius (0) and each pair's class is found with its own direction's edges below.
            c = kmax
            if shared:
                c = class_of(padded, lut, 0, np.int64(min(sd[q] * inv_cell, last)), sd[q], kmax)
            else:
                c = 0
            bins[q] = np.int32(c) if (d2 > 0.0) & (d2 <= max_d2) else dropped
    if omni:
        # The omnidirectional class admits every pair.
        for q in range(span):
            best[q] = 0
        return zero, 0
    stride = np.int32(kmax + 1)
    several = 0
    for k0 in range(0, sectors.shape[1], 4):
        last_four = shared and k0 + 4 == sectors.shape[1]
        several = admit_four(sx, sy, sectors, k0, span, passes, best, bins, last_four, stride, dropped)
    if not shared:
        several = 0
        for q in range(span):
            k = best[q]
            c = class_of(padded, lut, k, np.int64(min(sd[q] * inv_cell, last)), sd[q], kmax)
            bins[q] = k * stride + (np.int32(c) if (bins[q] < dropped) & (passes[q] == 1) else dropped)
            several += np.int32(passes[q] > 1)
    return zero, several


@njit(cache=True, inline="always")
def admitted(dx, dy, hh2, ux, uy, c2, b2):
    """The fast kernel's direction test: |h . u|^2 >= |h|^2 cos^2(tolerance) and the band."""
    proj = dx * ux + dy * uy
    perp = dx * uy - dy * ux
    return (proj * proj - hh2 * c2 >= 0.0) & (perp * perp <= b2)


@njit(cache=True, inline="always")
def within(dx, dy, hh2, ux, uy, c2):
    """:func:`admitted` for a direction without a band (the same angle test)."""
    proj = dx * ux + dy * uy
    return proj * proj - hh2 * c2 >= 0.0


@njit(cache=True, inline="always")
def merged(q, count, k, last, passes, best, bins, stride, dropped):
    """Record the directions admitting pair q (``count`` of directions k0 .. k0 + 3, the last ``k``
    or -1); on the last four, with shared edges, the pair's bin; returns whether several admit it.
    Every row is read and written whatever the flags, so that the loop stays one SIMD loop."""
    total = passes[q] + count
    k = k if k >= 0 else best[q]
    passes[q] = total
    best[q] = k
    c = bins[q]
    bins[q] = np.int32(k * stride + (c if total == 1 else dropped)) if last else c
    return np.int32(total > 1)


@njit(cache=True)
def admit_four(sx, sy, sectors, k0, span, passes, best, bins, last, stride, dropped):
    """Test directions k0 .. k0 + 3 on every pair of the span in one loop: ``passes[q]`` counts
    the directions admitting pair q (from 0 when k0 = 0) and ``best[q]`` is the last of them. With
    ``last`` (the last four, shared edges), ``bins[q]`` becomes the pair's bin
    ``best * stride + class`` (class ``dropped`` unless exactly one direction admits the pair).
    Returns the pairs of the span admitted by several directions so far."""
    ux0, uy0, c0, b0 = sectors[0, k0], sectors[1, k0], sectors[2, k0], sectors[3, k0]
    ux1, uy1, c1, b1 = sectors[0, k0 + 1], sectors[1, k0 + 1], sectors[2, k0 + 1], sectors[3, k0 + 1]
    ux2, uy2, c2, b2 = sectors[0, k0 + 2], sectors[1, k0 + 2], sectors[2, k0 + 2], sectors[3, k0 + 2]
    ux3, uy3, c3, b3 = sectors[0, k0 + 3], sectors[1, k0 + 3], sectors[2, k0 + 3], sectors[3, k0 + 3]
    ka, k1, k2, k3 = np.int32(k0), np.int32(k0 + 1), np.int32(k0 + 2), np.int32(k0 + 3)
    none = np.int32(-1)
    if k0 == 0:
        for q in range(span):
            passes[q] = 0
            best[q] = 0
    several = 0
    if b0 == np.inf and b1 == np.inf and b2 == np.inf and b3 == np.inf:
        # No band (the common case): the angle test alone, half the work.
        for q in range(span):
            dx = sx[q]
            dy = sy[q]
            hh2 = dx * dx + dy * dy
            a0 = within(dx, dy, hh2, ux0, uy0, c0)
            a1 = within(dx, dy, hh2, ux1, uy1, c1)
            a2 = within(dx, dy, hh2, ux2, uy2, c2)
            a3 = within(dx, dy, hh2, ux3, uy3, c3)
            count = np.int32(a0) + np.int32(a1) + np.int32(a2) + np.int32(a3)
            k = k3 if a3 else (k2 if a2 else (k1 if a1 else (ka if a0 else none)))
            several += merged(q, count, k, last, passes, best, bins, stride, dropped)
    else:
        for q in range(span):
            dx = sx[q]
            dy = sy[q]
            hh2 = dx * dx + dy * dy
            a0 = admitted(dx, dy, hh2, ux0, uy0, c0, b0)
            a1 = admitted(dx, dy, hh2, ux1, uy1, c1, b1)
            a2 = admitted(dx, dy, hh2, ux2, uy2, c2, b2)
            a3 = admitted(dx, dy, hh2, ux3, uy3, c3, b3)
            count = np.int32(a0) + np.int32(a1) + np.int32(a2) + np.int32(a3)
            k = k3 if a3 else (k2 if a2 else (k1 if a1 else (ka if a0 else none)))
            several += merged(q, count, k, last, passes, best, bins, stride, dropped)
    return several


@njit(cache=True)
def add_shared_pair(table, cols, i, j, d, max_d2, dirs, padded, lut, inv_cell, shared, kmax, mode, mean):
    """Add a pair admitted by several directions (overlapping or touching sectors) to each of them."""
    xs, ys, zs, vals = cols[0], cols[1], cols[2], cols[3]
    dx = xs[j] - xs[i]
    dy = ys[j] - ys[i]
    dz = zs[j] - zs[i]
    d2 = dx * dx + dy * dy + dz * dz
    if d2 == 0.0 or d2 > max_d2:
        return
    m = np.int64(min(d * inv_cell, np.float64(lut.shape[1] - 1)))
    hh2 = dx * dx + dy * dy
    for k in range(dirs.shape[0]):
        if admitted(dx, dy, hh2, dirs[k, 0], dirs[k, 1], dirs[k, 11], dirs[k, 3]):
            c = class_of(padded, lut, 0 if shared else k, m, d, kmax)
            if c < kmax:
                add_oriented(
                    table, k * (kmax + 1) + c, d, vals[i], vals[j], dx, dy, dz, dirs[k, 0], dirs[k, 1], mode, mean
                )


@njit(cache=True)
def scatter_span(table, copy_rows, cols, i, start, stop, dirs, mode, mean, scratch, marks):
    """Add the pairs (i, j), j in [start, stop), to their bins (:func:`bin_span`); pair q goes to
    copy ``q % COPIES`` of the table so that consecutive pairs of one bin do not wait on each other."""
    bins, best = marks[0], marks[2]
    sd, sv = scratch[2], scratch[3]
    span = stop - start
    if mode == MODE_COUNT or mode == MODE_SQUARE:
        # The table as one flat row with unsigned offsets: no negative-index wrap-around per access.
        flat = table.reshape(table.size)
        width = np.uint64(ACCUMULATORS)
        for q in range(span):
            b = np.uint64(bins[q] + (q & (COPIES - 1)) * copy_rows) * width
            flat[b + np.uint64(COUNT)] += 1.0
            flat[b + np.uint64(DISTANCE)] += sd[q]
            if mode == MODE_SQUARE:
                diff = sv[q]
                flat[b + np.uint64(SQUARE)] += diff * diff
        return
    zs, vals = cols[2], cols[3]
    vi = vals[i]
    for q in range(span):
        j = start + q
        b = bins[q] + (q & (COPIES - 1)) * copy_rows
        k = best[q]
        dz = zs[j] - zs[i]
        add_oriented(table, b, sd[q], vi, vals[j], scratch[0, q], scratch[1, q], dz, dirs[k, 0], dirs[k, 1], mode, mean)


@njit(cache=True)
def add_range(table, copy_rows, cols, i, lo, hi, max_d2, sectors, omni, four, dirs, padded, lut, inv_cell, shared,
              origin, inv_step, kmax, mode, mean, scratch, marks):  # fmt: skip
    """Add the pairs (i, j), j in [lo, hi), of the column-ordered samples to their bins, :data:`SPAN`
    candidates at a time (:func:`bin_span`, :func:`scatter_span`, :func:`add_shared_pair`);
    returns the co-located pairs among them."""
    zero_pairs = 0
    for start in range(lo, hi, SPAN):
        stop = min(hi, start + SPAN)
        zero, several = bin_span(
            cols, i, start, stop, max_d2, sectors, omni, four, padded, lut, inv_cell, shared, origin, inv_step, kmax,
            scratch, marks,
        )  # fmt: skip
        zero_pairs += zero
        scatter_span(table, copy_rows, cols, i, start, stop, dirs, mode, mean, scratch, marks)
        for q in range(stop - start if several > 0 else 0):
            if marks[1, q] > 1:
                add_shared_pair(
                    table, cols, i, start + q, scratch[2, q], max_d2, dirs, padded, lut, inv_cell, shared, kmax,
                    mode, mean,
                )  # fmt: skip
    return zero_pairs


@njit(cache=True, inline="always")
def bin_piece_one(cols, i, start, stop, q0, q1, k, max_d2, padded, lut, inv_cell, origin, inv_step, kmax, scratch,
                  marks):  # fmt: skip
    """:func:`bin_span_four` on pairs q0 <= q < q1 of the span that direction ``k`` alone certainly admits
    (:func:`cut_run`): the same separations, classes and bins, without the angle tests."""
    xi = cols[0, i]
    yi = cols[1, i]
    zi = cols[2, i]
    vi = cols[3, i]
    stride = np.int32(kmax + 1)
    offset = np.int32(k) * stride
    sector = np.int32(k)
    one = np.int32(1)
    dropped = np.int32(kmax)
    top = np.float64(kmax)
    first = np.uint64(start + q0)
    at = np.uint64(q0)
    zero = 0
    unsure = 0
    for r in range(q1 - q0):
        j = first + np.uint64(r)
        q = at + np.uint64(r)
        dx = cols[0, j] - xi
        dy = cols[1, j] - yi
        dz = cols[2, j] - zi
        d2 = dx * dx + dy * dy + dz * dz
        d = math.sqrt(d2)
        scratch[0, q] = dx
        scratch[1, q] = dy
        scratch[2, q] = d
        scratch[3, q] = cols[3, j] - vi
        zero += np.int32(d2 == 0.0)
        t = (d - origin) * inv_step
        f = np.floor(t)
        frac = t - f
        unsure += np.int32((frac < UNSURE) | (frac > 1.0 - UNSURE))
        member = (t >= 0.0) & (t < top) & (d2 > 0.0) & (d2 <= max_d2)
        marks[1, q] = one
        marks[2, q] = sector
        marks[0, q] = offset + (np.int32(f) if member else dropped)
    if unsure > 0:
        last = np.float64(lut.shape[1] - 1)
        for r in range(q1 - q0):
            j = first + np.uint64(r)
            q = at + np.uint64(r)
            dx = cols[0, j] - xi
            dy = cols[1, j] - yi
            dz = cols[2, j] - zi
            d2 = dx * dx + dy * dy + dz * dz
            d = scratch[2, q]
            c = class_of(padded, lut, 0, np.int64(min(d * inv_cell, last)), d, kmax)
            marks[0, q] = offset + (np.int32(c) if (d2 > 0.0) & (d2 <= max_d2) else dropped)
    return zero


# Half-width (radians) of the angles around a sector edge whose pairs take the exact angle tests: far
# wider than the rounding of the test proj^2 - |h|^2 cos^2 (a few 1e-16 |h|^2) wherever
# sin(2 tolerance) >= EDGE_SINE (the test's value there is at least EDGE_MARGIN * EDGE_SINE |h|^2).
EDGE_MARGIN = 1e-8
EDGE_SINE = 1e-4


@njit(cache=True)
def sector_edges(sectors, ndir):
    """The sector edges of up to four directions without band as y-bands per unit of x:
    ``bands[0, b]`` and ``bands[1, b]`` are tan(phi - EDGE_MARGIN) and tan(phi + EDGE_MARGIN) of the
    edges' angles phi from the x axis (in (-pi/2, pi/2), increasing; edges closer than twice
    EDGE_MARGIN merged). Returns (bands, count); count 0 when the runs are not to be cut (an edge
    within 1e-6 radians of the y axis, a tolerance with sin(2 tolerance) < :data:`EDGE_SINE`, or no edge).
    """
    angles = np.empty(2 * ndir)
    count = 0
    for k in range(ndir):
        ux, uy, c2 = sectors[0, k], sectors[1, k], sectors[2, k]
        if c2 <= 0.0:
            continue  # tolerance 90 degrees: every pair, no edge
        cosine = math.sqrt(c2 / (ux * ux + uy * uy))
        if not cosine < 1.0:
            return np.empty((2, 0)), np.empty(0, np.int64), 0
        tolerance = math.acos(cosine)
        if math.sin(2.0 * tolerance) < EDGE_SINE:
            return np.empty((2, 0)), np.empty(0, np.int64), 0
        axis = math.atan2(uy, ux)
        for side in (-1.0, 1.0):
            phi = axis + side * tolerance
            phi -= math.pi * math.floor(phi / math.pi + 0.5)  # into [-pi/2, pi/2)
            if abs(phi) > 0.5 * math.pi - 1e-6:
                return np.empty((2, 0)), np.empty(0, np.int64), 0
            angles[count] = phi
            count += 1
    if count == 0:
        return np.empty((2, 0)), np.empty(0, np.int64), 0
    angles = np.sort(angles[:count])
    bands = np.empty((2, count))
    lowest = np.empty(count)  # the first and last edge angle of each merged band
    tops = np.empty(count)
    merged_count = 0
    top = 0.0
    for b in range(count):
        if merged_count > 0 and angles[b] - EDGE_MARGIN <= top + EDGE_MARGIN:
            top = angles[b]
            tops[merged_count - 1] = top
            bands[1, merged_count - 1] = math.tan(top + EDGE_MARGIN)
            continue
        top = angles[b]
        tops[merged_count] = top
        bands[0, merged_count] = math.tan(top - EDGE_MARGIN)
        bands[1, merged_count] = math.tan(top + EDGE_MARGIN)
        lowest[merged_count] = angles[b]
        merged_count += 1
    # The direction alone admitting the angles of each gap (-1: none or several), from the test at the
    # gap's middle angle, far from every edge; gap b lies below band b, the last above the last band.
    gaps = np.empty(merged_count + 1, dtype=np.int64)
    for g in range(merged_count + 1):
        below = angles[count - 1] - math.pi if g == 0 else tops[g - 1]
        above = lowest[g] if g < merged_count else lowest[0] + math.pi
        middle = 0.5 * (below + above)
        dx, dy = math.cos(middle), math.sin(middle)
        hh2 = dx * dx + dy * dy
        admitting = 0
        k = -1
        for s in range(4):
            if within(dx, dy, hh2, sectors[0, s], sectors[1, s], sectors[2, s]):
                admitting += 1
                k = s
        gaps[g] = k if admitting == 1 else -1
    return bands[:, :merged_count], gaps, merged_count


BUCKET_ROWS = 2  # rows per y-bucket of a column's index (bucket_rows)


@njit(cache=True)
def bucket_rows(ys, starts):
    """A y-index of each column of the column order: column c's y range from ``base[c]`` (its smallest y)
    cut into ``count[c]`` buckets of equal height (about :data:`BUCKET_ROWS` rows each);
    ``first[offset[c] + b]`` is the first row of the column whose bucket (:func:`bucket_of`) is b or more,
    ``first[offset[c] + count[c]]`` the column's end. Returns (first, offset, count, scale, base) with
    ``scale[c]`` the buckets per unit of y."""
    ncol = starts.shape[0] - 1
    offset = np.empty(ncol + 1, dtype=np.int64)
    count = np.empty(ncol, dtype=np.int64)
    scale = np.zeros(ncol)
    base = np.zeros(ncol)
    offset[0] = 0
    for c in range(ncol):
        rows = starts[c + 1] - starts[c]
        count[c] = max(1, rows // BUCKET_ROWS)
        offset[c + 1] = offset[c] + count[c] + 1
        if rows > 0:
            base[c] = ys[starts[c]]
        if rows > 1 and ys[starts[c + 1] - 1] > ys[starts[c]]:
            scale[c] = count[c] / (ys[starts[c + 1] - 1] - ys[starts[c]])
    first = np.empty(offset[ncol], dtype=np.int64)
    for c in range(ncol):
        r = starts[c]
        for b in range(count[c]):
            while r < starts[c + 1] and bucket_of(ys[r], base[c], scale[c], count[c]) < b:
                r += 1
            first[offset[c] + b] = r
        first[offset[c] + count[c]] = starts[c + 1]
    return first, offset, count, scale, base


@njit(cache=True, inline="always")
def bucket_of(y, base, scale, count):
    """Bucket of y in a column's index (:func:`bucket_rows`): floor((y - base) * scale) within
    [0, count - 1], non-decreasing in y."""
    return np.int64(min(max((y - base) * scale, 0.0), np.float64(count - 1)))


@njit(cache=True, inline="always")
def bucket_span(index, c, y):
    """The rows [a, e) of y's bucket in column c's index (:func:`bucket_rows`): every row before a lies
    below y, every row from e on above it."""
    first, offset, count, scale, base = index
    at = offset[c] + bucket_of(y, base[c], scale[c], count[c])
    return first[at], first[at + 1]


@njit(cache=True)
def cut_run(cols, index, c2, i, lo, hi, g0, g1, reach, bands, nbands, gaps, pieces):
    """Cut the run [lo, hi) of a later column (separations x_j - x_i within [g0, g1], g0 >= 0) into
    pieces by the sector edges: the rows whose y lies in an edge's band (the y the edge's line, widened
    by EDGE_MARGIN radians and a rounding margin, takes over the column) take the four angle tests;
    between bands no pair lies within EDGE_MARGIN of an edge, so the test's outcome is certain (its
    value is far from 0) and the same for the whole piece: that of its gap between edges
    (``gaps``, :func:`sector_edges`). Writes the
    pieces' first rows to ``pieces[0]`` (``pieces[0, m] = hi``) and to ``pieces[1]`` the direction that
    alone admits every pair of the piece, or -1 for the four tests; returns m."""
    yi = cols[1, i]
    m = 0
    done = lo  # rows below are cut
    for b in range(nbands + 1):
        if b < nbands:
            tl = bands[0, b]
            th = bands[1, b]
            low = min(g0 * tl, g1 * tl)
            high = max(g0 * th, g1 * th)
            slop = 1e-12 * (abs(yi) + abs(low) + abs(high) + reach)
            # The band's rows, widened to whole buckets (more rows take the four tests, none fewer).
            a = min(max(bucket_span(index, c2, yi + (low - slop))[0], done), hi)
            e = min(max(bucket_span(index, c2, yi + (high + slop))[1], a), hi)
        else:
            a = hi
            e = hi
        if a > done:
            # Rows between bands b - 1 and b: angles within gap b, whose direction sector_edges found.
            k = gaps[b]
            if not (m > 0 and pieces[1, m - 1] == k):
                pieces[0, m] = done
                pieces[1, m] = k
                m += 1
        if e > a:
            if not (m > 0 and pieces[1, m - 1] == -1):
                pieces[0, m] = a
                pieces[1, m] = -1
                m += 1
        done = max(done, e)
    pieces[0, m] = hi
    return m


@njit(cache=True)
def add_cut_run(table, copy_rows, cols, index, c2, i, lo, hi, g0, g1, reach, bands, nbands, gaps, pieces, max_d2,
                sectors, dirs,
                padded, lut, inv_cell, origin, inv_step, kmax, mode, mean, scratch, marks):  # fmt: skip
    """:func:`add_range` for a run of a later column with up to four directions (``four`` of
    :func:`bin_span`), cut by :func:`cut_run`: the pieces one direction certainly admits are binned
    without the angle tests (:func:`bin_piece_one`), the others by :func:`bin_span_four`. The spans,
    their bins and the order of additions are those of :func:`add_range`."""
    cut_run(cols, index, c2, i, lo, hi, g0, g1, reach, bands, nbands, gaps, pieces)
    zero_pairs = 0
    p = 0
    for start in range(lo, hi, SPAN):
        stop = min(hi, start + SPAN)
        several = 0
        q = start
        while q < stop:
            while pieces[0, p + 1] <= q:
                p += 1
            e = min(pieces[0, p + 1], stop)
            k = pieces[1, p]
            if k >= 0 and e - q >= MIN_PIECE:
                zero_pairs += bin_piece_one(cols, i, start, stop, q - start, e - start, k, max_d2, padded, lut,
                                            inv_cell, origin, inv_step, kmax, scratch, marks)  # fmt: skip
            else:
                zero, more = bin_span_four(cols, i, start, stop, q - start, e - start, max_d2, sectors, padded, lut,
                                           inv_cell, origin, inv_step, kmax, scratch, marks)  # fmt: skip
                zero_pairs += zero
                several += more
            q = e
        scatter_span(table, copy_rows, cols, i, start, stop, dirs, mode, mean, scratch, marks)
        for q in range(stop - start if several > 0 else 0):
            if marks[1, q] > 1:
                add_shared_pair(
                    table, cols, i, start + q, scratch[2, q], max_d2, dirs, padded, lut, inv_cell, True, kmax, mode,
                    mean,
                )  # fmt: skip
    return zero_pairs


@njit(cache=True, inline="always")
def column_run(ys, starts, lowest, c2, xi, yi, max_d2, margin):
    """The run of column ``c2`` that sample (xi, yi) visits in the column sweep: whether the column's
    smallest x lies within the radius (the sweep stops at the first that does not), and the rows
    [lo, hi) whose y lies within sqrt(radius^2 - gap^2 + margin) of yi (two binary searches)."""
    gap = lowest[c2] - xi
    if gap * gap > max_d2:
        return False, 0, 0
    s0 = starts[c2]
    h = math.sqrt(max(max_d2 - gap * gap, 0.0) + margin)
    run = ys[s0 : starts[c2 + 1]]
    return True, s0 + np.searchsorted(run, yi - h, side="left"), s0 + np.searchsorted(run, yi + h, side="right")


@njit(parallel=True, cache=True)
def accumulate_horizontal(
    cols, column, starts, lowest, mean, max_d2, dirs, padded, lut, inv_cell, shared, origin, inv_step, mode, nthreads,
    first, last,
):  # fmt: skip
    """Fast path of :func:`accumulate_classes` (rows [first, last) of the column order) for classes
    without dip or vertical band.

    Samples arrive in *column order* (:func:`lagwise.core.variography.pairs.columns`): cut along x
    into columns (``column[r]`` the column of row r, ``starts`` their first rows, ``lowest`` their
    smallest x) and sorted by y within a column; ``cols`` holds the rows x, y, z and centred value.
    Sample i visits the later samples of its own column up to y_i + radius, then, in every later
    column whose smallest x lies within the radius (at gap g along x), the contiguous run of samples
    with y within sqrt(radius^2 - g^2) of y_i (two binary searches). Every pair is visited once, and
    the candidates outside the radius are only those of the runs' corners, against the whole strip
    of the x-sorted sweep.

    Class lookup: ``lut[k, m]`` is ``searchsorted(edges_k, m * cell, "right") - 1`` for
    fine cells at most half the narrowest class wide (callers use :func:`accumulate_classes`
    where the table cannot be that fine, ``ClassLayout.fast``), so one step up and one step down
    (against ``padded[k] = [-inf, edges_k..., +inf...]``) give exactly
    ``searchsorted(edges_k, d, "right") - 1``. ``shared`` means every direction has
    the same edges, so the class is looked up once per pair; if they are also of equal
    width (``inv_step`` > 0, the first edge ``origin``), the class is found by a floor division
    in a SIMD loop, the lookup table serving only spans with a distance within
    :data:`UNSURE` widths of an edge.

    The runs are taken in spans of :data:`SPAN` (:func:`add_range`): :func:`bin_span` finds every
    pair's bin in loops without branches over contiguous columns (compiled to SIMD instructions),
    pairs outside the radius, the classes or every direction going to a dropped bin ``kmax`` of
    their direction; :func:`scatter_span` then adds them to the thread's table, in :data:`COPIES`
    interleaved copies. Pairs admitted by several directions (only where sectors overlap or touch)
    are added to each by :func:`add_shared_pair`. Blocks of :data:`ROW_BLOCK` rows are dealt to the
    threads in turn. Returns the table (ndir * kmax, ACCUMULATORS) and co-located pairs.
    """
    ndir = dirs.shape[0]
    kmax = padded.shape[1] - 3
    stride = kmax + 1
    copy_rows = ndir * stride
    ncol = lowest.shape[0]
    tables = np.zeros((nthreads, COPIES * copy_rows, ACCUMULATORS))
    colocated = np.zeros(nthreads, dtype=np.int64)
    nblocks = (last - first + ROW_BLOCK - 1) // ROW_BLOCK
    xs = cols[0]
    ys = cols[1]
    # The runs' bounds take a margin of 1e-12 radius^2 so that rounding never leaves out a pair
    # whose computed distance is within the radius (bin_span tests each candidate exactly).
    margin = 1e-12 * max_d2
    reach = math.sqrt(max_d2 + margin)
    # Directions four to a loop; the padding directions admit nothing (cos^2 = inf).
    sectors = np.full((4, (ndir + 3) // 4 * 4), np.inf)
    sectors[0, :ndir] = dirs[:, 0]
    sectors[1, :ndir] = dirs[:, 1]
    sectors[2, :ndir] = dirs[:, 11]
    sectors[3, :ndir] = dirs[:, 3]
    omni = ndir == 1 and dirs[0, 11] <= 0.0 and dirs[0, 3] == np.inf
    four = shared and inv_step > 0.0 and not omni and ndir <= 4 and np.all(sectors[3] == np.inf)
    # With four, the runs of later columns are cut by the sector edges (cut_run), which needs each
    # column's largest x as well.
    bands, gaps, nbands = sector_edges(sectors, ndir) if four else (np.empty((2, 0)), np.empty(0, np.int64), 0)
    highest = np.empty(ncol)
    for c in range(ncol):
        highest[c] = xs[starts[c] : starts[c + 1]].max() if starts[c + 1] > starts[c] else lowest[c]
    index = bucket_rows(ys, starts)
    for t in prange(nthreads):
        table = tables[t]
        zero_pairs = 0
        scratch = np.empty((4, SPAN))
        marks = np.empty((3, SPAN), dtype=np.int32)
        pieces = np.empty((2, 2 * nbands + 3), dtype=np.int64)
        for blk in range(t, nblocks, nthreads):
            for i in range(first + blk * ROW_BLOCK, min(last, first + (blk + 1) * ROW_BLOCK)):
                c = column[i]
                xi = xs[i]
                yi = ys[i]
                stop = i + 1 + np.searchsorted(ys[i + 1 : starts[c + 1]], yi + reach, side="right")
                zero_pairs += add_range(
                    table, copy_rows, cols, i, i + 1, stop, max_d2, sectors, omni, four, dirs, padded, lut, inv_cell,
                    shared, origin, inv_step, kmax, mode, mean, scratch, marks,
                )  # fmt: skip
                for c2 in range(c + 1, ncol):
                    within_reach, lo, hi = column_run(ys, starts, lowest, c2, xi, yi, max_d2, margin)
                    if not within_reach:
                        break
                    if starts[c2 + 1] == starts[c2]:
                        continue
                    if nbands > 0 and hi - lo >= CUT_RUN:
                        zero_pairs += add_cut_run(
                            table, copy_rows, cols, index, c2, i, lo, hi, lowest[c2] - xi, highest[c2] - xi, reach, bands,
                            nbands, gaps, pieces, max_d2, sectors, dirs, padded, lut, inv_cell, origin, inv_step, kmax, mode,
                            mean, scratch, marks,
                        )  # fmt: skip
                        continue
                    zero_pairs += add_range(
                        table, copy_rows, cols, i, lo, hi, max_d2, sectors, omni, four, dirs, padded, lut, inv_cell,
                        shared, origin, inv_step, kmax, mode, mean, scratch, marks,
                    )  # fmt: skip
        colocated[t] = zero_pairs
    out = tables.sum(axis=0)
    result = np.zeros((ndir * kmax, ACCUMULATORS))
    for k in range(ndir):
        for r in range(COPIES):
            result[k * kmax : (k + 1) * kmax] += out[r * copy_rows + k * stride : r * copy_rows + k * stride + kmax]
    return result, colocated.sum()


@njit(parallel=True, cache=True)
def column_candidates(cols, column, starts, lowest, max_d2, stride, run_work):
    """Work of :func:`accumulate_horizontal` from rows 0, stride, 2 stride, ... (same arguments, column order):
    the candidates it visits, the later rows of its own column up to y + radius and, in each later
    non-empty column within the radius along x, the run within sqrt(radius^2 - gap^2) of its y (the same
    bounds and margin), plus ``run_work`` for each run it takes (its own column's included).
    Returns an int64 array of one count per row taken."""
    n = cols.shape[1]
    ncol = lowest.shape[0]
    taken = (n + stride - 1) // stride
    out = np.zeros(taken, dtype=np.int64)
    xs = cols[0]
    ys = cols[1]
    margin = 1e-12 * max_d2
    reach = math.sqrt(max_d2 + margin)
    for k in prange(taken):
        i = k * stride
        c = column[i]
        xi = xs[i]
        yi = ys[i]
        count = np.searchsorted(ys[i + 1 : starts[c + 1]], yi + reach, side="right") + run_work
        for c2 in range(c + 1, ncol):
            within_reach, lo, hi = column_run(ys, starts, lowest, c2, xi, yi, max_d2, margin)
            if not within_reach:
                break
            if starts[c2 + 1] == starts[c2]:
                continue
            count += hi - lo + run_work
        out[k] = count
    return out


@njit(cache=True)
def collect_pairs(
    pts,
    vals,
    max_d2,
    dirs,
    edges,
    nk,
    inv_width,
    offsets,
    ends,
    out_abs,
    target,
    stride,
    out_tail,
    out_head,
    state,
    first,
    last,
):
    """Serial pass over rows [first, last) that copies pair values out of the accumulators' reach.

    When ``out_abs`` is non-empty, |head - tail| of every member pair is written at
    ``offsets[bin]`` onwards, never past ``ends[bin]`` (offsets are advanced; they
    come from the counts of an earlier pass, and the bound keeps a disagreement from
    writing outside the bin). When ``target >= 0``, every ``stride``-th pair of that bin (in
    visiting order) has its centred tail and head values written to out_tail/out_head.
    ``state`` holds (pairs of the target bin seen, scattergram pairs written) and is
    carried from one range of rows to the next.
    """
    n = pts.shape[0]
    ndir = dirs.shape[0]
    kmax = edges.shape[1] - 1
    seen = state[0]
    written = state[1]
    want_abs = out_abs.shape[0] > 0
    near = np.empty(n, dtype=np.int64)
    sep = np.empty((4, n))
    for i in range(first, last):
        count, _ = sweep_row(pts, i, max_d2, near, sep)
        for q in range(count):
            j, dx, dy, dz, d = near[q], sep[0, q], sep[1, q], sep[2, q], sep[3, q]
            for k in range(ndir):
                c, sign = classify(dx, dy, dz, d, dirs, k, edges, nk, inv_width)
                if c < 0:
                    continue
                b = k * kmax + c
                if want_abs and offsets[b] < ends[b]:
                    out_abs[offsets[b]] = abs(vals[j] - vals[i])
                    offsets[b] += 1
                if b == target:
                    if seen % stride == 0 and written < out_tail.shape[0]:
                        out_tail[written] = vals[i] if sign > 0 else vals[j]
                        out_head[written] = vals[j] if sign > 0 else vals[i]
                        written += 1
                    seen += 1
    state[0] = seen
    state[1] = written


@njit(cache=True)
def map_cell(hx, hy, cell, cells):
    """Cell index (row by hy) of separation (hx, hy), or -1 outside the map."""
    ix = int(math.floor(hx / cell + 0.5))
    iy = int(math.floor(hy / cell + 0.5))
    if ix < -cells or ix > cells or iy < -cells or iy > cells:
        return -1
    return (iy + cells) * (2 * cells + 1) + (ix + cells)


@njit(parallel=True, cache=True)
def accumulate_map(pts, vals, mean, cell, cells, mode, nthreads, first, last):
    """Accumulate every pair whose first sample is in rows [first, last), as h and as -h,
    into the cells of a variogram map.

    Cell (i, j) collects horizontal separations with hx in [(i - 1/2) cell, (i + 1/2) cell)
    and hy likewise, i, j in [-cells, cells]; the pair (a, b) counts with tail a and head
    b at h = x_b - x_a, and with tail b and head a at -h.
    """
    n = pts.shape[0]
    width = 2 * cells + 1
    reach = (cells + 0.5) * cell
    tables = np.zeros((nthreads, width * width, ACCUMULATORS))
    nblocks = (last - first + ROW_BLOCK - 1) // ROW_BLOCK
    for t in prange(nthreads):
        table = tables[t]
        for blk in range(t, nblocks, nthreads):
            for i in range(first + blk * ROW_BLOCK, min(last, first + (blk + 1) * ROW_BLOCK)):
                for j in range(i + 1, n):
                    dx = pts[j, 0] - pts[i, 0]
                    if dx > reach:
                        break
                    dy = pts[j, 1] - pts[i, 1]
                    if abs(dy) > reach or (dx == 0.0 and dy == 0.0):
                        continue
                    d = math.sqrt(dx * dx + dy * dy)
                    b = map_cell(dx, dy, cell, cells)
                    if b >= 0:
                        add_pair(table, b, d, vals[i], vals[j], mode, mean)
                    b = map_cell(-dx, -dy, cell, cells)
                    if b >= 0:
                        add_pair(table, b, d, vals[j], vals[i], mode, mean)
    return tables.sum(axis=0)


@njit(cache=True)
def collect_map_differences(pts, vals, cell, cells, offsets, ends, out_abs, first, last):
    """Serial pass over rows [first, last) writing |head - tail| of every map pair at
    offsets[cell] onwards (up to ends[cell])."""
    n = pts.shape[0]
    reach = (cells + 0.5) * cell
    for i in range(first, last):
        for j in range(i + 1, n):
            dx = pts[j, 0] - pts[i, 0]
            if dx > reach:
                break
            dy = pts[j, 1] - pts[i, 1]
            if abs(dy) > reach or (dx == 0.0 and dy == 0.0):
                continue
            a = abs(vals[j] - vals[i])
            b = map_cell(dx, dy, cell, cells)
            if b >= 0 and offsets[b] < ends[b]:
                out_abs[offsets[b]] = a
                offsets[b] += 1
            b = map_cell(-dx, -dy, cell, cells)
            if b >= 0 and offsets[b] < ends[b]:
                out_abs[offsets[b]] = a
                offsets[b] += 1


@njit(parallel=True, cache=True)
def accumulate_blocks(
    pts, vals, mean, max_d2, dirs, edges, nk, inv_width, mode, blocks, nblocks, nthreads, first, last
):
    """Accumulate every pair whose first sample is in rows [first, last) into (direction, class)
    bins, in total and per spatial block.

    ``blocks[i]`` is the block (0 .. nblocks - 1) of sample i. A pair is added to the
    total table once and to the table of each block it touches (once when both ends
    share a block), so ``total - by_block[b]`` holds the sums of the pairs that avoid
    block b. Returns (total of shape (ndir * kmax, ACCUMULATORS), by_block of shape
    (nblocks, ndir * kmax, ACCUMULATORS)).
    """
    n = pts.shape[0]
    ndir = dirs.shape[0]
    kmax = edges.shape[1] - 1
    bins = ndir * kmax
    totals = np.zeros((nthreads, bins, ACCUMULATORS))
    tables = np.zeros((nthreads, nblocks, bins, ACCUMULATORS))
    nrows = (last - first + ROW_BLOCK - 1) // ROW_BLOCK
    for t in prange(nthreads):
        total = totals[t]
        table = tables[t]
        near = np.empty(n, dtype=np.int64)
        sep = np.empty((4, n))
        for blk in range(t, nrows, nthreads):
            for i in range(first + blk * ROW_BLOCK, min(last, first + (blk + 1) * ROW_BLOCK)):
                bi = blocks[i]
                count, _ = sweep_row(pts, i, max_d2, near, sep)
                for q in range(count):
                    j, dx, dy, dz, d = near[q], sep[0, q], sep[1, q], sep[2, q], sep[3, q]
                    bj = blocks[j]
                    for k in range(ndir):
                        c, sign = classify(dx, dy, dz, d, dirs, k, edges, nk, inv_width)
                        if c < 0:
                            continue
                        b = k * kmax + c
                        tail = vals[i] if sign > 0 else vals[j]
                        head = vals[j] if sign > 0 else vals[i]
                        add_pair(total, b, d, tail, head, mode, mean)
                        add_pair(table[bi], b, d, tail, head, mode, mean)
                        if bj != bi:
                            add_pair(table[bj], b, d, tail, head, mode, mean)
    return totals.sum(axis=0), tables.sum(axis=0)


# ---- several variables in one pass ---------------------------------------------------
#
# Values arrive as an (n, p) table centred per variable, 0 where not measured, with an
# (n, p) 0/1 table of what was measured. Sums are kept per bin in "slots":
#   MODE_SQUARE with cross sums: slot s of the upper triangle a <= b (row-major), columns
#     MULTI_COUNT, MULTI_DISTANCE, MULTI_SQUARE over pairs where a and b are both measured
#     at both ends; the square column sums (a_h - a_t)(b_h - b_t) (a == b: the direct sums);
#   MODE_COVARIANCE with cross sums: slot a * p + b of the full matrix, over pairs with a
#     measured at the tail and b at the head, columns MULTI_COUNT, MULTI_DISTANCE, and
#     (tail a, head b, tail a^2, head b^2, tail a x head b) in MULTI_TAIL .. MULTI_PRODUCT;
#   without cross sums (and for MODE_ABSOLUTE, MODE_RELATIVE): slot a, the direct sums in
#     the columns of the single-variable layout (COUNT .. RELATIVE).

MULTI_COUNT, MULTI_DISTANCE, MULTI_SQUARE = 0, 1, 2
MULTI_TAIL, MULTI_HEAD, MULTI_TAIL2, MULTI_HEAD2, MULTI_PRODUCT = 2, 3, 4, 5, 6


@njit(cache=True, inline="always")
def _add_square_cross(table, b, d, diff, both, p):
    """Add one pair's masked differences to the triangular slots of bin b."""
    s = 0
    for a in range(p):
        wa = both[a]
        if wa == 0.0:
            s += p - a
            continue
        da = diff[a]
        for c in range(a, p):
            w = wa * both[c]
            table[b, MULTI_COUNT, s] += w
            table[b, MULTI_DISTANCE, s] += d * w
            table[b, MULTI_SQUARE, s] += da * diff[c]
            s += 1


@njit(cache=True, inline="always")
def _add_covariance_cross(table, b, d, vt, vh, mt, mh, p):
    """Add one oriented pair (tail row vt, head row vh, their masks) to the full slots of bin b."""
    for a in range(p):
        if mt[a] == 0.0:
            continue
        ta = vt[a]
        base = a * p
        for c in range(p):
            w = mh[c]
            hc = vh[c]
            table[b, MULTI_COUNT, base + c] += w
            table[b, MULTI_DISTANCE, base + c] += d * w
            table[b, MULTI_TAIL, base + c] += ta * w
            table[b, MULTI_HEAD, base + c] += hc
            table[b, MULTI_TAIL2, base + c] += ta * ta * w
            table[b, MULTI_HEAD2, base + c] += hc * hc
            table[b, MULTI_PRODUCT, base + c] += ta * hc


@njit(cache=True, inline="always")
def _add_direct(table, b, d, vt, vh, mt, mh, p, mode, means):
    """Add one oriented pair to the per-variable slots of bin b (single-variable columns)."""
    for a in range(p):
        if mt[a] * mh[a] != 0.0:
            add_to(table[b, :, a], d, vt[a], vh[a], mode, means[a])


@njit(parallel=True, cache=True)
def accumulate_variables(
    pts, vals, measured, means, max_d2, dirs, edges, nk, inv_width, mode, cross, nthreads, first, last
):
    """Accumulate every pair within sqrt(max_d2) whose first sample is in rows [first, last)
    into (direction, class) bins for all variables (and, with ``cross``, all pairs of variables) at once.

    ``vals`` (n, p) holds values centred per variable and 0 where not measured; ``measured``
    (n, p) is 1.0 where measured, else 0.0; ``means`` (p,) the centring means. The slot
    layout and columns per ``mode`` and ``cross`` are described above. Returns the table of
    shape (ndir * kmax, columns, slots) and the number of co-located (zero-distance) pairs.
    """
    n = pts.shape[0]
    p = vals.shape[1]
    ndir = dirs.shape[0]
    kmax = edges.shape[1] - 1
    if cross and mode == MODE_SQUARE:
        columns, slots = 3, p * (p + 1) // 2
    elif cross and mode == MODE_COVARIANCE:
        columns, slots = 7, p * p
    else:
        columns, slots = ACCUMULATORS, p
    tables = np.zeros((nthreads, ndir * kmax, columns, slots))
    colocated = np.zeros(nthreads, dtype=np.int64)
    nblocks = (last - first + ROW_BLOCK - 1) // ROW_BLOCK
    for t in prange(nthreads):
        table = tables[t]
        zero_pairs = 0
        near = np.empty(n, dtype=np.int64)
        sep = np.empty((4, n))
        diff = np.empty(p)
        both = np.empty(p)
        for blk in range(t, nblocks, nthreads):
            for i in range(first + blk * ROW_BLOCK, min(last, first + (blk + 1) * ROW_BLOCK)):
                vi = vals[i]
                mi = measured[i]
                count, zero = sweep_row(pts, i, max_d2, near, sep)
                zero_pairs += zero
                for q in range(count):
                    j, dx, dy, dz, d = near[q], sep[0, q], sep[1, q], sep[2, q], sep[3, q]
                    vj = vals[j]
                    mj = measured[j]
                    prepared = False
                    for k in range(ndir):
                        c, sign = classify(dx, dy, dz, d, dirs, k, edges, nk, inv_width)
                        if c < 0:
                            continue
                        b = k * kmax + c
                        if cross and mode == MODE_SQUARE:
                            # Orientation does not matter: (-da)(-db) = da db.
                            if not prepared:
                                for a in range(p):
                                    both[a] = mi[a] * mj[a]
                                    diff[a] = (vj[a] - vi[a]) * both[a]
                                prepared = True
                            _add_square_cross(table, b, d, diff, both, p)
                        elif cross and mode == MODE_COVARIANCE:
                            if sign > 0:
                                _add_covariance_cross(table, b, d, vi, vj, mi, mj, p)
                            else:
                                _add_covariance_cross(table, b, d, vj, vi, mj, mi, p)
                        elif sign > 0:
                            _add_direct(table, b, d, vi, vj, mi, mj, p, mode, means)
                        else:
                            _add_direct(table, b, d, vj, vi, mj, mi, p, mode, means)
        colocated[t] = zero_pairs
    return tables.sum(axis=0), colocated.sum()


@njit(parallel=True, cache=True)
def accumulate_square_patterns(
    pts,
    vals,
    pattern,
    patterns,
    max_d2,
    dirs,
    edges,
    nk,
    inv_width,
    padded,
    lut,
    inv_cell,
    shared,
    horizontal,
    nthreads,
    first,
    last,
    head,
):
    """Cross sums of squared-difference type for all pairs of variables, with O(p) work per pair.

    For the pairs of a bin whose ends have measurement patterns g (tail row i) and h,
    sum (v_j - v_i)(v_j - v_i)^T = n v_i v_i^T - v_i R^T - R v_i^T + sum_j v_j v_j^T with
    R = sum_j v_j; a row keeps R, the count and the distance sum per (bin, partner
    pattern) and folds them into the (p, p) sums when it is done, masked by the variables
    both patterns measure. The last term is added later from ``head[bin * G + g, j]``,
    the number of pairs in which sample j is the later end and the earlier end has
    pattern g (:func:`add_head_squares`).

    ``vals`` (n, p) is centred per variable and 0 where not measured; ``pattern`` (n,) the
    index of each sample's row in ``patterns`` (G, p), the distinct 0/1 measurement rows;
    ``head`` (nthreads, bins * G, n) is filled in place. With ``horizontal`` (no dip or
    vertical band, and a lookup table that resolves the classes: ``ClassLayout.fast``) classes
    are looked up as in :func:`accumulate_horizontal`. Returns the (bins, p, p) sums,
    and the (bins, G, G) pair counts and distance sums per pattern pair, and the
    co-located pairs.
    """
    n = pts.shape[0]
    p = vals.shape[1]
    ndir = dirs.shape[0]
    kmax = edges.shape[1] - 1
    bins = ndir * kmax
    g_count = patterns.shape[0]
    last_cell = lut.shape[1] - 1
    squares = np.zeros((nthreads, bins, p, p))
    counts = np.zeros((nthreads, bins, g_count, g_count))
    distances = np.zeros((nthreads, bins, g_count, g_count))
    colocated = np.zeros(nthreads, dtype=np.int64)
    nblocks = (last - first + ROW_BLOCK - 1) // ROW_BLOCK
    for t in prange(nthreads):
        sq = squares[t]
        own_head = head[t]
        sums = np.zeros((bins * g_count, p))
        row_count = np.zeros(bins * g_count)
        row_distance = np.zeros(bins * g_count)
        touched = np.empty(bins * g_count, dtype=np.int64)
        mask = np.empty(p)
        zero_pairs = 0
        near = np.empty(n, dtype=np.int64)
        sep = np.empty((4, n))
        for blk in range(t, nblocks, nthreads):
            for i in range(first + blk * ROW_BLOCK, min(last, first + (blk + 1) * ROW_BLOCK)):
                gi = pattern[i]
                used = 0
                count, zero = sweep_row(pts, i, max_d2, near, sep)
                zero_pairs += zero
                for q in range(count):
                    j, dx, dy, dz, d = near[q], sep[0, q], sep[1, q], sep[2, q], sep[3, q]
                    h = pattern[j]
                    hh2 = dx * dx + dy * dy
                    m_cell = min(int(d * inv_cell), last_cell)
                    shared_c = class_of(padded, lut, 0, m_cell, d, kmax)
                    for k in range(ndir):
                        if horizontal:
                            proj = dx * dirs[k, 0] + dy * dirs[k, 1]
                            perp = dx * dirs[k, 1] - dy * dirs[k, 0]
                            if (proj * proj < hh2 * dirs[k, 11]) or (perp * perp > dirs[k, 3]):
                                continue
                            c = shared_c if shared else class_of(padded, lut, k, m_cell, d, kmax)
                            if c >= nk[k]:
                                continue
                        else:
                            c, _ = classify(dx, dy, dz, d, dirs, k, edges, nk, inv_width)
                            if c < 0:
                                continue
                        b = k * kmax + c
                        key = b * g_count + h
                        if row_count[key] == 0.0:
                            touched[used] = key
                            used += 1
                        row_count[key] += 1.0
                        row_distance[key] += d
                        for a in range(p):
                            sums[key, a] += vals[j, a]
                        own_head[b * g_count + gi, j] += np.float32(1.0)
                for u in range(used):
                    key = touched[u]
                    b = key // g_count
                    h = key - b * g_count
                    m = row_count[key]
                    for a in range(p):
                        mask[a] = patterns[gi, a] * patterns[h, a]
                    for a in range(p):
                        if mask[a] == 0.0:
                            continue
                        va = vals[i, a]
                        ra = sums[key, a]
                        for c2 in range(p):
                            if mask[c2] == 0.0:
                                continue
                            vc = vals[i, c2]
                            sq[b, a, c2] += m * va * vc - va * sums[key, c2] - ra * vc
                    counts[t, b, gi, h] += m
                    distances[t, b, gi, h] += row_distance[key]
                    row_count[key] = 0.0
                    row_distance[key] = 0.0
                    for a in range(p):
                        sums[key, a] = 0.0
        colocated[t] = zero_pairs
    return squares.sum(axis=0), counts.sum(axis=0), distances.sum(axis=0), colocated.sum()


@njit(parallel=True, cache=True)
def add_head_squares(squares, vals, pattern, patterns, head):
    """Add sum_j v_j v_j^T over the pairs in which sample j is the later end (see
    :func:`accumulate_square_patterns`), masked by the variables both ends measure.

    ``head`` (bins * G, n) holds, per bin and sample, the pairs by the earlier end's pattern.
    """
    n = vals.shape[0]
    p = vals.shape[1]
    bins = squares.shape[0]
    g_count = patterns.shape[0]
    for b in prange(bins):
        mask = np.empty(p)
        for j in range(n):
            gj = pattern[j]
            for g in range(g_count):
                m = head[b * g_count + g, j]
                if m == 0.0:
                    continue
                for a in range(p):
                    mask[a] = patterns[g, a] * patterns[gj, a]
                for a in range(p):
                    if mask[a] == 0.0:
                        continue
                    wa = m * vals[j, a]
                    for c in range(p):
                        if mask[c] != 0.0:
                            squares[b, a, c] += wa * vals[j, c]


@njit(parallel=True, cache=True)
def accumulate_cross_blocks(
    pts, vals, measured, max_d2, dirs, edges, nk, inv_width, first_of, second_of, labels, nblocks, nthreads, first,
    last,
):  # fmt: skip
    """Cross-semivariance sums of chosen pairs of variables, in total and per spatial block, for the
    pairs whose first sample is in rows [first, last).

    Cross pair s is (``first_of[s]``, ``second_of[s]``); a pair of samples enters it when both
    variables are measured at both ends, adding 1, the distance and (a_j - a_i)(b_j - b_i)
    (columns ``MULTI_COUNT``, ``MULTI_DISTANCE``, ``MULTI_SQUARE``; orientation does not matter)
    to the total and to the table of each block it touches (once when both ends share it),
    ``labels[i]`` the block of sample i. ``vals`` and ``measured`` as for
    :func:`accumulate_variables`. Returns (total (ndir * kmax, 3, P), by_block (nblocks,
    ndir * kmax, 3, P)).
    """
    n = pts.shape[0]
    p = vals.shape[1]
    ndir = dirs.shape[0]
    kmax = edges.shape[1] - 1
    bins = ndir * kmax
    cross = first_of.shape[0]
    totals = np.zeros((nthreads, bins, 3, cross))
    tables = np.zeros((nthreads, nblocks, bins, 3, cross))
    nrows = (last - first + ROW_BLOCK - 1) // ROW_BLOCK
    for t in prange(nthreads):
        total = totals[t]
        table = tables[t]
        near = np.empty(n, dtype=np.int64)
        sep = np.empty((4, n))
        diff = np.empty(p)
        both = np.empty(p)
        for blk in range(t, nrows, nthreads):
            for i in range(first + blk * ROW_BLOCK, min(last, first + (blk + 1) * ROW_BLOCK)):
                count, _ = sweep_row(pts, i, max_d2, near, sep)
                for q in range(count):
                    j, dx, dy, dz, d = near[q], sep[0, q], sep[1, q], sep[2, q], sep[3, q]
                    for a in range(p):
                        both[a] = measured[i, a] * measured[j, a]
                        diff[a] = vals[j, a] - vals[i, a]
                    for k in range(ndir):
                        c, _ = classify(dx, dy, dz, d, dirs, k, edges, nk, inv_width)
                        if c < 0:
                            continue
                        b = k * kmax + c
                        for s in range(cross):
                            u = first_of[s]
                            v = second_of[s]
                            if both[u] * both[v] == 0.0:
                                continue
                            product = diff[u] * diff[v]
                            total[b, MULTI_COUNT, s] += 1.0
                            total[b, MULTI_DISTANCE, s] += d
                            total[b, MULTI_SQUARE, s] += product
                            li = labels[i]
                            lj = labels[j]
                            table[li, b, MULTI_COUNT, s] += 1.0
                            table[li, b, MULTI_DISTANCE, s] += d
                            table[li, b, MULTI_SQUARE, s] += product
                            if lj != li:
                                table[lj, b, MULTI_COUNT, s] += 1.0
                                table[lj, b, MULTI_DISTANCE, s] += d
                                table[lj, b, MULTI_SQUARE, s] += product
    return totals.sum(axis=0), tables.sum(axis=0)
