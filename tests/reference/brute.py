"""Brute-force reference: enumerate every pair explicitly and apply the definitions.

Distances come from ``scipy.spatial.distance.pdist``; direction membership uses
explicit angles (atan2), not the projections the kernels use; statistics are
written from their published formulas on the arrays of pair values.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.spatial.distance import pdist


def pair_table(coords: np.ndarray, values: np.ndarray):
    """Every unordered pair (i < j): indices, separation vectors and pdist distances."""
    n = coords.shape[0]
    i, j = np.triu_indices(n, k=1)
    h = np.zeros((i.size, 3))
    h[:, : coords.shape[1]] = coords[j] - coords[i]
    return i, j, h, pdist(coords)


def members(
    h, d, edges, azimuth=0.0, tolerance=90.0, bandwidth=None, dip=0.0, dip_tolerance=90.0, vertical_bandwidth=None
):
    """Boolean mask of member pairs, class index and orientation (+1: tail i, head j)."""
    hx, hy, hz = h[:, 0], h[:, 1], h[:, 2]
    hh = np.hypot(hx, hy)
    pair_az = np.degrees(np.arctan2(hx, hy)) % 180.0
    off = np.abs(pair_az - azimuth % 180.0)
    off = np.minimum(off, 180.0 - off)
    ok = (hh == 0) | (off <= tolerance + 1e-9)
    if bandwidth is not None:
        ok &= (hh == 0) | (hh * np.sin(np.radians(off)) <= bandwidth)
    az = math.radians(azimuth)
    proj = hx * math.sin(az) + hy * math.cos(az)
    perp = hx * math.cos(az) - hy * math.sin(az)
    sign = np.where(
        proj > 0, 1, np.where(proj < 0, -1, np.where(perp > 0, 1, np.where(perp < 0, -1, np.where(hz >= 0, 1, -1))))
    )
    if dip_tolerance < 90.0:
        pair_dip = np.degrees(np.arctan2(-hz * sign, hh))
        gap = np.where(hh == 0, 90.0 - abs(dip), np.abs(pair_dip - dip))
        ok &= gap <= dip_tolerance + 1e-9
    if vertical_bandwidth is not None:
        dp = math.radians(dip)
        w = np.array([math.sin(az) * math.sin(dp), math.cos(az) * math.sin(dp), math.cos(dp)])
        ok &= np.abs(h @ w) <= vertical_bandwidth
    klass = np.searchsorted(edges, d, side="right") - 1
    ok &= (klass >= 0) & (klass < len(edges) - 1) & (d > 0)
    return ok, klass, sign


def class_statistics(statistic, values, i, j, ok, klass, sign, nclasses):
    """Per-class (count, mean distance placeholder, value) by the published formulas."""
    tail = np.where(sign > 0, values[i], values[j])
    head = np.where(sign > 0, values[j], values[i])
    out = []
    for c in range(nclasses):
        m = ok & (klass == c)
        t, hd = tail[m], head[m]
        n = m.sum()
        if n == 0:
            out.append((0, None))
            continue
        delta = hd - t
        if statistic == "semivariance":
            v = np.sum(delta**2) / (2 * n)  # Matheron (1962)
        elif statistic == "semivariance_robust":
            v = np.mean(np.sqrt(np.abs(delta))) ** 4 / (2 * (0.457 + 0.494 / n))  # Cressie & Hawkins (1980)
        elif statistic == "semivariance_median":
            v = 2.198 * np.median(np.abs(delta)) ** 2 / 2  # Dowd (1984)
        elif statistic == "madogram":
            v = np.sum(np.abs(delta)) / (2 * n)
        elif statistic == "covariance":
            v = np.mean(t * hd) - t.mean() * hd.mean()
        elif statistic == "covariance_noncentered":
            v = np.mean(t * hd)
        elif statistic == "correlogram":
            v = (np.mean(t * hd) - t.mean() * hd.mean()) / (t.std() * hd.std())
        elif statistic == "pairwise_relative":
            v = np.sum((delta / ((t + hd) / 2)) ** 2) / (2 * n)
        out.append((int(n), float(v)))
    return out
