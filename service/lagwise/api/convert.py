"""Turn validated request documents into the core's inputs."""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..core.analysis import AnalysisOptions
from ..core.data.declustering import decluster
from ..core.data.raster import Raster, build_raster, raster_points
from ..core.data.samples import SampleSet, build_sample_set, columnar_pointer, input_hash
from ..core.data.variables import MultiSampleSet, VariableInput, build_multi_sample_set, variables_from_mapping
from ..core.errors import FieldIssue, InvalidInput, pointers_under
from ..core.kriging.blocks import DEFAULT_POINTS_PER_AXIS, Blocks
from ..core.kriging.cross_validation import DEFAULT_OUTLIER_THRESHOLD, Scheme
from ..core.kriging.neighbourhood import Neighbourhood
from ..core.kriging.prediction import Grid
from ..core.kriging.systems import KrigingSpec
from ..core.limits import Limits
from ..core.modelling.fitting import SEMIVARIANCE_STATISTICS, points_from_rows
from ..core.modelling.models import FAMILIES, Anisotropy, Structure, VariogramModel
from ..core.stages import (
    AreaSimulation,
    CrossValidationOptions,
    FitOptions,
    MapOptions,
    PredictionOptions,
    VariogramOptions,
)
from ..core.variography.directions import DirectionClass
from ..core.variography.experimental import ScatterRequest
from ..core.variography.gridded import DEFAULT_TOLERANCE
from ..core.variography.lags import LagRequest
from .fields import pointer_token

FEATURES = "/samples/geojson/features"


def _geojson_pointer(value_property: str | None, id_property: str | None):
    """Pointers into GeoJSON features; a variable's fields (``variables/<name>``) point at its property."""

    def pointer_for(name: str, index: int | None) -> str:
        if index is None:
            return FEATURES
        base = f"{FEATURES}/{index}"
        if name in ("x", "y", "z"):
            return f"{base}/geometry/coordinates/{'xyz'.index(name)}"
        if name == "values":
            return f"{base}/properties/{value_property}"
        for member in ("variables/", "censored/", "detection_limits/"):
            if name.startswith(member):
                return f"{base}/properties/{name[len(member) :]}"
        return f"{base}/properties/{id_property}" if id_property else f"{base}/id"

    return pointer_for


def _number(value) -> float | None:
    if type(value) not in (int, float):
        return None
    try:
        number = float(value)
    except OverflowError:
        return None
    return number if math.isfinite(number) else None


def _below_limit(raw) -> float | None:
    """The detection limit of a result written like "<0.5", else None."""
    if isinstance(raw, str) and raw.strip().startswith("<"):
        try:
            limit = float(raw.strip()[1:])
        except ValueError:
            return None
        return limit if math.isfinite(limit) and limit > 0 else None
    return None


def _fill_ids(ids: list[str | None]) -> list[str]:
    """Name each feature without an identifier (None) by its index in ``features``, as text.

    Where that text is another feature's given identifier, ``#`` is put before it until it is
    not (``"3"``, then ``"#3"``, ``"##3"``...), so a made identifier never repeats a given one
    (and two made ones differ by their digits).
    """
    given = {identifier for identifier in ids if identifier is not None}
    filled = []
    for index, identifier in enumerate(ids):
        if identifier is None:
            identifier = str(index)
            while identifier in given:
                identifier = "#" + identifier
        filled.append(identifier)
    return filled


