"""Error bounds of the grid method: how far a class value on binned samples can lie from the exact one.

Derivation
----------
Scattered samples are binned on square cells of side c. A pair whose samples sit in
cells k and k + s is classified by the cells' offset s = (i c, j c); its true
separation differs from s by the difference of the two samples' offsets within their
cells, at most w_x along x and w_y along y (measured, "Map cells" below; each at most
about c), so it lies in the disk of radius r = sqrt(w_x^2 + w_y^2) (about a cell's
diagonal) about s. Hence:

* a lag vector whose disk lies inside one class (distance within [lower + r,
  upper - r), and no sector line at azimuth +- tolerance nor band line at
  perpendicular offset +- bandwidth within r of it) holds only pairs that the exact
  path puts in that same class (its *core*);
* every pair the two paths classify differently lies in a *boundary* lag vector:
  one whose disk crosses an edge of the class. Pairs within one cell (s = 0) lie
  within r of the origin and are boundary pairs of every class starting below r
  (the grid method leaves them out).

For a ratio statistic v = A / N over a class (semivariance: A = sum Delta^2 / 2;
non-centred covariance: A = sum z_tail z_head), the exact value is
(A_core + sum_s f_s A_s) / (N_core + sum_s f_s N_s) over the boundary lag vectors s,
where f_s in [0, 1] is the unknown share of s's pairs that belong to the class and
each share carries its lag vector's mean A_s / N_s (the pairs of one lag vector are
interchangeable as far as the grid knows). The largest and smallest values of this
linear-fractional function over the box of shares are taken at vertices, by
prefixes of the boundary lag vectors sorted by A_s / N_s (descending for the
largest, ascending for the smallest). The stated relative bound of a class is
max(v_max - v_grid, v_grid - v_min) / |v_grid|; the pair count's bound is rigorous
(|N_grid - N_exact| <= sum of the boundary counts), the value's holds under the
stated reading of each boundary lag vector's mean.

Map cells
---------
A variogram map puts a pair in cell (I, J) when its separation h has
floor(h_x / S + 1/2) = I and floor(h_y / S + 1/2) = J, S the map's cell size. A pair
binned in cells k and k + s has h = s c + (u_head - u_tail), u a sample's offset from its
cell's lower-left corner. The offsets are measured (one pass over the samples,
:func:`lagwise.core.variography.gridded.offset_spread`): along x every difference lies
within w_x = (largest - smallest offset along x) plus a rounding margin (of the offsets
and of the exact path's h), at most about c, and likewise w_y; so h lies in the rectangle
of half-sides (w_x, w_y) about s c (not a disk: map cells are squares with the same axes).
Along x, the map columns that rectangle reaches run from floor((s_x c - w_x) / S + 1/2) to
floor((s_x c + w_x) / S + 1/2), and likewise along y. A lag vector whose two ranges are
single columns and rows is a *core* lag vector of that cell; the others (within w of a
cell edge along an axis) are *boundary* lag vectors of every cell of their ranges. Pairs
within one grid cell (s = 0, each counted as h and as -h, as the map counts every pair)
are boundary pairs of the cells the rectangle about 0 reaches (the origin cell when
w < S / 2). The extremes then follow as for classes, cell by cell, over the ordered lag
vectors (s and -s both, as the map holds each pair twice), and so do the relative bound
and the (rigorous) pair-count bound. With the map's grid cells (c = S / m, m odd,
:mod:`lagwise.core.variography.binned_maps`) each edge lies half a grid cell from the
nearest column of lag vectors on either side, so two columns (rows) per edge are boundary
lag vectors and those a whole cell or more away are core; a fixed reach of c with a
relative slack (before the offsets were measured) made the columns whose rectangle
touches the edge only at its rim boundary lag vectors too.

Narrower crossing shares from the offsets' moments: analysed, not used
-----------------------------------------------------------------------
Which pairs of a boundary lag vector cross an edge depends on d = u_head - u_tail, not on
a product of a head term and a tail term, so no sum over node pairs gives the crossing
pairs' sums; but the sums of d and d^2 over each lag vector's pairs are such sums
(per-node sums of the offsets and of their squares: two more forward and two inverse
transforms per axis, 9 in all with the counts'). One of the pairs of lag vector s lies in
a column i above the grid's own g = floor(s_x c / S + 1/2) only if
d_x >= t = (i - 1/2) S - s_x c, and by Cantelli's inequality the share of its pairs with
d_x >= t is at most 1 - (t - mu)^2 / E[(d_x - t)^2] when t > mu (mu and E[...] over
those pairs): with the odd m of :mod:`lagwise.core.variography.binned_maps` the columns
nearest an edge sit c / 2 from it, and for samples spread evenly within cells (mu = 0,
E[d^2] = c^2 / 6) the cap is 0.4 instead of 1 (the actual share 1/8); on an edge
(t = 0) it is 1 whatever the variance, and no polynomial in d bounds the crossing
indicator 1[d >= t] closely near t (its jump lies where the pairs are densest).

Those caps are strict bounds on counts, but they do not give a tighter rigorous value
bound. Capping each share while it still carries its lag vector's mean removes the slack
that made that reading hold: on 120 samples of white noise (tests/client/test_sdk.py,
cells of 10) a map cell's actual error reached 1.17 times such a capped bound (1.49 times
when the lag vectors the caps show cannot move, mostly of one pair, were taken as exact),
because the one or two pairs of a lag vector that cross carry their own values, not the
lag vector's mean (on 20,000 samples the capped bound would have flagged 25-33 % of the
automatic map's cells instead of nearly all, the largest error at 0.88 of it). A bound
free of the reading must let the crossing pairs be those of largest (smallest) value:
with each lag vector's sum of squared pair values (more transforms) a subset of k of its
N pairs sums to k mean +- sqrt(k (N - k) / N) times the root of the sum of squared
deviations (exact for N <= 2), but for lag vectors of about a hundred pairs, as on
20,000 samples, that moves a map cell's value by some 3 % by estimate (not measured; the
share of pairs that may cross has a median of 22-37 % there), wider than the bound with
the reading. The caps alone would narrow only ``pair_bound``, for 2.3 times the
transforms' CPU time of the semivariance map (200,000 samples: 0.76 against 0.33 CPU s)
and a memory estimate 22 % larger (170 -> 208 MiB), which under the default budget took a
coarser grid and more flagged cells (200,000 samples, automatic cells: 28 % -> 33 %); they
are not computed.

What sets the bound: halving c halves the boundary share, but it also quarters the pairs
of each lag vector, and the worst case takes every boundary lag vector whose mean lies
above (below) the cell's value. Where lag vectors hold few pairs their means scatter
widely (the pairs of one lag vector sit at different places of the field), so a finer
grid alone lowers the bound little (1/128 of a map cell, 1.48 GiB: still 17 % of the
cells flagged on 20,000 samples). Measured offsets and odd m (3 December 2026, share of
map cells above tolerance 0.01, before -> after, same samples): 20,000 samples (seeds
1-3), automatic cells 99.9-100 % -> 99.9-100 %, cells of 25 100 % -> 89-90 % (median bound
2.0 % -> 1.2 %, largest actual error 0.73 % -> 0.17 %), cells of 6 100 % -> 100 %; largest
actual error over the bound 0.36 -> 0.33; 200,000 samples (seed 7, default budget),
automatic cells 28 % -> 26 %, cells of 10 54 % -> 41 %.
"""

