"""Request and response schemas (marshmallow); they also generate the OpenAPI document.

Range checks here document the contract; the core checks the same rules again
with pointers, so a caller gets the same answer from either side.
"""

from __future__ import annotations

import unicodedata

from marshmallow import EXCLUDE, Schema, ValidationError, fields, validate, validates_schema

from ..core.data.censoring import CENSORING_POLICIES
from ..core.data.samples import COORDINATE_SYSTEMS, DUPLICATE_POLICIES
from ..core.data.transforms import TRANSFORMS
from ..core.kriging.systems import DRIFTS, KRIGING_TYPES, NUGGET_ROLES
from ..core.modelling.families import ANISOTROPY, FAMILIES, UNIT_KINDS, Parameter, structure_parameters
from ..core.modelling.fitting import SEMIVARIANCE_STATISTICS, WEIGHTINGS
from ..core.modelling.models import Anisotropy
from ..core.variography.lags import AUTO_METHODS, MAX_CLASSES
from ..core.variography.statistics import STATISTICS
from ..figures import COLOUR_SCALES, FIGURES, FORMATS
from .fields import AutoOrList, CappedList, DirectionsOption, NuggetOption, NumberArray

MAX_DIRECTIONS = 36
MAX_THRESHOLDS = 20


def finite(**kwargs) -> fields.Float:
    """A finite float field."""
    return fields.Float(allow_nan=False, **kwargs)


class SamplesSchema(Schema):
    """Samples as columns (x, y, z, values, ids) or as a GeoJSON FeatureCollection of Points."""

    x = NumberArray(metadata={"description": "Easting, or longitude in degrees for geographic coordinates."})
    y = NumberArray(metadata={"description": "Northing, or latitude in degrees; makes the set 2-D."})
    z = NumberArray(
        metadata={
            "description": "Elevation, positive up, same unit as x and y (metres for geographic); makes the set 3-D."
        }
    )
    values = NumberArray(metadata={"description": "Measured values."})
    ids = CappedList(fields.String(), metadata={"description": "Sample identifiers echoed in per-sample outputs."})
    geojson = fields.Dict(metadata={"description": "A GeoJSON FeatureCollection (RFC 7946) of Point features."})
    value_property = fields.String(metadata={"description": "Feature property holding the value (GeoJSON input)."})
    id_property = fields.String(
        metadata={"description": "Feature property holding the identifier (GeoJSON input; default the feature id)."}
    )
    censored = CappedList(
        fields.Boolean(),
        metadata={
            "description": 'True where the result is below its detection limit (GeoJSON: a value written like "<0.5").'
        },
    )
    detection_limits = CappedList(
        fields.Float(allow_none=True, allow_nan=False),
        metadata={"description": "Detection limits (value units), needed where censored is true."},
    )

    @validates_schema
    def _one_layout(self, data, **kwargs):
        if "geojson" in data:
            clash = [k for k in ("x", "y", "z", "values", "ids", "censored", "detection_limits") if k in data]
            if clash:
                raise ValidationError(f"give either geojson or columns, not both ({', '.join(clash)})")
            if "value_property" not in data:
                raise ValidationError("required with geojson", "value_property")
            return
        missing = {k: ["required"] for k in ("x", "values") if k not in data}
        if missing:
            raise ValidationError(missing)


class SampleOptions(Schema):
    """Options shared by every request that carries samples."""

    samples = fields.Nested(SamplesSchema, required=True)
    coordinates = fields.String(
        validate=validate.OneOf(COORDINATE_SYSTEMS),
        metadata={"description": "planar (default for columns) or geographic (WGS84 degrees; default for GeoJSON)."},
    )
    duplicates = fields.String(
        load_default="average",
        validate=validate.OneOf(DUPLICATE_POLICIES),
        metadata={"description": "What to do with samples at the same location."},
    )
    censoring = fields.String(
        load_default="half_limit",
        validate=validate.OneOf(CENSORING_POLICIES),
        metadata={"description": "Value given to results below their detection limit."},
    )


