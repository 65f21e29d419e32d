"""Compiled single passes over large scattered sets (numba): moments and binning on square cells.

Each function reads the samples once, so the grid method's cost on millions of
samples follows memory bandwidth rather than the number of numpy temporaries.
"""

from __future__ import annotations

import numpy as np
from numba import njit


@njit(cache=True)
def extent_and_mean(coords, values):
    """(x min, x max, y min, y max, value min, value max, value mean) of (n, 2) coordinates in one pass."""
    x_lo, x_hi, y_lo, y_hi = coords[0, 0], coords[0, 0], coords[0, 1], coords[0, 1]
    v_lo, v_hi, total = values[0], values[0], 0.0
    for k in range(values.size):
        x, y = coords[k, 0], coords[k, 1]
        x_lo = min(x_lo, x)
        x_hi = max(x_hi, x)
        y_lo = min(y_lo, y)
        y_hi = max(y_hi, y)
        v_lo = min(v_lo, values[k])
        v_hi = max(v_hi, values[k])
        total += values[k]
    return x_lo, x_hi, y_lo, y_hi, v_lo, v_hi, total / values.size


@njit(cache=True)
def bin_on_cells(coords, values, x0, y0, cell, nx, ny, mean):
    """Count, sum and sum of squares of the values centred on ``mean`` in each cell.

    Cell (i, j) = (floor((x - x0) / cell), floor((y - y0) / cell)), clipped to the grid;
    arrays of shape (ny * nx,), index j * nx + i.
    """
    count = np.zeros(nx * ny)
    total = np.zeros(nx * ny)
    squares = np.zeros(nx * ny)
    for k in range(values.size):
        i = min(int((coords[k, 0] - x0) / cell), nx - 1)
        j = min(int((coords[k, 1] - y0) / cell), ny - 1)
        b = j * nx + i
        v = values[k] - mean
        count[b] += 1.0
        total[b] += v
        squares[b] += v * v
    return count, total, squares


@njit(cache=True)
def offset_range(coords, x0, y0, cell, nx, ny):
    """(smallest, largest) offset of the samples from their cells' lower-left corners along x, then y.

    The cell index is :func:`bin_on_cells`'s (clipped to the grid), so a sample clipped into the last
    cell may have an offset of ``cell`` or more; returns (x low, x high, y low, y high), coordinate units.
    """
    x_lo, x_hi, y_lo, y_hi = np.inf, -np.inf, np.inf, -np.inf
    for k in range(coords.shape[0]):
        i = min(int((coords[k, 0] - x0) / cell), nx - 1)
        j = min(int((coords[k, 1] - y0) / cell), ny - 1)
        u = (coords[k, 0] - x0) - i * cell
        v = (coords[k, 1] - y0) - j * cell
        x_lo = min(x_lo, u)
        x_hi = max(x_hi, u)
        y_lo = min(y_lo, v)
        y_hi = max(y_hi, v)
    return x_lo, x_hi, y_lo, y_hi
