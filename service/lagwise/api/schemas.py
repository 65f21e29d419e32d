"""Request and response schemas (marshmallow); they also generate the OpenAPI document.

Range checks here document the contract; the core checks the same rules again
with pointers, so a caller gets the same answer from either side. Objects that take
one of several forms (samples as columns or GeoJSON; distance classes; a structure
of each family) are :class:`~lagwise.api.fields.Variants` of one schema per form, so
that the contract says ``oneOf`` and the service loads exactly the form it documents.
Response schemas mark every member that is always present as required
(:func:`always_present`), so that generated clients get non-optional attributes.
"""

from __future__ import annotations

import copy
import unicodedata
from typing import Any

from marshmallow import EXCLUDE, Schema, ValidationError, fields, missing, post_dump, validate, validates_schema

from ..core.data.censoring import CENSORING_POLICIES
from ..core.data.samples import COORDINATE_SYSTEMS, DUPLICATE_POLICIES
from ..core.data.transforms import TRANSFORMS
from ..core.data.variables import MAX_VARIABLES
from ..core.kriging.blocks import DEFAULT_POINTS_PER_AXIS, MAX_POINTS, MAX_POINTS_PER_AXIS
from ..core.kriging.cross_validation import SCHEMES
from ..core.kriging.systems import DRIFTS, KRIGING_TYPES, NUGGET_ROLES
from ..core.modelling.families import ANISOTROPY, FAMILIES, NUGGET, UNIT_KINDS, Family, Parameter
from ..core.modelling.fitting import SEMIVARIANCE_STATISTICS, WEIGHTINGS
from ..core.modelling.models import Anisotropy
from ..core.selection import STRATEGY_NAMES
from ..core.simulation.simulate import MAX_REALISATIONS, SIMULATION_KRIGING
from ..core.stages import ANISOTROPY_CHOICES
from ..core.variography.gridded import DEFAULT_TOLERANCE, METHODS
from ..core.variography.lags import AUTO_METHODS, MAX_CLASSES
from ..core.variography.statistics import CLASS_REASONS, STATISTICS
from ..core.verdict import LEVELS as VERDICT_LEVELS
from ..figures import COLOUR_SCALES, FIGURES, FORMATS
from .fields import (
    AutoOr,
    AutoOrList,
    CappedList,
    Column,
    DirectionsOption,
    NamedColumns,
    NuggetOption,
    NullableNumberArray,
    NumberArray,
    Rows,
    StrictBoolean,
    StrictFloat,
    StrictInteger,
    Variants,
    by_discriminator,
)
from .problems import KINDS

MAX_DIRECTIONS = 36
MAX_THRESHOLDS = 20
PLAUSIBLE = 1e100
FAMILY_NAMES = tuple(FAMILIES)


# The words of a missing required member, after its pointer ("/samples/values: is required").
REQUIRED = "is required"


# The library's default messages and ours, after the member's pointer ("/lags: must not be null").
OWN_WORDS = {
    fields.Field.default_error_messages["required"]: REQUIRED,
    fields.Field.default_error_messages["null"]: "must not be null",
    fields.Field.default_error_messages["validator_failed"]: "is not a valid value",
    fields.String.default_error_messages["invalid"]: "must be text",
    fields.Number.default_error_messages["invalid"]: "must be a number",
    fields.Integer.default_error_messages["invalid"]: "must be a whole number",
    fields.Boolean.default_error_messages["invalid"]: "must be true or false",
    fields.List.default_error_messages["invalid"]: "must be an array",
    fields.Tuple.default_error_messages["invalid"]: "must be an array",
    fields.Dict.default_error_messages["invalid"]: "must be an object",
    fields.Nested.default_error_messages["type"]: "must be an object",
}


def _own_words(field_obj: fields.Field) -> None:
    """Put :data:`OWN_WORDS` in place of the library's default messages of a field and of the fields
    it holds (an array's elements, a tuple's places, a mapping's values); a field's own messages stay."""
    field_obj.error_messages = {key: OWN_WORDS.get(text, text) for key, text in field_obj.error_messages.items()}
    held = [getattr(field_obj, "inner", None), getattr(field_obj, "value_field", None)]
    for inner in [*held, *getattr(field_obj, "tuple_fields", ())]:
        if isinstance(inner, fields.Field):
            _own_words(inner)


class BaseSchema(Schema):
    """The base of every schema: the library's default messages in our own words (:data:`OWN_WORDS`;
    a missing required member: :data:`REQUIRED`) unless a field gives its own."""

    error_messages = {"unknown": "is not a member of this object", "type": "must be an object"}

    def on_bind_field(self, field_name: str, field_obj: fields.Field) -> None:
        _own_words(field_obj)


def map_tolerance() -> fields.Field:
    """The grid method's per-cell tolerance of a variogram map (its own endpoint and an analysis' stage)."""
    return finite(
        load_default=DEFAULT_TOLERANCE,
        validate=validate.Range(min=0, max=1, min_inclusive=False, max_inclusive=False),
        metadata={"description": "Grid method: relative error bound above which a map cell is flagged."},
    )


def finite(**kwargs) -> StrictFloat:
    """A finite float field."""
    return StrictFloat(allow_nan=False, **kwargs)


def one_of(choices, **kwargs) -> fields.String:
    """A string field restricted to ``choices`` (documented as an enum)."""
    return fields.String(validate=validate.OneOf(choices), **kwargs)


def _absent_when_none(self, obj, attr, default):
    """A dumped schema's accessor: an optional, non-nullable member whose value is None is left out."""
    value = Schema.get_attribute(self, obj, attr, default)
    return missing if value is None and attr in self.absent_when_none else value


def always_present(*optional: str):
    """Class decorator for response schemas: every member is required except ``optional``.

    The fields are copied first, so a parent schema's own fields keep their setting. When
    the schema dumps a result, an optional member is left out when its value is missing or
    None, unless its field allows null (then it is written as null).
    """

    def mark(cls: type[Schema]) -> type[Schema]:
        for name, field in list(cls._declared_fields.items()):
            field = copy.copy(field)
            field.required = name not in optional
            cls._declared_fields[name] = field
        cls.absent_when_none = frozenset(  # type: ignore[attr-defined]
            field.attribute or name
            for name, field in cls._declared_fields.items()
            if name in optional and not field.allow_none
        )
        cls.get_attribute = _absent_when_none  # type: ignore[method-assign]
        return cls

    return mark


# ---- samples -----------------------------------------------------------------


class _SampleCoordinates(BaseSchema):
    """The coordinate columns (and identifiers) every columnar form of samples has."""

    x = NumberArray(
        required=True, metadata={"description": "Easting, or longitude in degrees for geographic coordinates."}
    )
    y = NumberArray(metadata={"description": "Northing, or latitude in degrees; makes the set 2-D."})
    z = NumberArray(
        metadata={
            "description": "Elevation, positive up, same unit as x and y (metres for geographic); makes the set 3-D."
        }
    )
    ids = CappedList(fields.String(), metadata={"description": "Sample identifiers echoed in per-sample outputs."})


class SampleColumns(_SampleCoordinates):
    """Samples as columns of equal length."""

    values = NumberArray(required=True, metadata={"description": "Measured values."})
    censored = CappedList(
        StrictBoolean(), metadata={"description": "True where the result is below its detection limit."}
    )
    detection_limits = CappedList(
        StrictFloat(allow_none=True, allow_nan=False),
        metadata={"description": "Detection limits (value units), needed where censored is true."},
    )


class _SampleFeatureCollection(BaseSchema):
    """The feature collection (and identifier property) every GeoJSON form of samples has."""

    geojson = fields.Dict(
        required=True, metadata={"description": "A GeoJSON FeatureCollection (RFC 7946) of Point features."}
    )
    id_property = fields.String(
        metadata={
            "description": "Feature property holding the identifier (default the feature id). A feature without "
            'one is named by its 0-based index in features, as text ("3"), with "#" put before it while another '
            'feature\'s identifier has that text ("#3", "##3"...): a made identifier never repeats a given one.'
        }
    )


class SampleFeatures(_SampleFeatureCollection):
    """Samples as a GeoJSON FeatureCollection (RFC 7946) of Point features."""

    value_property = fields.String(
        required=True,
        metadata={"description": 'Feature property holding the value (a value written like "<0.5" is censored).'},
    )


def _units_field() -> NamedColumns:
    return NamedColumns(
        fields.String(validate=validate.Length(min=1, max=30)),
        max_names=MAX_VARIABLES,
        metadata={"description": "Unit of each variable (by name), for labels and the echo."},
    )


