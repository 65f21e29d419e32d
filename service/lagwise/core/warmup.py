"""Compile (or load from numba's cache) and run every compiled kernel once (pair kernels, kriging covariances).

Call :func:`compile_kernels` before forking worker processes (it starts no
threads) and :func:`warm_kernels` in each worker after the fork (it starts the
threading layer there), so that no request pays for compilation.
"""

from __future__ import annotations

import numpy as np

from .data.samples import build_sample_set
from .data.variables import VariableInput, build_multi_sample_set
from .kriging.neighbourhood import Neighbourhood
from .kriging.prediction import predict
from .limits import Limits
from .modelling.models import Structure, VariogramModel
from .variography.directions import DirectionClass
from .variography.experimental import ScatterRequest, experimental_variogram
from .variography.lags import LagRequest
from .variography.maps import variogram_map
from .variography.several import several_variograms
from .variography.statistics import STATISTICS

_warm = False


def _tiny_samples():
    rng = np.random.default_rng(7)
    # 40 samples: enough spatial blocks for the class-uncertainty kernel to run too.
    return build_sample_set(rng.uniform(1.0, 2.0, 40), rng.uniform(0, 10, 40), rng.uniform(0, 10, 40))


def warm_kernels() -> None:
    """Run every kernel on a tiny sample set (idempotent within a process)."""
    global _warm
    if _warm:
        return
    samples = _tiny_samples()
    for statistic in STATISTICS:
        experimental_variogram(samples, statistic=statistic, directions=[DirectionClass(30.0, 30.0, 5.0)])
        variogram_map(samples, cell_size=2.0, cells=2, statistic=statistic)
    experimental_variogram(
        samples, lags=LagRequest(edges=(0.0, 1.0, 3.0, 6.0)), pairs_for_class=ScatterRequest(0, 1, 5)
    )
    # The grid method's compiled passes (binning, hull throw-away on 3,001 points).
    many = build_sample_set(np.ones(3001), np.arange(3001.0) % 61, np.arange(3001.0) // 61)
    for statistic in ("semivariance", "covariance_noncentered"):  # the FFT's two sets of spectrum products
        experimental_variogram(many, lags=LagRequest(width=5.0, count=3), method="grid", statistic=statistic)
    several = _tiny_variables(samples)
    for statistic in ("semivariance", "covariance", "madogram"):
        several_variograms(several, statistic=statistic)
    several_variograms(several, limits=Limits(memory_budget_bytes=1))
    model = VariogramModel(0.1, (Structure("spherical", 1.0, 5.0),))
    predict(samples, model, neighbourhood=Neighbourhood(max_points=8), targets=samples.coords[:3] + 0.5)
    _warm = True


def _tiny_variables(samples):
    """Two variables on the tiny set, the second missing at every tenth sample (36 measuring both:
    enough spatial blocks for the cross-semivariance's uncertainty kernel to run too)."""
    x, y = samples.coords[:, 0], samples.coords[:, 1]
    other = np.where(np.arange(samples.size) % 10 != 0, samples.values, np.nan)
    return build_multi_sample_set([VariableInput("a", samples.values), VariableInput("b", other)], x, y)


def compile_kernels() -> None:
    """Compile every kernel for the argument types the engine uses, without running it."""
    from numba import types

    from .data import identifiers
    from .kriging import compiled
    from .variography import kernels as K
    from .variography import spectra

    f8, i8 = "float64", "int64"
    a1, a2 = f"{f8}[::1]", f"{f8}[:, ::1]"
    rows = f"{i8}, {i8}"
    K.accumulate_classes.compile(f"({a2}, {a1}, {f8}, {f8}, {a2}, {a2}, {i8}[::1], {a1}, {i8}, {i8}, {rows})")
    K.accumulate_map.compile(f"({a2}, {a1}, {f8}, {f8}, {i8}, {i8}, {i8}, {rows})")
    K.accumulate_horizontal.compile(
        f"({a2}, {i8}[::1], {i8}[::1], {a1}, {f8}, {f8}, {a2}, {a2}, {i8}[:, ::1], {f8}, boolean, {f8}, {f8}, "
        f"{i8}, {i8}, {rows})"
    )
    K.column_candidates.compile(f"({a2}, {i8}[::1], {i8}[::1], {a1}, {f8}, {i8}, {i8})")
    K.collect_pairs.compile(
        f"({a2}, {a1}, {f8}, {a2}, {a2}, {i8}[::1], {a1}, {i8}[::1], {i8}[::1], {a1}, {i8}, {i8}, {a1}, {a1}, {i8}[::1], {rows})"
    )
    K.accumulate_blocks.compile(
        f"({a2}, {a1}, {f8}, {f8}, {a2}, {a2}, {i8}[::1], {a1}, {i8}, {i8}[::1], {i8}, {i8}, {rows})"
    )
    K.collect_map_differences.compile(f"({a2}, {a1}, {f8}, {i8}, {i8}[::1], {i8}[::1], {a1}, {rows})")
    c1 = "complex128[::1]"
    for product in (spectra.cross_into, spectra.power_into, spectra.twice_real_cross, spectra.less_twice_power):
        arguments = 3 if product is spectra.cross_into else 2
        product.compile(f"({', '.join([c1] * arguments)})")
    a3 = f"{f8}[:, :, ::1]"
    compiled.add_structure.compile(f"({a3}, {a3}, {a3}, {i8}, {f8}, {f8}, {f8}, boolean)")
    # Text ids of an Arrow stream: read-only views of its bytes and its int32 or int64 offsets.
    data = types.Array(types.uint8, 1, "C", readonly=True)
    for width in (types.int32, types.int64):
        identifiers._text_hashes.compile((data, types.Array(width, 1, "C", readonly=True)))
    # Integer ids (an Arrow int64 column, raster cells): read-only int64 views.
    identifiers._distinct_in_span.compile((types.Array(types.int64, 1, "C", readonly=True), types.int64, types.int64))