def _feature_columns(collection, value_properties: list[str], id_property: str | None, *, optional: bool = False):
    """Read Point features into columns; raises InvalidInput naming each bad feature.

    Returns (columns, has_z) where columns holds x, y, z, ids and, per property,
    ``values/<p>``, ``censored/<p>`` and ``limits/<p>``. With ``optional`` a missing or null
    property is not measured (NaN) instead of an error.
    """
    if collection.get("type") != "FeatureCollection" or not isinstance(collection.get("features"), list):
        raise InvalidInput.at("/samples/geojson", "must be a GeoJSON FeatureCollection with a features array")
    columns: dict[str, list] = {"x": [], "y": [], "z": [], "ids": []}
    for name in value_properties:
        columns.update({f"values/{name}": [], f"censored/{name}": [], f"limits/{name}": []})
    issues: list[FieldIssue] = []
    bad = 0  # every invalid field; the first 20 are listed

    def note(pointer: str, detail: str) -> None:
        nonlocal bad
        bad += 1
        if len(issues) < 20:
            issues.append(FieldIssue(pointer, detail))

    dims = set()
    for i, feature in enumerate(collection["features"]):
        geometry = feature.get("geometry") if isinstance(feature, dict) else None
        coordinates = geometry.get("coordinates") if isinstance(geometry, dict) else None
        if (
            not isinstance(geometry, dict)
            or geometry.get("type") != "Point"
            or not isinstance(coordinates, list)
            or len(coordinates) not in (2, 3)
        ):
            note(f"{FEATURES}/{i}/geometry", "must be a Point with 2 or 3 coordinates")
            continue
        numbers = [_number(c) for c in coordinates]
        for a, c in enumerate(numbers):
            if c is None:
                note(f"{FEATURES}/{i}/geometry/coordinates/{a}", "not a finite number")
        properties = feature.get("properties") or {}
        if not isinstance(properties, dict):
            properties = {}
        dims.add(len(coordinates))
        for name in value_properties:
            raw = properties.get(name)
            limit = _below_limit(raw)
            value = limit if limit is not None else _number(raw)
            if value is None and not (optional and raw is None):
                note(f"{FEATURES}/{i}/properties/{pointer_token(name)}", "missing or not a finite number")
            if not bad:
                columns[f"values/{name}"].append(np.nan if value is None else value)
                columns[f"censored/{name}"].append(limit is not None)
                columns[f"limits/{name}"].append(limit if limit is not None else np.nan)
        if bad:
            continue  # the request is refused: its columns are not needed
        columns["x"].append(numbers[0])
        columns["y"].append(numbers[1])
        columns["z"].append(numbers[2] if len(numbers) == 3 else None)
        identifier = properties.get(id_property) if id_property else feature.get("id")
        columns["ids"].append(str(identifier) if identifier is not None else None)
    if len(dims) > 1:
        note(FEATURES, "every Point must have the same number of coordinates (2 or 3)")
    if issues:
        raise InvalidInput(issues, total=bad)
    columns["ids"] = _fill_ids(columns["ids"])
    return columns, dims == {3}


def _feature_variables(document: dict) -> MultiSampleSet:
    samples = document["samples"]
    names = samples["variable_properties"]
    repeated = sorted({n for n in names if names.count(n) > 1})
    if repeated:
        raise InvalidInput.at("/samples/variable_properties", f"names {repeated[0]!r} more than once")
    columns, has_z = _feature_columns(samples["geojson"], names, samples.get("id_property"), optional=True)
    units = samples.get("units") or {}
    for name in units:
        if name not in names:
            raise InvalidInput.at(f"/samples/units/{pointer_token(name)}", "names no variable of variable_properties")
    variables = [
        VariableInput(
            name=name,
            values=np.array(columns[f"values/{name}"], dtype=np.float64),
            censored=np.array(columns[f"censored/{name}"]) if any(columns[f"censored/{name}"]) else None,
            detection_limits=np.array(columns[f"limits/{name}"]) if any(columns[f"censored/{name}"]) else None,
            unit=units.get(name),
        )
        for name in names
    ]
    return build_multi_sample_set(
        variables,
        np.array(columns["x"], dtype=np.float64),
        np.array(columns["y"], dtype=np.float64),
        np.array(columns["z"], dtype=np.float64) if has_z else None,
        ids=columns["ids"],
        coordinates=document.get("coordinates", "geographic"),
        duplicates=document["duplicates"],
        pointer_for=_geojson_pointer(None, samples.get("id_property")),
        censoring=document.get("censoring", "half_limit"),
    )