class SampleVariableColumns(_SampleCoordinates):
    """Samples as columns carrying several named variables (null where a variable was not measured)."""

    variables = NamedColumns(
        NullableNumberArray(),
        required=True,
        min_names=1,
        max_names=MAX_VARIABLES,
        metadata={
            "description": "One column per variable, as long as x; null where the variable was not measured "
            "(heterotopic samples). Each variable needs at least two measured values.",
            "example": {"lead": [120.0, None, 95.5], "zinc": [310.0, 280.0, None]},
        },
    )
    censored = NamedColumns(
        CappedList(StrictBoolean()),
        max_names=MAX_VARIABLES,
        metadata={"description": "Per variable: true where the result is below its detection limit."},
    )
    detection_limits = NamedColumns(
        CappedList(StrictFloat(allow_none=True, allow_nan=False)),
        max_names=MAX_VARIABLES,
        metadata={"description": "Per variable: detection limits (its unit), needed where censored is true."},
    )
    units = _units_field()


class SampleFeatureVariables(_SampleFeatureCollection):
    """Samples as GeoJSON Point features (RFC 7946) carrying several variables as properties."""

    variable_properties = fields.List(
        fields.String(validate=validate.Length(min=1, max=60)),
        required=True,
        validate=validate.Length(min=1, max=MAX_VARIABLES),
        metadata={
            "description": "Feature properties holding the variables; a missing or null property means not measured, "
            'a value written like "<0.5" is censored.'
        },
    )
    units = _units_field()


class RasterLayout(BaseSchema):
    """Where a raster's nodes lie (planar coordinates); node (i, j) at origin + (i dx, j dy)."""

    origin = fields.List(
        finite(), required=True, validate=validate.Length(equal=2), metadata={"description": "[x0, y0] of node (0, 0)."}
    )
    spacing = fields.List(
        finite(validate=validate.Range(min=0, min_inclusive=False)),
        required=True,
        validate=validate.Length(equal=2),
        metadata={"description": "[dx, dy] between neighbouring nodes, coordinate units."},
    )
    shape = fields.List(
        StrictInteger(validate=validate.Range(min=1)),
        required=True,
        validate=validate.Length(equal=2),
        metadata={"description": "[nx, ny] nodes along x and y."},
    )


class RasterGrid(RasterLayout):
    """A regular 2-D grid of values (planar coordinates); a cell's value sits at its node, origin + i spacing."""

    values = NullableNumberArray(
        required=True, metadata={"description": "nx * ny values, x fastest (i + nx j); null for a missing cell."}
    )


class ArrowRaster(BaseSchema):
    """The request part's samples of a raster sent as Arrow: its layout; its values are the samples part's
    one column values (x fastest, null for a missing cell)."""

    raster = fields.Nested(RasterLayout, required=True)


class SampleRaster(BaseSchema):
    """Samples on a raster: experimental variograms and maps by FFT; points elsewhere (within the sample limit)."""

    raster = fields.Nested(RasterGrid, required=True)


def _sample_form(value: dict) -> str:
    if "raster" in value:
        return "raster"
    if "geojson" in value:
        if "variable_properties" in value and "value_property" in value:
            raise ValidationError(
                {"value_property": ["give value_property (one variable) or variable_properties (several), not both"]}
            )
        return "feature_variables" if "variable_properties" in value else "features"
    if "variables" in value:
        if "values" in value:
            raise ValidationError({"values": ["give values (one variable) or variables (several), not both"]})
        return "variables"
    return "columns"


def samples_field(**kwargs) -> Variants:
    """Samples as columns or as GeoJSON features, with one variable or several."""
    return Variants(
        {
            "columns": SampleColumns,
            "features": SampleFeatures,
            "variables": SampleVariableColumns,
            "feature_variables": SampleFeatureVariables,
            "raster": SampleRaster,
        },
        _sample_form,
        accepted="columns (x, values), columns of several variables (x, variables), GeoJSON features "
        "(geojson with value_property or variable_properties), or a raster",
        **kwargs,
    )


def variable_choice(**kwargs) -> fields.String:
    """The variable to use when samples carry several (``samples.variables``)."""
    return fields.String(
        validate=validate.Length(min=1, max=60),
        metadata={
            "description": "With samples.variables: the name of the variable this request uses "
            "(may be omitted when there is only one)."
        },
        **kwargs,
    )


class SampleOptions(BaseSchema):
    """Options shared by every request that carries samples."""

    samples = samples_field(required=True)
    coordinates = one_of(
        COORDINATE_SYSTEMS,
        metadata={"description": "planar (default for columns) or geographic (WGS84 degrees; default for GeoJSON)."},
    )
    duplicates = one_of(
        DUPLICATE_POLICIES,
        load_default="average",
        metadata={"description": "What to do with samples at the same location."},
    )
    censoring = one_of(
        CENSORING_POLICIES,
        load_default="half_limit",
        metadata={"description": "Value given to results below their detection limit."},
    )


# ---- distance and direction classes -------------------------------------------------


class LagWidths(BaseSchema):
    """Contiguous classes [0, w), [w, 2w), ... [(count - 1) w, count w)."""

    width = finite(
        required=True,
        validate=validate.Range(min=0, min_inclusive=False),
        metadata={"description": "Class width, coordinate units."},
    )
    count = StrictInteger(required=True, validate=validate.Range(min=1, max=MAX_CLASSES))


class LagEdges(BaseSchema):
    """Classes [e_i, e_i+1) between strictly increasing edges (coordinate units)."""

    edges = fields.List(finite(), required=True, validate=validate.Length(min=2, max=MAX_CLASSES + 1))


class LagAuto(BaseSchema):
    """Classes chosen from the data up to half the field's extent (an empty object: equal_width)."""

    auto = one_of(
        AUTO_METHODS, metadata={"description": "equal_width (default) or equal_pairs (pair-count quantiles)."}
    )


def _lag_form(value: dict) -> str:
    if "edges" in value:
        return "edges"
    if "width" in value or "count" in value:
        return "widths"
    return "auto"


def lags_field(**kwargs) -> Variants:
    """Distance classes: width and count, explicit edges, or auto."""
    return Variants(
        {"widths": LagWidths, "edges": LagEdges, "auto": LagAuto},
        _lag_form,
        accepted="width and count, edges, or auto",
        **kwargs,
    )


class DirectionSchema(BaseSchema):
    """A direction class (degrees; azimuth clockwise from north)."""

    azimuth = finite(load_default=0.0, validate=validate.Range(min=0, max=360, max_inclusive=False))
    tolerance = finite(load_default=22.5, validate=validate.Range(min=0, max=90, min_inclusive=False))
    bandwidth = finite(
        load_default=None, allow_none=True, metadata={"description": "Largest perpendicular offset; null: no limit."}
    )
    dip = finite(load_default=0.0, validate=validate.Range(min=-90, max=90))
    dip_tolerance = finite(load_default=90.0, validate=validate.Range(min=0, max=90, min_inclusive=False))
    vertical_bandwidth = finite(load_default=None, allow_none=True)


class ScatterRequestSchema(BaseSchema):
    """Ask for the pairs of one class (h-scattergram)."""

    direction = StrictInteger(load_default=0, validate=validate.Range(min=0))
    klass = StrictInteger(required=True, data_key="class", validate=validate.Range(min=0))
    limit = StrictInteger(load_default=2000, validate=validate.Range(min=1))


def directions_list(**kwargs) -> fields.List:
    return fields.List(fields.Nested(DirectionSchema), validate=validate.Length(min=1, max=MAX_DIRECTIONS), **kwargs)


class ExperimentalRequest(SampleOptions):
    """POST /v1/experimental-variograms."""

    lags = lags_field()
    directions = directions_list()
    statistic = one_of(STATISTICS, load_default="semivariance")
    min_pairs = StrictInteger(load_default=30, validate=validate.Range(min=1))
    pairs_for_class = fields.Nested(ScatterRequestSchema)
    variable = variable_choice()
    method = one_of(
        METHODS,
        metadata={
            "description": "exact (pair engine), grid (FFT on a fine grid of binned samples, with an error bound per "
            "class; a raster is its own grid, exact), or auto (rasters: their grid; scattered samples: exact unless "
            "over LAGWISE_MAX_PAIRS). Default: exact for scattered samples, auto for rasters."
        },
    )
    tolerance = finite(
        load_default=DEFAULT_TOLERANCE,
        validate=validate.Range(min=0, max=1, min_inclusive=False, max_inclusive=False),
        metadata={"description": "Grid method: relative error bound above which a class is flagged."},
    )


class MapRequest(SampleOptions):
    """POST /v1/variogram-maps."""

    variable = variable_choice()
    cell_size = finite(
        validate=validate.Range(min=0, min_inclusive=False),
        metadata={
            "description": "Cell side, coordinate units. Default: the typical sample spacing (median nearest-neighbour "
            "distance), enlarged so that a cell holds about min_pairs pairs on average and at most 40 cells lie on "
            "each side of the origin."
        },
    )
    cells = StrictInteger(
        validate=validate.Range(min=1),
        metadata={
            "description": "Cells on each side of the origin. Default: enough to reach half the largest separation."
        },
    )
    statistic = one_of(STATISTICS, load_default="semivariance")
    min_pairs = StrictInteger(
        load_default=30,
        validate=validate.Range(min=1),
        metadata={"description": "Average pairs per cell the automatic cell size aims for."},
    )
    method = one_of(
        METHODS,
        metadata={
            "description": "exact (pair enumeration), grid (2-D samples binned on a fine grid, every lag vector "
            "summed by FFT, with an error bound per cell; a raster is its own grid, exact), or auto (rasters: their "
            "grid; scattered samples: exact unless over LAGWISE_MAX_PAIRS). Default: exact for scattered samples, "
            "auto for rasters."
        },
    )
    tolerance = map_tolerance()


