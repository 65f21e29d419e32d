"""Messages read well: figures that differ are written so that they differ; one parenthesis per label."""

import numpy as np
from lagwise.core.analysis import _as_candidate
from lagwise.core.data.declustering import Declustering, distinct_figures
from lagwise.core.modelling.fitting import ExperimentalPoints, fit_model
from lagwise.core.modelling.models import Anisotropy, Structure, VariogramModel


def test_close_figures_get_the_digits_that_tell_them_apart():
    assert distinct_figures(1e12, 1e12 + 1e4) == ("1e+12", "1.00000001e+12")
    assert distinct_figures(2.5, 3.75) == ("2.5", "3.75")
    assert distinct_figures(7.0, 7.0) == ("7", "7")


def test_declustering_warning_shows_a_shift_of_a_large_mean():
    found = Declustering(
        weights=np.full(4, 0.25),
        cell_size=10.0,
        clustered=True,
        mean=1e12,
        variance=4e6,
        declustered_mean=1e12 + 5e4,
        declustered_variance=3.9e6,
        over_sampled="high",
        shift_z=-3.0,
    )
    assert "moves the mean from 1e+12 to 1.00000005e+12 and the variance from 4e+06 to 3.9e+06" in found.warning


def test_refined_anisotropic_label_has_one_parenthesis():
    h = np.arange(1.0, 9.0)
    points = ExperimentalPoints(
        distance=h,
        value=1.0 - np.exp(-3.0 * h / 5.0),
        pairs=np.full(8, 100),
        azimuth=np.zeros(8),
        direction=np.zeros(8, dtype=int),
        klass=np.arange(8),
        usable=np.ones(8, dtype=bool),
    )
    fit = fit_model(points, dimension=2, families=["exponential"], nugget="none")
    model = VariogramModel(0.1, (Structure("exponential", 1.0, 5.0, anisotropy=Anisotropy(30.0, 0.5)),))
    _, refined = _as_candidate(fit, model)
    assert refined.best.label == "nugget + exponential (anisotropic, refined by restricted likelihood)"
    isotropic = VariogramModel(0.1, (Structure("exponential", 1.0, 5.0),))
    assert _as_candidate(fit, isotropic)[1].best.label == "nugget + exponential (refined by restricted likelihood)"
