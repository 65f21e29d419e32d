"""Cell declustering (lagwise.core.data.declustering) and the weighted normal-score table."""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.declustering import cell_weights, decluster, nearest_neighbour_ratio, random_designs
from lagwise.core.data.spacing import nearest_distances
from lagwise.core.data.summary import summarise
from lagwise.core.data.transforms import fit_transform
from scipy.special import ndtri
from scipy.stats import rankdata

from tests.reference.simulate import isotropic, simulate


def test_cell_weights_hand_example():
    """Worked by hand (Journel 1983 cell weights w_i = 1 / (L n_i)).

    Samples (0,0), (1,0), (0,1), (1,1) with values 10, 12, 14, 16 share one 10 m cell,
    (15,15) with value 2 sits alone in another: L = 2 occupied cells, so the four
    clustered samples weigh 1/(2*4) = 1/8 each and the lone one 1/2.
    Declustered mean = (10 + 12 + 14 + 16)/8 + 2/2 = 6.5 + 1 = 7.5 (plain mean 10.8).
    Declustered variance = [2.5^2 + 4.5^2 + 6.5^2 + 8.5^2]/8 + 5.5^2/2 = 17.625 + 15.125 = 32.75.
    """
    coords = np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 1.0], [1.0, 1.0], [15.0, 15.0]])
    values = np.array([10.0, 12.0, 14.0, 16.0, 2.0])
    w = cell_weights(coords, 10.0, origins=1)  # the first Halton offset is the origin itself
    assert w.tolist() == [0.125, 0.125, 0.125, 0.125, 0.5]
    mean = float(w @ values)
    assert mean == pytest.approx(7.5)
    assert float(w @ (values - mean) ** 2) == pytest.approx(32.75)
    averaged = cell_weights(coords, 10.0)
    assert averaged.sum() == pytest.approx(1.0) and averaged[4] == pytest.approx(0.5)


def test_cell_weights_over_more_cells_than_int64_holds():
    """Samples 1 apart with one of them 1e19 away: 2e19 cells of side 0.5 overflow 64-bit indexes.

    Worked by hand as above (w_i = 1 / (L n_i)): with one grid origin at the lowest sample and cells of
    0.5, every sample has a cell of its own, L = 20, so every weight is 1/20; the far sample's
    weight, 1/L = 1/20, is the same at 1e19 as at 100.
    """
    coords = np.arange(20.0)[:, None]
    near = cell_weights(np.where(coords == 19.0, 100.0, coords), 0.5, origins=1)
    far = cell_weights(np.where(coords == 19.0, 1e19, coords), 0.5, origins=1)
    assert near.tolist() == far.tolist() == [0.05] * 20
    assert decluster(np.where(coords == 19.0, 1e19, coords), np.arange(20.0)).weights.sum() == pytest.approx(1.0)


def test_nearest_neighbour_ratio_of_a_square_grid():
    """A k x k square grid of spacing s: mean nearest-neighbour distance s, hull area ((k - 1) s)^2,
    so Clark & Evans' (1954) R = s / (0.5 / sqrt(rho)) = 2 k / (k - 1) (worked by hand)."""
    k, s = 30, 5.0
    gx, gy = np.meshgrid(np.arange(k) * s, np.arange(k) * s)
    coords = np.column_stack([gx.ravel(), gy.ravel()])
    ratio, z = nearest_neighbour_ratio(coords, float(nearest_distances(coords).mean()), ((k - 1) * s) ** 2)
    assert ratio == pytest.approx(2 * k / (k - 1))
    assert z > 10


def test_random_pattern_is_not_clustered():
    """Poisson pattern with independent values (numpy draws): R near 1 and uniform weights are used."""
    rng = np.random.default_rng(5)
    coords = rng.uniform(0, 1000, (3000, 2))
    result = decluster(coords, rng.normal(size=3000))
    assert 0.97 < result.nearest_neighbour_ratio < 1.05  # Clark & Evans 1954; edges lengthen distances slightly
    assert not result.clustered and result.warning is None
    assert np.allclose(result.used_weights, 1 / 3000)


