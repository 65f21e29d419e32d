"""Samples at the same location: the duplicate search behind every duplicates policy.

Conventions
-----------
* Two samples share a location when every coordinate is equal as a float64 number
  (``-0.0`` equals ``0.0``; there is no tolerance). Coordinates are finite (validated).
* Locations are numbered as ``numpy.unique(coords, axis=0)`` numbers them: rows in
  lexicographic order, x first.
"""

from __future__ import annotations

import numpy as np

# Odd 64-bit constants of a multiplicative hash (the golden ratio's and a widely used mixer's).
_MULTIPLIERS = (np.uint64(0x9E3779B97F4A7C15), np.uint64(0xBF58476D1CE4E5B9), np.uint64(0x94D049BB133111EB))


def locations(coords: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The distinct locations of ``coords`` (n, d), as ``numpy.unique(coords, axis=0, return_index=True,
    return_inverse=True, return_counts=True)`` numbers them.

    Returns the input index of each location's first sample, each sample's location and each
    location's sample count. One stable ``lexsort`` of the columns.
    """
    order = np.lexsort(coords.T[::-1])
    ordered = coords[order]
    starts = np.ones(len(order), dtype=bool)
    np.any(ordered[1:] != ordered[:-1], axis=1, out=starts[1:])
    inverse = np.empty(len(order), dtype=np.intp)
    inverse[order] = np.cumsum(starts) - 1
    first = np.flatnonzero(starts)
    return order[first], inverse, np.diff(np.append(first, len(order)))


def _row_hashes(coords: np.ndarray) -> np.ndarray:
    """A 64-bit hash of each row's coordinates; equal rows (``-0.0`` read as ``0.0``) hash alike.

    Each step (xor a coordinate's bits, multiply by an odd constant modulo 2^64) is a bijection
    of the running hash, so rows that differ in one coordinate only never collide.
    """
    hashes = np.zeros(coords.shape[0], dtype=np.uint64)
    column = np.empty(coords.shape[0], dtype=np.float64)
    for k in range(coords.shape[1]):
        np.add(coords[:, k], 0.0, out=column)  # -0.0 + 0.0 is +0.0: one bit pattern per number
        hashes ^= column.view(np.uint64)
        hashes *= _MULTIPLIERS[k]
    return hashes


def repeated_locations(coords: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The locations of ``coords`` (n, d) that hold more than one sample.

    Returns
    -------
    group : ndarray of intp, shape (n,)
        Each sample's repeated location, numbered 0, 1, ... in the order of :func:`locations`
        (lexicographic); -1 for a sample alone at its location.
    counts : ndarray of intp, shape (g,)
        The number of samples at each repeated location.

    Notes
    -----
    A sort of one 64-bit hash per row (O(n log n), a few vector passes) finds the rows whose
    hash repeats; only those candidates go through the exact comparison of :func:`locations`,
    so a set without duplicates costs one sort of n integers instead of a lexsort of d columns
    (about ten times quicker at 10^7 samples), and the answer is the exact one whatever the
    hash's collisions.
    """
    n = coords.shape[0]
    group = np.full(n, -1, dtype=np.intp)
    hashes = _row_hashes(coords)
    ordered = np.sort(hashes)
    repeats = ordered[1:][ordered[1:] == ordered[:-1]]
    if repeats.size == 0:
        return group, np.zeros(0, dtype=np.intp)
    repeats = np.unique(repeats)
    where = np.minimum(np.searchsorted(repeats, hashes), repeats.size - 1)
    candidates = np.flatnonzero(repeats[where] == hashes)
    _, inverse, counts = locations(coords[candidates])
    several = counts > 1
    number = np.cumsum(several) - 1
    found = several[inverse]
    group[candidates[found]] = number[inverse[found]]
    return group, counts[several]


def kept_rows(group: np.ndarray) -> np.ndarray:
    """The input index of the samples a duplicates policy keeps: each single sample and the first
    (lowest index) of each repeated location, in input order."""
    keep = group < 0
    members = np.flatnonzero(~keep)
    _, first = np.unique(group[members], return_index=True)
    keep[members[first]] = True
    return np.flatnonzero(keep)
