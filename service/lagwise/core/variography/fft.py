"""Pair sums of gridded data for every lag vector at once, by FFT (Marcotte 1996,
Computers & Geosciences 22(10)).

A grid holds at each node k a weight c_k (1 or 0 for a raster's present and missing
cells; the number of samples for scattered data binned on a grid), the sum S_k of
its values and the sum Q_k of their squares (values centred on the data mean, so
products keep their precision). For a lag vector s = (i, j) (nodes), the ordered
pairs (tail at node k, head at node k + s) have the sums

    count   = sum_k c_k c_(k+s)            tail  = sum_k S_k c_(k+s)
    head    = sum_k c_k S_(k+s)            tail2 = sum_k Q_k c_(k+s)
    head2   = sum_k c_k Q_(k+s)            product = sum_k S_k S_(k+s)

and the squared differences sum to square = tail2 + head2 - 2 product. These are exact
sums over every pair of samples in the two nodes. Each sum is a cross-correlation
corr(a, b)(s) = sum_k a_k b_(k+s), computed as irfft2(conj(rfft2 a) rfft2 b) on a
grid padded to at least n + reach along each axis (next_fast_len), so no lag wraps
around; corr(b, a)(s) = corr(a, b)(-s) gives the head sums from the tail sums. Three
forward and four inverse real transforms serve every class, direction and map cell.
The semivariance needs only count and square; square's spectrum is
conj(Q) C + conj(C) Q - 2 |S|^2 (hats omitted), so it takes three forward and two
inverse transforms. An inverse transform keeps only the lags up to the reach: the
inverse along y runs on every column of the spectrum, the one along x only on the
2 ry + 1 rows of the window (about half the work of a whole 2-D inverse).

Lag vectors are then classified with the pair engine's own rules
(:mod:`lagwise.core.variography.kernels`): separation h = (i dx, j dy), distance
sqrt(hx^2 + hy^2), class ``searchsorted(edges, d, "right") - 1`` within the
edges, direction membership proj^2 >= |h|^2 cos^2(tolerance) and perp^2 <=
bandwidth^2, tail and head oriented so that h . u >= 0 (ties toward azimuth + 90).
Each unordered pair is one lag vector of the half-plane j > 0 or (j = 0, i > 0).

Statistics available from these sums: pair counts, mean distance, semivariance,
covariance (centred and not) and the correlogram (:data:`FFT_STATISTICS`). The
madogram, the robust and median estimators and the pairwise relative semivariance
need each pair's own difference and are not sums of node products.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.fft

from ..deadline import check_deadline
from ..errors import FieldIssue, InvalidInput, LimitExceeded
from ..limits import Limits
from . import kernels as K
from . import spectra
from .directions import BAND2, COS2_TOL, UX, UY, DirectionClass, direction_table

FFT_STATISTICS = ("semivariance", "covariance", "covariance_noncentered", "correlogram")
WORKERS = 2
# Arrays alive at the peak of lag_sums, each the size of the padded grid in float64 (a half
# spectrum in complex128 takes the same): the padded layer and three spectra (two for the
# semivariance's sums alone).
SPECTRA_ALIVE = 4
SEMIVARIANCE_SPECTRA_ALIVE = 3
LAYERS = ("count", "total", "squares")


@dataclass(frozen=True)
class NodeSums:
    """Data on a regular grid of nodes (rows by y, columns by x).

    Attributes
    ----------
    count, total, squares : ndarray, shape (ny, nx)
        Weight c, sum S of centred values and sum Q of their squares at each node.
    spacing : tuple of float
        Node spacing (dx, dy), coordinate units.
    mean : float
        The value every sum was centred on.
    scale : float
        Largest absolute value (for rounding-noise thresholds).
    """

    count: np.ndarray
    total: np.ndarray
    squares: np.ndarray
    spacing: tuple[float, float]
    mean: float
    scale: float

    @property
    def shape(self) -> tuple[int, int]:
        """(ny, nx) nodes."""
        return self.count.shape

    def fill(self, layer: str, out: np.ndarray) -> None:
        """Write ``layer`` (one of :data:`LAYERS`) into ``out``, shape (ny, nx)."""
        np.copyto(out, getattr(self, layer))


@dataclass(frozen=True)
class RasterNodes:
    """A raster's cells as nodes, without arrays of their own: weight 1 at a present cell and 0
    at a missing one, S the value less ``mean`` (0 where missing), Q = S^2; formed on demand
    (:meth:`fill`), so the transforms' input is the only copy.

    Attributes
    ----------
    values : ndarray, shape (ny, nx)
        The raster's values (NaN where missing).
    present : ndarray of bool, shape (ny, nx)
        The cells holding a value.
    spacing, mean, scale
        As :class:`NodeSums`.
    """

    values: np.ndarray
    present: np.ndarray
    spacing: tuple[float, float]
    mean: float
    scale: float

    @property
    def shape(self) -> tuple[int, int]:
        """(ny, nx) nodes."""
        return self.values.shape

    def fill(self, layer: str, out: np.ndarray) -> None:
        """Write ``layer`` (one of :data:`LAYERS`) into ``out``, shape (ny, nx)."""
        if layer == "count":
            np.copyto(out, self.present)
            return
        np.subtract(self.values, self.mean, out=out)
        np.copyto(out, 0.0, where=~self.present)
        if layer == "squares":
            np.multiply(out, out, out=out)


@dataclass(frozen=True)
class LagSums:
    """Sums over ordered pairs (tail at node k, head at node k + s) for every lag vector
    s = (i, j), |i| <= reach[0], |j| <= reach[1]; arrays of shape (2 ry + 1, 2 rx + 1)
    indexed [j + ry, i + rx]. s = 0 includes each sample with itself: it is no pair."""

    count: np.ndarray
    square: np.ndarray
    tail: np.ndarray
    head: np.ndarray
    tail2: np.ndarray
    head2: np.ndarray
    product: np.ndarray
    reach: tuple[int, int]
    spacing: tuple[float, float]

    def separations(self) -> tuple[np.ndarray, np.ndarray]:
        """hx, hy (coordinate units) of every lag vector, arrays of the sums' shape."""
        rx, ry = self.reach
        hx = np.arange(-rx, rx + 1, dtype=np.float64) * self.spacing[0]
        hy = np.arange(-ry, ry + 1, dtype=np.float64) * self.spacing[1]
        return np.broadcast_to(hx[None, :], self.count.shape), np.broadcast_to(hy[:, None], self.count.shape)


