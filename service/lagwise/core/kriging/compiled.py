"""Compiled covariance matrices of batched kriging systems (numba).

A moving neighbourhood builds one small system per target: the (k, k) covariances
of its neighbours and the (k, 1) covariances to the target. Built with numpy, each
entry passes through a dozen temporaries (separations, squares, ratios, powers); here
each entry is one loop iteration that reads two points and writes one number, with
the batch split over the threads. The families whose formulas are written here are
those of :data:`COMPILED_FAMILIES`, the same formulas as
:mod:`lagwise.core.modelling.models` (a test compares them to 1e-13); other families
(Matérn, stable, cardinal sine, circular, linear, power) use the numpy path.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

from ..variography import kernels as _threading  # noqa: F401  (sets numba's fork-safe threading layer first)

COMPILED_FAMILIES = {"spherical": 0, "exponential": 1, "gaussian": 2, "cubic": 3, "pentaspherical": 4}


@njit(cache=True, inline="always")
def unit_value(code, h, a):
    """Unit semivariance of family ``code`` at distance h with practical range a (the models' formulas)."""
    r = h / a
    if code == 1:
        return 1.0 - math.exp(-3.0 * r)
    if code == 2:
        return 1.0 - math.exp(-3.0 * r * r)
    if r >= 1.0:
        return 1.0
    if code == 0:
        return 1.5 * r - 0.5 * r**3.0
    if code == 3:
        return 7 * r**2.0 - 35 / 4 * r**3.0 + 7 / 2 * r**5.0 - 3 / 4 * r**7.0
    return 15 / 8 * r - 5 / 4 * r**3.0 + 3 / 8 * r**5.0


@njit(parallel=True, cache=True)
def add_structure(out, a, b, code, a_range, sill, c0, first):
    """Covariances of one structure between point sets, written into ``out`` (batch, m, q).

    out[t, i, j] = (c0 if first else out[t, i, j]) - sill * unit(|a[t, i] - b[t, j]|), with
    ``a`` (batch, m, d) and ``b`` (batch, q, d) in the structure's isotropic space.
    """
    batch, m, d = a.shape
    q = b.shape[1]
    for t in prange(batch):
        for i in range(m):
            for j in range(q):
                s = 0.0
                for c in range(d):
                    diff = a[t, i, c] - b[t, j, c]
                    s += diff * diff
                base = c0 if first else out[t, i, j]
                out[t, i, j] = base - sill * unit_value(code, math.sqrt(s), a_range)


def compiled_covariances(a: np.ndarray, b: np.ndarray, structures, c0: float) -> np.ndarray | None:
    """c0 minus the structures' semivariances between a (batch, m, d) and b (batch, q, d),
    or None when a family has no compiled formula or the shapes are not two equal batches."""
    if a.ndim != 3 or b.ndim != 3 or a.shape[0] != b.shape[0]:
        return None
    if any(s.family not in COMPILED_FAMILIES for s in structures):
        return None
    from .neighbourhood import to_search_space

    out = np.empty((a.shape[0], a.shape[1], b.shape[1]))
    for index, structure in enumerate(structures):
        ta, tb = a, b
        if not structure.anisotropy.isotropic:
            d = a.shape[-1]
            ta = to_search_space(a.reshape(-1, d), structure.anisotropy).reshape(a.shape)
            tb = to_search_space(b.reshape(-1, d), structure.anisotropy).reshape(b.shape)
        add_structure(
            out,
            np.ascontiguousarray(ta, dtype=np.float64),
            np.ascontiguousarray(tb, dtype=np.float64),
            COMPILED_FAMILIES[structure.family],
            float(structure.range),
            float(structure.partial_sill),
            float(c0),
            index == 0,
        )
    return out