class LagsSchema(Schema):
    """Distance classes: width and count, explicit edges, or auto."""

    width = finite(
        validate=validate.Range(min=0, min_inclusive=False), metadata={"description": "Class width, coordinate units."}
    )
    count = fields.Integer(strict=True, validate=validate.Range(min=1, max=MAX_CLASSES))
    edges = fields.List(finite(), validate=validate.Length(min=2, max=MAX_CLASSES + 1))
    auto = fields.String(validate=validate.OneOf(AUTO_METHODS))


class DirectionSchema(Schema):
    """A direction class (degrees; azimuth clockwise from north)."""

    azimuth = finite(load_default=0.0, validate=validate.Range(min=0, max=360, max_inclusive=False))
    tolerance = finite(load_default=22.5, validate=validate.Range(min=0, max=90, min_inclusive=False))
    bandwidth = finite(
        load_default=None, allow_none=True, metadata={"description": "Largest perpendicular offset; null: no limit."}
    )
    dip = finite(load_default=0.0, validate=validate.Range(min=-90, max=90))
    dip_tolerance = finite(load_default=90.0, validate=validate.Range(min=0, max=90, min_inclusive=False))
    vertical_bandwidth = finite(load_default=None, allow_none=True)


class ScatterRequestSchema(Schema):
    """Ask for the pairs of one class (h-scattergram)."""

    direction = fields.Integer(strict=True, load_default=0, validate=validate.Range(min=0))
    klass = fields.Integer(strict=True, required=True, data_key="class", validate=validate.Range(min=0))
    limit = fields.Integer(strict=True, load_default=2000, validate=validate.Range(min=1))


class ExperimentalRequest(SampleOptions):
    """POST /v1/experimental-variograms."""

    lags = fields.Nested(LagsSchema)
    directions = fields.List(fields.Nested(DirectionSchema), validate=validate.Length(min=1, max=MAX_DIRECTIONS))
    statistic = fields.String(load_default="semivariance", validate=validate.OneOf(STATISTICS))
    min_pairs = fields.Integer(strict=True, load_default=30, validate=validate.Range(min=1))
    pairs_for_class = fields.Nested(ScatterRequestSchema)


class MapRequest(SampleOptions):
    """POST /v1/variogram-maps."""

    cell_size = finite(
        validate=validate.Range(min=0, min_inclusive=False),
        metadata={
            "description": "Cell side, coordinate units. Default: the typical sample spacing (median nearest-neighbour "
            "distance), enlarged so that a cell holds about min_pairs pairs on average and at most 40 cells lie on "
            "each side of the origin."
        },
    )
    cells = fields.Integer(
        strict=True,
        validate=validate.Range(min=1),
        metadata={
            "description": "Cells on each side of the origin. Default: enough to reach half the largest separation."
        },
    )
    statistic = fields.String(load_default="semivariance", validate=validate.OneOf(STATISTICS))
    min_pairs = fields.Integer(
        strict=True,
        load_default=30,
        validate=validate.Range(min=1),
        metadata={"description": "Average pairs per cell the automatic cell size aims for."},
    )


class ExperimentalClassInput(Schema):
    """A class of a previous experimental response (other members are ignored)."""

    class Meta:
        unknown = EXCLUDE

    mean_distance = fields.Float(allow_none=True, required=True)
    value = fields.Float(allow_none=True, required=True)
    pairs = fields.Integer(required=True, validate=validate.Range(min=0))
    standard_error = fields.Float(
        allow_none=True, metadata={"description": "Class standard error (used by weighting inverse_variance)."}
    )


class ExperimentalDirectionInput(Schema):
    class Meta:
        unknown = EXCLUDE

    azimuth = finite(load_default=0.0, validate=validate.Range(min=0, max=360, max_inclusive=False))
    classes = fields.List(fields.Nested(ExperimentalClassInput), required=True, validate=validate.Length(min=1))