def test_declustered_mean_is_closer_to_the_field_mean_on_a_clustered_design():
    """Preferential sampling of a simulated field (Cholesky, scipy): the cell-declustered mean
    lies closer to the field's own mean over the domain than the plain sample mean
    (Deutsch 1989, Computers & Geosciences 15(3): minimum declustered mean when highs are over-sampled)."""
    g = np.arange(0.0, 600.0, 15.0)
    gx, gy = np.meshgrid(g, g)
    grid = np.column_stack([gx.ravel(), gy.ravel()])
    model = isotropic("spherical", 1.0, 200.0, nugget=0.1)
    plain, declustered = [], []
    for seed in range(5):
        rng = np.random.default_rng(seed)
        field = simulate(model, grid, rng) + 10.0
        base = rng.choice(grid.shape[0], 120, replace=False)
        centre = grid[np.argmax(field)]  # extra samples around the hot spot
        near = np.argsort(np.hypot(*(grid - centre).T))[:120]
        chosen = np.unique(np.concatenate([base, rng.choice(near, 80, replace=False)]))
        result = decluster(grid[chosen], field[chosen])
        assert result.clustered and result.over_sampled == "high"
        assert "sampling is clustered" in result.warning
        plain.append(abs(result.mean - field.mean()))
        declustered.append(abs(result.declustered_mean - field.mean()))
    assert np.mean(declustered) < 0.5 * np.mean(plain)
    assert sum(d < p for d, p in zip(declustered, plain, strict=True)) >= 4


def test_summary_reports_plain_and_declustered_moments():
    rng = np.random.default_rng(1)
    coords = np.vstack([rng.uniform(0, 100, (60, 2)), rng.uniform(0, 10, (60, 2))])
    values = np.concatenate([rng.normal(0, 1, 60), rng.normal(5, 1, 60)])
    summary = summarise(coords, values)
    d = summary.declustering
    assert d["clustered"] and d["cell_size"] > 0
    assert summary.declustered_mean < summary.mean
    assert summary.reference_mean == summary.declustered_mean
    assert summary.reference_variance == summary.declustered_variance
    assert summary.as_dict()["declustering"]["weights_used"] is True


def test_weighted_normal_scores():
    """Weighted plotting positions W_below + w_tie / 2 worked by hand; equal weights give
    Hazen's (r - 1/2)/n with mid-ranks for ties (scipy.stats.rankdata)."""
    t = fit_transform("normal_score", np.array([3.0, 1.0, 2.0]), weights=np.array([0.25, 0.5, 0.25]))
    assert t.weighted
    assert t.scores == pytest.approx(ndtri([0.25, 0.625, 0.875]))
    ties = fit_transform("normal_score", np.array([1.0, 1.0, 2.0]), weights=np.array([1.0, 1.0, 2.0]))
    assert ties.scores == pytest.approx(ndtri([0.25, 0.75]))
    values = np.random.default_rng(3).gamma(2.0, size=50).round(1)
    equal = fit_transform("normal_score", values, weights=np.full(50, 0.02))
    assert not equal.weighted
    hazen = ndtri((rankdata(values) - 0.5) / 50)
    assert equal.forward(values) == pytest.approx(hazen)


def test_weighted_start_shares_the_weights_between_stages():
    """Normal scores from weighted plotting positions have a declustered mean near 0 and variance
    near 1 (the standard normal's moments, discretised), while the plain moments are pulled
    toward the over-sampled patch."""
    from lagwise.core.data.declustering import weighted_start

    rng = np.random.default_rng(1)
    coords = np.vstack([rng.uniform(0, 100, (150, 2)), rng.uniform(0, 10, (100, 2))])
    values = np.exp(np.concatenate([rng.normal(0, 1, 150), rng.normal(2, 0.5, 100)]))
    start = weighted_start(coords, values, "normal_score")
    assert start.declustering.clustered and start.transform.weighted
    assert abs(start.simple_kriging_mean) < 0.05 and abs(start.sill_reference - 1.0) < 0.1
    assert start.values.mean() > 0.2  # unweighted mean of the scores is pulled up by the patch
    plain = weighted_start(coords[:150], values[:150], "log")
    assert not plain.declustering.clustered
    assert plain.simple_kriging_mean == pytest.approx(np.log(values[:150]).mean())


