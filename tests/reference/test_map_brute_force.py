"""Variogram maps against brute-force enumeration (scipy pdist pairs, cells by explicit floor rule)."""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.variography.maps import variogram_map


@pytest.mark.parametrize("statistic", ["semivariance", "madogram", "covariance", "semivariance_median"])
def test_map_matches_brute_force(statistic, rng):
    coords = rng.uniform(0, 40, (120, 2))
    values = rng.normal(3, 1, 120)
    s, k = 4.0, 4
    result = variogram_map(
        build_sample_set(values, coords[:, 0], coords[:, 1]), cell_size=s, cells=k, statistic=statistic
    )
    i, j = np.triu_indices(120, k=1)
    h = coords[j] - coords[i]
    # Each pair as h (tail i, head j) and as -h (tail j, head i).
    hx = np.concatenate([h[:, 0], -h[:, 0]])
    hy = np.concatenate([h[:, 1], -h[:, 1]])
    tail = np.concatenate([values[i], values[j]])
    head = np.concatenate([values[j], values[i]])
    col = np.floor(hx / s + 0.5).astype(int) + k
    row = np.floor(hy / s + 0.5).astype(int) + k
    inside = (col >= 0) & (col <= 2 * k) & (row >= 0) & (row <= 2 * k)
    for r in range(2 * k + 1):
        for c in range(2 * k + 1):
            m = inside & (row == r) & (col == c)
            assert result.pairs[r, c] == m.sum()
            got = result.values[r][c]
            if m.sum() == 0:
                assert got is None
                continue
            t, hd = tail[m], head[m]
            if statistic == "semivariance":
                expected = np.mean((hd - t) ** 2) / 2
            elif statistic == "madogram":
                expected = np.mean(np.abs(hd - t)) / 2
            elif statistic == "covariance":
                expected = np.mean(t * hd) - t.mean() * hd.mean()
            else:
                expected = 2.198 * np.median(np.abs(hd - t)) ** 2 / 2  # Dowd (1984)
            assert got == pytest.approx(expected, rel=1e-9, abs=1e-12)
    assert result.hx.tolist() == (s * np.arange(-k, k + 1)).tolist()


def test_symmetric_statistic_map_is_centrosymmetric(rng):
    coords = rng.uniform(0, 40, (80, 2))
    result = variogram_map(build_sample_set(rng.normal(size=80), coords[:, 0], coords[:, 1]), cell_size=5.0, cells=3)
    assert np.array_equal(result.pairs, result.pairs[::-1, ::-1])
