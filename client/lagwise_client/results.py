"""Small typed results returned by the client (plain Python; pandas optional)."""

from __future__ import annotations

from dataclasses import dataclass, field

from .models import VariogramModel


def _dataframe(rows: list[dict]):
    try:
        import pandas as pd
    except ImportError as exc:  # pragma: no cover - depends on the environment
        raise ImportError("to_dataframe() needs pandas: pip install 'lagwise-client[dataframes]'") from exc
    return pd.DataFrame(rows)


@dataclass(frozen=True)
class VariogramClass:
    """One distance class: bounds [lower, upper), mean distance, pair count, value (None if undefined)."""

    lower: float
    upper: float
    mean_distance: float | None
    pairs: int
    value: float | None
    sparse: bool
    reason: str | None = None
    tail_mean: float | None = None
    head_mean: float | None = None
    tail_sd: float | None = None
    head_sd: float | None = None


@dataclass(frozen=True)
class DirectionVariogram:
    """The classes of one direction class (angles in degrees)."""

    azimuth: float
    tolerance: float
    bandwidth: float | None
    classes: tuple[VariogramClass, ...]
    dip: float | None = None
    dip_tolerance: float | None = None
    vertical_bandwidth: float | None = None


@dataclass(frozen=True)
class ExperimentalVariogram:
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
    summary: dict
    parameters: dict
    warnings: tuple[str, ...]
    provenance: dict
    pairs_for_class: dict | None = None
    raw: dict = field(default_factory=dict, repr=False)

    @classmethod
    def from_response(cls, document: dict) -> ExperimentalVariogram:
        directions = []
        for d in document["directions"]:
            classes = tuple(VariogramClass(**c) for c in d["classes"])
            directions.append(DirectionVariogram(**{k: v for k, v in d.items() if k != "classes"}, classes=classes))
        return cls(
            directions=tuple(directions),
            summary=document["summary"],
            parameters=document["parameters"],
            warnings=tuple(document.get("warnings", [])),
            provenance=document["provenance"],
            pairs_for_class=document.get("pairs_for_class"),
            raw=document,
        )

    def to_dict(self) -> dict:
        """The response document."""
        return self.raw

    def to_dataframe(self):
        """One row per (direction, class) with the direction's azimuth and tolerance (needs pandas)."""
        rows = []
        for index, d in enumerate(self.directions):
            for c in d.classes:
                rows.append({"direction": index, "azimuth": d.azimuth, "tolerance": d.tolerance, **c.__dict__})
        return _dataframe(rows)


@dataclass(frozen=True)
class VariogramMap:
    """Result of :meth:`Lagwise.variogram_map`: values[row][column], rows by hy."""

    hx: tuple[float, ...]
    hy: tuple[float, ...]
    values: tuple[tuple[float | None, ...], ...]
    pairs: tuple[tuple[int, ...], ...]
    summary: dict
    parameters: dict
    warnings: tuple[str, ...]
    provenance: dict
    raw: dict = field(default_factory=dict, repr=False)

    @classmethod
    def from_response(cls, document: dict) -> VariogramMap:
        return cls(
            hx=tuple(document["hx"]),
            hy=tuple(document["hy"]),
            values=tuple(tuple(row) for row in document["values"]),
            pairs=tuple(tuple(row) for row in document["pairs"]),
            summary=document["summary"],
            parameters=document["parameters"],
            warnings=tuple(document.get("warnings", [])),
            provenance=document["provenance"],
            raw=document,
        )

    def to_dict(self) -> dict:
        """The response document."""
        return self.raw

    def to_dataframe(self):
        """One row per cell: hx, hy, value, pairs (needs pandas)."""
        rows = [
            {"hx": hx, "hy": hy, "value": self.values[r][c], "pairs": self.pairs[r][c]}
            for r, hy in enumerate(self.hy)
            for c, hx in enumerate(self.hx)
        ]
        return _dataframe(rows)


@dataclass(frozen=True)
class Candidate:
    """One candidate model tried by the fit, with its scores (lower criterion is better)."""

    rank: int
    label: str
    model: VariogramModel | None
    parameters: int
    weighted_sse: float | None
    r_squared: float | None
    criterion: float | None
    converged: bool
    iterations: int
    note: str | None = None