# ---- models ------------------------------------------------------------------------


def _bounded(parameter: Parameter, **kwargs) -> StrictFloat:
    """A finite float field checked against a parameter's documented bounds (the family table)."""
    b = parameter.bounds
    rule = validate.Range(
        min=b.minimum,
        max=b.maximum,
        min_inclusive=not b.minimum_exclusive,
        max_inclusive=not b.maximum_exclusive,
    )
    doc: dict = {"description": parameter.unit.capitalize() + "."}
    if b.minimum is not None and b.minimum_exclusive:
        doc["exclusiveMinimum"] = b.minimum
    if b.maximum is not None and b.maximum_exclusive:
        doc["exclusiveMaximum"] = b.maximum
    return finite(validate=rule, metadata=doc, **kwargs)


AnisotropyInput = BaseSchema.from_dict(
    {p.name: _bounded(p, load_default=getattr(Anisotropy(), p.name)) for p in ANISOTROPY}, name="AnisotropyInput"
)
AnisotropyInput.__doc__ = "Geometric anisotropy; omitted: isotropic."


def _structure_form(family: Family) -> type[Schema]:
    """The schema of one family's structure: its own parameters, all required, and an optional anisotropy."""
    members: dict = {
        "family": fields.String(required=True, validate=validate.Equal(family.name)),
        **{p.name: _bounded(p, required=True) for p in family.parameters},
        "anisotropy": fields.Nested(AnisotropyInput),
    }
    title = "".join(part.capitalize() for part in family.name.split("_"))
    form = BaseSchema.from_dict(members, name=f"{title}Structure")
    form.__doc__ = f"A {family.name.replace('_', ' ')} structure: {family.description}."
    return form


STRUCTURE_FORMS = {name: _structure_form(f) for name, f in FAMILIES.items()}


class Model(BaseSchema):
    """A variogram model: a nugget plus nested structures (GET /v1/model-families lists the families).

    Fitted models in responses use this same schema, so a response's model can be sent back as it is.
    """

    nugget = _bounded(NUGGET, load_default=0.0)
    structures = fields.List(
        Variants(STRUCTURE_FORMS, by_discriminator("family", FAMILY_NAMES), discriminator="family"),
        load_default=list,
        validate=validate.Length(max=5),
    )
    transform = one_of(
        TRANSFORMS,
        metadata={
            "description": "The transform the model was fitted in (echoed by fits): kriging with this model runs "
            "on the transformed values and back-transforms, unless the request says otherwise."
        },
    )


def _matrix(**kwargs) -> fields.List:
    return fields.List(
        fields.List(finite(), validate=validate.Length(min=1, max=MAX_VARIABLES)),
        validate=validate.Length(min=1, max=MAX_VARIABLES),
        **kwargs,
    )


class JointStructureInput(BaseSchema):
    """A structure shared by every variable of a joint model, with its matrix of sills."""

    family = one_of(
        tuple(name for name, f in FAMILIES.items() if f.bounded),
        required=True,
        metadata={"description": "A bounded family (GET /v1/model-families)."},
    )
    range = finite(
        required=True,
        validate=validate.Range(min=0, min_inclusive=False),
        metadata={"description": "Practical range, coordinate units (shared by every variable)."},
    )
    smoothness = finite(metadata={"description": "Matern smoothness."})
    shape = finite(metadata={"description": "Stable shape."})
    anisotropy = fields.Nested(AnisotropyInput)
    sills = _matrix(
        required=True,
        metadata={
            "description": "Coregionalisation matrix (rows and columns in the order of variables): partial sills on "
            "the diagonal, cross partial sills off it; symmetric positive semi-definite.",
            "example": [[0.8, 0.5], [0.5, 0.6]],
        },
    )


class JointModel(BaseSchema):
    """A joint model of several variables (linear model of coregionalisation): a nugget matrix and
    shared structures, every matrix symmetric positive semi-definite."""

    variables = fields.List(
        fields.String(validate=validate.Length(min=1, max=60)),
        required=True,
        validate=validate.Length(min=1, max=MAX_VARIABLES),
        metadata={"description": "Variable names: the rows and columns of every matrix, in order."},
    )
    nugget = _matrix(metadata={"description": "Nugget matrix; omitted: zero."})
    structures = fields.List(fields.Nested(JointStructureInput), load_default=list, validate=validate.Length(max=5))


def _model_form(value: dict) -> str:
    return "joint" if "variables" in value else "single"


def model_field(**kwargs) -> Variants:
    """A variogram model of one variable, or a joint model of several (with ``variables``)."""
    return Variants({"single": Model, "joint": JointModel}, _model_form, **kwargs)


# ---- fitting -----------------------------------------------------------------------


class ExperimentalClassInput(BaseSchema):
    """A class of a previous experimental response (other members are ignored)."""

    class Meta:
        unknown = EXCLUDE

    # Magnitudes are bounded so that weighted squared residuals stay within the float range;
    # counts are held as 64-bit integers.
    mean_distance = finite(allow_none=True, required=True, validate=validate.Range(min=0, max=PLAUSIBLE))
    value = finite(
        allow_none=True,
        required=True,
        validate=validate.Range(min=0, max=PLAUSIBLE, error="semivariances cannot be negative (at most {max})"),
    )
    pairs = StrictInteger(required=True, validate=validate.Range(min=0, max=2**62))
    standard_error = finite(
        allow_none=True,
        validate=validate.Range(min=0, max=PLAUSIBLE),
        metadata={"description": "Class standard error (used by weighting inverse_variance)."},
    )


class ExperimentalDirectionInput(BaseSchema):
    class Meta:
        unknown = EXCLUDE

    azimuth = finite(load_default=0.0, validate=validate.Range(min=0, max=360, max_inclusive=False))
    classes = fields.List(fields.Nested(ExperimentalClassInput), required=True, validate=validate.Length(min=1))


class CrossClassInput(ExperimentalClassInput):
    """A class of a cross variogram: the cross-semivariance may be negative."""

    value = finite(allow_none=True, required=True, validate=validate.Range(min=-PLAUSIBLE, max=PLAUSIBLE))


class CrossDirectionInput(ExperimentalDirectionInput):
    classes = fields.List(fields.Nested(CrossClassInput), required=True, validate=validate.Length(min=1))


class ExperimentalVariableInput(BaseSchema):
    """One variable's direct variogram in a several-variable experimental response."""

    class Meta:
        unknown = EXCLUDE

    name = fields.String(required=True, validate=validate.Length(min=1, max=60))
    directions = fields.List(
        fields.Nested(ExperimentalDirectionInput), required=True, validate=validate.Length(min=1, max=MAX_DIRECTIONS)
    )
    summary = fields.Dict()


class ExperimentalCrossInput(BaseSchema):
    """One pair's cross variogram in a several-variable experimental response."""

    class Meta:
        unknown = EXCLUDE

    variables = fields.List(
        fields.String(validate=validate.Length(min=1, max=60)), required=True, validate=validate.Length(equal=2)
    )
    directions = fields.List(
        fields.Nested(CrossDirectionInput), required=True, validate=validate.Length(min=1, max=MAX_DIRECTIONS)
    )


class ExperimentalInput(BaseSchema):
    """A previous response of POST /v1/experimental-variograms (as returned): one variable's
    ``directions``, or several variables' ``variables`` and ``cross`` (a joint fit)."""

    class Meta:
        unknown = EXCLUDE

    directions = fields.List(
        fields.Nested(ExperimentalDirectionInput), validate=validate.Length(min=1, max=MAX_DIRECTIONS)
    )
    variables = fields.List(
        fields.Nested(ExperimentalVariableInput), validate=validate.Length(min=2, max=MAX_VARIABLES)
    )
    cross = fields.List(fields.Nested(ExperimentalCrossInput), load_default=list)
    summary = fields.Dict()
    parameters = fields.Dict()

    @validates_schema
    def _one_form(self, data, **kwargs):
        if ("directions" in data) == ("variables" in data):
            raise ValidationError("give directions (one variable) or variables and cross (several), not both")