def _column_variables(document: dict) -> MultiSampleSet:
    samples = document["samples"]
    limits = {
        name: [np.nan if v is None else v for v in column]
        for name, column in samples.get("detection_limits", {}).items()
    }
    variables = variables_from_mapping(
        samples["variables"], censored=samples.get("censored"), detection_limits=limits, units=samples.get("units")
    )
    return build_multi_sample_set(
        variables,
        samples["x"],
        samples.get("y"),
        samples.get("z"),
        ids=samples.get("ids"),
        coordinates=document.get("coordinates", "planar"),
        duplicates=document["duplicates"],
        pointer_for=columnar_pointer,
        censoring=document.get("censoring", "half_limit"),
    )


def raster(document: dict) -> Raster | None:
    """The request's raster, or None for other forms of samples."""
    given = document["samples"].get("raster")
    if given is None:
        return None
    if document.get("coordinates", "planar") != "planar":
        raise InvalidInput.at("/coordinates", "a raster has planar coordinates")
    return build_raster(given["origin"], given["spacing"], given["shape"], given["values"])


def samples_of(document: dict, limits: Limits | None = None) -> SampleSet | MultiSampleSet:
    """The request's samples: a :class:`SampleSet` for one variable (``values`` or ``value_property``,
    or a raster's present cells as points within ``limits.max_samples``), a :class:`MultiSampleSet`
    for several (``variables`` or ``variable_properties``)."""
    samples = document["samples"]
    grid = raster(document)
    if grid is not None:
        return raster_points(grid, limits or Limits())
    if "variable_properties" in samples:
        return _feature_variables(document)
    if "variables" in samples:
        return _column_variables(document)
    if "geojson" in samples:
        value_property, id_property = samples["value_property"], samples.get("id_property")
        columns, has_z = _feature_columns(samples["geojson"], [value_property], id_property)
        censored = columns[f"censored/{value_property}"]
        return build_sample_set(
            np.array(columns[f"values/{value_property}"], dtype=np.float64),
            np.array(columns["x"], dtype=np.float64),
            np.array(columns["y"], dtype=np.float64),
            np.array(columns["z"], dtype=np.float64) if has_z else None,
            ids=columns["ids"],
            coordinates=document.get("coordinates", "geographic"),
            duplicates=document["duplicates"],
            pointer_for=_geojson_pointer(value_property, id_property),
            censored=np.array(censored) if any(censored) else None,
            detection_limits=np.array(columns[f"limits/{value_property}"]) if any(censored) else None,
            censoring=document.get("censoring", "half_limit"),
        )
    return build_sample_set(
        samples["values"],
        samples["x"],
        samples.get("y"),
        samples.get("z"),
        ids=samples.get("ids"),
        coordinates=document.get("coordinates", "planar"),
        duplicates=document["duplicates"],
        pointer_for=columnar_pointer,
        censored=np.array(samples["censored"], dtype=bool) if "censored" in samples else None,
        detection_limits=np.array([np.nan if v is None else v for v in samples["detection_limits"]], dtype=np.float64)
        if "detection_limits" in samples
        else None,
        censoring=document.get("censoring", "half_limit"),
    )


def chosen_variable(document: dict, samples: MultiSampleSet, pointer: str = "/variable") -> str:
    """The variable a single-variable request uses: ``variable`` when given, else the only one.

    Raises
    ------
    InvalidInput
        When ``variable`` names no variable of the samples, or is omitted while there are several.
    """
    name = document.get("variable")
    if isinstance(name, dict):
        # An analysis names its variable in an object (name and unit, for labels).
        pointer = f"{pointer}/name"
        name = name["name"] if name.get("name") in samples.names else None
    if name is None:
        if samples.count == 1:
            return samples.names[0]
        raise InvalidInput.at(
            pointer,
            f"the samples carry {samples.count} variables ({', '.join(samples.names)}); name the one this request uses",
        )
    if name not in samples.names:
        raise InvalidInput.at(pointer, f"names no variable of the samples; they carry {', '.join(samples.names)}")
    return name