@dataclass(frozen=True)
class ModelFit:
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
    diagnostics: dict
    candidates: tuple[Candidate, ...]
    experimental: dict
    parameters: dict
    warnings: tuple[str, ...]
    provenance: dict
    summary: dict | None = None
    raw: dict = field(default_factory=dict, repr=False)

    @classmethod
    def from_response(cls, document: dict) -> ModelFit:
        candidates = tuple(
            Candidate(**{**c, "model": None if c["model"] is None else VariogramModel.from_dict(c["model"])})
            for c in document["candidates"]
        )
        return cls(
            model=VariogramModel.from_dict(document["model"]),
            diagnostics=document["diagnostics"],
            candidates=candidates,
            experimental=document["experimental"],
            parameters=document["parameters"],
            warnings=tuple(document.get("warnings", [])),
            provenance=document["provenance"],
            summary=document.get("summary"),
            raw=document,
        )

    def to_dict(self) -> dict:
        """The response document."""
        return self.raw

    def to_dataframe(self):
        """One row per candidate (needs pandas)."""
        return _dataframe([{k: v for k, v in c.__dict__.items() if k != "model"} for c in self.candidates])


@dataclass(frozen=True)
class CrossValidation:
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
    assessment: str
    unestimated: tuple[dict, ...]
    parameters: dict
    warnings: tuple[str, ...]
    provenance: dict
    raw: dict = field(default_factory=dict, repr=False)

    @classmethod
    def from_response(cls, document: dict) -> CrossValidation:
        return cls(
            statistics=document["statistics"],
            samples=document["samples"],
            assessment=document["assessment"],
            unestimated=tuple(document.get("unestimated", [])),
            parameters=document["parameters"],
            warnings=tuple(document.get("warnings", [])),
            provenance=document["provenance"],
            raw=document,
        )

    def to_dict(self) -> dict:
        """The response document."""
        return self.raw

    def to_dataframe(self):
        """One row per sample (needs pandas)."""
        return _dataframe(
            [dict(zip(self.samples, row, strict=True)) for row in zip(*self.samples.values(), strict=True)]
        )


@dataclass(frozen=True)
class Predictions:
    """Result of :meth:`Lagwise.predict`: columnar targets, estimates and kriging variances
    (None where a target could not be estimated; ``unestimated`` says why)."""

    x: tuple[float, ...]
    y: tuple[float, ...] | None
    z: tuple[float, ...] | None
    estimate: tuple[float | None, ...]
    variance: tuple[float | None, ...]
    grid: dict | None
    unestimated: tuple[dict, ...]
    weights: tuple[dict, ...]
    parameters: dict
    warnings: tuple[str, ...]
    provenance: dict
    raw: dict = field(default_factory=dict, repr=False)

    @classmethod
    def from_response(cls, document: dict) -> Predictions:
        return cls(
            x=tuple(document["x"]),
            y=tuple(document["y"]) if "y" in document else None,
            z=tuple(document["z"]) if "z" in document else None,
            estimate=tuple(document["estimate"]),
            variance=tuple(document["variance"]),
            grid=document.get("grid"),
            unestimated=tuple(document.get("unestimated", [])),
            weights=tuple(document.get("weights", [])),
            parameters=document["parameters"],
            warnings=tuple(document.get("warnings", [])),
            provenance=document["provenance"],
            raw=document,
        )

    def to_dict(self) -> dict:
        """The response document."""
        return self.raw

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


@dataclass(frozen=True)
class Analysis:
    """Result of :meth:`Lagwise.analyze`: the stages as attributes.

    Attributes
    ----------
    summary, transformed_summary : dict
    experimental : dict
        ``omnidirectional`` and ``directional`` classes, and the ``anisotropy`` estimate.
    model : VariogramModel
        The selected model (in transformed units when a transform was asked for).
    fit : dict
        model, diagnostics, candidates.
    cross_validation : dict or None
        statistics, samples, assessment.
    prediction : dict or None
        Columnar grid predictions in original units.
    figures : dict
        Figure name -> SVG text or base64 PNG.
    verdict : str
    """

    summary: dict
    transformed_summary: dict
    experimental: dict
    model: VariogramModel
    fit: dict
    cross_validation: dict | None
    prediction: dict | None
    figures: dict
    warnings: tuple[str, ...]
    verdict: str
    parameters: dict
    provenance: dict
    raw: dict = field(default_factory=dict, repr=False)

    @classmethod
    def from_response(cls, document: dict) -> Analysis:
        return cls(
            summary=document["summary"],
            transformed_summary=document["transformed_summary"],
            experimental=document["experimental"],
            model=VariogramModel.from_dict(document["fit"]["model"]),
            fit=document["fit"],
            cross_validation=document.get("cross_validation"),
            prediction=document.get("prediction"),
            figures=document.get("figures", {}),
            warnings=tuple(document.get("warnings", [])),
            verdict=document["verdict"],
            parameters=document["parameters"],
            provenance=document["provenance"],
            raw=document,
        )

    def to_dict(self) -> dict:
        """The response document."""
        return self.raw

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