from __future__ import annotations

import math

import numpy as np

from .directions import DirectionClass

BOUND_STATISTICS = ("semivariance", "covariance_noncentered")


def _boundary_entries(
    hx: np.ndarray, hy: np.ndarray, direction: DirectionClass, edges: np.ndarray, radius: float
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(class, lag index, is_core) entries: every class each lag vector's disk may touch in this direction."""
    az = math.radians(direction.azimuth)
    ux, uy = math.sin(az), math.cos(az)
    hh2 = hx * hx + hy * hy
    d = np.sqrt(hh2)
    proj = hx * ux + hy * uy
    perp = hx * uy - hy * ux
    near = np.zeros(hx.shape, dtype=bool)
    inside = hh2 > 0.0
    if direction.tolerance < 90.0:
        tol = math.radians(direction.tolerance)
        inside &= proj * proj >= hh2 * (math.cos(tol) - 1e-12) ** 2
        for side in (az - tol, az + tol):
            vx, vy = math.sin(side), math.cos(side)
            near |= np.abs(hx * vy - hy * vx) < radius
    if direction.bandwidth is not None and direction.bandwidth <= 1e150:
        inside &= perp * perp <= direction.bandwidth**2
        near |= np.abs(np.abs(perp) - direction.bandwidth) < radius
    maybe = inside | near
    sure = inside & ~near
    count = len(edges) - 1
    low = np.searchsorted(edges, d - radius, side="right") - 1
    high = np.searchsorted(edges, d + radius, side="left") - 1
    low, high = np.maximum(low, 0), np.minimum(high, count - 1)
    classes, lags, core = [], [], []
    candidates = np.flatnonzero(maybe & (high >= low))
    width = high[candidates] - low[candidates]
    for t in range(int(width.max(initial=-1)) + 1):
        pick = candidates[width >= t]
        c = low[pick] + t
        is_core = sure[pick] & (d[pick] - radius >= edges[c]) & (d[pick] + radius < edges[c + 1])
        classes.append(c)
        lags.append(pick)
        core.append(is_core)
    if not classes:
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64), np.zeros(0, dtype=bool)
    return np.concatenate(classes), np.concatenate(lags), np.concatenate(core)