def sample_set(document: dict, limits: Limits | None = None) -> SampleSet:
    """The :class:`SampleSet` of a single-variable request (columnar or GeoJSON samples, or a raster's cells).

    With several variables, the one ``variable`` names (or the only one) is used.
    """
    samples = samples_of(document, limits)
    if isinstance(samples, MultiSampleSet):
        return samples.variable(chosen_variable(document, samples))
    return samples


def lag_request(document: dict) -> LagRequest:
    """The distance-class request (auto equal width when omitted)."""
    lags = document.get("lags") or {}
    edges = lags.get("edges")
    return LagRequest(
        width=lags.get("width"),
        count=lags.get("count"),
        edges=tuple(edges) if edges is not None else None,
        auto=lags.get("auto"),
    )


def direction_classes(document: dict) -> list[DirectionClass] | None:
    """The direction classes, or None for one omnidirectional class."""
    directions = document.get("directions")
    if directions is None:
        return None
    return [DirectionClass(**d) for d in directions]


def scatter_request(document: dict) -> ScatterRequest | None:
    """The h-scattergram request, if any."""
    raw = document.get("pairs_for_class")
    return None if raw is None else ScatterRequest(direction=raw["direction"], klass=raw["klass"], limit=raw["limit"])


def experimental_points(document: dict, min_pairs: int):
    """Fit points, dimension and sample variance from a previous experimental response.

    Returns (points, dimension, sample_variance or None, statistic, SHA-256 of the classes).
    """
    given = document["experimental"]
    statistic = (given.get("parameters") or {}).get("statistic", "semivariance")
    if statistic not in SEMIVARIANCE_STATISTICS:
        raise InvalidInput.at(
            "/experimental/parameters/statistic", f"models are fitted to semivariances, not to {statistic!r}"
        )
    rows = [
        (
            d["azimuth"],
            k,
            c,
            _ClassRow(row.get("mean_distance"), row.get("value"), row["pairs"], row.get("standard_error")),
        )
        for k, d in enumerate(given["directions"])
        for c, row in enumerate(d["classes"])
    ]
    points = points_from_rows(rows, min_pairs)
    summary = given.get("summary") or {}
    dimension = summary.get("dimension", 2)
    if dimension not in (1, 2, 3):
        raise InvalidInput.at("/experimental/summary/dimension", "must be 1, 2 or 3")
    variance = summary.get("variance")
    if (summary.get("declustering") or {}).get("weights_used"):
        # Clustered sampling: the declustered variance is the sill reference.
        variance = summary.get("declustered_variance", variance)
    variance = _finite_number(variance)
    digest = input_hash([points.distance, points.value, points.pairs.astype(np.float64)])
    return points, int(dimension), variance, statistic, digest


def _finite_number(value: object) -> float | None:
    """A finite JSON number (not a boolean) as a float; None for anything else."""
    if (type(value) is int or type(value) is float) and math.isfinite(value):
        return float(value)
    return None


@dataclass(frozen=True)
class _ClassRow:
    mean_distance: float | None
    value: float | None
    pairs: int
    standard_error: float | None = None


def _structure(pointer: str, raw: dict) -> Structure:
    """One request structure, its family's parameter names (the family table) mapped to the core's slots."""
    family = FAMILIES.get(raw["family"])
    if family is None:
        raise InvalidInput.at(f"{pointer}/family", f"unknown family {raw['family']!r}; valid: {', '.join(FAMILIES)}")
    missing = [p.name for p in family.parameters if p.slot != "shape" and raw.get(p.name) is None]
    if missing:
        raise InvalidInput([FieldIssue(f"{pointer}/{name}", "is required") for name in missing])
    slots: dict[str, Any] = {p.slot: raw.get(p.name) for p in family.parameters}
    aniso = raw.get("anisotropy") or {}
    return Structure(
        family.name,
        float(slots["sill"]),
        float(slots.get("range", 1.0)),
        slots.get("shape"),
        Anisotropy(aniso.get("azimuth", 0.0), aniso.get("ratio", 1.0), aniso.get("vertical_ratio", 1.0)),
    )


