"""Joint models (linear model of coregionalisation): validation and the Goulard-Voltz fit."""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.errors import InvalidInput
from lagwise.core.modelling.coregionalisation import (
    JointModel,
    JointStructure,
    project_psd,
    require_variables,
    validate_joint_model,
)
from lagwise.core.modelling.fitting import ExperimentalPoints
from lagwise.core.modelling.joint_fitting import JointExperimental, fit_joint_model
from lagwise.core.modelling.models import Anisotropy


def _model(sills, nugget=None, family="spherical", range_=10.0):
    sills = np.asarray(sills, dtype=float)
    p = sills.shape[0]
    return JointModel(
        tuple("abcdefgh"[:p]),
        np.zeros((p, p)) if nugget is None else np.asarray(nugget, dtype=float),
        (JointStructure(family, range_, sills),),
    )


def test_valid_model_passes():
    validate_joint_model(_model([[1.0, 0.5], [0.5, 1.0]], [[0.1, 0.0], [0.0, 0.1]]), 2)


def test_not_psd_names_structure_and_smallest_eigenvalue():
    """Eigenvalues of [[1, 2], [2, 1]] are 3 and -1 (numpy.linalg.eigvalsh)."""
    with pytest.raises(InvalidInput) as caught:
        validate_joint_model(_model([[1.0, 2.0], [2.0, 1.0]]), 2)
    issue = caught.value.issues[0]
    assert issue.pointer == "/model/structures/0/sills"
    assert "-1" in issue.detail and "positive semi-definite" in issue.detail


def test_nugget_not_psd_named():
    with pytest.raises(InvalidInput) as caught:
        validate_joint_model(_model([[1.0, 0.0], [0.0, 1.0]], [[0.1, 0.5], [0.5, 0.1]]), 2)
    assert caught.value.issues[0].pointer == "/model/nugget"


def test_asymmetric_and_wrong_shape_refused():
    with pytest.raises(InvalidInput) as caught:
        validate_joint_model(_model([[1.0, 0.2], [0.3, 1.0]]), 2)
    assert caught.value.issues[0].pointer.startswith("/model/structures/0/sills/")
    bad = JointModel(("a", "b"), np.zeros((2, 2)), (JointStructure("spherical", 5.0, np.eye(3)),))
    with pytest.raises(InvalidInput) as caught:
        validate_joint_model(bad, 2)
    assert caught.value.issues[0].pointer == "/model/structures/0/sills"


def test_unbounded_family_and_duplicate_names_refused():
    bad = JointModel(("a", "a"), np.zeros((2, 2)), (JointStructure("linear", 5.0, np.eye(2)),))
    with pytest.raises(InvalidInput) as caught:
        validate_joint_model(bad, 2)
    pointers = {i.pointer for i in caught.value.issues}
    assert {"/model/variables/1", "/model/structures/0/family"} <= pointers


def test_variables_the_samples_lack():
    with pytest.raises(InvalidInput) as caught:
        require_variables(_model(np.eye(2)), ("a", "zinc"))
    assert caught.value.issues[0].pointer == "/model/variables/1"


def test_projection_is_psd_and_keeps_psd_matrices():
    """Higham (1988): the nearest PSD matrix sets negative eigenvalues to zero."""
    m = np.array([[1.0, 2.0], [2.0, 1.0]])
    projected = project_psd(m)
    assert np.linalg.eigvalsh(projected).min() >= -1e-12
    np.testing.assert_allclose(projected, [[1.5, 1.5], [1.5, 1.5]], atol=1e-12)
    good = np.array([[2.0, 0.3], [0.3, 1.0]])
    np.testing.assert_allclose(project_psd(good), good, atol=1e-14)


def _points(model, i, j, h, pairs):
    value = model.semivariance(i, j, h)
    return ExperimentalPoints(
        h,
        value,
        np.asarray(pairs),
        np.zeros_like(h),
        np.zeros(len(h), dtype=int),
        np.arange(len(h)),
        np.asarray(pairs) >= 30,
    )