def square_rounding(norms: tuple[float, float, float], shape: tuple[int, int], reach: tuple[int, int]) -> float:
    """Estimated rounding error of one lag vector's ``square`` sum (value units squared).

    ``norms`` are sum C^2, sum S^2 and sum Q^2 over the nodes (or upper bounds of them). The sum
    is corr(Q, C) + corr(C, Q) - 2 corr(S, S) by FFT, whose error in the 2-norm, and so in each
    element, is of order eps log2(P) ||a||_2 ||b||_2 for a correlation of a and b over P points
    (Higham 2002, Accuracy and Stability of Numerical Algorithms, section 24.1): here
    eps log2(P) (2 ||Q|| ||C|| + 2 ||S||^2). Against direct sums on grids of 20 to 300 nodes a
    side (trends, waves and noise, 10 % missing) the largest error was 0.09 of this estimate. It
    matters where a class's semivariance is tiny beside the field's variance (a strong trend with
    little local variation), where cancellation leaves only rounding.
    """
    c2, s2, q2 = norms
    py, px = padded_shape(shape, reach)
    return float(np.finfo(np.float64).eps) * math.log2(max(py * px, 2)) * (2.0 * math.sqrt(q2 * c2) + 2.0 * s2)


def padded_shape(shape: tuple[int, int], reach: tuple[int, int]) -> tuple[int, int]:
    """(rows, columns) of the transforms: at least n + reach along each axis, of fast length."""
    ny, nx = shape
    return scipy.fft.next_fast_len(ny + reach[1], real=True), scipy.fft.next_fast_len(nx + reach[0], real=True)


