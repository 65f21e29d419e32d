"""Small typed results returned by the client (plain Python; pandas optional).

Results are read tolerantly: each class takes the members it knows from the response and
ignores the others, so a newer service that adds members does not break a deployed client;
the whole document of each part stays in its ``raw`` attribute. A member with a default may be
missing; a missing member without one raises :class:`ResponseError` naming its place.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import MISSING, dataclass, field, fields
from typing import Any, TypeVar

from .errors import ResponseError
from .models import VariogramModel

T = TypeVar("T")


def _dataframe(rows: list[dict]):
    try:
        import pandas as pd
    except ImportError as exc:  # pragma: no cover - depends on the environment
        raise ImportError("to_dataframe() needs pandas: pip install 'lagwise-client[dataframes]'") from exc
    return pd.DataFrame(rows)


def _columnar_frame(columns: Mapping[str, list]):
    """A DataFrame of equal-length columns (a response's columnar member), one row per entry."""
    return _dataframe([dict(zip(columns, row, strict=True)) for row in zip(*columns.values(), strict=True)])


def _object(payload: Any, where: str) -> Mapping[str, Any]:
    if not isinstance(payload, Mapping):
        raise ResponseError(f"the response's {where or '/'} is not a JSON object")
    return payload


def _items(document: Mapping[str, Any], name: str, where: str, required: bool = True) -> list:
    """The list ``document[name]`` ([] when an optional list is missing or null)."""
    value = document.get(name)
    if value is None and not required:
        return []
    if not isinstance(value, list):
        raise ResponseError(f"the response's {where}/{name} is missing or not a list")
    return value


def _member(f: Any, value: Any, where: str) -> Any:
    """A response member in the form its field declares: JSON arrays become tuples (rows too)."""
    annotation = str(f.type)
    if value is None or not annotation.startswith("tuple"):
        return value
    if not isinstance(value, list):
        raise ResponseError(f"the response's {where}/{f.name} is not a list")
    if annotation.startswith("tuple[tuple"):
        return tuple(tuple(row) if isinstance(row, list) else row for row in value)
    return tuple(value)


def _read(cls: type[T], payload: Any, where: str, **typed: Any) -> T:
    """An instance of the result dataclass ``cls`` from the members of ``payload`` it knows.

    A member that is missing or null takes its field's default; one without a default must be
    present. Arrays become tuples where the field says so.

    Parameters
    ----------
    payload : mapping
        The part of the response (kept whole in ``raw``).
    where : str
        Its JSON pointer in the response, for messages.
    typed
        Members already turned into their typed form (nested results).
    """
    document = _object(payload, where)
    values: dict[str, Any] = {}
    for f in fields(cls):  # type: ignore[arg-type]
        if f.name == "raw":
            continue
        has_default = f.default is not MISSING or f.default_factory is not MISSING
        if f.name in typed:
            values[f.name] = typed[f.name]
        elif document.get(f.name) is not None or (f.name in document and not has_default):
            values[f.name] = _member(f, document[f.name], where)
        elif not has_default:
            raise ResponseError(f"the response lacks {where}/{f.name}")
    values["raw"] = dict(document)
    return cls(**values)


class Response:
    """What every result read from a whole response has: ``from_response`` and ``to_dict``."""

    raw: dict

    @classmethod
    def from_response(cls, document: Any) -> Any:
        """Read the response document (see the module's notes on tolerance)."""
        return _read(cls, document, "")

    def to_dict(self) -> dict:
        """The response document."""
        return self.raw


def _row(result: Any) -> dict:
    """The typed members of a result as a flat dict (``raw`` left out)."""
    return {f.name: getattr(result, f.name) for f in fields(result) if f.name != "raw"}


def _raw() -> Any:
    return field(default_factory=dict, repr=False, compare=False)


@dataclass(frozen=True, kw_only=True)
class VariogramClass:
    """One distance class: bounds [lower, upper), mean distance, pair count, value (None if undefined),
    and its jackknife standard error and 95 % interval (None with ``uncertainty_reason`` when undefined)."""

    lower: float
    upper: float
    pairs: int
    value: float | None = None
    mean_distance: float | None = None
    sparse: bool = False
    reason: str | None = None
    tail_mean: float | None = None
    head_mean: float | None = None
    tail_sd: float | None = None
    head_sd: float | None = None
    error_bound: float | None = None
    pair_bound: int | None = None
    bound_exceeded: bool | None = None
    standard_error: float | None = None
    interval_95: tuple[float, ...] | None = None
    uncertainty_reason: str | None = None
    raw: dict = _raw()


@dataclass(frozen=True, kw_only=True)
class DirectionVariogram:
    """The classes of one direction class (angles in degrees)."""

    azimuth: float
    classes: tuple[VariogramClass, ...]
    tolerance: float | None = None
    bandwidth: float | None = None
    dip: float | None = None
    dip_tolerance: float | None = None
    vertical_bandwidth: float | None = None
    raw: dict = _raw()

    @classmethod
    def read(cls, payload: Any, where: str) -> DirectionVariogram:
        """Read one direction of a response, ``where`` being its JSON pointer."""
        document = _object(payload, where)
        classes = tuple(
            _read(VariogramClass, c, f"{where}/classes/{i}") for i, c in enumerate(_items(document, "classes", where))
        )
        return _read(cls, document, where, classes=classes)


def _directions(document: Mapping[str, Any], where: str, required: bool = True) -> tuple[DirectionVariogram, ...]:
    return tuple(
        DirectionVariogram.read(d, f"{where}/directions/{i}")
        for i, d in enumerate(_items(document, "directions", where, required))
    )


@dataclass(frozen=True, kw_only=True)
class ExperimentalVariogram(Response):
    """Result of :meth:`Lagwise.experimental_variogram`.

    Attributes
    ----------
    directions : tuple of DirectionVariogram
    summary, parameters, provenance : dict
    warnings : tuple of str
    pairs_for_class : dict or None
        Tail and head values of one class, when requested.
    raw : dict
        The whole response document.
    """

    directions: tuple[DirectionVariogram, ...]
    summary: dict = field(default_factory=dict)
    parameters: dict = field(default_factory=dict)
    warnings: tuple[str, ...] = ()
    provenance: dict = field(default_factory=dict)
    pairs_for_class: dict | None = None
    raw: dict = _raw()

    @classmethod
    def from_response(cls, document: Any) -> Any:
        """The response as an :class:`ExperimentalVariogram`, or as :class:`SeveralVariograms`
        when the samples carried several variables."""
        document = _object(document, "")
        if "variables" in document and "directions" not in document:
            return SeveralVariograms.from_response(document)
        return _read(cls, document, "", directions=_directions(document, ""))

    def to_dataframe(self):
        """One row per (direction, class) with the direction's azimuth and tolerance (needs pandas)."""
        rows = []
        for index, d in enumerate(self.directions):
            for c in d.classes:
                rows.append({"direction": index, "azimuth": d.azimuth, "tolerance": d.tolerance, **_row(c)})
        return _dataframe(rows)


@dataclass(frozen=True, kw_only=True)
class VariogramMap(Response):
    """Result of :meth:`Lagwise.variogram_map`: values[row][column], rows by hy.

    With the grid method, ``error_bound`` (relative, None where undefined), ``pair_bound`` and
    ``bound_exceeded`` per cell, in the same layout; empty tuples otherwise.
    """

    hx: tuple[float, ...]
    hy: tuple[float, ...]
    values: tuple[tuple[float | None, ...], ...]
    pairs: tuple[tuple[int, ...], ...]
    error_bound: tuple[tuple[float | None, ...], ...] = ()
    pair_bound: tuple[tuple[int, ...], ...] = ()
    bound_exceeded: tuple[tuple[bool, ...], ...] = ()
    summary: dict = field(default_factory=dict)
    parameters: dict = field(default_factory=dict)
    warnings: tuple[str, ...] = ()
    provenance: dict = field(default_factory=dict)
    raw: dict = _raw()

    def to_dataframe(self):
        """One row per cell: hx, hy, value, pairs, and with the grid method its bounds (needs pandas)."""
        rows = []
        for r, hy in enumerate(self.hy):
            for c, hx in enumerate(self.hx):
                row = {"hx": hx, "hy": hy, "value": self.values[r][c], "pairs": self.pairs[r][c]}
                if self.error_bound:
                    row.update(
                        error_bound=self.error_bound[r][c],
                        pair_bound=self.pair_bound[r][c],
                        bound_exceeded=self.bound_exceeded[r][c],
                    )
                rows.append(row)
        return _dataframe(rows)


def _model(payload: Any, where: str) -> VariogramModel:
    try:
        return VariogramModel.from_dict(_object(payload, where))
    except (TypeError, ValueError) as exc:
        raise ResponseError(f"the response's {where} is not a readable model: {exc}") from None


@dataclass(frozen=True, kw_only=True)
class Candidate:
    """One candidate model tried by the fit, with its scores (lower criterion is better).

    ``model`` is None when the candidate's fit failed (``note`` says why); ``selected`` is true
    on the candidate the fit chose (from services that say so).
    """

    rank: int
    label: str
    model: VariogramModel | None = None
    parameters: int | None = None
    weighted_sse: float | None = None
    r_squared: float | None = None
    criterion: float | None = None
    converged: bool = False
    iterations: int | None = None
    note: str | None = None
    selected: bool = False
    raw: dict = _raw()

    @classmethod
    def read(cls, payload: Any, where: str) -> Candidate:
        """Read one candidate of a response, ``where`` being its JSON pointer."""
        document = _object(payload, where)
        model = document.get("model")
        return _read(cls, document, where, model=None if model is None else _model(model, f"{where}/model"))


def _candidates(document: Mapping[str, Any], where: str) -> tuple[Candidate, ...]:
    return tuple(
        Candidate.read(c, f"{where}/candidates/{i}")
        for i, c in enumerate(_items(document, "candidates", where, required=False))
    )


def _fitted(fit: Mapping[str, Any], where: str) -> dict[str, Any]:
    """The selected model and the candidates of a fit's document."""
    if "model" not in fit:
        raise ResponseError(f"the response lacks {where}/model")
    return {"model": _model(fit["model"], f"{where}/model"), "candidates": _candidates(fit, where)}


@dataclass(frozen=True, kw_only=True)
class ModelFit(Response):
    """Result of :meth:`Lagwise.fit_model`.

    Attributes
    ----------
    model : VariogramModel
        The selected model; evaluate it locally with ``model.semivariance(h)``.
    diagnostics : dict
        weighted_sse, r_squared, criterion, converged, iterations.
    candidates : tuple of Candidate
        Every model tried, ranked.
    experimental : dict
        The classes used, with ``used`` flags and the model's value at each.
    """

    model: VariogramModel
    diagnostics: dict = field(default_factory=dict)
    candidates: tuple[Candidate, ...] = ()
    experimental: dict = field(default_factory=dict)
    parameters: dict = field(default_factory=dict)
    warnings: tuple[str, ...] = ()
    provenance: dict = field(default_factory=dict)
    summary: dict | None = None
    raw: dict = _raw()

    @classmethod
    def from_response(cls, document: Any) -> ModelFit:
        document = _object(document, "")
        return _read(cls, document, "", **_fitted(document, ""))

    def to_dataframe(self):
        """One row per candidate (needs pandas)."""
        return _dataframe([{k: v for k, v in _row(c).items() if k != "model"} for c in self.candidates])


@dataclass(frozen=True, kw_only=True)
class CrossValidation(Response):
    """Result of :meth:`Lagwise.cross_validate`.

    Attributes
    ----------
    statistics : dict
        count, mean_error, mean_absolute_error, root_mean_square_error,
        mean_standardized_error, root_mean_square_standardized_error, correlation,
        goodness_of_prediction, interval_coverage_95, outliers.
    samples : dict
        Columnar per-sample results: id, observed, estimate, standard_deviation,
        error (estimate - observed), standardized_error, outlier.
    assessment : str
        Plain-language reading of the statistics.
    """

    statistics: dict
    samples: dict
    assessment: str = ""
    unestimated: tuple[dict, ...] = ()
    parameters: dict = field(default_factory=dict)
    warnings: tuple[str, ...] = ()
    provenance: dict = field(default_factory=dict)
    raw: dict = _raw()

    def to_dataframe(self):
        """One row per sample (needs pandas)."""
        return _columnar_frame(self.samples)


@dataclass(frozen=True, kw_only=True)
class Predictions(Response):
    """Result of :meth:`Lagwise.predict`: columnar targets, estimates and kriging variances
    (None where a target could not be estimated; ``unestimated`` says why).

    ``exceedance``: ``{"threshold", "probability"}`` per threshold asked for; ``support``:
    ``point`` or ``block`` (estimates of block averages)."""

    x: tuple[float, ...]
    estimate: tuple[float | None, ...]
    variance: tuple[float | None, ...]
    y: tuple[float, ...] | None = None
    z: tuple[float, ...] | None = None
    grid: dict | None = None
    unestimated: tuple[dict, ...] = ()
    weights: tuple[dict, ...] = ()
    exceedance: tuple[dict, ...] = ()
    support: str = "point"
    parameters: dict = field(default_factory=dict)
    warnings: tuple[str, ...] = ()
    provenance: dict = field(default_factory=dict)
    raw: dict = _raw()

    def exceedance_grid(self, threshold: float):
        """P(value > ``threshold``) per grid node as a 2-D numpy array (rows by y; NaN where unestimated)."""
        return _exceedance_grid(self.grid, self.exceedance, threshold)

    def to_grid(self, which: str = "estimate"):
        """A 2-D numpy array (rows by y, columns by x; NaN where unestimated) for a grid request.

        Needs numpy (imported only here).
        """
        import numpy as np

        if self.grid is None or len(self.grid["shape"]) != 2:
            raise ValueError("to_grid() needs a 2-D grid prediction")
        nx, ny = self.grid["shape"]
        values = np.array([np.nan if v is None else v for v in getattr(self, which)], dtype=float)
        return values.reshape(ny, nx)

    def to_dataframe(self):
        """One row per target (needs pandas)."""
        columns = {"x": self.x, "y": self.y, "z": self.z, "estimate": self.estimate, "variance": self.variance}
        present = {k: v for k, v in columns.items() if v is not None}
        return _dataframe([dict(zip(present, row, strict=True)) for row in zip(*present.values(), strict=True)])


def _exceedance_grid(grid: dict | None, entries, threshold: float):
    import numpy as np

    if grid is None or len(grid["shape"]) != 2:
        raise ValueError("exceedance_grid() needs a 2-D grid prediction")
    for entry in entries:
        if entry["threshold"] == threshold:
            nx, ny = grid["shape"]
            values = [np.nan if v is None else v for v in entry["probability"]]
            return np.array(values, dtype=float).reshape(ny, nx)
    known = ", ".join(str(e["threshold"]) for e in entries) or "none"
    raise KeyError(f"no exceedance for threshold {threshold!r} (thresholds: {known})")


@dataclass(frozen=True, kw_only=True)
class Analysis(Response):
    """Result of :meth:`Lagwise.analyze`: the stages as attributes.

    Attributes
    ----------
    summary, transformed_summary : dict
    experimental : dict
        ``omnidirectional`` and ``directional`` classes, and the ``anisotropy`` estimate.
    model : VariogramModel
        The selected model (in transformed units when a transform was asked for).
    fit : dict
        model, diagnostics, candidates (as in the response).
    candidates : tuple of Candidate
        The fit's candidates, typed.
    cross_validation : dict or None
        statistics, samples, assessment.
    prediction : dict or None
        Columnar grid predictions in original units; with thresholds also ``exceedance``,
        ``classes`` (targets by probability class) and ``simulation`` (share of the grid
        above each threshold, simulated blocks).
    figures : dict
        Figure name -> SVG text or base64 PNG.
    selection : dict or None
        The strategies compared by cross-validation (``strategies``, each with ``selected``,
        and the ``reason``).
    verdict : dict
        ``usable`` (bool), ``level`` (no_structure, weak, usable, review) and ``text``.
    """

    model: VariogramModel
    fit: dict
    candidates: tuple[Candidate, ...] = ()
    summary: dict = field(default_factory=dict)
    transformed_summary: dict = field(default_factory=dict)
    experimental: dict = field(default_factory=dict)
    cross_validation: dict | None = None
    prediction: dict | None = None
    figures: dict = field(default_factory=dict)
    warnings: tuple[str, ...] = ()
    selection: dict | None = None
    verdict: dict = field(default_factory=dict)
    parameters: dict = field(default_factory=dict)
    provenance: dict = field(default_factory=dict)
    raw: dict = _raw()

    @classmethod
    def from_response(cls, document: Any) -> Any:
        """The response as an :class:`Analysis`, or as :class:`BatchAnalysis` for several variables."""
        document = _object(document, "")
        if "variables" in document and "fit" not in document:
            return BatchAnalysis.from_response(document)
        return _read(cls, document, "", **_fitted(_object(document.get("fit"), "/fit"), "/fit"))

    def exceedance_grid(self, threshold: float):
        """P(value > ``threshold``) per prediction node as a 2-D numpy array (rows by y)."""
        if self.prediction is None:
            raise ValueError("the analysis has no prediction stage")
        return _exceedance_grid(self.prediction["grid"], self.prediction.get("exceedance") or (), threshold)

    def probability_classes(self, threshold: float) -> list[dict]:
        """Rows ``{"class", "meaning", "count", "share"}`` of the targets by probability class."""
        for table in (self.prediction or {}).get("classes") or ():
            if table["threshold"] == threshold:
                return list(table["classes"])
        raise KeyError(f"no probability classes for threshold {threshold!r}")

    def save_figures(self, folder) -> list:
        """Write each figure to ``folder`` (``<name>.svg`` or ``<name>.png``); returns the paths."""
        import base64
        from pathlib import Path

        target = Path(folder)
        target.mkdir(parents=True, exist_ok=True)
        png = self.parameters.get("figure_format") == "png"
        paths = []
        for name, content in self.figures.items():
            path = target / f"{name}.{'png' if png else 'svg'}"
            if png:
                path.write_bytes(base64.b64decode(content))
            else:
                path.write_text(content, encoding="utf-8")
            paths.append(path)
        return paths


@dataclass(frozen=True, kw_only=True)
class VariableVariogram:
    """The direct experimental variogram of one variable of a several-variable response."""

    name: str
    directions: tuple[DirectionVariogram, ...]
    unit: str | None = None
    summary: dict = field(default_factory=dict)
    class_uncertainty: dict = field(default_factory=dict)
    raw: dict = _raw()


@dataclass(frozen=True, kw_only=True)
class CrossVariogram:
    """The cross statistic of a pair of variables; ``variables`` (a, b), a the tail variable of covariances;
    ``class_uncertainty`` the jackknife's method and blocks (cross-semivariance only, else None)."""

    variables: tuple[str, ...]
    directions: tuple[DirectionVariogram, ...]
    class_uncertainty: dict = field(default_factory=dict)
    raw: dict = _raw()


def _variogram_rows(directions: tuple[DirectionVariogram, ...], **labels: Any) -> list[dict]:
    return [
        {**labels, "direction": index, "azimuth": d.azimuth, "tolerance": d.tolerance, **_row(c)}
        for index, d in enumerate(directions)
        for c in d.classes
    ]


@dataclass(frozen=True, kw_only=True)
class SeveralVariograms(Response):
    """Result of :meth:`Lagwise.experimental_variogram` for samples with several variables.

    Attributes
    ----------
    variables : tuple of VariableVariogram
        Each variable's direct variogram, in the samples' order.
    cross : tuple of CrossVariogram
        Every pair of variables (``parameters["cross_statistic"]`` says what the values are).
    parameters, provenance : dict
    warnings : tuple of str
    """

    variables: tuple[VariableVariogram, ...]
    cross: tuple[CrossVariogram, ...] = ()
    colocated_pairs: int = 0
    parameters: dict = field(default_factory=dict)
    warnings: tuple[str, ...] = ()
    provenance: dict = field(default_factory=dict)
    raw: dict = _raw()

    @classmethod
    def from_response(cls, document: Any) -> SeveralVariograms:
        document = _object(document, "")
        variables = tuple(
            _read(VariableVariogram, v, f"/variables/{i}", directions=_directions(v, f"/variables/{i}"))
            for i, v in enumerate(_items(document, "variables", ""))
        )
        cross = tuple(
            _read(CrossVariogram, c, f"/cross/{i}", directions=_directions(c, f"/cross/{i}"))
            for i, c in enumerate(_items(document, "cross", "", required=False))
        )
        return _read(cls, document, "", variables=variables, cross=cross)

    def variable(self, name: str) -> VariableVariogram:
        """The direct variogram of ``name`` (KeyError when the response has no such variable)."""
        for v in self.variables:
            if v.name == name:
                return v
        raise KeyError(name)

    def to_dataframe(self):
        """Tidy rows, one per (variogram, direction, class): ``first`` and ``second`` name the
        variables (the same for a direct variogram), ``kind`` is ``direct`` or ``cross`` (needs pandas)."""
        rows = []
        for v in self.variables:
            rows.extend(_variogram_rows(v.directions, kind="direct", first=v.name, second=v.name))
        for c in self.cross:
            rows.extend(_variogram_rows(c.directions, kind="cross", first=c.variables[0], second=c.variables[1]))
        return _dataframe(rows)

    def frames(self) -> dict:
        """One DataFrame per variogram: keyed by the variable's name (direct) or the (a, b) pair (cross)."""
        out: dict = {v.name: _dataframe(_variogram_rows(v.directions)) for v in self.variables}
        out.update({tuple(c.variables): _dataframe(_variogram_rows(c.directions)) for c in self.cross})
        return out


@dataclass(frozen=True, kw_only=True)
class BatchAnalysis(Response):
    """Result of :meth:`Lagwise.analyze` for samples with several variables: one
    :class:`Analysis` per variable (``name`` and ``unit`` in each one's ``raw``).

    Attributes
    ----------
    variables : tuple of Analysis
        In the samples' order.
    names : tuple of str
    parameters, provenance : dict
    warnings : tuple of str
    """

    variables: tuple[Analysis, ...]
    names: tuple[str, ...] = ()
    parameters: dict = field(default_factory=dict)
    warnings: tuple[str, ...] = ()
    provenance: dict = field(default_factory=dict)
    raw: dict = _raw()

    @classmethod
    def from_response(cls, document: Any) -> BatchAnalysis:
        document = _object(document, "")
        sections = _items(document, "variables", "")
        analyses = []
        for i, section in enumerate(sections):
            where = f"/variables/{i}"
            section = _object(section, where)
            analyses.append(
                _read(Analysis, section, where, **_fitted(_object(section.get("fit"), f"{where}/fit"), f"{where}/fit"))
            )
        names = tuple(str(_object(s, "").get("name")) for s in sections)
        return _read(cls, document, "", variables=tuple(analyses), names=names)

    def __getitem__(self, name: str) -> Analysis:
        """The analysis of the variable ``name`` (KeyError when there is none)."""
        if name not in self.names:
            raise KeyError(name)
        return self.variables[self.names.index(name)]

    def to_dataframe(self):
        """One row per variable (needs pandas): name, unit, samples, verdict level, usable, the selected
        model (families, nugget, total sill, largest practical range of its bounded structures) and every cross-validation
        statistic (RMSE and standardized RMSE also as ``rmse`` and ``rmse_standardized``)."""
        rows = []
        for name, analysis in zip(self.names, self.variables, strict=True):
            statistics = (analysis.cross_validation or {}).get("statistics") or {}
            model = analysis.model
            rows.append(
                {
                    "name": name,
                    "unit": analysis.raw.get("unit"),
                    "samples": analysis.summary.get("samples"),
                    "verdict": analysis.verdict.get("level"),
                    "usable": analysis.verdict.get("usable"),
                    "families": "+".join(s.family for s in model.structures),
                    "nugget": model.nugget,
                    "sill": model.sill,
                    "range": max((s.range for s in model.structures if s.bounded), default=None),
                    "rmse": statistics.get("root_mean_square_error"),
                    "rmse_standardized": statistics.get("root_mean_square_standardized_error"),
                    **{k: v for k, v in statistics.items() if not isinstance(v, dict | list)},
                }
            )
        return _dataframe(rows)

    def frames(self) -> dict:
        """One DataFrame per variable, keyed by its name: its cross-validation per sample (id,
        observed, estimate, standard_deviation, error, standardized_error, outlier; the samples
        where that variable was measured), empty when the analysis had no cross-validation."""
        return {
            name: _columnar_frame((analysis.cross_validation or {}).get("samples") or {})
            for name, analysis in zip(self.names, self.variables, strict=True)
        }
