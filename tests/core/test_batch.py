"""A batch's shared variograms equal what each variable's own chain computes, to the bit.

Reference: each variable's chain alone (:func:`lagwise.core.stages.run_variogram` on its
working values, as :func:`lagwise.core.analysis.analyse` runs it), itself checked against a
brute-force enumeration with ``scipy.spatial.distance.pdist`` in tests/reference/; the
twelve-analyte batch is invented (tests/batch_data.py).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from lagwise.core.analysis import AUTO_FAN, AnalysisOptions, begin, fan_directions
from lagwise.core.batch import batch_inputs
from lagwise.core.data.variables import VariableInput, build_multi_sample_set
from lagwise.core.limits import Limits
from lagwise.core.stages import FitOptions, VariogramOptions, run_variogram
from lagwise.core.variography.directions import DirectionClass
from lagwise.core.variography.lags import LagRequest

from tests.batch_data import ANALYTES, batch

EXPLICIT = (DirectionClass(20.0, 30.0), DirectionClass(110.0, 30.0))


def samples():
    raw = batch()
    columns = [
        VariableInput(name, np.array([np.nan if v is None else v for v in raw["variables"][name]])) for name in ANALYTES
    ]
    return build_multi_sample_set(columns, np.array(raw["x"]), np.array(raw["y"]))


def chain_alone(single, options):
    """The omnidirectional variogram and the fan of the variable's own chain."""
    start = begin(single, options)
    working = replace(single, values=start.values)
    stage = options.variogram
    omni = run_variogram(working, stage, limits=Limits(), declustering=start.declustering)
    fan = run_variogram(
        working, stage, limits=Limits(), directions=fan_directions(options), declustering=start.declustering
    )
    return omni, fan


@pytest.mark.parametrize(
    "options",
    [
        AnalysisOptions(transform="log"),
        AnalysisOptions(transform="log", variogram=VariogramOptions(lags=LagRequest(auto="equal_pairs"))),
        AnalysisOptions(transform="log", variogram=VariogramOptions(directions=EXPLICIT)),
        AnalysisOptions(variogram=VariogramOptions(statistic="semivariance_robust"), fit=FitOptions(anisotropy="fit")),
    ],
    ids=["auto-fan", "equal-pairs", "explicit-classes", "robust"],
)
def test_each_variable_gets_the_fan_its_own_chain_computes(options):
    batched = samples()
    given = batch_inputs(batched, options)
    assert fan_directions(options) == (EXPLICIT if options.variogram.directions else AUTO_FAN)
    for name, ours in zip(ANALYTES, given, strict=True):
        omni, fan = chain_alone(batched.variable(name), options)
        assert ours.omnidirectional == omni, name
        assert ours.fan == fan, name


def test_no_fan_without_anisotropy():
    options = AnalysisOptions(transform="log", fit=FitOptions(anisotropy="none"))
    batched = samples()
    for name, ours in zip(ANALYTES, batch_inputs(batched, options), strict=True):
        assert ours.fan is None
        assert ours.omnidirectional == chain_alone(batched.variable(name), options)[0], name
