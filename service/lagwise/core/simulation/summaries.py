"""Summaries of an ensemble of realisations, built chunk of grid rows by chunk.

Per node (over the R realisations of that node): the e-type mean, the variance with
divisor R, the quantiles p10, p50, p90 (linear interpolation between order
statistics, Hyndman & Fan 1996, *Am. Stat.* 50(4), definition 7 -- numpy's default)
and, per threshold t, the share of realisations above t (strictly greater).
Per block (the grid nodes it covers): the block average of each realisation, its
mean over realisations and the share of realisations whose average exceeds t.
Over the whole grid: for each realisation the share of nodes above t, summarised
over realisations by its mean, p10, p50 and p90.

Every node's statistics come from all its realisations at once (exact order
statistics); a chunk covers whole rows of blocks so every block lies in one chunk.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

QUANTILES = (0.1, 0.5, 0.9)


@dataclass(frozen=True)
class BlockLayout:
    """How blocks tile the grid: ``nodes`` (kx, ky) grid nodes per block, ``shape`` blocks per axis."""

    nodes: tuple[int, int]
    shape: tuple[int, int]


@dataclass(frozen=True)
class Fraction:
    """Share of the grid above a threshold, over the realisations (0-1)."""

    mean: float
    p10: float
    p50: float
    p90: float


class Accumulator:
    """Collects the summaries of one ensemble; call :meth:`add` for consecutive chunks of grid rows.

    Parameters
    ----------
    grid_shape : tuple of int
        (nx, ny).
    realisations : int
        R.
    thresholds : tuple of float
        Original units.
    blocks : BlockLayout or None
    keep : bool
        Keep every realisation (``return_realisations``): an (R, nx ny) array.
    """

    def __init__(
        self,
        grid_shape: tuple[int, int],
        realisations: int,
        thresholds: tuple[float, ...],
        blocks: BlockLayout | None,
        keep: bool,
    ):
        nx, ny = grid_shape
        m = nx * ny
        self.nx = nx
        self.m = m
        self.thresholds = np.asarray(thresholds, dtype=np.float64)
        self.blocks = blocks
        self.mean = np.empty(m)
        self.variance = np.empty(m)
        self.quantiles = np.empty((len(QUANTILES), m))
        self.exceedance = np.empty((self.thresholds.size, m))
        self.above_counts = np.zeros((self.thresholds.size, realisations), dtype=np.int64)
        self.realisations = np.empty((realisations, m)) if keep else None
        if blocks is not None:
            count = blocks.shape[0] * blocks.shape[1]
            self.block_mean = np.empty(count)
            self.block_exceedance = np.empty((self.thresholds.size, count))

    def add(self, first_node: int, values: np.ndarray) -> None:
        """Add the realisations (c, R) of nodes first_node .. first_node + c - 1 (whole grid rows)."""
        c = values.shape[0]
        part = slice(first_node, first_node + c)
        self.mean[part] = values.mean(axis=1)
        self.variance[part] = values.var(axis=1)
        self.quantiles[:, part] = np.quantile(values, QUANTILES, axis=1)
        for j, t in enumerate(self.thresholds):
            above = values > t
            self.exceedance[j, part] = above.mean(axis=1)
            self.above_counts[j] += above.sum(axis=0)
        if self.realisations is not None:
            self.realisations[:, part] = values.T
        if self.blocks is not None:
            self._add_blocks(first_node, values)

    def _add_blocks(self, first_node: int, values: np.ndarray) -> None:
        assert self.blocks is not None
        (kx, ky), (bx, _) = self.blocks.nodes, self.blocks.shape
        rows = values.shape[0] // self.nx
        r = values.shape[1]
        # (rows of blocks, ky, blocks along x, kx, R) -> block averages (rows of blocks * bx, R)
        averages = values.reshape(rows // ky, ky, bx, kx, r).mean(axis=(1, 3)).reshape(-1, r)
        first_block = (first_node // self.nx) // ky * bx
        part = slice(first_block, first_block + averages.shape[0])
        self.block_mean[part] = averages.mean(axis=1)
        for j, t in enumerate(self.thresholds):
            self.block_exceedance[j, part] = (averages > t).mean(axis=1)

    def fractions(self) -> list[Fraction]:
        """Share of the grid above each threshold: mean, p10, p50, p90 over the realisations."""
        out = []
        for counts in self.above_counts:
            share = counts / self.m
            p10, p50, p90 = np.quantile(share, QUANTILES)
            out.append(Fraction(float(share.mean()), float(p10), float(p50), float(p90)))
        return out