def test_random_designs_fill_the_hull_uniformly():
    """Points uniform over the triangle (0,0), (10,0), (0,10) (hull of the samples): centroid (10/3, 10/3)
    and P(x < 5) = 1 - (1/2)^2 = 3/4 (worked by hand), none outside."""
    coords = np.array([[0.0, 0.0], [10.0, 0.0], [0.0, 10.0], [1.0, 1.0], [2.0, 1.0], [1.0, 2.0]])
    points = np.vstack(random_designs(coords, 20_000, np.random.default_rng(1)))
    assert points.shape == (120_000, 2)
    assert np.all(points >= -1e-12) and np.all(points.sum(axis=1) <= 10.0 + 1e-9)
    assert points.mean(axis=0) == pytest.approx([10 / 3, 10 / 3], abs=0.03)
    assert np.mean(points[:, 0] < 5.0) == pytest.approx(0.75, abs=0.005)


def _grid(step, low=(0.0, 0.0), high=(60.0, 50.0)):
    gx, gy = np.meshgrid(np.arange(low[0], high[0] + 1e-9, step), np.arange(low[1], high[1] + 1e-9, step))
    return np.column_stack([gx.ravel(), gy.ravel()])


def _smooth(coords, rng):
    return np.sin(coords[:, 0] / 9.0) + np.cos(coords[:, 1] / 7.0)


def _rough(coords, rng):
    return np.sin(coords[:, 0] * 2.3) * np.cos(coords[:, 1] * 1.7) + rng.normal(0.0, 1.0, coords.shape[0])


_HOMOGENEOUS = {
    "full grid": lambda rng: _grid(1.0, high=(59.0, 49.0)),
    "grid less 10 % of nodes": lambda rng: (lambda g: g[rng.random(g.shape[0]) >= 0.1])(_grid(1.0, high=(59.0, 49.0))),
    "uniform random": lambda rng: rng.uniform((0.0, 0.0), (59.0, 49.0), (600, 2)),
}


@pytest.mark.parametrize("seed", [0, 1, 2])
@pytest.mark.parametrize("field", [_smooth, _rough], ids=["smooth", "rough"])
@pytest.mark.parametrize("design", list(_HOMOGENEOUS))
def test_homogeneous_designs_keep_equal_weights(design, field, seed):
    """Declustering is for preferential (clustered) sampling (common practice): a regular grid, with
    or without gaps, and a uniform random design have none, whatever the field. Clark & Evans (1954)
    R is at or above 1 and the cell weights (Deutsch 1989) are as even as a random pattern's, so the
    weights stay 1/n and the mean is the plain mean. The smooth full grid was the defect: the old
    mean-shift test called it clustered and moved the mean from 0.117 to 0.335."""
    rng = np.random.default_rng(seed)
    coords = _HOMOGENEOUS[design](rng)
    values = field(coords, rng)
    result = decluster(coords, values)
    assert not result.clustered and result.warning is None
    assert result.nearest_neighbour_ratio > 0.9
    assert result.effective_fraction > 0.95 * result.random_fraction
    assert np.array_equal(result.used_weights, np.full(coords.shape[0], 1.0 / coords.shape[0]))
    assert result.mean_of(values) == pytest.approx(values.mean(), rel=1e-12, abs=1e-12)
    assert result.variance_of(values) == pytest.approx(values.var(), rel=1e-12)
    if design != "uniform random":  # a regular design's weights are more even than a random pattern's
        assert result.effective_fraction > result.random_fraction


