"""A batch of analyses: the whole chain for each variable of a several-variable sample set.

Each variable is analysed as a single-variable request on the samples where it was
measured would be (:func:`lagwise.core.analysis.analyse`), with its own transform, fit,
cross-validation and verdict. The chains' first variograms (the stage's classes,
omnidirectional unless given) and, when the chain may look at anisotropy, their fans of
direction classes (:func:`lagwise.core.analysis.fan_directions`) are computed before the
chains by :mod:`lagwise.core.variography.shared`: automatic classes once per group of
variables measured at the same samples, the class uncertainties' pass over the pairs of
all locations once for every variable, each variable's class sums from its own pass;
each result equal to the bit to what its own chain computes. The other pair passes
(residual variograms of a drift, variogram maps) stay per variable.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from .analysis import AnalysisOptions, Given, begin, fan_directions, wants_fan
from .data.variables import MultiSampleSet, escape_token
from .errors import InvalidInput, LimitExceeded
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
    # The chain's first variogram has the stage's classes (None: one omnidirectional class); its fan
    # is the stage's classes again when given, else the automatic fan.
    first = stage.classes
    fan = list(fan_directions(options)) if wants_fan(options, samples.dimension) else None
    sets = [first] if fan is None or fan == first else [first, fan]
    found = _shared(samples, members, sets, options, limits)
    if found is None and len(sets) > 1:
        found, fan = _shared(samples, members, sets[:1], options, limits), None
    if found is None:
        return given
    return [
        replace(g, omnidirectional=v[0], fan=None if fan is None else v[-1]) for g, v in zip(given, found, strict=True)
    ]


def _shared(samples: MultiSampleSet, members: list[Member], sets: list, options: AnalysisOptions, limits: Limits):
    """Every member's variogram of each direction set from one pass, or None where the pass refuses them
    (each chain then computes its own and reports its own error) or its tables would not fit the budget."""
    stage = options.variogram
    try:
        return shared_variograms(
            samples.coords,
            members,
            sets,
            lags=stage.lags,
            statistic=stage.statistic,
            min_pairs=stage.min_pairs,
            limits=limits,
            pointers=("/variogram",) * len(sets),
        )
    except (InvalidInput, LimitExceeded):
        return None
