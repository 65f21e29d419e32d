"""The unconditional field at the sample locations, drawn jointly with the lattice.

Samples rarely sit on lattice nodes, and conditioning must use the field at the
samples themselves. Each sample's structural value is drawn from its Gaussian
distribution given the lattice nodes of a window around it (``WINDOW`` x ``WINDOW``
nodes) and up to ``EARLIER`` samples drawn before it nearby:

    Y(s) = a' Y(window) + b' Y(earlier) + sqrt(v) e,    e ~ N(0, 1),

with [a; b] = C_cc^-1 c_cs the simple-kriging weights of the conditioning set c and
v = C(0) - [a; b]' c_cs the simple-kriging variance (the conditional mean and
variance of a Gaussian vector; e.g. Rasmussen & Williams 2006, eq. A.6). A relative
jitter of ``JITTER`` x C(0) on the diagonal of C_cc keeps the systems of very smooth
models solvable; it changes the reproduced covariances by about that share of the sill. The draw
therefore reproduces exactly the covariance of a sample with its window's nodes,
with the nearby earlier samples and its own variance; covariances with nodes and
samples further away are those the window implies, which the screen effect makes
close to the model's (checked empirically in the tests). A sample on a lattice
node takes that node's value (a is that node's indicator, v = 0).

The weights depend on the model and the locations only: they are computed once and
applied to every realisation, as the sparse unit lower-triangular system
(I - B) Y_s = A Y_window + D e.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import sparse
from scipy.sparse.linalg import spsolve_triangular
from scipy.spatial import cKDTree

from ..kriging.systems import Covariance, KrigingSpec
from ..modelling.models import VariogramModel

WINDOW = 6
EARLIER = 8
PREPARE_CHUNK = 2000
JITTER = 1e-8


@dataclass(frozen=True)
class PointDraw:
    """Weights of the joint draw of the samples given the lattice.

    Attributes
    ----------
    nodes : ndarray of int, shape (n, WINDOW**2)
        Flat lattice index (x fastest) of each sample's window nodes.
    node_weights : ndarray, shape (n, WINDOW**2)
        Weights a of the window nodes.
    earlier : scipy.sparse.csr_matrix, shape (n, n)
        Weights b of earlier samples (strictly lower triangular).
    deviation : ndarray, shape (n,)
        sqrt(v), the conditional standard deviation.
    """

    nodes: np.ndarray
    node_weights: np.ndarray
    earlier: sparse.csr_matrix
    deviation: np.ndarray

    def draw(self, lattice: np.ndarray, rng: np.random.Generator) -> np.ndarray:
        """Right-hand side of one realisation: a' Y(window) + sqrt(v) e, shape (n,).

        ``lattice`` is the physical lattice (P_y, P_x); draws n standard normal numbers.
        """
        flat = lattice.ravel()
        return np.einsum("nw,nw->n", self.node_weights, flat[self.nodes]) + self.deviation * rng.standard_normal(
            self.deviation.size
        )

    def solve(self, right: np.ndarray) -> np.ndarray:
        """Structural values at the samples from right-hand sides (n, R): (I - B)^-1 right."""
        if self.earlier.nnz == 0:
            return right
        system = (sparse.identity(right.shape[0], format="csr") - self.earlier).tocsr()
        return np.asarray(spsolve_triangular(system, right, lower=True, unit_diagonal=True))


def window_origin(position: np.ndarray) -> np.ndarray:
    """Lowest lattice index of each window along an axis, from fractional positions (nodes)."""
    return np.floor(position).astype(np.int64) - (WINDOW // 2 - 1)


def prepare(
    structural: VariogramModel,
    positions: np.ndarray,
    spacing: tuple[float, float],
    lattice_shape: tuple[int, int],
) -> PointDraw:
    """Weights of the joint draw of the samples given the lattice.

    Parameters
    ----------
    structural : VariogramModel
        The model without its nugget.
    positions : ndarray, shape (n, 2)
        Fractional lattice positions of the samples (nodes from the lattice's first node).
    spacing : tuple of float
        Lattice spacing (dx, dy), coordinate units.
    lattice_shape : tuple of int
        Physical lattice nodes (P_x, P_y); every window lies inside it.
    """
    n = positions.shape[0]
    px = lattice_shape[0]
    step = np.asarray(spacing)
    cov = Covariance(structural, KrigingSpec(type="simple", mean=0.0))
    offsets = np.stack(np.meshgrid(np.arange(WINDOW), np.arange(WINDOW), indexing="xy"), axis=-1).reshape(-1, 2)
    low = np.column_stack([window_origin(positions[:, 0]), window_origin(positions[:, 1])])
    node_index = low[:, None, :] + offsets[None, :, :]  # (n, W^2, 2) as (ix, iy)
    flat = node_index[..., 1] * px + node_index[..., 0]
    coords = positions * step
    # Earlier samples within half a window, nearest first, at most EARLIER of them.
    k = min(n, EARLIER * 4 + 1)
    distance, neighbour = cKDTree(coords).query(coords, k=k)
    distance, neighbour = distance.reshape(n, k), neighbour.reshape(n, k)
    chosen = (neighbour < np.arange(n)[:, None]) & (distance <= WINDOW / 2 * float(step.max()))
    chosen &= np.cumsum(chosen, axis=1) <= EARLIER
    counts = chosen.sum(axis=1)
    w2 = WINDOW * WINDOW
    node_weights = np.empty((n, w2))
    deviation = np.empty(n)
    rows: list[np.ndarray] = [np.zeros(0, np.int64)]
    cols: list[np.ndarray] = [np.zeros(0, np.int64)]
    vals: list[np.ndarray] = [np.zeros(0)]
    if cov.c0 <= 0:  # no continuous part (a pure-nugget model): nothing to draw
        return PointDraw(flat, np.zeros((n, w2)), sparse.csr_matrix((n, n)), np.zeros(n))
    for count in np.unique(counts):
        members = np.flatnonzero(counts == count)
        for first in range(0, members.size, PREPARE_CHUNK):
            group = members[first : first + PREPARE_CHUNK]
            earlier = neighbour[group][chosen[group]].reshape(group.size, int(count))
            points = np.concatenate([node_index[group] * step, coords[earlier]], axis=1)
            c = cov.between(points, points)
            target = cov.between(points, coords[group][:, None, :])[..., 0]
            c[:, np.arange(c.shape[1]), np.arange(c.shape[1])] += JITTER * cov.c0
            weights = np.linalg.solve(c, target[..., None])[..., 0]
            variance = cov.c0 - np.einsum("gi,gi->g", weights, target)
            node_weights[group] = weights[:, :w2]
            deviation[group] = np.sqrt(np.where(variance > 1e-12 * cov.c0, variance, 0.0))
            rows.append(np.repeat(group, int(count)))
            cols.append(earlier.ravel())
            vals.append(weights[:, w2:].ravel())
    # A sample on a lattice node is that node (exactly, whatever the jitter).
    on_node = np.flatnonzero(np.all(np.abs(positions - np.rint(positions)) <= 1e-9, axis=1))
    if on_node.size:
        node = np.rint(positions[on_node]).astype(np.int64)
        flat[on_node, 0] = node[:, 1] * px + node[:, 0]
        node_weights[on_node] = 0.0
        node_weights[on_node, 0] = 1.0
        deviation[on_node] = 0.0
        rows, cols, vals = _drop_rows(rows, cols, vals, on_node)
    earlier_matrix = sparse.csr_matrix(
        (np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))), shape=(n, n)
    )
    return PointDraw(flat, node_weights, earlier_matrix, deviation)


def _drop_rows(rows, cols, vals, drop):
    """The sparse entries without those of rows ``drop``."""
    r, c, v = np.concatenate(rows), np.concatenate(cols), np.concatenate(vals)
    keep = ~np.isin(r, drop)
    return [r[keep]], [c[keep]], [v[keep]]