class ExperimentalInput(Schema):
    """A previous response of POST /v1/experimental-variograms (as returned)."""

    class Meta:
        unknown = EXCLUDE

    directions = fields.List(
        fields.Nested(ExperimentalDirectionInput), required=True, validate=validate.Length(min=1, max=MAX_DIRECTIONS)
    )
    summary = fields.Dict()
    parameters = fields.Dict()


class ModelFitRequest(SampleOptions):
    """POST /v1/model-fits: samples (with classes and directions) or a previous experimental response."""

    samples = fields.Nested(SamplesSchema)
    experimental = fields.Nested(ExperimentalInput)
    lags = fields.Nested(LagsSchema)
    directions = fields.List(fields.Nested(DirectionSchema), validate=validate.Length(min=1, max=MAX_DIRECTIONS))
    statistic = fields.String(load_default="semivariance", validate=validate.OneOf(SEMIVARIANCE_STATISTICS))
    min_pairs = fields.Integer(strict=True, load_default=30, validate=validate.Range(min=1))
    families = AutoOrList(
        load_default="auto", metadata={"description": '"auto" or a list of family names (GET /v1/model-families).'}
    )
    nugget = NuggetOption(load_default="fit", metadata={"description": '"fit", "none" or a fixed value.'})
    weighting = fields.String(load_default="pairs", validate=validate.OneOf(WEIGHTINGS))
    anisotropy = fields.String(load_default="none", validate=validate.OneOf(("none", "fit")))
    structures = fields.Integer(strict=True, load_default=1, validate=validate.OneOf((1, 2)))

    @validates_schema
    def _one_source(self, data, **kwargs):
        if ("samples" in data) == ("experimental" in data):
            raise ValidationError("give either samples or experimental (a previous experimental response), not both")
        if "experimental" in data:
            clash = [k for k in ("lags", "directions", "coordinates") if k in data]
            if clash:
                raise ValidationError(f"{', '.join(clash)} apply to samples, not to a given experimental variogram")


def _bounded(parameter: Parameter, **kwargs) -> fields.Float:
    """A finite float field checked against a parameter's documented bounds (the family table)."""
    b = parameter.bounds
    rule = validate.Range(
        min=b.minimum,
        max=b.maximum,
        min_inclusive=not b.minimum_exclusive,
        max_inclusive=not b.maximum_exclusive,
    )
    return finite(validate=rule, metadata={"description": parameter.unit}, **kwargs)


AnisotropyInput = Schema.from_dict(
    {p.name: _bounded(p, load_default=getattr(Anisotropy(), p.name)) for p in ANISOTROPY}, name="AnisotropyInput"
)

StructureInput = Schema.from_dict(
    {
        "family": fields.String(required=True, validate=validate.OneOf(FAMILIES)),
        **{name: _bounded(p) for name, p in structure_parameters().items()},
        "anisotropy": fields.Nested(AnisotropyInput),
    },
    name="StructureInput",
)
StructureInput.__doc__ = """One structure: its family's parameters (GET /v1/model-families), e.g. partial_sill and
range (bounded families), slope (linear), coefficient and exponent (power)."""


class ModelInput(Schema):
    """A variogram model (GET /v1/model-families lists the families)."""

    nugget = finite(load_default=0.0, validate=validate.Range(min=0))
    structures = fields.List(fields.Nested(StructureInput), load_default=list, validate=validate.Length(max=5))


class KrigingInput(Schema):
    type = fields.String(load_default="ordinary", validate=validate.OneOf(KRIGING_TYPES))
    mean = finite(
        metadata={
            "description": "Known mean (simple kriging). Default: the samples' mean, declustered (cell declustering) "
            "when sampling is clustered."
        }
    )
    drift = fields.String(validate=validate.OneOf(DRIFTS), metadata={"description": "Drift (universal kriging)."})
    nugget_as = fields.String(load_default="micro_scale", validate=validate.OneOf(NUGGET_ROLES))