def variogram_model(document: dict) -> VariogramModel:
    """The request's model, with the family-specific parameter names mapped to the core's."""
    raw = document["model"]
    structures = tuple(_structure(f"/model/structures/{k}", s) for k, s in enumerate(raw["structures"]))
    return VariogramModel(float(raw["nugget"]), structures)


def kriging_spec(
    document: dict, samples: SampleSet | None = None, default_mean: Callable[[], float] | None = None
) -> KrigingSpec:
    """The kriging options; simple kriging without a mean takes ``default_mean()`` or else the
    samples' declustered mean (when given samples)."""
    k = document["kriging"]
    mean = k.get("mean")
    if mean is None and k["type"] == "simple" and default_mean is not None:
        mean = default_mean()
    if mean is None and k["type"] == "simple" and samples is not None:
        mean = decluster(samples.coords, samples.values).mean_of(samples.values)
    return KrigingSpec(type=k["type"], mean=mean, drift=k.get("drift"), nugget_as=k["nugget_as"])


def blocks(document: dict) -> Blocks | None:
    """The request's blocks (discretisation default: DEFAULT_POINTS_PER_AXIS per axis)."""
    raw = document.get("blocks")
    if raw is None:
        return None
    size = tuple(raw["size"])
    counts = raw.get("discretisation", [DEFAULT_POINTS_PER_AXIS] * len(size))
    return Blocks(size, tuple(counts))


def transform_kind(document: dict, default: str = "none") -> str:
    """The request's transform: as given, else the model's (the one it was fitted in), else ``default``."""
    given, fitted = document.get("transform"), document["model"].get("transform")
    if given is not None and fitted is not None and given != fitted:
        raise InvalidInput.at(
            "/transform",
            f"the model was fitted to {fitted} values (model.transform) but transform is {given}: "
            "give the transform the model was fitted in, or refit",
        )
    return given or fitted or default


def neighbourhood(document: dict) -> Neighbourhood:
    raw = document.get("neighbourhood")
    if raw is None:
        return Neighbourhood()
    return Neighbourhood(
        max_points=raw["max_points"], min_points=raw["min_points"], radius=raw["radius"], sectors=raw["sectors"]
    )


def scheme(document: dict) -> Scheme:
    raw = document["scheme"]
    return Scheme(type=raw["type"], folds=raw.get("folds", Scheme.folds), seed=raw.get("seed", Scheme.seed))


def targets(document: dict, dimension: int) -> np.ndarray | None:
    """Target coordinates (m, d), or None when a grid is given."""
    raw = document.get("targets")
    if raw is None:
        return None
    columns = [raw[a] for a in ("x", "y", "z") if a in raw]
    lengths = {len(c) for c in columns}
    if len(lengths) > 1:
        raise InvalidInput.at("/targets", "x, y and z must have the same length")
    if len(columns) != dimension:
        raise InvalidInput.at("/targets", f"targets need {dimension} coordinates (the samples are {dimension}-D)")
    return np.column_stack(columns)


def grid(document: dict) -> Grid | None:
    raw = document.get("grid")
    if raw is None:
        return None
    return Grid(tuple(raw["origin"]), tuple(raw["spacing"]), tuple(raw["shape"]))


def simulation_grid(document: dict) -> Grid:
    """The simulation grid (required, 2-D)."""
    raw = document["grid"]
    return Grid(tuple(raw["origin"]), tuple(raw["spacing"]), tuple(raw["shape"]))


# ---- one converter per stage: the separate endpoint's request, or the analysis's stage object ----


def _given_model(stage: dict) -> VariogramModel | None:
    """The stage's given ``model`` (fit: skips fitting; kriging endpoints: the model to krige with)."""
    return variogram_model(stage) if "model" in stage else None


