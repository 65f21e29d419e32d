"""The analysis's plain-language warnings agree in number with what they count."""

from types import SimpleNamespace

from lagwise.core.analysis import _warnings


def _chosen(outliers: int) -> SimpleNamespace:
    return SimpleNamespace(
        name="ordinary",
        model=None,
        cross_validation=SimpleNamespace(statistics={"outliers": outliers}),
    )


def _notes(outliers: int, withheld: int) -> list[str]:
    samples = SimpleNamespace(size=500)
    return _warnings(samples, [], object(), _chosen(outliers), None, withheld)


def test_one_outlier_and_one_withheld_node_read_in_the_singular():
    notes = _notes(outliers=1, withheld=1)
    assert "1 sample has large cross-validation errors (see cross_validation.samples.outlier)" in notes
    assert "1 prediction node falls outside the plausible envelope of the data and is withheld" in notes


def test_several_read_in_the_plural():
    notes = _notes(outliers=3, withheld=4)
    assert "3 samples have large cross-validation errors (see cross_validation.samples.outlier)" in notes
    assert "4 prediction nodes fall outside the plausible envelope of the data and are withheld" in notes
