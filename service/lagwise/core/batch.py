"""A batch of analyses: the whole chain for each variable of a several-variable sample set.

Each variable is analysed as a single-variable request on the samples where it was
measured would be (:func:`lagwise.core.analysis.analyse`), with its own transform, fit,
cross-validation and verdict. What the chains share is the pair enumeration: the
omnidirectional variogram of every variable's working values
comes from one pass over the pairs of all locations
(:mod:`lagwise.core.variography.shared`), each with its own classes and class
uncertainties. The other pair passes (the anisotropy fan, residual variograms of a
drift, variogram maps) stay per variable.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from .analysis import AnalysisOptions, Given, begin
from .data.variables import MultiSampleSet, escape_token
from .errors import InvalidInput
from .limits import Limits
from .variography.shared import SHARED_STATISTICS, Member, shared_variograms


def of_variable(exc: InvalidInput, name: str) -> InvalidInput:
    """The error with pointers into one variable's values moved to ``/samples/variables/<name>``."""
    column = f"/samples/variables/{escape_token(name)}"
    issues = [
        replace(i, pointer=column + i.pointer[len("/samples/values") :])
        if i.pointer.startswith("/samples/values")
        else i
        for i in exc.issues
    ]
    return InvalidInput(issues, f"variable {name!r}: {exc.summary}")


def batch_inputs(samples: MultiSampleSet, options: AnalysisOptions, limits: Limits = Limits()) -> list[Given]:
    """Every variable's first steps (validation, transform) and its shared variograms, in the samples' order.

    Raises
    ------
    InvalidInput
        Naming the variable (``/samples/variables/<name>/...``).

    A variable whose variograms the shared pass refuses (or a statistic it does not
    compute) gets none: its chain computes them, and reports its own error.
    """
    members, given = [], []
    for k, name in enumerate(samples.names):
        single = samples.variable(name)
        try:
            start = begin(single, options)
        except InvalidInput as exc:
            raise of_variable(exc, name) from None
        given.append(Given(start))
        rows = np.flatnonzero(~np.isnan(samples.values[:, k]))
        members.append(Member(replace(single, values=start.values), rows, start.declustering))
    stage = options.variogram
    if stage.statistic not in SHARED_STATISTICS:
        return given
    # The fan stays with each chain for now: with automatic classes its directions have edges
    # of their own, where the single-variable fast kernel currently disagrees with a brute-force
    # enumeration (the shared pass agrees with it), so the two would not give the same fan.
    try:
        found = shared_variograms(
            samples.coords,
            members,
            [None],
            lags=stage.lags,
            statistic=stage.statistic,
            min_pairs=stage.min_pairs,
            limits=limits,
            pointers=("/variogram",),
        )
    except InvalidInput:
        return given
    if found is None:
        return given
    return [replace(g, omnidirectional=v[0]) for g, v in zip(given, found, strict=True)]
