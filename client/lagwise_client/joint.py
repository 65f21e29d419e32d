"""Several variables in the client: joint models, multi-variable samples and cokriging results.

A joint model (linear model of coregionalisation) names its ``variables``; its ``nugget``
and each structure's ``sills`` are square matrices in that order (lists of rows). Samples
with several variables are sent as ``{"x", "y", ("z"), "variables": {name: column}}`` with
``null`` where a variable was not measured; :func:`variables_samples` builds that from a
table (a mapping of columns or a pandas DataFrame, whose missing values are NaN).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from .errors import ColumnsError
from .results import CrossValidation, Predictions, Response, _dataframe, _object, _raw, _read
from .samples import column


@dataclass(frozen=True)
class JointModel:
    """A joint model of several variables.

    Attributes
    ----------
    variables : tuple of str
        Row and column order of every matrix.
    nugget : tuple of tuples
        Nugget matrix.
    structures : tuple of dict
        Each ``{"family", "range", "sills", ("anisotropy", "smoothness", "shape")}``.
    """

    variables: tuple[str, ...]
    nugget: tuple[tuple[float, ...], ...]
    structures: tuple[dict, ...] = ()

    @classmethod
    def from_dict(cls, document: Mapping[str, Any]) -> JointModel:
        p = len(document["variables"])
        nugget = document.get("nugget") or [[0.0] * p for _ in range(p)]
        return cls(
            tuple(document["variables"]),
            tuple(tuple(row) for row in nugget),
            tuple(dict(s) for s in document.get("structures", ())),
        )

    def to_dict(self) -> dict:
        return {
            "variables": list(self.variables),
            "nugget": [list(row) for row in self.nugget],
            "structures": [dict(s) for s in self.structures],
        }


def _missing_to_null(value: Any) -> Any:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return None
    return value


def variables_samples(
    table: Any,
    variables: Sequence[str],
    *,
    x: str = "x",
    y: str | None = "y",
    z: str | None = None,
    ids: str | None = None,
) -> dict:
    """The ``samples`` member for several variables from a table.

    Parameters
    ----------
    table : mapping of columns or pandas DataFrame
    variables : sequence of str
        The table's columns sent as variables (their names are the variables' names).
    x, y, z, ids : str or None
        The table's coordinate and identifier columns (``y`` None for 1-D samples).

    Raises
    ------
    ColumnsError
        A named column the table lacks.
    """
    available = list(table.keys()) if isinstance(table, Mapping) else list(getattr(table, "columns", []))
    wanted = [c for c in (x, y, z, ids, *variables) if c is not None]
    lacking = [c for c in wanted if c not in available]
    if lacking:
        raise ColumnsError(
            f"the table lacks the column {lacking[0]!r}; its columns are {', '.join(map(str, available))}",
            key=str(lacking[0]),
            column=str(lacking[0]),
            available=[str(c) for c in available],
        )
    document: dict = {"x": column(table[x])}
    if y is not None:
        document["y"] = column(table[y])
    if z is not None:
        document["z"] = column(table[z])
    if ids is not None:
        document["ids"] = [str(v) for v in column(table[ids])]
    document["variables"] = {name: [_missing_to_null(v) for v in column(table[name])] for name in variables}
    return document


@dataclass(frozen=True, kw_only=True)
class Cokriging(Predictions):
    """Result of :meth:`Lagwise.cokrige`: the primary's cokriging estimates and variances and
    ``cokriging``: primary, secondaries, mean_variance, mean_variance_primary_only,
    variance_reduction and variance_primary_only (per target)."""

    cokriging: dict = field(default_factory=dict)
    raw: dict = _raw()

    @property
    def variance_reduction(self) -> float | None:
        """1 - mean cokriging variance / mean variance of kriging the primary alone."""
        return self.cokriging.get("variance_reduction")

    def to_dataframe(self):
        """One row per target with the variance of kriging the primary alone beside (needs pandas)."""
        columns = {
            "x": self.x,
            "y": self.y,
            "z": self.z,
            "estimate": self.estimate,
            "variance": self.variance,
            "variance_primary_only": tuple(self.cokriging.get("variance_primary_only", ())) or None,
        }
        present = {k: v for k, v in columns.items() if v is not None}
        return _dataframe([dict(zip(present, row, strict=True)) for row in zip(*present.values(), strict=True)])


@dataclass(frozen=True, kw_only=True)
class CokrigingCrossValidation(CrossValidation):
    """Result of :meth:`Lagwise.cross_validate_cokriging`: the primary's per-sample results and
    ``cokriging`` (as for :class:`Cokriging`, plus ``statistics_primary_only``)."""

    cokriging: dict = field(default_factory=dict)
    raw: dict = _raw()

    @property
    def variance_reduction(self) -> float | None:
        return self.cokriging.get("variance_reduction")

    def to_dataframe(self):
        """One row per sample where the primary is measured, with the primary-only variance (needs pandas)."""
        rows = [dict(zip(self.samples, row, strict=True)) for row in zip(*self.samples.values(), strict=True)]
        alone = self.cokriging.get("variance_primary_only") or [None] * len(rows)
        for row, value in zip(rows, alone, strict=True):
            row["variance_primary_only"] = value
        return _dataframe(rows)


@dataclass(frozen=True, kw_only=True)
class JointFit(Response):
    """Result of :meth:`Lagwise.fit_joint_model`.

    Attributes
    ----------
    model : JointModel
        The selected joint model (send it back as ``model`` to :meth:`Lagwise.cokrige`).
    candidates : tuple of dict
        Every joint model tried, ranked (rank, label, model, selected, parameters, weighted_sse,
        r_squared, criterion, converged, iterations).
    experimental : dict
        ``variables`` and ``cross``: the classes used, with the model's value at each.
    """

    model: JointModel
    diagnostics: dict = field(default_factory=dict)
    candidates: tuple[dict, ...] = ()
    experimental: dict = field(default_factory=dict)
    parameters: dict = field(default_factory=dict)
    warnings: tuple[str, ...] = ()
    provenance: dict = field(default_factory=dict)
    raw: dict = _raw()

    @classmethod
    def from_response(cls, document: Any) -> JointFit:
        document = _object(document, "")
        return _read(cls, document, "", model=JointModel.from_dict(_object(document.get("model"), "/model")))

    def to_dataframe(self):
        """One row per candidate, without its model (needs pandas)."""
        return _dataframe([{k: v for k, v in c.items() if k != "model"} for c in self.candidates])

    def classes(self):
        """One row per class of every direct and cross variogram: variables, azimuth, mean_distance,
        value, pairs, used, model_value (needs pandas)."""
        rows = []
        parts = [((v["name"], v["name"]), v["directions"]) for v in self.experimental.get("variables", [])]
        parts += [(tuple(c["variables"]), c["directions"]) for c in self.experimental.get("cross", [])]
        for (a, b), directions in parts:
            for d in directions:
                for row in d["classes"]:
                    rows.append({"variable": a, "with": b, "azimuth": d["azimuth"], **row})
        return _dataframe(rows)