class ModelFitRequest(SampleOptions):
    """POST /v1/model-fits: samples (with classes and directions) or a previous experimental response."""

    samples = samples_field()
    experimental = fields.Nested(ExperimentalInput)
    lags = lags_field()
    directions = directions_list()
    statistic = one_of(SEMIVARIANCE_STATISTICS, load_default="semivariance")
    min_pairs = StrictInteger(load_default=30, validate=validate.Range(min=1))
    families = AutoOrList(
        FAMILY_NAMES,
        load_default="auto",
        metadata={"description": '"auto" or a list of family names (GET /v1/model-families).'},
    )
    nugget = NuggetOption(load_default="fit", metadata={"description": '"fit", "none" or a fixed value.'})
    weighting = one_of(WEIGHTINGS, load_default="pairs")
    anisotropy = one_of(("none", "fit"), load_default="none")
    structures = StrictInteger(load_default=1, validate=validate.OneOf((1, 2)))
    variable = variable_choice()
    transform = one_of(
        TRANSFORMS,
        load_default="none",
        metadata={"description": "Fit to the transformed values (samples only); the model echoes it."},
    )

    @validates_schema
    def _one_source(self, data, **kwargs):
        if ("samples" in data) == ("experimental" in data):
            raise ValidationError("give either samples or experimental (a previous experimental response), not both")
        if "experimental" in data:
            clash = [k for k in ("lags", "directions", "coordinates", "variable") if k in data]
            if clash:
                raise ValidationError(f"{', '.join(clash)} apply to samples, not to a given experimental variogram")


class ModelFitFromSamples(ModelFitRequest):
    """POST /v1/model-fits on samples: the experimental variogram is computed first."""

    samples = samples_field(required=True)

    class Meta:
        exclude = ("experimental",)


class ModelFitFromExperimental(ModelFitRequest):
    """POST /v1/model-fits on a previous experimental response."""

    experimental = fields.Nested(ExperimentalInput, required=True)

    class Meta:
        exclude = ("samples", "lags", "directions", "coordinates", "variable", "transform")


# ---- kriging -----------------------------------------------------------------------


def _nugget_role() -> fields.String:
    return one_of(NUGGET_ROLES, load_default="micro_scale")


class OrdinaryKriging(BaseSchema):
    """Ordinary kriging: the weights sum to one (an unknown constant mean); the default."""

    type = fields.String(required=True, validate=validate.Equal("ordinary"))
    nugget_as = _nugget_role()


class SimpleKriging(BaseSchema):
    """Simple kriging: a known mean (or, for a joint model, one per variable)."""

    type = fields.String(required=True, validate=validate.Equal("simple"))
    mean = finite(
        metadata={
            "description": "Known mean. Default (separate endpoints): the samples' mean, declustered (cell "
            "declustering) when sampling is clustered; an analysis's fixed simple kriging needs it."
        }
    )
    means = NamedColumns(
        finite(),
        max_names=MAX_VARIABLES,
        metadata={
            "description": "Simple cokriging: the known mean of each variable of the joint model. Default: each "
            "variable's mean, declustered when sampling is clustered."
        },
    )
    nugget_as = _nugget_role()


class UniversalKriging(BaseSchema):
    """Universal kriging: a drift in the coordinates, estimated with the weights."""

    type = fields.String(required=True, validate=validate.Equal("universal"))
    drift = one_of(
        DRIFTS,
        required=True,
        error_messages={"required": f"universal kriging needs a drift: one of {', '.join(DRIFTS)}"},
    )
    nugget_as = _nugget_role()


def kriging_field(**kwargs) -> Variants:
    """The kriging options: one form per ``type`` (the service reads an object without it as ordinary)."""
    return Variants(
        {"ordinary": OrdinaryKriging, "simple": SimpleKriging, "universal": UniversalKriging},
        by_discriminator("type", KRIGING_TYPES),
        discriminator="type",
        component="Kriging",
        omitted="ordinary",
        **kwargs,
    )


class NeighbourhoodInput(BaseSchema):
    """A moving neighbourhood; omit it for the unique neighbourhood (all samples)."""

    max_points = StrictInteger(load_default=24, validate=validate.Range(min=1, max=500))
    min_points = StrictInteger(load_default=4, validate=validate.Range(min=1))
    radius = finite(allow_none=True, load_default=None, validate=validate.Range(min=0, min_inclusive=False))
    sectors = StrictInteger(allow_none=True, load_default=None, validate=validate.Range(min=1, max=8))


class LeaveOneOut(BaseSchema):
    """Leave-one-out: each sample estimated from all the others; the default."""

    type = fields.String(required=True, validate=validate.Equal("leave_one_out"))


class KFold(BaseSchema):
    """k-fold: the samples shuffled (by ``seed``) into ``folds`` groups, each estimated from the others."""

    type = fields.String(required=True, validate=validate.Equal("k_fold"))
    folds = StrictInteger(load_default=10, validate=validate.Range(min=2))
    seed = StrictInteger(load_default=1, validate=validate.Range(min=0))


def scheme_field() -> Variants:
    """The cross-validation scheme: one form per ``type`` (the service reads an object without it as
    leave-one-out)."""
    return Variants(
        {"leave_one_out": LeaveOneOut, "k_fold": KFold},
        by_discriminator("type", SCHEMES),
        discriminator="type",
        component="Scheme",
        omitted="leave_one_out",
        load_default=lambda: {"type": "leave_one_out"},
    )


class KrigingOptions(SampleOptions):
    model = model_field(
        required=True,
        metadata={"description": "A variogram model, or a joint model of several variables (cokriging the primary)."},
    )
    primary = fields.String(
        validate=validate.Length(min=1, max=60),
        metadata={
            "description": "Cokriging: the variable estimated (default the joint model's first); the others are "
            "secondaries."
        },
    )

    @validates_schema
    def _joint_members(self, data, **kwargs):
        joint = "variables" in (data.get("model") or {})
        if "primary" in data and not joint:
            raise ValidationError({"primary": ["applies to a joint model (model.variables)"]})
        if (data.get("kriging") or {}).get("means") is not None and not joint:
            raise ValidationError({"kriging": {"means": ["apply to a joint model; one variable takes mean"]}})

    variable = variable_choice()
    transform = one_of(
        TRANSFORMS,
        metadata={
            "description": "Krige the transformed values and back-transform (parameters.transform states how). "
            "Default: the model's transform, else none."
        },
    )
    kriging = kriging_field(load_default=lambda: {"type": "ordinary", "nugget_as": "micro_scale"})
    neighbourhood = fields.Nested(NeighbourhoodInput, allow_none=True, load_default=None)


class CrossValidationRequest(KrigingOptions):
    """POST /v1/cross-validations."""

    scheme = scheme_field()
    outlier_threshold = finite(load_default=2.5, validate=validate.Range(min=0, min_inclusive=False))


class TargetsInput(BaseSchema):
    x = NumberArray(required=True)
    y = NumberArray()
    z = NumberArray()


class GridInput(BaseSchema):
    origin = fields.List(finite(), required=True, validate=validate.Length(min=1, max=3))
    spacing = fields.List(
        finite(validate=validate.Range(min=0, min_inclusive=False)),
        required=True,
        validate=validate.Length(min=1, max=3),
    )
    shape = fields.List(
        StrictInteger(validate=validate.Range(min=1)),
        required=True,
        validate=validate.Length(min=1, max=3),
    )


class BlocksInput(BaseSchema):
    """Block kriging: each target or grid node is the centre of a block."""

    size = fields.List(
        finite(validate=validate.Range(min=0, min_inclusive=False)),
        required=True,
        validate=validate.Length(min=1, max=3),
        metadata={"description": "Block side per axis (coordinate units)."},
    )
    discretisation = fields.List(
        StrictInteger(validate=validate.Range(min=1, max=MAX_POINTS_PER_AXIS)),
        validate=validate.Length(min=1, max=3),
        metadata={
            "description": f"Sub-cells per axis whose centres discretise the block (default {DEFAULT_POINTS_PER_AXIS} "
            f"per axis; at most {MAX_POINTS} points per block)."
        },
    )


class PredictionRequest(KrigingOptions):
    """POST /v1/predictions: targets or a grid."""

    targets = fields.Nested(TargetsInput)
    grid = fields.Nested(GridInput)
    return_weights = CappedList(
        StrictInteger(validate=validate.Range(min=0)),
        validate=validate.Length(max=20),
        metadata={"description": "Target indexes whose kriging weights are returned (at most 20)."},
    )
    thresholds = fields.List(
        finite(),
        validate=validate.Length(max=MAX_THRESHOLDS),
        load_default=list,
        metadata={"description": "Values in original units: P(value > threshold) per target (exceedance)."},
    )
    blocks = fields.Nested(
        BlocksInput,
        metadata={
            "description": "Estimate block averages (support block) instead of point values; without a transform "
            "(block averages of transformed values need POST /v1/simulations)."
        },
    )

    @validates_schema
    def _one_target_kind(self, data, **kwargs):
        if ("targets" in data) == ("grid" in data):
            raise ValidationError("give either targets or grid")


class PredictionAtTargets(PredictionRequest):
    """POST /v1/predictions at target points."""

    targets = fields.Nested(TargetsInput, required=True)

    class Meta:
        exclude = ("grid",)


class PredictionOnGrid(PredictionRequest):
    """POST /v1/predictions on a regular grid (x fastest)."""

    grid = fields.Nested(GridInput, required=True)

    class Meta:
        exclude = ("targets",)


# ---- analyses ----------------------------------------------------------------------