def fft_bytes(shape: tuple[int, int], reach: tuple[int, int], first_moments: bool = True, node_arrays: int = 3) -> int:
    """Working memory of :func:`lag_sums` in bytes: the arrays alive at its peak
    (:data:`SPECTRA_ALIVE`, or :data:`SEMIVARIANCE_SPECTRA_ALIVE` without the first moments), an
    inverse transform's window rows (complex, then real), the sums' windows and ``node_arrays``
    arrays of the grid's size (a binned grid holds three: counts, sums, squares; a raster none)."""
    py, px = padded_shape(shape, reach)
    spectrum = py * (px // 2 + 1) * 16
    alive = SPECTRA_ALIVE if first_moments else SEMIVARIANCE_SPECTRA_ALIVE
    window_rows = 2 * (2 * reach[1] + 1) * (px // 2 + 1) * 16
    window = (2 * reach[0] + 1) * (2 * reach[1] + 1) * 8
    return alive * spectrum + window_rows + 8 * window + node_arrays * shape[0] * shape[1] * 8


def transform_count(first_moments: bool) -> int:
    """Real 2-D FFTs of :func:`lag_sums`: forward transforms of the counts, sums and squares, then two
    inverse transforms (count, square) or, with the first moments, four."""
    return 3 + (4 if first_moments else 2)


def check_budget(
    shape: tuple[int, int],
    reach: tuple[int, int],
    limits: Limits,
    pointer: str,
    first_moments: bool = True,
    node_arrays: int = 3,
) -> int:
    """Refuse FFT work whose memory estimate (:func:`fft_bytes`) exceeds ``LAGWISE_MEMORY_BUDGET_BYTES``;
    returns the estimate."""
    need = fft_bytes(shape, reach, first_moments, node_arrays)
    if need > limits.memory_budget_bytes:
        py, px = padded_shape(shape, reach)
        raise LimitExceeded(
            "LAGWISE_MEMORY_BUDGET_BYTES",
            limits.memory_budget_bytes,
            need,
            f"The FFT of a {shape[1]} x {shape[0]} grid (padded to {px} x {py} for lags up to {reach[0]} x "
            f"{reach[1]} nodes) needs about {need / 2**20:.0f} MiB. Shorten the largest distance class, "
            "use a coarser grid, or send a smaller raster.",
            pointer,
        )
    return need


class _Transforms:
    """The forward and (windowed) inverse transforms of :func:`lag_sums` on one padded shape."""

    def __init__(self, nodes: NodeSums | RasterNodes, shape: tuple[int, int], reach: tuple[int, int]):
        self.nodes = nodes
        self.shape = shape
        self.reach = reach
        self.layer = np.zeros(shape)

    def forward(self, layer: str) -> np.ndarray:
        """Half spectrum (rows, columns // 2 + 1) of a node layer zero-padded to the transforms' shape."""
        ny, nx = self.nodes.shape
        self.nodes.fill(layer, self.layer[:ny, :nx])
        return scipy.fft.rfft2(self.layer, workers=WORKERS)

    def inverse(self, spectrum: np.ndarray) -> np.ndarray:
        """Lags -reach..reach of the circular correlation whose half spectrum is ``spectrum`` (overwritten).

        The 2-D inverse is the inverse along the rows' axis, then along the columns: only the
        2 ry + 1 rows of the window go through the second.
        """
        check_deadline()
        rx, ry = self.reach
        rows, columns = self.shape
        along_y = scipy.fft.ifft(spectrum, axis=0, overwrite_x=True, workers=WORKERS)
        window_rows = np.concatenate([along_y[rows - ry :], along_y[: ry + 1]])
        full = scipy.fft.irfft(window_rows, n=columns, axis=1, workers=WORKERS)
        return np.concatenate([full[:, columns - rx :], full[:, : rx + 1]], axis=1)


def _flat(spectrum: np.ndarray) -> np.ndarray:
    return spectrum.reshape(-1)


def lag_sums(nodes: NodeSums | RasterNodes, reach: tuple[int, int], first_moments: bool = True) -> LagSums:
    """The pair sums for lag vectors up to ``reach`` = (rx, ry) nodes (see the module docstring).

    ``first_moments=False`` computes count and square only (the semivariance's sums;
    the others are left zero), with two inverse transforms instead of four. Spectra are
    multiplied in place (:mod:`lagwise.core.variography.spectra`) and dropped after their last
    use, so at most :data:`SPECTRA_ALIVE` arrays of the padded size are alive at once.
    """
    t = _Transforms(nodes, padded_shape(nodes.shape, reach), reach)
    c_hat = t.forward("count")
    if first_moments:
        s_hat = t.forward("total")
        work = np.empty_like(c_hat)
        spectra.cross_into(_flat(work), _flat(s_hat), _flat(c_hat))
        tail = t.inverse(work)
        spectra.power_into(_flat(s_hat), _flat(s_hat))
        product = t.inverse(s_hat)
        del s_hat
        q_hat = t.forward("squares")
        del t.layer
        spectra.cross_into(_flat(work), _flat(q_hat), _flat(c_hat))
        del q_hat
        tail2 = t.inverse(work)
        del work
        spectra.power_into(_flat(c_hat), _flat(c_hat))
        count = np.rint(t.inverse(c_hat))  # products of whole numbers
        del c_hat
        # corr(c, S)(s) = corr(S, c)(-s): reverse both axes of the symmetric window.
        head, head2 = tail[::-1, ::-1].copy(), tail2[::-1, ::-1].copy()
        square = tail2 + head2 - 2.0 * product
    else:
        q_hat = t.forward("squares")
        spectra.twice_real_cross(_flat(q_hat), _flat(c_hat))  # conj(Q) C + conj(C) Q
        spectra.power_into(_flat(c_hat), _flat(c_hat))
        count = np.rint(t.inverse(c_hat))
        del c_hat
        s_hat = t.forward("total")
        del t.layer
        spectra.less_twice_power(_flat(q_hat), _flat(s_hat))
        del s_hat
        square = t.inverse(q_hat)
        del q_hat
        tail = head = tail2 = head2 = product = np.zeros_like(count)
    check_deadline()
    empty = count <= 0.0
    for a in {id(a): a for a in (square, tail, head, tail2, head2, product)}.values():
        a[empty] = 0.0
    count[empty] = 0.0
    return LagSums(count, square, tail, head, tail2, head2, product, reach, nodes.spacing)


def check_statistic(statistic: str, pointer: str = "/statistic") -> None:
    """Refuse a statistic the FFT sums cannot give (see :data:`FFT_STATISTICS`)."""
    if statistic not in FFT_STATISTICS:
        raise InvalidInput(
            [
                FieldIssue(
                    pointer,
                    f"{statistic!r} needs each pair's own difference, which the FFT path does not form; "
                    f"it gives {', '.join(FFT_STATISTICS)} (use method 'exact' on points for the others)",
                )
            ]
        )


def half_plane(sums: LagSums) -> np.ndarray:
    """Boolean mask of the lag vectors j > 0 or (j = 0, i > 0): one per unordered pair."""
    rx, ry = sums.reach
    i = np.arange(-rx, rx + 1)[None, :]
    j = np.arange(-ry, ry + 1)[:, None]
    return (j > 0) | ((j == 0) & (i > 0))


@dataclass(frozen=True)
class LagClasses:
    """Class of every half-plane lag vector in each direction.

    Attributes
    ----------
    index : ndarray of int64, shape (ndir, m)
        Distance class (-1: in no class of the direction) of the m half-plane lag vectors.
    forward : ndarray of bool, shape (ndir, m)
        Tail at node k (h = s points along the azimuth); else tail and head swap.
    distance : ndarray, shape (m,)
        |h|, coordinate units.
    hx, hy : ndarray, shape (m,)
        Separations, coordinate units.
    """

    index: np.ndarray
    forward: np.ndarray
    distance: np.ndarray
    hx: np.ndarray
    hy: np.ndarray


def classify_lags(
    hx: np.ndarray, hy: np.ndarray, directions: list[DirectionClass], edges: list[np.ndarray]
) -> LagClasses:
    """Classify separations (hx, hy) with the pair kernels' rules (module docstring)."""
    table = direction_table(directions)
    hh2 = hx * hx + hy * hy
    d = np.sqrt(hh2)
    index = np.full((len(directions), hx.size), -1, dtype=np.int64)
    forward = np.ones((len(directions), hx.size), dtype=bool)
    for k, e in enumerate(edges):
        ux, uy = table[k, UX], table[k, UY]
        proj = hx * ux + hy * uy
        perp = hx * uy - hy * ux
        inside = (proj * proj >= hh2 * table[k, COS2_TOL]) & (perp * perp <= table[k, BAND2]) & (hh2 > 0.0)
        c = np.searchsorted(e, d, side="right") - 1
        inside &= (c >= 0) & (c < len(e) - 1)
        index[k] = np.where(inside, c, -1)
        forward[k] = (proj > 0.0) | ((proj == 0.0) & (perp > 0.0))
    return LagClasses(index, forward, d, hx, hy)


def class_table(sums: LagSums, classes: LagClasses, mask: np.ndarray, kmax: int) -> np.ndarray:
    """Accumulator table (ndir, kmax, ACCUMULATORS) of the pair engine, from the lag vectors under ``mask``.

    ``classes`` classifies the lag vectors ``mask`` selects (in C order).
    """
    count = sums.count[mask]
    tail, head = sums.tail[mask], sums.head[mask]
    tail2, head2 = sums.tail2[mask], sums.head2[mask]
    product = sums.product[mask]
    square = sums.square[mask]
    out = np.zeros((classes.index.shape[0], kmax, K.ACCUMULATORS))
    for k in range(classes.index.shape[0]):
        member = classes.index[k] >= 0
        c = classes.index[k][member]
        fwd = classes.forward[k][member]

        n = count[member]
        t, h = tail[member], head[member]
        t2, h2 = tail2[member], head2[member]
        columns = {
            K.COUNT: n,
            K.DISTANCE: n * classes.distance[member],
            K.SQUARE: square[member],
            K.TAIL: np.where(fwd, t, h),
            K.HEAD: np.where(fwd, h, t),
            K.TAIL2: np.where(fwd, t2, h2),
            K.HEAD2: np.where(fwd, h2, t2),
            K.PRODUCT: product[member],
        }
        for column, weights in columns.items():
            out[k, :, column] = np.bincount(c, weights=weights, minlength=kmax)[:kmax]
    out[:, :, K.COUNT] = np.rint(out[:, :, K.COUNT])
    return out


ROUNDING = "the semivariance is within the FFT's rounding error"


def rounding_note(count: int, what: str) -> str:
    """The warning for ``count`` classes or map cells (``what``) left undefined as rounding."""
    return (
        f"{count} {what} are left undefined: their semivariance is within the FFT's rounding error (tiny beside "
        "the values' variance, as under a strong trend); method 'exact' on points computes them"
    )


def within_rounding(value: float | None, floor: float) -> bool:
    """True for a semivariance not above its rounding floor (a floor of 0 is exact)."""
    return value is not None and 0.0 < floor and value <= floor


def _floors(bins: np.ndarray, count: np.ndarray, size: int, noise: float) -> np.ndarray:
    """m ``noise`` / (2 N) for each of ``size`` bins holding m lag vectors of N pairs (inf where N = 0)."""
    vectors = np.bincount(bins, minlength=size)[:size]
    pairs = np.bincount(bins, weights=count, minlength=size)[:size]
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(pairs > 0, vectors * noise / (2.0 * pairs), np.inf)


def rounding_floors(classes: LagClasses, count: np.ndarray, kmax: int, noise: float) -> np.ndarray:
    """Semivariance below which a class is rounding (ndir, kmax): its lag vectors' errors summed,
    m ``noise`` / (2 N) for m lag vectors holding N pairs (inf where N = 0)."""
    floors = np.full((classes.index.shape[0], kmax), np.inf)
    for k in range(classes.index.shape[0]):
        member = classes.index[k] >= 0
        floors[k] = _floors(classes.index[k][member], count[member], kmax, noise)
    return floors


def _map_bins(sums: LagSums, cell_size: float, cells: int) -> tuple[np.ndarray, np.ndarray]:
    """The lag vectors a map holds (mask) and their flat cell index, as :func:`map_table` bins them."""
    hx, hy = sums.separations()
    # Indexes past the map are clipped before they become integers: a cell much smaller than the
    # grid's spacing (a raster's) would otherwise overflow int64 and wrap into the map.
    ix = np.clip(np.floor(hx / cell_size + 0.5), -cells - 1, cells + 1).astype(np.int64)
    iy = np.clip(np.floor(hy / cell_size + 0.5), -cells - 1, cells + 1).astype(np.int64)
    width = 2 * cells + 1
    keep = (np.abs(ix) <= cells) & (np.abs(iy) <= cells) & ((hx != 0.0) | (hy != 0.0)) & (sums.count > 0)
    return keep, ((iy + cells) * width + (ix + cells))[keep]


def map_table(sums: LagSums, cell_size: float, cells: int) -> np.ndarray:
    """Accumulator table ((2 cells + 1)^2, ACCUMULATORS) of a variogram map from ordered lag vectors.

    Cell (i, j) holds hx in [(i - 1/2) s, (i + 1/2) s) and hy likewise (index
    floor(h / s + 1/2), as the map kernel); every ordered lag vector but 0 is a pair
    counted once as h (its reverse is the lag vector -h).
    """
    hx, hy = sums.separations()
    keep, b = _map_bins(sums, cell_size, cells)
    width = 2 * cells + 1
    out = np.zeros((width * width, K.ACCUMULATORS))
    d = np.sqrt(hx * hx + hy * hy)[keep]
    n = sums.count[keep]
    columns = {
        K.COUNT: n,
        K.DISTANCE: n * d,
        K.SQUARE: sums.square[keep],
        K.TAIL: sums.tail[keep],
        K.HEAD: sums.head[keep],
        K.TAIL2: sums.tail2[keep],
        K.HEAD2: sums.head2[keep],
        K.PRODUCT: sums.product[keep],
    }
    for column, weights in columns.items():
        out[:, column] = np.bincount(b, weights=weights, minlength=width * width)
    out[:, K.COUNT] = np.rint(out[:, K.COUNT])
    return out


def rounding_bound(value: float | None, floor: float | None) -> float | None:
    """A raster's error bound (relative): the transforms' estimated rounding error of the semivariance
    over its value (:func:`~lagwise.core.variography.fft.square_rounding`); 0 where no estimate applies
    (the other statistics); None for an undefined value."""
    if value is None:
        return None
    if floor is None or not np.isfinite(floor) or value == 0.0:
        return 0.0
    return float(floor / abs(value))


def map_floors(sums: LagSums, cell_size: float, cells: int, noise: float) -> np.ndarray:
    """Semivariance below which each map cell ((2 cells + 1)^2, table order) is rounding, as
    :func:`rounding_floors` for classes (inf where a cell holds no pair)."""
    keep, b = _map_bins(sums, cell_size, cells)
    return _floors(b, sums.count[keep], (2 * cells + 1) ** 2, noise)