class NeighbourhoodInput(Schema):
    """A moving neighbourhood; omit it for the unique neighbourhood (all samples)."""

    max_points = fields.Integer(strict=True, load_default=24, validate=validate.Range(min=1, max=500))
    min_points = fields.Integer(strict=True, load_default=4, validate=validate.Range(min=1))
    radius = finite(allow_none=True, load_default=None, validate=validate.Range(min=0, min_inclusive=False))
    sectors = fields.Integer(strict=True, allow_none=True, load_default=None, validate=validate.Range(min=1, max=8))


class SchemeInput(Schema):
    type = fields.String(load_default="leave_one_out", validate=validate.OneOf(("leave_one_out", "k_fold")))
    folds = fields.Integer(strict=True, load_default=10, validate=validate.Range(min=2))
    seed = fields.Integer(strict=True, load_default=1, validate=validate.Range(min=0))


class KrigingOptions(SampleOptions):
    model = fields.Nested(ModelInput, required=True)
    kriging = fields.Nested(KrigingInput, load_default=lambda: {"type": "ordinary", "nugget_as": "micro_scale"})
    neighbourhood = fields.Nested(NeighbourhoodInput, allow_none=True, load_default=None)


class CrossValidationRequest(KrigingOptions):
    """POST /v1/cross-validations."""

    scheme = fields.Nested(SchemeInput, load_default=lambda: {"type": "leave_one_out", "folds": 10, "seed": 1})
    outlier_threshold = finite(load_default=2.5, validate=validate.Range(min=0, min_inclusive=False))


class TargetsInput(Schema):
    x = NumberArray(required=True)
    y = NumberArray()
    z = NumberArray()


class GridInput(Schema):
    origin = fields.List(finite(), required=True, validate=validate.Length(min=1, max=3))
    spacing = fields.List(
        finite(validate=validate.Range(min=0, min_inclusive=False)),
        required=True,
        validate=validate.Length(min=1, max=3),
    )
    shape = fields.List(
        fields.Integer(strict=True, validate=validate.Range(min=1)),
        required=True,
        validate=validate.Length(min=1, max=3),
    )


class PredictionRequest(KrigingOptions):
    """POST /v1/predictions: targets or a grid."""

    targets = fields.Nested(TargetsInput)
    grid = fields.Nested(GridInput)
    return_weights = CappedList(
        fields.Integer(strict=True, validate=validate.Range(min=0)),
        validate=validate.Length(max=20),
        metadata={"description": "Target indexes whose kriging weights are returned (at most 20)."},
    )

    @validates_schema
    def _one_target_kind(self, data, **kwargs):
        if ("targets" in data) == ("grid" in data):
            raise ValidationError("give either targets or grid")


class VariogramStage(Schema):
    lags = fields.Nested(LagsSchema)
    directions = DirectionsOption(
        DirectionSchema,
        metadata={"description": '"auto" (a fan of 6 classes from which the anisotropy is estimated) or a list.'},
    )
    statistic = fields.String(load_default="semivariance", validate=validate.OneOf(SEMIVARIANCE_STATISTICS))
    min_pairs = fields.Integer(strict=True, load_default=30, validate=validate.Range(min=1))


class FitStage(Schema):
    families = AutoOrList(load_default="auto")
    nugget = NuggetOption(load_default="fit")
    weighting = fields.String(load_default="pairs", validate=validate.OneOf(WEIGHTINGS))


class CrossValidationStage(Schema):
    kriging = fields.Nested(KrigingInput, load_default=lambda: {"type": "ordinary", "nugget_as": "micro_scale"})
    neighbourhood = fields.Nested(
        NeighbourhoodInput,
        allow_none=True,
        load_default=None,
        metadata={"description": "Default: all samples up to 1500, else 24 neighbours."},
    )
    scheme = fields.Nested(SchemeInput, load_default=lambda: {"type": "leave_one_out", "folds": 10, "seed": 1})


class PredictionStage(Schema):
    grid = fields.Nested(GridInput, required=True)
    thresholds = fields.List(
        finite(),
        validate=validate.Length(max=MAX_THRESHOLDS),
        load_default=list,
        metadata={"description": "Values in original units; the prediction map draws their contours."},
    )


