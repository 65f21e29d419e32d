"""Class standard errors of several-variable experimental variograms (lagwise.core.variography.several).

References: each variable's single-variable request on the samples where it was measured
(:func:`experimental_variogram`), and a brute-force delete-one-group jackknife written here
from its published formula, SE^2 = (g - 1)/g sum_i (theta_(i) - mean theta)^2 (Efron & Stein
1981, Annals of Statistics 9(3); Shao & Tu 1995, The Jackknife and Bootstrap, ch. 1), each
theta_(i) recomputed from scratch on the samples left once group i is deleted, with distances
from ``scipy.spatial.distance.pdist``. The groups are the spatial blocks the service documents
(:func:`lagwise.core.variography.uncertainty.spatial_blocks`); the data are invented.
"""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.variables import VariableInput, build_multi_sample_set
from lagwise.core.limits import Limits
from lagwise.core.variography.cross_uncertainty import TOO_LARGE
from lagwise.core.variography.directions import DirectionClass
from lagwise.core.variography.experimental import experimental_variogram
from lagwise.core.variography.lags import LagRequest
from lagwise.core.variography.several import CROSS_COVARIANCE_UNCERTAINTY, several_variograms
from lagwise.core.variography.uncertainty import spatial_blocks
from scipy.spatial.distance import pdist
from scipy.stats import t as student_t

EDGES = (0.0, 10.0, 20.0, 30.0, 40.0, 50.0)
LAGS = LagRequest(edges=EDGES)
FAN = [DirectionClass(0.0, 90.0), DirectionClass(45.0, 22.5), DirectionClass(135.0, 22.5, bandwidth=12.0)]


def heterotopic(n=150, seed=4, missing=(0.0, 0.35, 0.6)):
    """Three invented correlated variables; the second and third missing at the given shares."""
    rng = np.random.default_rng(seed)
    coords = rng.uniform(0, 120, (n, 2))
    base = np.sin(coords[:, 0] / 18.0) + np.cos(coords[:, 1] / 25.0)
    columns = {
        "lead": base + 0.3 * rng.normal(size=n) + 4.0,
        "zinc": 20.0 - 3.0 * base + rng.normal(size=n),
        "nickel": 0.5 * base + 0.4 * rng.normal(size=n),
    }
    for column, share in zip(columns.values(), missing, strict=True):
        column[rng.random(n) < share] = np.nan
    inputs = [VariableInput(k, v) for k, v in columns.items()]
    return build_multi_sample_set(inputs, coords[:, 0], coords[:, 1]), coords, columns


def assert_equal_to_single(result, samples, lags, directions, statistic):
    for variable in result.variables:
        alone = experimental_variogram(
            samples.variable(variable.name), lags=lags, directions=directions, statistic=statistic
        )
        ours = variable.result
        assert ours.uncertainty == alone.uncertainty
        assert ours.summary == alone.summary
        if alone.uncertainty is not None:
            # The same pairs summed in the same order as the single-variable passes: equal to the bit.
            assert ours.directions == alone.directions
            continue
        # Without a jackknife the sums come from the several-variable pass: equal up to the order of summation.
        for direction, single in zip(ours.directions, alone.directions, strict=True):
            for row, other in zip(direction.classes, single.classes, strict=True):
                assert (row.pairs, row.uncertainty_reason) == (other.pairs, other.uncertainty_reason)
                assert row.value == pytest.approx(other.value, rel=1e-12)
                assert row.mean_distance == pytest.approx(other.mean_distance, rel=1e-12)


@pytest.mark.parametrize("statistic", ["semivariance", "covariance", "madogram", "semivariance_median"])
def test_direct_results_with_uncertainty_equal_the_single_variable_request(statistic):
    samples, _, _ = heterotopic()
    result = several_variograms(samples, lags=LAGS, directions=FAN, statistic=statistic)
    assert_equal_to_single(result, samples, LAGS, FAN, statistic)
    rows = [row for v in result.variables for d in v.result.directions for row in d.classes]
    if statistic == "semivariance_median":
        assert all(r.standard_error is None and "median" in r.uncertainty_reason for r in rows)
    else:
        assert sum(r.standard_error is not None for r in rows) > len(rows) // 2