def _extreme(cls, ratio_key, num, den, core_num, core_den, count, largest: bool) -> np.ndarray:
    """Per class, the largest (or smallest) of (core_num + sum num) / (core_den + sum den) over every
    subset of the class's boundary entries (``ratio_key`` = num / den, den > 0).

    The extreme of this linear-fractional function over the box of shares is taken by a prefix of
    the entries in order of ratio (module docstring), found without sorting by Dinkelbach's
    iteration (Dinkelbach 1967, Management Science 13(7)): from the core's value v, take the
    entries whose ratio exceeds v (falls below it, for the smallest), recompute v, and repeat
    while v improves. Each step is a prefix's value, v improves strictly and there are finitely
    many prefixes, so it stops, at the extreme (the value no entry can raise). A class without
    core pairs takes its best entry alone: a mean never exceeds its largest member.
    """
    sign = 1.0 if largest else -1.0
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where(core_den > 0, core_num / core_den, np.nan)
    if not cls.size:
        return out
    key = sign * ratio_key
    best = np.full(count, -np.inf)
    np.maximum.at(best, cls, key)
    touched = np.isfinite(best)
    alone = touched & ~(core_den > 0)
    out[alone] = sign * best[alone]
    active = touched & (core_den > 0) & (best > sign * out)
    above = key > sign * out[cls]  # entries that can raise their class (the others never will: v only rises)
    cls, key, num, den = cls[above], key[above], num[above], den[above]
    while active.any():
        level = np.where(active, sign * out, np.inf)
        take = key > level[cls]
        top = core_num + np.bincount(cls[take], weights=num[take], minlength=count)
        bottom = core_den + np.bincount(cls[take], weights=den[take], minlength=count)
        with np.errstate(divide="ignore", invalid="ignore"):
            value = top / bottom
        active &= sign * value > sign * out
        out[active] = value[active]
        cls, key, num, den = cls[take], key[take], num[take], den[take]
    return out