def _printable(text: str) -> None:
    if any(unicodedata.category(c).startswith("C") for c in text):
        raise ValidationError("must not contain control characters")


class VariableSchema(Schema):
    """What was measured, for labels and the echo."""

    name = fields.String(
        load_default="value", validate=[validate.Length(min=1, max=60), _printable], metadata={"example": "lead"}
    )
    unit = fields.String(
        load_default=None,
        allow_none=True,
        validate=[validate.Length(min=1, max=30), _printable],
        metadata={"example": "mg/kg"},
    )


class AnalysisRequest(SampleOptions):
    """POST /v1/analyses: the whole chain in one call."""

    transform = fields.String(load_default="none", validate=validate.OneOf(TRANSFORMS))
    variogram = fields.Nested(VariogramStage, load_default=lambda: VariogramStage().load({}))
    fit = fields.Nested(FitStage, load_default=lambda: FitStage().load({}))
    cross_validation = fields.Nested(CrossValidationStage, load_default=lambda: CrossValidationStage().load({}))
    prediction = fields.Nested(PredictionStage)
    figures = fields.List(
        fields.String(validate=validate.OneOf(FIGURES)),
        load_default=list,
        metadata={"description": f"Any of {', '.join(FIGURES)}."},
    )
    figure_format = fields.String(
        load_default="svg", validate=validate.OneOf(FORMATS), metadata={"description": "svg (text) or png (base64)."}
    )
    figure_size = fields.List(
        fields.Integer(strict=True, validate=validate.Range(min=200, max=3000)),
        validate=validate.Length(equal=2),
        load_default=lambda: [800, 500],
        metadata={"description": "Width and height in pixels."},
    )
    figure_colour_scale = fields.String(
        load_default="auto",
        validate=validate.OneOf(COLOUR_SCALES),
        metadata={"description": "Colours of the prediction map; auto: log for log and normal-score transforms."},
    )
    variable = fields.Nested(VariableSchema, load_default=lambda: VariableSchema().load({}))
    coordinate_unit = fields.String(
        load_default=None,
        allow_none=True,
        validate=[validate.Length(min=1, max=20), _printable],
        metadata={"description": "Unit of planar coordinates (e.g. m); geographic coordinates measure distances in m."},
    )

    @validates_schema
    def _metres_for_geographic(self, data, **kwargs):
        unit = data.get("coordinate_unit")
        if data.get("coordinates") == "geographic" and unit not in (None, "m"):
            raise ValidationError(
                "geographic coordinates are degrees and their distances metres: omit coordinate_unit or give m",
                "coordinate_unit",
            )


# ---- responses -------------------------------------------------------------


class ProvenanceSchema(Schema):
    service = fields.String()
    version = fields.String()
    numpy = fields.String()
    scipy = fields.String()
    numba = fields.String()
    input_sha256 = fields.String(
        metadata={"description": "SHA-256 of the little-endian float64 bytes of x, y, z and values as parsed."}
    )
    elapsed_ms = fields.Float()


class DeclusteringSchema(Schema):
    """Cell declustering of the samples (weights used only when sampling is clustered)."""

    method = fields.String()
    cell_size = fields.Float(allow_none=True, metadata={"description": "Chosen cell size, coordinate units."})
    clustered = fields.Boolean()
    weights_used = fields.Boolean(
        metadata={"description": "The summary's reference moments, normal scores and sill reference use the weights."}
    )
    over_sampled = fields.String(
        allow_none=True, metadata={"description": "high (declustered mean minimised) or low (maximised)."}
    )
    nearest_neighbour_ratio = fields.Float(
        allow_none=True,
        metadata={
            "description": "Mean nearest-neighbour distance over its value for a random pattern (Clark & Evans 1954)."
        },
    )
    nearest_neighbour_z = fields.Float(allow_none=True)
    mean_shift_z = fields.Float(
        allow_none=True,
        metadata={"description": "Declustered minus plain mean in standard errors of a random assignment of values."},
    )
    reason = fields.String(allow_none=True)