class VariogramStage(BaseSchema):
    lags = lags_field()
    directions = DirectionsOption(
        DirectionSchema,
        max_length=MAX_DIRECTIONS,
        metadata={"description": '"auto" (a fan of 6 classes from which the anisotropy is estimated) or a list.'},
    )
    statistic = one_of(SEMIVARIANCE_STATISTICS, load_default="semivariance")
    min_pairs = StrictInteger(load_default=30, validate=validate.Range(min=1))


class VariogramMapStage(BaseSchema):
    """The analysis's variogram map (drawn when figures names variogram_map), of the variogram stage's statistic."""

    method = one_of(
        METHODS,
        load_default="auto",
        metadata={
            "description": "As for POST /v1/variogram-maps: exact (pair enumeration), grid (2-D samples binned on a "
            "fine grid, every lag vector summed by FFT, with an error bound per cell; semivariance only), or auto "
            "(default: exact unless over LAGWISE_MAX_PAIRS, then grid for 2-D samples and the semivariance). The "
            "method used is parameters.variogram_map.method."
        },
    )
    tolerance = map_tolerance()


class FitStage(BaseSchema):
    families = AutoOrList(FAMILY_NAMES, load_default="auto")
    nugget = NuggetOption(load_default="fit")
    weighting = one_of(WEIGHTINGS, load_default="pairs")
    anisotropy = one_of(
        ANISOTROPY_CHOICES,
        load_default="auto",
        metadata={
            "description": "auto: an anisotropic strategy is compared by cross-validation when a fan of direction "
            "classes shows a difference in continuity; none; fit: always fitted and compared."
        },
    )
    model = fields.Nested(
        Model, metadata={"description": "A given model (working units): skips fitting; compared with the null."}
    )
    compare = StrictBoolean(
        load_default=True,
        metadata={
            "description": "Compare strategies (pure nugget, isotropic, anisotropic, drift) by cross-validation "
            "(default); false uses the fitted model alone."
        },
    )


class CrossValidationStage(BaseSchema):
    kriging = AutoOr(
        kriging_field(),
        load_default="auto",
        metadata={
            "description": "auto (default): ordinary kriging, or universal kriging with a drift on the residual "
            "variogram when a trend is significant and wins the cross-validation; or fixed kriging options."
        },
    )
    neighbourhood = fields.Nested(
        NeighbourhoodInput,
        allow_none=True,
        load_default=None,
        metadata={"description": "Default: all samples up to 1500, else 24 neighbours."},
    )
    scheme = scheme_field()


class AnalysisSimulationBlocks(BaseSchema):
    size = fields.List(
        finite(validate=validate.Range(min=0, min_inclusive=False)),
        required=True,
        validate=validate.Length(equal=2),
        metadata={"description": "Block size along x and y: whole numbers of grid spacings that tile the grid."},
    )


class AnalysisSimulationInput(BaseSchema):
    """Conditional simulation with the selected model (as POST /v1/simulations)."""

    realisations = StrictInteger(load_default=100, validate=validate.Range(min=1, max=10_000))
    seed = StrictInteger(load_default=1, validate=validate.Range(min=0, max=2**63 - 1))
    blocks = fields.Nested(
        AnalysisSimulationBlocks,
        metadata={"description": "Block averages of the simulated values (also with a transform)."},
    )


class PredictionStage(BaseSchema):
    grid = fields.Nested(GridInput, required=True)
    thresholds = fields.List(
        finite(),
        validate=validate.Length(max=MAX_THRESHOLDS),
        load_default=list,
        metadata={
            "description": "Values in original units: exceedance probabilities, their classes and the "
            "probability map; the prediction map draws their contours."
        },
    )
    blocks = fields.Nested(
        BlocksInput, metadata={"description": "Block kriging of blocks centred at the grid nodes (no transform)."}
    )
    simulation = fields.Nested(
        AnalysisSimulationInput,
        metadata={"description": "Simulate for the share of the grid above each threshold (P10-P90) and blocks."},
    )


def _printable(text: str) -> None:
    if any(unicodedata.category(c).startswith("C") for c in text):
        raise ValidationError("must not contain control characters")


