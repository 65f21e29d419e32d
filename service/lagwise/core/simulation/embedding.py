"""Unconditional Gaussian fields on a regular lattice by circulant embedding.

A stationary covariance sampled on a P_x x P_y lattice is a block-Toeplitz matrix with
Toeplitz blocks. Embedded in a torus of M_x x M_y nodes (M >= 2P per axis) it becomes
block-circulant with circulant blocks, which the two-dimensional discrete Fourier
transform diagonalises: its eigenvalues are the transform of the covariance at the
torus separations (Dietrich & Newsam 1997, *SIAM J. Sci. Comput.* 18(4), 1088-1107).
When they are all non-negative,

    Y = FFT2( sqrt(lambda / M) * (e1 + i e2) ),    e1, e2 independent N(0, I)

has real and imaginary parts that are two independent fields whose covariance on the
torus, restricted to the physical P_x x P_y corner, is exactly the model's
(Dietrich & Newsam 1997, section 2; Wood & Chan 1994, *J. Comput. Graph. Stat.* 3(4)).

Conventions: the lattice array is indexed ``[iy, ix]`` (so a ravelled lattice runs x
fastest); separations wrap at M/2, and the rows and columns at exactly M/2 (never a
separation between physical nodes, since M >= 2P) average the two sign choices so the
embedded matrix stays symmetric for anisotropic models.

Negative eigenvalues: the embedding is enlarged (each axis by half) until the
negative eigenvalues hold at most :data:`NEGATIVE_SHARE` of the eigenvalues' total;
those left are set to zero. Since every covariance on the torus is an average of the
eigenvalues, zeroing them changes no covariance by more than that share of the sill.
If no embedding within ``max_nodes`` reaches it the request is refused.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import fft

from ..errors import LimitExceeded
from ..modelling.models import VariogramModel

NEGATIVE_SHARE = 1e-5
GROWTH = 1.5
MAX_ENLARGEMENTS = 12
EMBEDDING_WORK_BYTES = 48  # per torus node: eigenvalue roots (8), complex draw and transform (16 + 16), margin


@dataclass(frozen=True)
class Embedding:
    """A circulant embedding of a covariance on a lattice, ready to draw fields.

    Attributes
    ----------
    spacing : tuple of float
        Lattice spacing (dx, dy), coordinate units.
    physical : tuple of int
        Nodes of the physical lattice (P_x, P_y).
    torus : tuple of int
        Nodes of the embedding torus (M_x, M_y).
    roots : ndarray, shape (M_y, M_x)
        sqrt(max(lambda, 0) / M): the scaled roots of the eigenvalues.
    negative_share : float
        Sum of |negative eigenvalues| over the sum of |eigenvalues| (zeroed).
    enlargements : int
        How many times the torus was enlarged beyond the smallest one.
    """

    spacing: tuple[float, float]
    physical: tuple[int, int]
    torus: tuple[int, int]
    roots: np.ndarray
    negative_share: float
    enlargements: int

    @property
    def nodes(self) -> int:
        """Nodes of the torus, M_x M_y."""
        return self.torus[0] * self.torus[1]

    def draw_pair(self, rng: np.random.Generator, workers: int = 1) -> tuple[np.ndarray, np.ndarray]:
        """Two independent fields on the physical lattice, shape (P_y, P_x) each, mean 0.

        Draws 2 M standard normal numbers from ``rng`` (real parts, then imaginary parts).
        """
        my, mx = self.roots.shape
        noise = rng.standard_normal((2, my, mx))
        work = self.roots * (noise[0] + 1j * noise[1])
        field = fft.fft2(work, workers=workers, overwrite_x=True)
        px, py = self.physical
        corner = field[:py, :px]
        return np.ascontiguousarray(corner.real), np.ascontiguousarray(corner.imag)

    def as_dict(self) -> dict:
        return {
            "lattice_shape": list(self.physical),
            "embedding_shape": list(self.torus),
            "negative_eigenvalue_share": self.negative_share,
            "enlargements": self.enlargements,
        }


def _axis_lags(m: int) -> tuple[np.ndarray, np.ndarray]:
    """Signed torus separations (in nodes) of indexes 0..m-1; the two choices differ only at m/2."""
    j = np.arange(m)
    plus = np.where(j <= m // 2, j, j - m)
    minus = np.where(j < (m + 1) // 2, j, j - m)
    return plus, minus


def torus_covariance(structural: VariogramModel, spacing: tuple[float, float], torus: tuple[int, int]) -> np.ndarray:
    """The first row of the embedded matrix: C_s at the torus separations, shape (M_y, M_x)."""
    mx, my = torus
    sill = structural.sill
    assert sill is not None  # bounded models only (checked by the caller)
    lags_x, lags_y = _axis_lags(mx), _axis_lags(my)
    total = np.zeros((my, mx))
    for lx in lags_x:
        for ly in lags_y:
            hx, hy = np.meshgrid(lx * spacing[0], ly * spacing[1])
            h = np.column_stack([hx.ravel(), hy.ravel()])
            total += (sill - structural.semivariance(h)).reshape(my, mx)
    return total / 4.0


def _next_size(n: int) -> int:
    return int(fft.next_fast_len(max(int(n), 2), real=False))


def embedding_bytes(torus: tuple[int, int]) -> int:
    """Working memory of an embedding and one draw (bytes)."""
    return EMBEDDING_WORK_BYTES * torus[0] * torus[1]


def smallest_torus(physical: tuple[int, int]) -> tuple[int, int]:
    """The smallest FFT-friendly torus with at least 2P nodes per axis."""
    return (_next_size(2 * physical[0]), _next_size(2 * physical[1]))


def embed(
    structural: VariogramModel,
    spacing: tuple[float, float],
    physical: tuple[int, int],
    *,
    max_nodes: int,
    workers: int = 1,
) -> Embedding:
    """Find a non-negative circulant embedding of the structural covariance.

    Parameters
    ----------
    structural : VariogramModel
        The model without its nugget (the nugget is drawn apart, point by point); bounded.
    spacing : tuple of float
        Lattice spacing (dx, dy), coordinate units.
    physical : tuple of int
        Physical lattice nodes (P_x, P_y).
    max_nodes : int
        Largest torus (``LAGWISE_MAX_EMBEDDING_NODES``).
    workers : int
        Threads of the transforms.

    Raises
    ------
    LimitExceeded
        When the smallest torus, or the first torus without significant negative
        eigenvalues, has more than ``max_nodes`` nodes.
    """
    torus = smallest_torus(physical)
    for enlargement in range(MAX_ENLARGEMENTS + 1):
        nodes = torus[0] * torus[1]
        if nodes > max_nodes:
            break
        eigen = fft.fft2(torus_covariance(structural, spacing, torus), workers=workers).real
        negative = float(np.abs(eigen[eigen < 0]).sum())
        total = float(np.abs(eigen).sum())
        share = negative / total if total > 0 else 0.0  # a pure-nugget model has no continuous part
        if share <= NEGATIVE_SHARE:
            roots = np.sqrt(np.maximum(eigen, 0.0) / nodes)
            return Embedding(spacing, physical, torus, roots, share, enlargement)
        torus = (_next_size(math.ceil(GROWTH * torus[0])), _next_size(math.ceil(GROWTH * torus[1])))
    raise LimitExceeded(
        "LAGWISE_MAX_EMBEDDING_NODES",
        max_nodes,
        torus[0] * torus[1],
        f"The lattice of {physical[0]} x {physical[1]} nodes covers the grid and every sample; with this model "
        "its circulant embedding needs a larger torus before its eigenvalues are non-negative (the range is "
        "long compared with the lattice, or the model very smooth). Use a coarser grid, keep the grid and "
        "samples closer together, or a model with a shorter range or a nugget-free part that is less smooth.",
        "/grid",
    )