def _joint(model, h, cross_pairs=500):
    p = model.size
    points = {}
    for i in range(p):
        for j in range(i, p):
            points[(i, j)] = _points(model, i, j, h, np.full(len(h), 500 if i == j else cross_pairs))
    return JointExperimental(model.variables, points, 2, tuple(float(np.trace(model.sill())) for _ in range(p)))


def test_fit_recovers_exact_model_from_its_own_values():
    """Noise-free classes of a valid LMC: the fitted matrices equal the model's (Goulard & Voltz 1992)."""
    truth = _model([[1.0, 0.6, 0.2], [0.6, 0.8, 0.1], [0.2, 0.1, 0.5]], 0.1 * np.eye(3))
    h = np.linspace(1.0, 20.0, 15)
    result = fit_joint_model(_joint(truth, h), families=["spherical"])
    best = result.best.model
    assert sum(c is result.best for c in result.candidates) == 1
    np.testing.assert_allclose(best.structures[0].range, 10.0, rtol=2e-3)
    np.testing.assert_allclose(best.structures[0].sills, truth.structures[0].sills, atol=5e-3)
    np.testing.assert_allclose(best.nugget, truth.nugget, atol=5e-3)


def test_fitted_matrices_are_psd_even_when_the_classes_are_not():
    """Cross classes stronger than the direct ones allow: each matrix is still PSD
    (numpy.linalg.eigvalsh >= -1e-12), and the cross pair without classes gets zero sills."""
    strong = _model([[1.0, 1.5], [1.5, 1.0]])  # not PSD: |b_12| > sqrt(b_11 b_22)
    h = np.linspace(1.0, 20.0, 12)
    joint = _joint(strong, h)
    result = fit_joint_model(joint, families=["spherical"], nugget="fit")
    for candidate in result.candidates:
        for matrix in [candidate.model.nugget] + [s.sills for s in candidate.model.structures]:
            assert np.linalg.eigvalsh(matrix).min() >= -1e-12
    sparse = _joint(_model([[1.0, 0.5], [0.5, 1.0]]), h, cross_pairs=5)
    result = fit_joint_model(sparse, families=["spherical"])
    assert any("cross pair (a, b)" in w and "set to zero" in w for w in result.warnings)
    assert result.best.model.structures[0].sills[0, 1] == 0.0


def test_goulard_voltz_sweeps_improve_on_the_projected_start():
    """When projection is needed, the sweeps never end with a larger weighted SSE than their start."""
    from lagwise.core.modelling.joint_fitting import _entries, _Shape, _sse, _unconstrained, goulard_voltz

    h = np.linspace(1.0, 20.0, 12)
    joint = _joint(_model([[1.0, 1.4], [1.4, 1.0]], [[0.2, -0.3], [-0.3, 0.2]]), h)
    entries = _entries(joint, "pairs")
    shapes = [_Shape("spherical", 10.0, None, Anisotropy())]
    basis = [[np.ones(len(e.gamma)) for e in entries], [shapes[0].values(e.vectors) for e in entries]]
    start = _sse(entries, basis, _unconstrained(entries, basis, 2))
    nugget, sills, sse, _, converged = goulard_voltz(entries, shapes, 2, True)
    assert converged and sse <= start + 1e-15
    assert np.linalg.eigvalsh(nugget).min() >= -1e-12 and np.linalg.eigvalsh(sills[0]).min() >= -1e-12


def test_joint_fit_options_refused():
    h = np.linspace(1.0, 20.0, 12)
    joint = _joint(_model(np.eye(2)), h)
    with pytest.raises(InvalidInput) as caught:
        fit_joint_model(joint, weighting="cressie", nugget=0.5)
    assert {i.pointer for i in caught.value.issues} == {"/weighting", "/nugget"}