def test_automatic_classes_agree_when_every_variable_is_measured_everywhere():
    samples, _, _ = heterotopic(missing=(0.0, 0.0, 0.0))
    for lags in (LagRequest(), LagRequest(auto="equal_pairs")):
        result = several_variograms(samples, lags=lags)
        assert_equal_to_single(result, samples, lags, None, "semivariance")
        assert result.variables[0].result.uncertainty.blocks == 8


def test_standard_errors_equal_a_brute_force_delete_one_group_jackknife():
    samples, coords, columns = heterotopic(n=120)
    result = several_variograms(samples, lags=LAGS)
    for variable in result.variables:
        values = columns[variable.name]
        keep = ~np.isnan(values)
        xy, z = coords[keep], values[keep]
        groups = variable.result.uncertainty.blocks
        assert groups == min(8, keep.sum() // 6)
        labels = spatial_blocks(xy, groups)
        for c, row in enumerate(variable.result.directions[0].classes):
            replicates = []
            for g in range(groups):
                left = labels != g
                d = pdist(xy[left])
                squares = pdist(z[left, None], "sqeuclidean")
                inside = (d >= EDGES[c]) & (d < EDGES[c + 1])
                replicates.append(squares[inside].sum() / (2 * inside.sum()))
            replicates = np.array(replicates)
            se = np.sqrt((groups - 1) / groups * np.sum((replicates - replicates.mean()) ** 2))
            assert row.standard_error == pytest.approx(se, rel=1e-9)


def test_each_variables_own_passes_give_the_same_when_the_shared_tables_do_not_fit():
    samples, _, _ = heterotopic(n=100)
    tight = several_variograms(samples, lags=LAGS, directions=FAN, limits=Limits(memory_budget_bytes=20_000))
    assert_equal_to_single(tight, samples, LAGS, FAN, "semivariance")


def test_the_single_variable_skip_rule_applies_per_variable(monkeypatch):
    """Above MAX_UNCERTAINTY_PAIRS the jackknife is skipped, for each variable as for one alone."""
    import lagwise.core.variography.several as several
    import lagwise.core.variography.uncertainty as uncertainty

    samples, _, _ = heterotopic()
    monkeypatch.setattr(uncertainty, "MAX_UNCERTAINTY_PAIRS", 3000)
    monkeypatch.setattr(several, "MAX_UNCERTAINTY_PAIRS", 3000)
    result = several_variograms(samples, lags=LAGS)
    skipped = 0
    for variable in result.variables:
        alone = experimental_variogram(samples.variable(variable.name), lags=LAGS)
        ours, theirs = variable.result.directions[0].classes, alone.directions[0].classes
        assert [r.uncertainty_reason for r in ours] == [r.uncertainty_reason for r in theirs]
        assert [r.standard_error for r in ours] == [r.standard_error for r in theirs]
        for row, single in zip(ours, theirs, strict=True):
            assert row.pairs == single.pairs and row.value == pytest.approx(single.value, rel=1e-12)
        skipped += alone.uncertainty is None
    assert 0 < skipped < len(result.variables)


def test_one_budget_bounds_the_class_uncertainty_work_of_a_request(monkeypatch):
    """The direct jackknifes, then the cross pairs', run in order while their pair work fits one
    budget; the rest say so, and the variables that ran still equal their single requests."""
    import lagwise.core.variography.several as several
    from lagwise.core.variography import cross_uncertainty

    samples, _, _ = heterotopic()
    whole = several_variograms(samples, lags=LAGS)
    assert all(v.result.uncertainty is not None for v in whole.variables)
    assert all(c.uncertainty is not None for c in whole.cross)
    from lagwise.core.variography.pairs import sweep_visits

    lead_x = np.sort(samples.coords[~np.isnan(samples.values[:, 0]), 0])
    first = max(
        sum(r.pairs for r in whole.variables[0].result.directions[0].classes),
        int(sweep_visits(lead_x, EDGES[-1]).sum()),
    )
    monkeypatch.setattr(several, "REQUEST_UNCERTAINTY_PAIRS", first)
    bounded = several_variograms(samples, lags=LAGS)
    lead, *others = bounded.variables
    assert lead.result.uncertainty == whole.variables[0].result.uncertainty
    assert lead.result.directions == whole.variables[0].result.directions
    for variable in others:
        assert variable.result.uncertainty is None
        assert {r.uncertainty_reason for r in variable.result.directions[0].classes} == {several.BUDGET_SPENT}
    for cross in bounded.cross:
        assert cross.uncertainty is None
        assert {r.uncertainty_reason for r in cross.directions[0].classes} == {cross_uncertainty.BUDGET_SPENT}


def test_cross_semivariance_standard_errors_equal_a_brute_force_delete_one_group_jackknife():
    """The cross-semivariance (1/2N) sum (a_j - a_i)(b_j - b_i) (Journel & Huijbregts 1978, Mining
    Geostatistics, ch. II) over the samples measuring both, recomputed with each group deleted."""
    samples, coords, columns = heterotopic(n=220)
    result = several_variograms(samples, lags=LAGS)
    assert len(result.cross) == 3
    for cross in result.cross:
        a, b = columns[cross.names[0]], columns[cross.names[1]]
        both = ~np.isnan(a) & ~np.isnan(b)
        xy, za, zb = coords[both], a[both], b[both]
        groups = cross.uncertainty.blocks
        assert groups == min(8, both.sum() // 6)
        labels = spatial_blocks(xy, groups)
        factor = student_t.ppf(0.975, groups - 1)
        for c, row in enumerate(cross.directions[0].classes):
            replicates = []
            for g in range(groups):
                left = np.flatnonzero(labels != g)
                i, j = np.triu_indices(left.size, k=1)
                d = pdist(xy[left])
                products = (za[left][j] - za[left][i]) * (zb[left][j] - zb[left][i])
                inside = (d >= EDGES[c]) & (d < EDGES[c + 1])
                replicates.append(products[inside].sum() / (2 * inside.sum()))
            replicates = np.array(replicates)
            se = np.sqrt((groups - 1) / groups * np.sum((replicates - replicates.mean()) ** 2))
            assert row.standard_error == pytest.approx(se, rel=1e-9)
            # Symmetric: a cross-semivariance may be negative.
            assert row.interval_95 == pytest.approx((row.value - factor * se, row.value + factor * se), rel=1e-12)


def test_cross_semivariance_of_a_variable_with_itself_has_its_standard_errors():
    """gamma_aa = gamma_a (Wackernagel 2003, Multivariate Geostatistics, ch. 20), and the same
    samples give the same blocks, so the same jackknife."""
    _, coords, columns = heterotopic()
    twin = build_multi_sample_set(
        [VariableInput("zinc", columns["zinc"]), VariableInput("zinc_again", columns["zinc"].copy())],
        coords[:, 0],
        coords[:, 1],
    )
    result = several_variograms(twin, lags=LAGS, directions=FAN)
    (cross,) = result.cross
    assert cross.uncertainty == result.variables[0].result.uncertainty
    for direct, crossed in zip(result.variables[0].result.directions, cross.directions, strict=True):
        for row, other in zip(direct.classes, crossed.classes, strict=True):
            if row.standard_error is None:
                assert other.standard_error is None and other.uncertainty_reason == row.uncertainty_reason
            else:
                assert other.standard_error == pytest.approx(row.standard_error, rel=1e-9)


def test_cross_covariances_say_why_they_have_no_standard_errors():
    samples, _, _ = heterotopic(n=100)
    result = several_variograms(samples, lags=LAGS, statistic="covariance")
    rows = [row for c in result.cross for d in c.directions for row in d.classes if row.value is not None]
    assert rows and all(r.uncertainty_reason == CROSS_COVARIANCE_UNCERTAINTY for r in rows)
    assert all(c.uncertainty is None for c in result.cross)


def test_cross_blocks_that_would_not_fit_the_memory_budget_are_skipped_with_the_reason():
    samples, _, _ = heterotopic(n=220)
    result = several_variograms(samples, lags=LAGS, limits=Limits(memory_budget_bytes=1))
    rows = [row for c in result.cross for d in c.directions for row in d.classes if row.value is not None]
    assert rows and all(r.standard_error is None and r.uncertainty_reason == TOO_LARGE for r in rows)
    assert_equal_to_single(result, samples, LAGS, None, "semivariance")