def relative_bounds(
    hx: np.ndarray,
    hy: np.ndarray,
    count: np.ndarray,
    numerator: np.ndarray,
    within: tuple[float, float],
    directions: list[DirectionClass],
    edges: list[np.ndarray],
    radius: float,
    grid_values: np.ndarray,
) -> tuple[np.ndarray, np.ndarray]:
    """Relative error bound and pair-count bound of every class (module docstring).

    Parameters
    ----------
    hx, hy, count, numerator : ndarray, shape (m,)
        Half-plane lag vectors (coordinate units) with pairs, their pair counts and
        statistic numerators A_s.
    within : (float, float)
        Pairs within one cell and their numerator (the s = 0 lag vector).
    grid_values : ndarray, shape (ndir, kmax)
        The grid method's class values (NaN where undefined).

    Returns
    -------
    (relative, pairs) : ndarrays of shape (ndir, kmax)
        Relative bound of each value (NaN where undefined or the value is 0) and the
        largest difference of the pair count from the exact one.
    """
    kmax = grid_values.shape[1]
    relative = np.full(grid_values.shape, np.nan)
    pairs = np.zeros(grid_values.shape)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(count > 0, numerator / count, 0.0)
    for k, (direction, e) in enumerate(zip(directions, edges, strict=True)):
        cls, lag, core = _boundary_entries(hx, hy, direction, e, radius)
        core_num = np.bincount(cls[core], weights=numerator[lag[core]], minlength=kmax)[:kmax]
        core_den = np.bincount(cls[core], weights=count[lag[core]], minlength=kmax)[:kmax]
        b_cls, b_num, b_den = cls[~core], numerator[lag[~core]], count[lag[~core]]
        b_key = ratio[lag[~core]]
        if within[0] > 0:
            first = np.flatnonzero(e[:-1] < radius)
            b_cls = np.r_[b_cls, first]
            b_num = np.r_[b_num, np.full(first.size, within[1])]
            b_den = np.r_[b_den, np.full(first.size, within[0])]
            b_key = np.r_[b_key, np.full(first.size, within[1] / within[0])]
        keep = b_den > 0
        b_cls, b_num, b_den, b_key = b_cls[keep], b_num[keep], b_den[keep], b_key[keep]
        pairs[k] = np.bincount(b_cls, weights=b_den, minlength=kmax)[:kmax]
        hi = _extreme(b_cls, b_key, b_num, b_den, core_num, core_den, kmax, True)
        lo = _extreme(b_cls, b_key, b_num, b_den, core_num, core_den, kmax, False)
        v = grid_values[k]
        with np.errstate(divide="ignore", invalid="ignore"):
            relative[k] = np.where(np.abs(v) > 0, np.fmax(hi - v, v - lo) / np.abs(v), np.nan)
    return relative, pairs


def _map_spans(offsets: np.ndarray, spread: float, size: float) -> tuple[np.ndarray, np.ndarray]:
    """First and last map index, floor(h / size + 1/2), that separations within ``spread`` of each offset reach.

    ``spread`` already holds the rounding margin of the offsets and of the exact path's h
    (:func:`lagwise.core.variography.gridded.offset_spread`); the slack added here covers the rounding
    of the division and the addition of 1/2 (a few units in the last place of |h| and of ``size``).
    """
    slack = spread + 8.0 * np.finfo(np.float64).eps * (np.abs(offsets) + spread + size)
    low = np.floor((offsets - slack) / size + 0.5).astype(np.int64)
    high = np.floor((offsets + slack) / size + 0.5).astype(np.int64)
    return low, high


def _core_sums(values: np.ndarray, cx: np.ndarray, cy: np.ndarray, cells: int) -> np.ndarray:
    """Sums of ``values`` (rows by lag y, columns by lag x) over each cell's core lag vectors, shape (W, W).

    ``cx``, ``cy``: the map index of each lag column and row whose span is a single index, else a
    value outside [-cells, cells]; the grouped sums are two products with 0/1 matrices (exact).
    """
    index = np.arange(-cells, cells + 1)
    columns = (cx[None, :] == index[:, None]).astype(np.float64)  # (W, lag columns)
    rows = (cy[None, :] == index[:, None]).astype(np.float64)  # (W, lag rows)
    return rows @ (values @ columns.T)