class SummarySchema(Schema):
    samples = fields.Integer()
    dimension = fields.Integer()
    mean = fields.Float()
    variance = fields.Float(metadata={"description": "Divisor N."})
    minimum = fields.Float()
    maximum = fields.Float()
    extent = fields.Dict(keys=fields.String(), values=fields.List(fields.Float()))
    max_distance = fields.Float()
    declustered_mean = fields.Float(
        allow_none=True, metadata={"description": "Mean under the cell-declustering weights."}
    )
    declustered_variance = fields.Float(
        allow_none=True, metadata={"description": "Variance under the cell-declustering weights (weights sum to 1)."}
    )
    declustering = fields.Nested(DeclusteringSchema, allow_none=True)


class ClassSchema(Schema):
    lower = fields.Float()
    upper = fields.Float()
    mean_distance = fields.Float(allow_none=True)
    pairs = fields.Integer()
    value = fields.Float(allow_none=True)
    reason = fields.String(allow_none=True)
    sparse = fields.Boolean()
    tail_mean = fields.Float(allow_none=True)
    head_mean = fields.Float(allow_none=True)
    tail_sd = fields.Float(allow_none=True)
    head_sd = fields.Float(allow_none=True)
    standard_error = fields.Float(
        allow_none=True,
        metadata={
            "description": "Standard error of value: delete-one-block jackknife over spatial blocks of samples "
            "(parameters.class_uncertainty); null with uncertainty_reason when undefined."
        },
    )
    interval_95 = fields.List(
        fields.Float(),
        allow_none=True,
        validate=validate.Length(equal=2),
        metadata={"description": "[lower, upper] 95 % interval of the class's expected value."},
    )
    uncertainty_reason = fields.String(metadata={"description": "Why standard_error is null."})


class DirectionResultSchema(Schema):
    azimuth = fields.Float()
    tolerance = fields.Float()
    bandwidth = fields.Float(allow_none=True)
    dip = fields.Float()
    dip_tolerance = fields.Float()
    vertical_bandwidth = fields.Float(allow_none=True)
    classes = fields.List(fields.Nested(ClassSchema))


class ScattergramSchema(Schema):
    direction = fields.Integer()
    klass = fields.Integer(data_key="class")
    pairs_in_class = fields.Integer()
    stride = fields.Integer(metadata={"description": "Every stride-th pair of the class is returned."})
    tail = fields.List(fields.Float())
    head = fields.List(fields.Float())


class ResultEnvelope(Schema):
    parameters = fields.Dict(metadata={"description": "Every resolved parameter, defaults filled in."})
    warnings = fields.List(fields.String())
    provenance = fields.Nested(ProvenanceSchema)


class ExperimentalResponse(ResultEnvelope):
    directions = fields.List(fields.Nested(DirectionResultSchema))
    summary = fields.Nested(SummarySchema)
    colocated_pairs = fields.Integer()
    pairs_for_class = fields.Nested(ScattergramSchema)


class MapResponse(ResultEnvelope):
    hx = fields.List(fields.Float())
    hy = fields.List(fields.Float())
    values = fields.List(
        fields.List(fields.Float(allow_none=True)),
        metadata={"description": "Rows by hy, columns by hx; null for empty cells."},
    )
    pairs = fields.List(fields.List(fields.Integer()))
    summary = fields.Nested(SummarySchema)


class AnisotropySchema(Schema):
    azimuth = fields.Float()
    ratio = fields.Float()
    vertical_ratio = fields.Float()


StructureSchema = Schema.from_dict(
    {
        "family": fields.String(),
        **{name: fields.Float(metadata={"description": p.unit}) for name, p in structure_parameters().items()},
        "anisotropy": fields.Nested(AnisotropySchema),
    },
    name="StructureSchema",
)


class ModelSchema(Schema):
    nugget = fields.Float()
    structures = fields.List(fields.Nested(StructureSchema))


