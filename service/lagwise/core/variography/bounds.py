"""Error bounds of the grid method: how far a class value on binned samples can lie from the exact one.

Derivation
----------
Scattered samples are binned on square cells of side c. A pair whose samples sit in
cells k and k + s is classified by the cells' offset s = (i c, j c); its true
separation differs from s by less than c along each axis, so it lies in the open
disk of radius r = c sqrt(2) (a cell's diagonal) about s. Hence:

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
    """Per class, the extreme of (core_num + prefix num) / (core_den + prefix den) over ratio-sorted prefixes."""
    order = np.lexsort((-ratio_key if largest else ratio_key, cls))
    c, a, n = cls[order], num[order], den[order]
    starts = np.flatnonzero(np.r_[True, c[1:] != c[:-1]]) if c.size else np.zeros(0, dtype=np.int64)
    cum_a, cum_n = np.cumsum(a), np.cumsum(n)
    base_a = np.repeat(np.r_[0.0, cum_a][starts], np.diff(np.r_[starts, c.size]))
    base_n = np.repeat(np.r_[0.0, cum_n][starts], np.diff(np.r_[starts, c.size]))
    top = core_num[c] + cum_a - base_a
    bottom = core_den[c] + cum_n - base_n
    with np.errstate(divide="ignore", invalid="ignore"):
        values = np.where(bottom > 0, top / bottom, np.nan)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where(core_den > 0, core_num / core_den, np.nan)
    if c.size:
        pick = np.fmax.reduceat(values, starts) if largest else np.fmin.reduceat(values, starts)
        out[c[starts]] = np.fmax(out[c[starts]], pick) if largest else np.fmin(out[c[starts]], pick)
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