def map_bounds(
    count: np.ndarray,
    numerator: np.ndarray,
    reach: tuple[int, int],
    within: tuple[float, float],
    cell: float,
    spread: tuple[float, float],
    cell_size: float,
    cells: int,
    grid_values: np.ndarray,
) -> tuple[np.ndarray, np.ndarray]:
    """Relative error bound and pair-count bound of every map cell (module docstring, Map cells).

    Parameters
    ----------
    count, numerator : ndarray, shape (2 ry + 1, 2 rx + 1)
        Pair counts and statistic numerators A_s of every ordered lag vector s = (i, j),
        indexed [j + ry, i + rx] (:class:`lagwise.core.variography.fft.LagSums`); s = 0 is ignored.
    reach : (int, int)
        (rx, ry), lag vectors in grid cells.
    within : (float, float)
        Pairs within one grid cell and their numerator (each pair once).
    cell, cell_size : float
        The grid's cell side c and the map's cell side S, coordinate units.
    spread : (float, float)
        Largest |u_head - u_tail| of two samples' offsets within their grid cells along x and y,
        rounding margin included (at most about c; :func:`lagwise.core.variography.gridded.offset_spread`).
    cells : int
        Map cells on each side of the origin.
    grid_values : ndarray, shape (2 cells + 1, 2 cells + 1)
        The grid method's map (rows by hy), NaN where undefined.

    Returns
    -------
    (relative, pairs) : ndarrays of shape (2 cells + 1, 2 cells + 1)
        Relative bound of each cell's value (NaN where undefined or the value is 0) and the
        largest difference of its pair count from the exact map's.
    """
    rx, ry = reach
    width = 2 * cells + 1
    lx, hx = _map_spans(np.arange(-rx, rx + 1) * cell, spread[0], cell_size)
    ly, hy = _map_spans(np.arange(-ry, ry + 1) * cell, spread[1], cell_size)
    outside = cells + 1
    cx = np.where(lx == hx, lx, outside)
    cy = np.where(ly == hy, ly, outside)
    core_num = _core_sums(numerator, cx, cy, cells)
    core_den = _core_sums(count, cx, cy, cells)
    if cx[rx] == 0 and cy[ry] == 0:  # the s = 0 lag holds each sample with itself, no pair
        core_num[cells, cells] -= numerator[ry, rx]
        core_den[cells, cells] -= count[ry, rx]
    boundary = ~((cx[None, :] != outside) & (cy[:, None] != outside)) & (count > 0)
    boundary[ry, rx] = False
    jj, ii = np.nonzero(boundary)
    del boundary
    b_num, b_den = numerator[jj, ii], count[jj, ii]
    low_i, high_i, low_j, high_j = lx[ii], hx[ii], ly[jj], hy[jj]
    parts_cell, parts_lag = [], []
    for ti in range(int((high_i - low_i).max(initial=0)) + 1):
        for tj in range(int((high_j - low_j).max(initial=0)) + 1):
            i, j = low_i + ti, low_j + tj
            pick = np.flatnonzero((i <= high_i) & (j <= high_j) & (np.abs(i) <= cells) & (np.abs(j) <= cells))
            parts_cell.append((j[pick] + cells) * width + (i[pick] + cells))
            parts_lag.append(pick)
    cls = np.concatenate(parts_cell) if parts_cell else np.zeros(0, dtype=np.int64)
    lag = np.concatenate(parts_lag) if parts_lag else np.zeros(0, dtype=np.int64)
    e_num, e_den = b_num[lag], b_den[lag]
    if within[0] > 0:
        i0, i1 = _map_spans(np.zeros(1), spread[0], cell_size)
        j0, j1 = _map_spans(np.zeros(1), spread[1], cell_size)
        span_i = np.arange(max(int(i0[0]), -cells), min(int(i1[0]), cells) + 1)
        span_j = np.arange(max(int(j0[0]), -cells), min(int(j1[0]), cells) + 1)
        origin = ((span_j[:, None] + cells) * width + (span_i[None, :] + cells)).ravel()
        cls = np.r_[cls, origin]
        e_num = np.r_[e_num, np.full(origin.size, 2.0 * within[1])]
        e_den = np.r_[e_den, np.full(origin.size, 2.0 * within[0])]
    key = e_num / e_den
    flat_num, flat_den = core_num.ravel(), core_den.ravel()
    pairs = np.bincount(cls, weights=e_den, minlength=width * width)
    hi = _extreme(cls, key, e_num, e_den, flat_num, flat_den, width * width, True)
    lo = _extreme(cls, key, e_num, e_den, flat_num, flat_den, width * width, False)
    v = grid_values.ravel()
    with np.errstate(divide="ignore", invalid="ignore"):
        relative = np.where(np.abs(v) > 0, np.fmax(hi - v, v - lo) / np.abs(v), np.nan)
    return relative.reshape(width, width), pairs.reshape(width, width)