class DiagnosticsSchema(Schema):
    weighted_sse = fields.Float(allow_none=True)
    r_squared = fields.Float(allow_none=True)
    criterion = fields.Float(allow_none=True)
    criterion_name = fields.String()
    converged = fields.Boolean()
    iterations = fields.Integer()


class CandidateSchema(Schema):
    rank = fields.Integer()
    label = fields.String()
    model = fields.Nested(ModelSchema, allow_none=True)
    parameters = fields.Integer()
    weighted_sse = fields.Float(allow_none=True)
    r_squared = fields.Float(allow_none=True)
    criterion = fields.Float(allow_none=True)
    converged = fields.Boolean()
    iterations = fields.Integer()
    note = fields.String(allow_none=True)


class FitClassSchema(Schema):
    mean_distance = fields.Float(allow_none=True)
    value = fields.Float(allow_none=True)
    pairs = fields.Integer()
    used = fields.Boolean()
    model_value = fields.Float(allow_none=True)


class FitDirectionSchema(Schema):
    azimuth = fields.Float()
    classes = fields.List(fields.Nested(FitClassSchema))


class FitExperimentalSchema(Schema):
    statistic = fields.String()
    directions = fields.List(fields.Nested(FitDirectionSchema))


class ModelFitResponse(ResultEnvelope):
    model = fields.Nested(ModelSchema)
    diagnostics = fields.Nested(DiagnosticsSchema)
    candidates = fields.List(fields.Nested(CandidateSchema))
    experimental = fields.Nested(FitExperimentalSchema)
    summary = fields.Nested(SummarySchema)


class FitRuleSchema(Schema):
    """A fit bound or start: factor times a named fit scale."""

    factor = fields.Float()
    scale = fields.String(metadata={"description": "A key of fit_scales."})


class FamilyParameterFitSchema(Schema):
    low = fields.Nested(FitRuleSchema)
    high = fields.Nested(FitRuleSchema)
    start = fields.Nested(FitRuleSchema)


class FamilyParameterSchema(Schema):
    name = fields.String()
    unit = fields.String()
    kind = fields.String(validate=validate.OneOf(UNIT_KINDS))
    slot = fields.String(metadata={"description": "sill, range or shape; empty for model-wide parameters."})
    minimum = fields.Float()
    maximum = fields.Float()
    exclusive = fields.Boolean(metadata={"description": "Every given end is open."})
    minimum_exclusive = fields.Boolean()
    maximum_exclusive = fields.Boolean()
    fit = fields.Nested(FamilyParameterFitSchema, metadata={"description": "Bounds and start of a fit."})


class FamilySchema(Schema):
    name = fields.String()
    bounded = fields.Boolean()
    max_dimension = fields.Integer()
    parameters = fields.List(fields.Nested(FamilyParameterSchema))
    formula = fields.String()
    source = fields.String()


class FamiliesResponse(Schema):
    families = fields.List(fields.Nested(FamilySchema))
    model_parameters = fields.List(
        fields.Nested(FamilyParameterSchema), metadata={"description": "The nugget and the anisotropy."}
    )
    fit_scales = fields.Dict(keys=fields.String(), values=fields.String())
    conventions = fields.Dict()


class CrossValidationSamplesSchema(Schema):
    id = fields.List(fields.String())
    observed = fields.List(fields.Float())
    estimate = fields.List(fields.Float(allow_none=True))
    standard_deviation = fields.List(fields.Float(allow_none=True))
    error = fields.List(fields.Float(allow_none=True))
    standardized_error = fields.List(fields.Float(allow_none=True))
    outlier = fields.List(fields.Boolean())


class CrossValidationStatisticsSchema(Schema):
    count = fields.Integer()
    mean_error = fields.Float(allow_none=True)
    mean_absolute_error = fields.Float(allow_none=True)
    root_mean_square_error = fields.Float(allow_none=True)
    mean_standardized_error = fields.Float(allow_none=True)
    root_mean_square_standardized_error = fields.Float(allow_none=True)
    correlation = fields.Float(allow_none=True)
    goodness_of_prediction = fields.Float(allow_none=True)
    interval_coverage_95 = fields.Float(allow_none=True)
    outliers = fields.Integer()