class VariableSchema(BaseSchema):
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

    transform = one_of(TRANSFORMS, load_default="none")
    variogram = fields.Nested(VariogramStage, load_default=lambda: VariogramStage().load({}))
    fit = fields.Nested(FitStage, load_default=lambda: FitStage().load({}))
    cross_validation = fields.Nested(CrossValidationStage, load_default=lambda: CrossValidationStage().load({}))
    prediction = fields.Nested(PredictionStage)
    variogram_map = fields.Nested(VariogramMapStage, load_default=lambda: VariogramMapStage().load({}))
    figures = fields.List(
        one_of(FIGURES),
        load_default=list,
        metadata={"description": f"Any of {', '.join(FIGURES)}."},
    )
    figure_format = one_of(FORMATS, load_default="svg", metadata={"description": "svg (text) or png (base64)."})
    figure_size = fields.List(
        StrictInteger(validate=validate.Range(min=200, max=3000)),
        validate=validate.Length(equal=2),
        load_default=lambda: [800, 500],
        metadata={"description": "Width and height in pixels."},
    )
    figure_colour_scale = one_of(
        COLOUR_SCALES,
        load_default="auto",
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


@always_present()
class ProvenanceSchema(BaseSchema):
    service = fields.String()
    version = fields.String()
    numpy = fields.String()
    scipy = fields.String()
    numba = fields.String()
    input_sha256 = fields.String(
        metadata={"description": "SHA-256 of the little-endian float64 bytes of x, y, z and values as parsed."}
    )
    elapsed_ms = StrictFloat()


@always_present()
class DeclusteringSchema(BaseSchema):
    """Cell declustering of the samples (weights used only when sampling is clustered)."""

    method = fields.String()
    cell_size = StrictFloat(allow_none=True, metadata={"description": "Chosen cell size, coordinate units."})
    clustered = StrictBoolean()
    weights_used = StrictBoolean(
        metadata={"description": "The summary's reference moments, normal scores and sill reference use the weights."}
    )
    over_sampled = fields.String(
        allow_none=True, metadata={"description": "high (declustered mean minimised) or low (maximised)."}
    )
    nearest_neighbour_ratio = StrictFloat(
        allow_none=True,
        metadata={
            "description": "Mean nearest-neighbour distance over its value for a random pattern (Clark & Evans 1954)."
        },
    )
    nearest_neighbour_z = StrictFloat(allow_none=True)
    mean_shift_z = StrictFloat(
        allow_none=True,
        metadata={
            "description": "Declustered minus plain mean in standard errors of a random assignment of values "
            "(reported; does not decide clustering)."
        },
    )
    effective_sample_fraction = StrictFloat(
        allow_none=True,
        metadata={
            "description": "1 / (n sum w^2) of the cell weights at cells holding four samples on average "
            "(1 for equal weights)."
        },
    )
    random_pattern_fraction = StrictFloat(
        allow_none=True,
        metadata={"description": "Mean of that fraction over random patterns of as many points over the same hull."},
    )
    evenness_z = StrictFloat(
        allow_none=True,
        metadata={
            "description": "Effective sample fraction minus its random-pattern mean, in their standard deviations."
        },
    )
    reason = fields.String(allow_none=True)


@always_present()
class SummarySchema(BaseSchema):
    samples = StrictInteger()
    dimension = StrictInteger()
    mean = StrictFloat()
    variance = StrictFloat(metadata={"description": "Divisor N."})
    minimum = StrictFloat()
    maximum = StrictFloat()
    extent = fields.Dict(keys=fields.String(), values=fields.List(StrictFloat()))
    max_distance = StrictFloat()
    declustered_mean = StrictFloat(
        allow_none=True,
        metadata={
            "description": "Mean under the weights used: the cell-declustering weights when sampling is clustered "
            "(declustering.weights_used), else equal weights (the plain mean)."
        },
    )
    declustered_variance = StrictFloat(
        allow_none=True,
        metadata={"description": "Variance under the same weights (they sum to 1)."},
    )
    declustering = fields.Nested(DeclusteringSchema, allow_none=True)


@always_present(
    "reason",
    "tail_mean",
    "head_mean",
    "tail_sd",
    "head_sd",
    "uncertainty_reason",
    "error_bound",
    "pair_bound",
    "bound_exceeded",
)
class ClassSchema(BaseSchema):
    lower = StrictFloat()
    upper = StrictFloat()
    mean_distance = StrictFloat(allow_none=True)
    pairs = StrictInteger()
    value = StrictFloat(allow_none=True)
    reason = one_of(CLASS_REASONS, metadata={"description": "Why value is null."})
    sparse = StrictBoolean()
    tail_mean = StrictFloat(metadata={"description": "Covariance-type statistics only."})
    head_mean = StrictFloat()
    tail_sd = StrictFloat()
    head_sd = StrictFloat()
    standard_error = StrictFloat(
        allow_none=True,
        metadata={
            "description": "Standard error of value: delete-one-block jackknife over spatial blocks of samples "
            "(parameters.class_uncertainty); null with uncertainty_reason when undefined."
        },
    )
    interval_95 = fields.List(
        StrictFloat(),
        allow_none=True,
        validate=validate.Length(equal=2),
        metadata={"description": "[lower, upper] 95 % interval of the class's expected value."},
    )
    uncertainty_reason = fields.String(metadata={"description": "Why standard_error is null."})
    error_bound = StrictFloat(
        allow_none=True,
        metadata={
            "description": "Grid method: bound on |value - exact value| / |value| (for a raster, exact for its own pairs: the FFT's estimated rounding error of a semivariance, relative, and 0 for the other statistics; null when undefined)."
        },
    )
    pair_bound = StrictInteger(
        metadata={"description": "Grid method: largest difference of pairs from the exact path's count."}
    )
    bound_exceeded = StrictBoolean(
        metadata={"description": "Grid method: error_bound is above parameters.grid.tolerance (or undefined)."}
    )

    @post_dump
    def _finish(self, data, **kwargs):
        return self.finish_row(data)

    @staticmethod
    def finish_row(data: dict) -> dict:
        """The grid method's bounds come together (error_bound may be null); a reason only for a null error."""
        if "bound_exceeded" not in data:
            data.pop("error_bound", None)
        if data.get("standard_error") is not None:
            data.pop("uncertainty_reason", None)
        return data


@always_present("dip", "dip_tolerance", "vertical_bandwidth")
class DirectionResultSchema(BaseSchema):
    """A direction class as resolved (dip members for 3-D samples only) and its distance classes."""

    azimuth = StrictFloat()
    tolerance = StrictFloat()
    bandwidth = StrictFloat(allow_none=True)
    dip = StrictFloat()
    dip_tolerance = StrictFloat()
    vertical_bandwidth = StrictFloat(allow_none=True)
    classes = Rows(ClassSchema)


@always_present()
class ScattergramSchema(BaseSchema):
    direction = StrictInteger()
    klass = StrictInteger(data_key="class")
    pairs_in_class = StrictInteger()
    stride = StrictInteger(metadata={"description": "Every stride-th pair of the class is returned."})
    tail = Column(StrictFloat())
    head = Column(StrictFloat())


@always_present()
class ResultEnvelope(BaseSchema):
    parameters = fields.Dict(metadata={"description": "Every resolved parameter, defaults filled in."})
    warnings = fields.List(fields.String())
    provenance = fields.Nested(ProvenanceSchema)


@always_present("pairs_for_class")
class ExperimentalResponse(ResultEnvelope):
    directions = fields.List(fields.Nested(DirectionResultSchema))
    summary = fields.Nested(SummarySchema)
    colocated_pairs = StrictInteger()
    pairs_for_class = fields.Nested(ScattergramSchema)


@always_present()
class ClassUncertaintySchema(BaseSchema):
    """How one variogram's class standard errors were found (both null when none were)."""

    method = fields.String(allow_none=True)
    blocks = StrictInteger(allow_none=True, metadata={"description": "Spatial blocks of the jackknife."})


@always_present()
class VariableVariogramSchema(BaseSchema):
    """The direct experimental variogram of one variable."""

    name = fields.String()
    unit = fields.String(allow_none=True)
    directions = fields.List(fields.Nested(DirectionResultSchema))
    summary = fields.Nested(SummarySchema, metadata={"description": "The samples where the variable was measured."})
    class_uncertainty = fields.Nested(
        ClassUncertaintySchema,
        metadata={
            "description": "The delete-one-block jackknife over the variable's own samples, as a single-variable "
            "request on them would run it."
        },
    )


@always_present()
class CrossVariogramSchema(BaseSchema):
    """The cross statistic of a pair of variables (parameters.cross_statistic says which)."""

    variables = fields.List(
        fields.String(),
        metadata={"description": "[a, b]: a is the tail variable of covariance-type statistics."},
    )
    directions = fields.List(fields.Nested(DirectionResultSchema))
    class_uncertainty = fields.Nested(
        ClassUncertaintySchema,
        metadata={
            "description": "Cross-semivariance: the delete-one-block jackknife over the samples measuring both "
            "variables, interval value +- t standard_error; the cross-covariance statistics have none "
            "(uncertainty_reason says why)."
        },
    )


@always_present()
class SeveralExperimentalResponse(ResultEnvelope):
    """Experimental variograms of several variables (samples.variables) and of every pair of them."""

    variables = fields.List(fields.Nested(VariableVariogramSchema))
    cross = fields.List(
        fields.Nested(CrossVariogramSchema),
        metadata={
            "description": "Every pair of variables in the given order; empty for statistics without a cross form."
        },
    )
    colocated_pairs = StrictInteger()


@always_present("error_bound", "pair_bound", "bound_exceeded")
class MapResponse(ResultEnvelope):
    hx = Column(StrictFloat())
    hy = Column(StrictFloat())
    values = Column(
        fields.List(StrictFloat(allow_none=True)),
        metadata={"description": "Rows by hy, columns by hx; null for empty cells."},
    )
    pairs = Column(fields.List(StrictInteger()))
    summary = fields.Nested(SummarySchema)
    error_bound = Column(
        fields.List(StrictFloat(allow_none=True)),
        metadata={
            "description": "Grid method (parameters.method grid): bound on |value - exact value| / |value| per cell, "
            "rows as values (on a raster's own grid: the FFT's estimated rounding error of a semivariance, relative, and 0 for the other statistics; null where the value is null or 0)."
        },
    )
    pair_bound = Column(
        fields.List(StrictInteger()),
        metadata={"description": "Grid method: largest difference of a cell's pairs from the exact count."},
    )
    bound_exceeded = Column(
        fields.List(StrictBoolean()),
        metadata={
            "description": "Grid method: error_bound is above parameters.grid.tolerance or null, except where both "
            "the grid's and the exact map are certainly empty (no pairs, pair_bound 0)."
        },
    )


@always_present()
class DiagnosticsSchema(BaseSchema):
    weighted_sse = StrictFloat(allow_none=True)
    r_squared = StrictFloat(allow_none=True)
    criterion = StrictFloat(allow_none=True)
    criterion_name = fields.String()
    converged = StrictBoolean()
    iterations = StrictInteger()


@always_present()
class CandidateSchema(BaseSchema):
    rank = StrictInteger()
    label = fields.String()
    model = fields.Nested(Model, allow_none=True, metadata={"description": "Null when the fit failed (see note)."})
    selected = StrictBoolean(metadata={"description": "True for the one candidate returned as the model."})
    parameters = StrictInteger()
    weighted_sse = StrictFloat(allow_none=True)
    r_squared = StrictFloat(allow_none=True)
    criterion = StrictFloat(allow_none=True)
    converged = StrictBoolean()
    iterations = StrictInteger()
    note = fields.String(allow_none=True)


@always_present()
class JointCandidateSchema(BaseSchema):
    """A candidate joint model (linear model of coregionalisation)."""

    rank = StrictInteger()
    label = fields.String()
    model = fields.Nested(JointModel)
    selected = StrictBoolean(metadata={"description": "True for the one candidate returned as the model."})
    parameters = StrictInteger()
    weighted_sse = StrictFloat()
    r_squared = StrictFloat(allow_none=True)
    criterion = StrictFloat()
    converged = StrictBoolean()
    iterations = StrictInteger(metadata={"description": "Goulard-Voltz sweeps of the final fit."})


def _candidate_form(value: dict) -> str:
    return "joint" if "variables" in (value.get("model") or {}) else "single"


def _dumped_candidate_form(candidate: Any) -> str:
    """The form of a candidate being dumped, from its model (a dict, or None for a failed fit)."""
    return _candidate_form({"model": candidate.model})


@always_present()
class FitClassSchema(BaseSchema):
    mean_distance = StrictFloat(allow_none=True)
    value = StrictFloat(allow_none=True)
    pairs = StrictInteger()
    used = StrictBoolean()
    model_value = StrictFloat(allow_none=True)


@always_present()
class FitDirectionSchema(BaseSchema):
    azimuth = StrictFloat()
    classes = Rows(FitClassSchema)


@always_present()
class FitVariableSchema(BaseSchema):
    name = fields.String()
    directions = fields.List(fields.Nested(FitDirectionSchema))


@always_present()
class FitCrossSchema(BaseSchema):
    variables = fields.List(fields.String())
    directions = fields.List(fields.Nested(FitDirectionSchema))


@always_present("variables", "cross")
class FitExperimentalSchema(BaseSchema):
    statistic = one_of(STATISTICS)
    directions = fields.List(
        fields.Nested(FitDirectionSchema), metadata={"description": "One variable's classes; empty for a joint fit."}
    )
    variables = fields.List(
        fields.Nested(FitVariableSchema), metadata={"description": "A joint fit: each variable's direct classes."}
    )
    cross = fields.List(fields.Nested(FitCrossSchema), metadata={"description": "A joint fit: each pair's classes."})


@always_present("summary")
class ModelFitResponse(ResultEnvelope):
    model = model_field(
        metadata={"description": "The selected model: a joint model when several variables were fitted."}
    )
    diagnostics = fields.Nested(DiagnosticsSchema)
    candidates = fields.List(
        Variants(
            {"single": CandidateSchema, "joint": JointCandidateSchema},
            _candidate_form,
            dumped_as=_dumped_candidate_form,
        )
    )
    experimental = fields.Nested(FitExperimentalSchema)
    summary = fields.Nested(SummarySchema, metadata={"description": "Absent when fitted to a given experimental."})


@always_present()
class FitRuleSchema(BaseSchema):
    """A fit bound or start: factor times a named fit scale."""

    factor = StrictFloat()
    scale = fields.String(metadata={"description": "A key of fit_scales."})


@always_present()
class FamilyParameterFitSchema(BaseSchema):
    low = fields.Nested(FitRuleSchema)
    high = fields.Nested(FitRuleSchema)
    start = fields.Nested(FitRuleSchema)


@always_present("minimum", "maximum", "fit")
class FamilyParameterSchema(BaseSchema):
    name = fields.String()
    unit = fields.String()
    kind = fields.String(validate=validate.OneOf(UNIT_KINDS))
    slot = fields.String(metadata={"description": "sill, range or shape; empty for model-wide parameters."})
    minimum = StrictFloat()
    maximum = StrictFloat()
    exclusive = StrictBoolean(metadata={"description": "Every given end is open."})
    minimum_exclusive = StrictBoolean()
    maximum_exclusive = StrictBoolean()
    fit = fields.Nested(FamilyParameterFitSchema, metadata={"description": "Bounds and start of a fit."})


@always_present()
class FamilySchema(BaseSchema):
    name = one_of(FAMILY_NAMES)
    bounded = StrictBoolean()
    max_dimension = StrictInteger()
    parameters = fields.List(fields.Nested(FamilyParameterSchema))
    formula = fields.String()
    source = fields.String()


@always_present()
class FamiliesResponse(BaseSchema):
    families = fields.List(fields.Nested(FamilySchema))
    model_parameters = fields.List(
        fields.Nested(FamilyParameterSchema), metadata={"description": "The nugget and the anisotropy."}
    )
    fit_scales = fields.Dict(keys=fields.String(), values=fields.String())
    conventions = fields.Dict(keys=fields.String(), values=fields.String())


@always_present()
class CrossValidationSamplesSchema(BaseSchema):
    id = Column(fields.String())
    observed = Column(StrictFloat())
    estimate = Column(StrictFloat(allow_none=True))
    standard_deviation = Column(StrictFloat(allow_none=True))
    error = Column(StrictFloat(allow_none=True))
    standardized_error = Column(StrictFloat(allow_none=True))
    outlier = Column(StrictBoolean())


@always_present()
class CrossValidationStatisticsSchema(BaseSchema):
    count = StrictInteger()
    mean_error = StrictFloat(allow_none=True)
    mean_absolute_error = StrictFloat(allow_none=True)
    root_mean_square_error = StrictFloat(allow_none=True)
    mean_standardized_error = StrictFloat(allow_none=True)
    root_mean_square_standardized_error = StrictFloat(allow_none=True)
    correlation = StrictFloat(allow_none=True)
    goodness_of_prediction = StrictFloat(allow_none=True)
    interval_coverage_95 = StrictFloat(allow_none=True)
    outliers = StrictInteger()


@always_present()
class UnestimatedSchema(BaseSchema):
    index = StrictInteger()
    reason = fields.String()


class CokrigingGainSchema(BaseSchema):
    """Cokriging: what the secondary variables bought against kriging the primary alone (its direct model,
    the same kriging type and neighbourhood)."""

    primary = fields.String()
    secondaries = fields.List(fields.String())
    mean_variance = StrictFloat(
        allow_none=True, metadata={"description": "Mean cokriging variance over the targets both estimated."}
    )
    mean_variance_primary_only = StrictFloat(allow_none=True)
    variance_reduction = StrictFloat(
        allow_none=True, metadata={"description": "1 - mean_variance / mean_variance_primary_only."}
    )
    variance_primary_only = Column(
        StrictFloat(allow_none=True), metadata={"description": "Per target (or sample): kriging the primary alone."}
    )
    statistics_primary_only = fields.Nested(
        CrossValidationStatisticsSchema, metadata={"description": "Cross-validation of the primary kriged alone."}
    )


@always_present("cokriging")
class CrossValidationResponse(ResultEnvelope):
    statistics = fields.Nested(CrossValidationStatisticsSchema)
    samples = fields.Nested(CrossValidationSamplesSchema)
    assessment = fields.String()
    unestimated = fields.List(fields.Nested(UnestimatedSchema))
    cokriging = fields.Nested(CokrigingGainSchema, metadata={"description": "With a joint model."})


@always_present()
class WeightsSchema(BaseSchema):
    target = StrictInteger()
    samples = fields.List(fields.String())
    weights = Column(StrictFloat())
    lagrange = Column(StrictFloat())


@always_present()
class GridSchema(BaseSchema):
    origin = fields.List(StrictFloat())
    spacing = fields.List(StrictFloat())
    shape = fields.List(StrictInteger())
    order = fields.String()


@always_present()
class ExceedanceSchema(BaseSchema):
    threshold = StrictFloat(metadata={"description": "Original units."})
    probability = Column(
        StrictFloat(allow_none=True),
        metadata={"description": "P(value > threshold), aligned with estimate (null where no estimate)."},
    )


@always_present("y", "z", "grid", "weights", "exceedance", "cokriging")
class PredictionResponse(ResultEnvelope):
    x = Column(StrictFloat())
    y = Column(StrictFloat(), metadata={"description": "2-D and 3-D samples."})
    z = Column(StrictFloat(), metadata={"description": "3-D samples."})
    estimate = Column(StrictFloat(allow_none=True))
    variance = Column(StrictFloat(allow_none=True))
    grid = fields.Nested(GridSchema, metadata={"description": "Predictions on a grid."})
    unestimated = fields.List(fields.Nested(UnestimatedSchema))
    weights = fields.List(fields.Nested(WeightsSchema), metadata={"description": "When return_weights was given."})
    exceedance = fields.List(
        fields.Nested(ExceedanceSchema), metadata={"description": "When thresholds were given (parameters.exceedance)."}
    )
    support = one_of(("point", "block"), metadata={"description": "What estimate and variance refer to."})
    cokriging = fields.Nested(CokrigingGainSchema, metadata={"description": "With a joint model."})


@always_present()
class AnalysisVariogramSchema(BaseSchema):
    directions = fields.List(fields.Nested(DirectionResultSchema))
    colocated_pairs = StrictInteger()


class AnisotropyEstimateSchema(BaseSchema):
    azimuth = StrictFloat(metadata={"description": "Degrees clockwise from north of the longest continuity."})
    ratio = StrictFloat(metadata={"description": "Range across / range along, in (0, 1]."})
    family = fields.String()
    supported = StrictBoolean(
        metadata={"description": "True when the anisotropic strategy won the cross-validation (it is then used)."}
    )
    why = fields.String()
    method = fields.String()


@always_present()
class AnalysisExperimentalSchema(BaseSchema):
    omnidirectional = fields.Nested(AnalysisVariogramSchema)
    directional = fields.Nested(AnalysisVariogramSchema, allow_none=True)
    residual = fields.Nested(
        AnalysisVariogramSchema,
        allow_none=True,
        metadata={"description": "Variogram of the residuals from the drift (when a drift strategy was tried)."},
    )
    anisotropy = fields.Nested(AnisotropyEstimateSchema, allow_none=True)


class StrategySchema(BaseSchema):
    name = fields.String(validate=validate.OneOf(STRATEGY_NAMES))
    model = fields.Nested(Model)
    kriging = fields.Dict()
    statistics = fields.Nested(CrossValidationStatisticsSchema, allow_none=True)
    selected = StrictBoolean()
    why = fields.String()


class SelectionSchema(BaseSchema):
    strategies = fields.List(fields.Nested(StrategySchema))
    reason = fields.String()
    rule = fields.String()


class VerdictSchema(BaseSchema):
    usable = StrictBoolean(metadata={"description": "The map and its intervals can be used as they are."})
    level = fields.String(validate=validate.OneOf(VERDICT_LEVELS))
    text = fields.String()


@always_present()
class AnalysisFitSchema(BaseSchema):
    model = fields.Nested(Model)
    diagnostics = fields.Nested(DiagnosticsSchema)
    candidates = fields.List(fields.Nested(CandidateSchema))


@always_present()
class AnalysisCrossValidationSchema(BaseSchema):
    statistics = fields.Nested(CrossValidationStatisticsSchema)
    samples = fields.Nested(CrossValidationSamplesSchema)
    assessment = fields.String()
    unestimated = fields.List(fields.Nested(UnestimatedSchema))


@always_present()
class ProbabilityClassSchema(BaseSchema):
    name = fields.String(attribute="class", data_key="class", validate=validate.OneOf(("below", "uncertain", "above")))
    meaning = fields.String()
    count = StrictInteger()
    share = StrictFloat(allow_none=True)


@always_present()
class ProbabilityClassesSchema(BaseSchema):
    threshold = StrictFloat()
    confidence = StrictFloat()
    classes = fields.List(fields.Nested(ProbabilityClassSchema))
    unestimated = StrictInteger()
    support = one_of(("point", "block"))
    method = one_of(("kriging", "simulation"))


@always_present("blocks")
class AnalysisSimulationSchema(BaseSchema):
    realisations = StrictInteger()
    seed = StrictInteger()
    above = fields.List(fields.Nested("AboveSchema"))
    blocks = fields.Nested("SimulatedBlocksSchema")
    method = fields.Dict()


@always_present()
class AnalysisPredictionSchema(BaseSchema):
    x = Column(StrictFloat())
    y = Column(StrictFloat())
    estimate = Column(StrictFloat(allow_none=True), metadata={"description": "Original units (back-transformed)."})
    variance = Column(StrictFloat(allow_none=True))
    grid = fields.Nested(GridSchema)
    unestimated = fields.List(fields.Nested(UnestimatedSchema))
    support = one_of(("point", "block"))
    exceedance = fields.List(fields.Nested(ExceedanceSchema))
    classes = fields.List(
        fields.Nested(ProbabilityClassesSchema),
        metadata={"description": "Targets by probability class, per threshold."},
    )
    simulation = fields.Nested(AnalysisSimulationSchema, allow_none=True)


@always_present()
class AnalysisResponse(ResultEnvelope):
    summary = fields.Nested(SummarySchema)
    transformed_summary = fields.Nested(SummarySchema)
    experimental = fields.Nested(AnalysisExperimentalSchema)
    fit = fields.Nested(AnalysisFitSchema)
    cross_validation = fields.Nested(AnalysisCrossValidationSchema, allow_none=True)
    prediction = fields.Nested(AnalysisPredictionSchema, allow_none=True)
    figures = fields.Dict(keys=fields.String(), values=fields.String())
    selection = fields.Nested(SelectionSchema, allow_none=True)
    verdict = fields.Nested(VerdictSchema)


@always_present()
class VariableAnalysisSchema(AnalysisResponse):
    """The analysis of one variable of a batch (its own transform, fit, cross-validation and verdict)."""

    name = fields.String()
    unit = fields.String(allow_none=True)

    class Meta:
        exclude = ("parameters", "provenance")


@always_present()
class BatchAnalysisResponse(ResultEnvelope):
    """POST /v1/analyses with several variables (samples.variables): one analysis per variable, in their order."""

    variables = fields.List(fields.Nested(VariableAnalysisSchema))


# ---- conditional simulations ---------------------------------------------------------


class SimulationKrigingInput(BaseSchema):
    type = one_of(SIMULATION_KRIGING, load_default="simple")
    mean = finite(
        metadata={
            "description": "Known mean in transformed units (simple kriging). Default: the mean of the transformed "
            "values, declustered (cell declustering) when sampling is clustered."
        }
    )


class SimulationGridInput(BaseSchema):
    """A regular 2-D grid: nodes at origin + (i, j) * spacing, x fastest."""

    origin = fields.List(finite(), required=True, validate=validate.Length(equal=2))
    spacing = fields.List(
        finite(validate=validate.Range(min=0, min_inclusive=False)), required=True, validate=validate.Length(equal=2)
    )
    shape = fields.List(StrictInteger(validate=validate.Range(min=1)), required=True, validate=validate.Length(equal=2))


class SimulationBlocksInput(BaseSchema):
    size = fields.List(
        finite(validate=validate.Range(min=0, min_inclusive=False)),
        required=True,
        validate=validate.Length(equal=2),
        metadata={
            "description": "Block size along x and y (coordinate units): whole numbers of grid spacings that tile "
            "the grid exactly; a block is the set of grid nodes it covers."
        },
    )


class SimulationRequest(SampleOptions):
    """POST /v1/simulations."""

    model = fields.Nested(Model, required=True, metadata={"description": "In transformed units."})
    variable = variable_choice()
    transform = one_of(
        TRANSFORMS,
        metadata={
            "description": "Simulate the transformed values and back-transform each realisation. Default: the "
            "model's transform, else normal_score."
        },
    )
    kriging = fields.Nested(SimulationKrigingInput, load_default=lambda: {"type": "simple"})
    neighbourhood = fields.Nested(NeighbourhoodInput, allow_none=True, load_default=None)
    grid = fields.Nested(SimulationGridInput, required=True)
    realisations = StrictInteger(load_default=100, validate=validate.Range(min=1, max=MAX_REALISATIONS))
    seed = StrictInteger(load_default=1, validate=validate.Range(min=0, max=2**63 - 1))
    thresholds = fields.List(
        finite(),
        validate=validate.Length(max=MAX_THRESHOLDS),
        load_default=list,
        metadata={"description": "Values in original units: exceedance per node and block, share of the grid above."},
    )
    blocks = fields.Nested(SimulationBlocksInput)
    return_realisations = StrictBoolean(load_default=False)


@always_present()
class NodeQuantilesSchema(BaseSchema):
    p10 = Column(StrictFloat())
    p50 = Column(StrictFloat())
    p90 = Column(StrictFloat())


@always_present()
class SimulatedExceedanceSchema(BaseSchema):
    threshold = StrictFloat(metadata={"description": "Original units."})
    probability = Column(
        StrictFloat(), metadata={"description": "Share of the realisations above the threshold, x fastest."}
    )


@always_present()
class SimulatedBlocksSchema(BaseSchema):
    grid = fields.Nested(GridSchema, metadata={"description": "Block centres; spacing is the block size."})
    mean = Column(StrictFloat(), metadata={"description": "Mean over realisations of each block average."})
    exceedance = fields.List(fields.Nested(SimulatedExceedanceSchema))


@always_present()
class FractionSchema(BaseSchema):
    mean = StrictFloat()
    p10 = StrictFloat()
    p50 = StrictFloat()
    p90 = StrictFloat()


@always_present()
class AboveSchema(BaseSchema):
    threshold = StrictFloat()
    fraction = fields.Nested(FractionSchema, metadata={"description": "Share of the grid above, over realisations."})


@always_present("blocks", "realisations")
class SimulationResponse(ResultEnvelope):
    grid = fields.Nested(GridSchema)
    mean = Column(StrictFloat(), metadata={"description": "E-type mean per node (original units)."})
    variance = Column(StrictFloat(), metadata={"description": "Variance over realisations (divisor R)."})
    quantiles = fields.Nested(NodeQuantilesSchema)
    exceedance = fields.List(fields.Nested(SimulatedExceedanceSchema))
    blocks = fields.Nested(SimulatedBlocksSchema, metadata={"description": "When blocks were given."})
    above = fields.List(fields.Nested(AboveSchema))
    realisations = Column(
        fields.List(StrictFloat()), metadata={"description": "When return_realisations: one list per realisation."}
    )
    method = fields.Dict()


# ---- problems and small documents ---------------------------------------------------

PROBLEM_TYPES = tuple(f"/problems/{kind}" for kind in KINDS)
PROBLEM_STATUSES = tuple(sorted({k.status for k in KINDS.values()}))


@always_present()
class FieldErrorSchema(BaseSchema):
    pointer = fields.String(metadata={"description": "JSON Pointer (RFC 6901) into the request."})
    detail = fields.String()


@always_present("instance", "errors", "errors_omitted", "limit", "allowed", "requested", "acceptable")
class ProblemSchema(BaseSchema):
    """RFC 9457 problem details; a limit-exceeded problem also names the limit and both costs."""

    type = one_of(PROBLEM_TYPES, metadata={"description": "URI reference of the kind; GET it for a description."})
    title = fields.String()
    status = StrictInteger(validate=validate.OneOf(PROBLEM_STATUSES))
    detail = fields.String()
    instance = fields.String(
        metadata={"description": "The request's path; absent when it is unknown (refused before the request was read)."}
    )
    request_id = fields.String(metadata={"description": "Also in the X-Request-ID response header."})
    errors = fields.List(
        fields.Nested(FieldErrorSchema), metadata={"description": "Offending fields, at most 100 entries."}
    )
    errors_omitted = StrictInteger(
        metadata={
            "description": "Further problems not listed in errors: entries past the first 100, invalid elements "
            "of an array past the first 20 listed (every one is counted)."
        }
    )
    limit = fields.String(metadata={"description": "limit-exceeded: the LAGWISE_* variable that sets the limit."})
    allowed = StrictFloat(metadata={"description": "limit-exceeded: the configured value."})
    requested = StrictFloat(metadata={"description": "limit-exceeded: what this request would need (same unit)."})
    acceptable = fields.List(
        fields.String(), metadata={"description": "not-acceptable: the media types this path answers with."}
    )


@always_present()
class ProblemKindSchema(BaseSchema):
    """A kind of refusal, described for people."""

    type = one_of(PROBLEM_TYPES)
    title = fields.String()
    status = StrictInteger(validate=validate.OneOf(PROBLEM_STATUSES))
    description = fields.String()


@always_present()
class HealthSchema(BaseSchema):
    status = one_of(("alive", "ready"))