def test_the_reported_regular_grid_keeps_its_mean():
    """The 60 x 50 grid of sin(x/9) + cos(y/7) from the defect report: plain mean 0.117 (numpy mean),
    not clustered, so the summary's reference mean stays 0.117."""
    coords = _grid(1.0, high=(59.0, 49.0))
    values = _smooth(coords, None)
    summary = summarise(coords, values)
    assert summary.mean == pytest.approx(0.1171, abs=1e-4)
    assert summary.declustering["clustered"] is False and summary.declustering["weights_used"] is False
    assert summary.reference_mean == summary.mean
    assert summary.declustering["effective_sample_fraction"] > 0.95
    # The reported declustered moments are those of the weights used (equal ones), not of a cell
    # weighting the verdict set aside (it gave 0.335).
    assert summary.declustered_mean == pytest.approx(summary.mean, rel=1e-12)
    assert summary.declustered_variance == pytest.approx(summary.variance, rel=1e-12)


_HOT = np.array([45.0, 35.0])


def _hot_field(coords):
    """Smooth background plus a bump of height 3 (standard deviation 6) at (45, 35)."""
    x, y = coords[:, 0], coords[:, 1]
    return np.sin(x / 9.0) + np.cos(y / 7.0) + 3.0 * np.exp(-((x - _HOT[0]) ** 2 + (y - _HOT[1]) ** 2) / 72.0)


def _near_hot(points, radius):
    return points[np.hypot(*(points - _HOT).T) < radius]


_PREFERENTIAL = {
    "dense cluster over a random background": lambda rng: np.vstack(
        [rng.uniform((0.0, 0.0), (60.0, 50.0), (80, 2)), np.clip(_HOT + rng.normal(0, 4, (60, 2)), 0, (60, 50))]
    ),
    "dense cluster over a regular background": lambda rng: np.vstack(
        [_grid(6.0), np.clip(_HOT + rng.normal(0, 4, (60, 2)), 0, (60, 50))]
    ),
    "grid of 2 near the high values over a grid of 6": lambda rng: np.vstack(
        [_grid(6.0), _near_hot(_grid(2.0, (35.0, 25.0), (55.0, 45.0)) + rng.uniform(0.5, 1.5, 2), 10.0)]
    ),
    "grid of 3 near the high values over a grid of 6": lambda rng: np.vstack(
        [_grid(6.0), _near_hot(_grid(3.0, (30.0, 20.0), (60.0, 50.0)) + rng.uniform(0.5, 2.5, 2), 15.0)]
    ),
}


@pytest.mark.parametrize("seed", [0, 1, 2])
@pytest.mark.parametrize("design", list(_PREFERENTIAL))
def test_preferential_designs_are_declustered_toward_the_field_mean(design, seed):
    """Extra samples over the high values (Deutsch 1989: the cell size minimising the declustered mean
    when highs are over-sampled). The true spatial mean is the field's mean over a 0.1 grid of the
    60 x 50 domain (numpy mean). Two grids of different spacing have R well above 1 (Clark & Evans
    1954), so the uneven cell weights alone must find them."""
    rng = np.random.default_rng(seed)
    coords = np.unique(_PREFERENTIAL[design](rng), axis=0)
    values = _hot_field(coords)
    fine = _grid(0.1, (0.05, 0.05), (59.95, 49.95))
    truth = float(_hot_field(fine).mean())
    result = decluster(coords, values)
    assert result.clustered and result.over_sampled == "high"
    assert result.effective_fraction < 0.9 * result.random_fraction
    assert "unevenly spread" in result.warning
    assert abs(result.declustered_mean - truth) < abs(result.mean - truth)
    assert result.mean_of(values) == result.declustered_mean


def test_random_designs_are_seldom_called_clustered():
    """False-alarm rate of the rule on 100 uniform random designs of 100 points (numpy draws):
    R's one-sided z < -2.58 alone errs 0.5 % of the time (Clark & Evans 1954, normal approximation)
    and the evenness test about 0.1 % (z < -3); at most 3 of 100 is allowed."""
    flagged = 0
    for seed in range(100):
        rng = np.random.default_rng(seed)
        coords = rng.uniform(0.0, 100.0, (100, 2))
        flagged += decluster(coords, rng.normal(size=100)).clustered
    assert flagged <= 3