class UnestimatedSchema(Schema):
    index = fields.Integer()
    reason = fields.String()


class CrossValidationResponse(ResultEnvelope):
    statistics = fields.Nested(CrossValidationStatisticsSchema)
    samples = fields.Nested(CrossValidationSamplesSchema)
    assessment = fields.String()
    unestimated = fields.List(fields.Nested(UnestimatedSchema))


class WeightsSchema(Schema):
    target = fields.Integer()
    samples = fields.List(fields.String())
    weights = fields.List(fields.Float())
    lagrange = fields.List(fields.Float())


class GridSchema(Schema):
    origin = fields.List(fields.Float())
    spacing = fields.List(fields.Float())
    shape = fields.List(fields.Integer())
    order = fields.String()


class PredictionResponse(ResultEnvelope):
    x = fields.List(fields.Float())
    y = fields.List(fields.Float())
    z = fields.List(fields.Float())
    estimate = fields.List(fields.Float(allow_none=True))
    variance = fields.List(fields.Float(allow_none=True))
    grid = fields.Nested(GridSchema)
    unestimated = fields.List(fields.Nested(UnestimatedSchema))
    weights = fields.List(fields.Nested(WeightsSchema))


class AnalysisVariogramSchema(Schema):
    directions = fields.List(fields.Nested(DirectionResultSchema))
    colocated_pairs = fields.Integer()


class AnalysisExperimentalSchema(Schema):
    omnidirectional = fields.Nested(AnalysisVariogramSchema)
    directional = fields.Nested(AnalysisVariogramSchema, allow_none=True)
    anisotropy = fields.Dict(allow_none=True)


class AnalysisFitSchema(Schema):
    model = fields.Nested(ModelSchema)
    diagnostics = fields.Nested(DiagnosticsSchema)
    candidates = fields.List(fields.Nested(CandidateSchema))


class AnalysisCrossValidationSchema(Schema):
    statistics = fields.Nested(CrossValidationStatisticsSchema)
    samples = fields.Nested(CrossValidationSamplesSchema)
    assessment = fields.String()
    unestimated = fields.List(fields.Nested(UnestimatedSchema))


class AnalysisPredictionSchema(Schema):
    x = fields.List(fields.Float())
    y = fields.List(fields.Float())
    estimate = fields.List(
        fields.Float(allow_none=True), metadata={"description": "Original units (back-transformed)."}
    )
    variance = fields.List(fields.Float(allow_none=True))
    grid = fields.Nested(GridSchema)
    unestimated = fields.List(fields.Nested(UnestimatedSchema))


class AnalysisResponse(ResultEnvelope):
    summary = fields.Nested(SummarySchema)
    transformed_summary = fields.Nested(SummarySchema)
    experimental = fields.Nested(AnalysisExperimentalSchema)
    fit = fields.Nested(AnalysisFitSchema)
    cross_validation = fields.Nested(AnalysisCrossValidationSchema, allow_none=True)
    prediction = fields.Nested(AnalysisPredictionSchema, allow_none=True)
    figures = fields.Dict(keys=fields.String(), values=fields.String())
    verdict = fields.String()


class FieldErrorSchema(Schema):
    pointer = fields.String(metadata={"description": "JSON Pointer (RFC 6901) into the request."})
    detail = fields.String()


class ProblemSchema(Schema):
    """RFC 9457 problem details."""

    type = fields.String()
    title = fields.String()
    status = fields.Integer()
    detail = fields.String()
    instance = fields.String()
    request_id = fields.String()
    errors = fields.List(
        fields.Nested(FieldErrorSchema), metadata={"description": "Offending fields, at most 100 entries."}
    )
    errors_omitted = fields.Integer(
        metadata={
            "description": "Further problems not listed in errors: entries past the first 100, and list elements "
            "left unchecked after the first 20 bad ones of a list."
        }
    )


class HealthSchema(Schema):
    status = fields.String()