def variogram_options(stage: dict, *, for_fit: bool = True) -> VariogramOptions:
    """The experimental variogram stage (``for_fit``: the classes are fitted, so semivariances only)."""
    directions = stage.get("directions")
    return VariogramOptions(
        lags=lag_request(stage),
        directions=tuple(DirectionClass(**d) for d in directions) if isinstance(directions, list) else directions,
        statistic=stage["statistic"],
        min_pairs=stage["min_pairs"],
        pairs_for_class=scatter_request(stage),
        method=stage.get("method") or "exact",
        tolerance=stage.get("tolerance", DEFAULT_TOLERANCE),
        for_fit=for_fit,
    )


def fit_options(stage: dict) -> FitOptions:
    """The model-fitting stage."""
    return FitOptions(
        families=stage["families"] if stage["families"] == "auto" else tuple(stage["families"]),
        nugget=stage["nugget"],
        weighting=stage["weighting"],
        anisotropy=stage["anisotropy"],
        structures=stage.get("structures", 1),
        model=_given_model(stage),
        compare=stage.get("compare", True),
    )


def _kriging_choices(stage: dict, default_mean: Callable[[], float] | None, default_neighbourhood):
    """The kriging options (None for ``auto``) and the neighbourhood (``default_neighbourhood`` when omitted)."""
    given = stage.get("kriging")
    kriging = None if given is None or given == "auto" else kriging_spec(stage, default_mean=default_mean)
    hood = neighbourhood(stage) if stage.get("neighbourhood") is not None else default_neighbourhood
    return kriging, hood


def cross_validation_options(
    stage: dict,
    *,
    default_mean: Callable[[], float] | None = None,
    default_neighbourhood: Neighbourhood | None = None,
) -> CrossValidationOptions:
    """The kriging and cross-validation stage (the separate endpoint's ``model`` included).

    ``default_mean``: simple kriging's mean when none is given; ``default_neighbourhood``:
    the neighbourhood when none is given (None: the analysis chooses).
    """
    kriging, hood = _kriging_choices(stage, default_mean, default_neighbourhood)
    return CrossValidationOptions(
        kriging=kriging,
        neighbourhood=hood,
        scheme=scheme(stage),
        outlier_threshold=stage.get("outlier_threshold", DEFAULT_OUTLIER_THRESHOLD),
        model=_given_model(stage),
    )


def prediction_options(
    stage: dict,
    *,
    transform: str,
    dimension: int | None = None,
    default_mean: Callable[[], float] | None = None,
    default_neighbourhood: Neighbourhood | None = None,
) -> PredictionOptions:
    """The prediction stage: targets (``dimension``: the samples') or a grid, thresholds, blocks; the
    separate endpoint's model, kriging and weights; an analysis's simulation."""
    raw = stage.get("simulation")
    simulation = None
    if raw is not None:
        size = raw.get("blocks", {}).get("size")
        simulation = AreaSimulation(raw["realisations"], raw["seed"], None if size is None else tuple(size))
    found = targets(stage, dimension) if dimension is not None else None
    kriging, hood = _kriging_choices(stage, default_mean, default_neighbourhood)
    return PredictionOptions(
        grid=grid(stage),
        targets=found,
        thresholds=tuple(stage["thresholds"]),
        blocks=blocks(stage),
        transform=transform,
        weights_for=tuple(stage.get("return_weights", ())),
        kriging=kriging,
        neighbourhood=hood,
        model=_given_model(stage),
        simulation=simulation,
    )


def analysis_options(document: dict) -> AnalysisOptions:
    """The analysis stages' options (defaults filled in by the schema), pointers under each stage."""
    with pointers_under("/variogram"):
        variogram = variogram_options(document["variogram"])
    with pointers_under("/fit"):
        fit = fit_options(document["fit"])
    with pointers_under("/cross_validation"):
        cross_validation = cross_validation_options(document["cross_validation"])
    prediction = None
    if "prediction" in document:
        with pointers_under("/prediction"):
            prediction = prediction_options(document["prediction"], transform=document["transform"])
    stage = document["variogram_map"]
    return AnalysisOptions(
        transform=document["transform"],
        variogram=variogram,
        fit=fit,
        cross_validation=cross_validation,
        prediction=prediction,
        variogram_map=MapOptions(method=stage["method"], tolerance=stage["tolerance"]),
    )
