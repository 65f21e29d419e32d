"""Custom marshmallow fields and the apispec functions that document them."""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from typing import Any

import numpy as np
from marshmallow import Schema, ValidationError, fields, missing

from ..core.data.identifiers import CompactIds

NUMBER_TYPES = (int, float)
MAX_ELEMENT_ERRORS = 20
# The key under which an array's error messages count its invalid elements past the first MAX_ELEMENT_ERRORS.
FURTHER_INVALID = "_further_invalid"
MAX_FAMILIES = 32
# Array numbers stay below this magnitude, so that squares and sums of squares are finite doubles.
MAX_MAGNITUDE = 1e150


NOT_FINITE = "not a finite number (overflows to infinity)"
# An element that is JSON null where a number is required; an Arrow column's null gets the same words.
MISSING = "missing (null)"


def _element_error(value) -> str | None:
    if value is None:
        return MISSING
    if type(value) not in NUMBER_TYPES:
        return "not a number"
    try:
        if not math.isfinite(float(value)):
            return NOT_FINITE
    except OverflowError:
        return NOT_FINITE
    if abs(value) > MAX_MAGNITUDE:
        return f"magnitude above {MAX_MAGNITUDE:g}"
    return None


def _array_errors(array: np.ndarray) -> dict:
    """Per-index messages for a float64 array's elements that are not finite or too large (the first 20),
    with the number of further ones under :data:`FURTHER_INVALID`."""
    with np.errstate(invalid="ignore"):
        bad = np.flatnonzero(~(np.abs(array) <= MAX_MAGNITUDE))
    errors: dict = {
        int(i): ["not a finite number" if not math.isfinite(array[i]) else f"magnitude above {MAX_MAGNITUDE:g}"]
        for i in bad[:MAX_ELEMENT_ERRORS]
    }
    if bad.size > MAX_ELEMENT_ERRORS:
        errors[FURTHER_INVALID] = int(bad.size - MAX_ELEMENT_ERRORS)
    return errors


def _list_errors(value: list, message_for: Callable[[Any], str | None]) -> dict:
    """Per-index messages for a JSON array's invalid elements (the first 20), with the number of
    further ones under :data:`FURTHER_INVALID` (counted without building their messages)."""
    errors: dict = {}
    further = 0
    for index, element in enumerate(value):
        message = message_for(element)
        if message:
            if len(errors) < MAX_ELEMENT_ERRORS:
                errors[index] = [message]
            else:
                further += 1
    if further:
        errors[FURTHER_INVALID] = further
    return errors


def json_kind(value) -> str:
    """The JSON type of a parsed value, with its article (``"a string"``, ``"an array"``...), for messages."""
    if value is None:
        return "null"
    if value is True or value is False:
        return "a boolean"
    if isinstance(value, str):
        return "a string"
    if isinstance(value, list):
        return "an array"
    if isinstance(value, dict):
        return "an object"
    return "a number"


class StrictFloat(fields.Float):
    """A JSON number, never a string or boolean (marshmallow's Float would take ``"12"``), and finite."""

    default_error_messages = {"special": NOT_FINITE}

    def _deserialize(self, value, attr, data, **kwargs):
        if type(value) not in NUMBER_TYPES:
            raise ValidationError(f"must be a number, not {json_kind(value)}")
        return super()._deserialize(value, attr, data, **kwargs)


class StrictInteger(fields.Integer):
    """A JSON integer, never a string, boolean or number with a fraction."""

    def __init__(self, **kwargs):
        super().__init__(strict=True, **kwargs)

    def _deserialize(self, value, attr, data, **kwargs):
        if type(value) is not int:
            kind = "a number with a fraction" if type(value) is float else json_kind(value)
            raise ValidationError(f"must be an integer, not {kind}")
        return super()._deserialize(value, attr, data, **kwargs)


class StrictBoolean(fields.Boolean):
    """A JSON ``true`` or ``false``, never a string or number (marshmallow's Boolean would take ``"yes"`` or 1)."""

    def _deserialize(self, value, attr, data, **kwargs):
        if value is True or value is False:
            return value
        raise ValidationError(f"must be true or false, not {json_kind(value)}")


class NumberArray(fields.Field):
    """A JSON array of finite numbers (magnitude at most :data:`MAX_MAGNITUDE`), deserialised to float64.

    A float64 numpy array (a column of an Arrow stream, see :mod:`lagwise.api.columnar`)
    is checked by the same rules. Errors name each offending index (the first 20), e.g.
    ``{17: ["not a number"]}``, and count the further ones under :data:`FURTHER_INVALID`.
    """

    def _deserialize(self, value, attr, data, **kwargs):
        if isinstance(value, np.ndarray):
            if value.size == 0 or np.abs(value).max() <= MAX_MAGNITUDE:  # NaN fails the comparison
                return value
            errors = _array_errors(value)
            if errors:
                raise ValidationError(errors)
            return value
        if not isinstance(value, list):
            raise ValidationError("must be an array of numbers")
        if {type(v) for v in value} <= set(NUMBER_TYPES):
            try:
                array = np.array(value, dtype=np.float64)
                if np.isfinite(array).all() and (array.size == 0 or np.abs(array).max() <= MAX_MAGNITUDE):
                    return array
            except OverflowError:
                pass
        raise ValidationError(_list_errors(value, _element_error))

    def _serialize(self, value, attr, obj, **kwargs):
        return None if value is None else [float(v) for v in value]


class NullableNumberArray(fields.Field):
    """A JSON array of finite numbers or ``null`` (not measured), deserialised to float64 with NaN for null.

    Numbers obey the rules of :class:`NumberArray`; errors name each offending index (the first 20)
    and count the further ones.
    """

    def _deserialize(self, value, attr, data, **kwargs):
        if isinstance(value, np.ndarray):
            # A column of an Arrow stream, NaN where it held null (the reader refuses NaN numbers).
            with np.errstate(invalid="ignore"):
                bad = ~(np.abs(value) <= MAX_MAGNITUDE) & ~np.isnan(value)
            if bad.any():
                raise ValidationError(_array_errors(np.where(bad, value, 0.0)))
            return value
        if not isinstance(value, list):
            raise ValidationError("must be an array of numbers or nulls")
        if {type(v) for v in value} <= {int, float, type(None)}:
            # Fast path (large rasters): NaN cannot come from strict JSON, so it marks exactly the nulls.
            try:
                array = np.array(value, dtype=np.float64)
                given = array[~np.isnan(array)]
                if np.isfinite(given).all() and (given.size == 0 or np.abs(given).max() <= MAX_MAGNITUDE):
                    return array
            except OverflowError:
                pass
        errors = _list_errors(value, lambda element: None if element is None else _element_error(element))
        if errors:
            raise ValidationError(errors)
        return np.array([np.nan if v is None else v for v in value], dtype=np.float64)

    def _serialize(self, value, attr, obj, **kwargs):
        return None if value is None else [None if math.isnan(v) else float(v) for v in value]


class Column(fields.List):
    """A per-target or per-sample array in a response, documented as a list of its ``inner`` field.

    Dumping passes the value through as it is (a numpy array, a tuple or a list), with no
    per-element processing: orjson writes numpy arrays natively and NaN as ``null``
    (:mod:`lagwise.api.jsonio`), and Arrow answers take the arrays as they are
    (:mod:`lagwise.api.columnar`), so a million-target answer costs nothing here.
    """

    def _serialize(self, value, attr, obj, **kwargs):
        return value


def _optional(convert: Callable[[Any], Any]) -> Callable[[Any], Any]:
    return lambda value: None if value is None else convert(value)


def _number_list(value: Any) -> Any:
    return None if value is None else [float(v) for v in value]


# How marshmallow dumps each scalar field type (Number, Boolean and String ``_serialize``), without its call chain.
_SCALAR_DUMPS: tuple[tuple[type[fields.Field], Callable[[Any], Any]], ...] = (
    (fields.Float, _optional(float)),
    (StrictFloat, _optional(float)),
    (fields.Integer, _optional(int)),
    (StrictInteger, _optional(int)),
    (fields.Boolean, _optional(bool)),
    (StrictBoolean, _optional(bool)),
    (fields.String, _optional(str)),
)


def _scalar_dump(field: fields.Field) -> Callable[[Any], Any] | None:
    """The plain conversion that dumps ``field`` (a scalar, or a list of floats), or None for other fields."""
    if type(field) is fields.List and type(field.inner) in (fields.Float, StrictFloat):
        return _number_list
    return next((dump for kind, dump in _SCALAR_DUMPS if type(field) is kind), None)


class Rows(fields.List):
    """A list of rows of one flat schema (e.g. the distance classes of a direction), documented as
    ``fields.List(fields.Nested(schema))``.

    A response may hold thousands of rows; each is dumped by a plan made once from the
    schema's fields (the conversions marshmallow applies to scalars and lists of floats;
    any other field dumps itself) instead of marshmallow's per-field call chain. A member
    is left out as the schema's dump leaves it out (missing, or None for a member in the
    schema's ``absent_when_none``), and the schema's ``finish_row(data)``, when it has one,
    completes each row as its ``post_dump`` does.
    """

    def __init__(self, schema: type[Schema], **kwargs):
        super().__init__(fields.Nested(schema), **kwargs)
        self.schema_class = schema
        self._plan: list | None = None

    def _make_plan(self) -> list:
        schema = self.schema_class()
        absent: frozenset[str] = getattr(schema, "absent_when_none", frozenset())
        plan = []
        for name, field in schema.dump_fields.items():
            attribute = field.attribute or name
            plan.append((field.data_key or name, attribute, _scalar_dump(field), field, attribute in absent))
        self._finish = getattr(schema, "finish_row", None)
        return plan

    def _serialize(self, value, attr, obj, **kwargs):
        if value is None:
            return None
        if self._plan is None:
            self._plan = self._make_plan()
        plan, finish, rows = self._plan, self._finish, []
        for row in value:
            is_dict = isinstance(row, dict)
            out = {}
            for key, attribute, dump, field, absent_when_none in plan:
                item = row.get(attribute, missing) if is_dict else getattr(row, attribute, missing)
                if item is missing or (item is None and absent_when_none):
                    continue
                out[key] = dump(item) if dump is not None else field._serialize(item, attribute, row)
            rows.append(finish(out) if finish is not None else out)
        return rows


def pointer_token(name: str) -> str:
    """A JSON Pointer reference token (RFC 6901: ``~`` as ``~0``, ``/`` as ``~1``)."""
    return name.replace("~", "~0").replace("/", "~1")


class NamedColumns(fields.Dict):
    """An object of named columns (one member per variable), at most ``max_names`` members.

    Names have 1 to 60 printable characters. Errors are keyed by the name as a JSON
    Pointer token, so they point at ``/samples/variables/<name>/<index>``.
    """

    def __init__(self, values: fields.Field, *, max_names: int, min_names: int = 0, **kwargs):
        super().__init__(keys=fields.String(), values=values, **kwargs)
        self.max_names = max_names
        self.min_names = min_names

    def _deserialize(self, value, attr, data, **kwargs):
        if not isinstance(value, dict):
            raise ValidationError("must be an object with one member per variable")
        if not self.min_names <= len(value) <= self.max_names:
            raise ValidationError(f"must name {self.min_names} to {self.max_names} variables, got {len(value)}")
        out, errors = {}, {}
        for name, column in value.items():
            if not 1 <= len(name) <= 60 or any(not c.isprintable() for c in name):
                errors[pointer_token(name)] = ["variable names have 1 to 60 printable characters"]
                continue
            try:
                assert self.value_field is not None  # always given by __init__
                out[name] = self.value_field.deserialize(column, **kwargs)
            except ValidationError as exc:
                errors[pointer_token(name)] = exc.messages
        if errors:
            raise ValidationError(errors)
        return out


def _finite_number(value) -> bool:
    try:
        return math.isfinite(value)
    except OverflowError:  # an integer beyond float64
        return False


def _plain_element(field: fields.Field) -> tuple[Callable[[Any], bool], Callable[[Any], Any] | None] | None:
    """For a plain scalar field (a string, :class:`StrictBoolean` or :class:`StrictFloat` without
    validators), a cheap test equivalent to loading a parsed JSON element without error, and the
    conversion of an element that passes (None: it loads as itself); None for any other field."""
    if field.validators:
        return None
    allow_none = field.allow_none
    kind = type(field)
    if kind is fields.String:
        return (lambda v: type(v) is str or (v is None and allow_none)), None
    if kind is StrictBoolean:
        return (lambda v: v is True or v is False or (v is None and allow_none)), None
    if isinstance(field, StrictFloat) and kind is StrictFloat and not field.allow_nan:

        def number(v) -> bool:
            return (type(v) in NUMBER_TYPES and _finite_number(v)) or (v is None and allow_none)

        return number, lambda v: None if v is None else float(v)
    return None


class CappedList(fields.List):
    """A list whose element errors list the first :data:`MAX_ELEMENT_ERRORS` and count the rest.

    marshmallow's list keeps one message per bad element, so a body of a million bad
    entries would build a million messages; this one builds the first 20 and counts every
    further invalid element under :data:`FURTHER_INVALID` (without building their messages).
    A list of a plain scalar field is checked by one cheap test per element (the valid case
    loads without marshmallow's per-element call chain). A numpy array or compact
    identifiers (an Arrow column, typed by :mod:`lagwise.api.columnar`) are taken as they are.
    """

    def __init__(self, cls_or_instance, **kwargs):
        super().__init__(cls_or_instance, **kwargs)
        self._plain = _plain_element(self.inner)

    def _deserialize(self, value, attr, data, **kwargs):
        if isinstance(value, (np.ndarray, CompactIds)):
            # A column of an Arrow stream, whose element type the reader has checked.
            return value
        if not isinstance(value, list):
            raise ValidationError("must be an array")
        if self._plain is not None:
            test, convert = self._plain
            if all(map(test, value)):
                return value if convert is None else [convert(v) for v in value]
        out, errors = [], {}
        for index, element in enumerate(value):
            try:
                out.append(self.inner.deserialize(element, **kwargs))
            except ValidationError as exc:
                errors[index] = exc.messages
                if len(errors) == MAX_ELEMENT_ERRORS:
                    further = self._count_invalid(value[index + 1 :], **kwargs)
                    if further:
                        errors[FURTHER_INVALID] = further
                    break
        if errors:
            raise ValidationError(errors)
        return out

    def _count_invalid(self, elements: list, **kwargs) -> int:
        """The number of ``elements`` that do not load (by the cheap test where there is one)."""
        if self._plain is not None:
            test = self._plain[0]
            return sum(1 for v in elements if not test(v))
        invalid = 0
        for element in elements:
            try:
                self.inner.deserialize(element, **kwargs)
            except ValidationError:
                invalid += 1
        return invalid


class AutoOrList(fields.Field):
    """Either ``"auto"`` or a list of distinct allowed strings (model families, at most :data:`MAX_FAMILIES`)."""

    def __init__(self, choices: tuple[str, ...], **kwargs):
        super().__init__(**kwargs)
        self.choices = choices

    def _deserialize(self, value, attr, data, **kwargs):
        if value == "auto":
            return "auto"
        if not isinstance(value, list) or not value or not all(isinstance(v, str) for v in value):
            raise ValidationError('must be "auto" or a non-empty list of family names')
        if len(value) > MAX_FAMILIES:
            raise ValidationError(f"at most {MAX_FAMILIES} families (each listed once)")
        seen: dict[str, int] = {}
        for index, name in enumerate(value):
            if name not in self.choices:
                raise ValidationError({index: [f"unknown family {name!r}; valid: {', '.join(self.choices)}"]})
            if name in seen:
                raise ValidationError({index: [f"repeats {name!r} (entry {seen[name]}); list each family once"]})
            seen[name] = index
        return value


class NuggetOption(fields.Field):
    """``"fit"``, ``"none"`` or a fixed non-negative finite number."""

    def _deserialize(self, value, attr, data, **kwargs):
        if value in ("fit", "none"):
            return value
        if type(value) in NUMBER_TYPES and _element_error(value) is None and value >= 0:
            return float(value)
        raise ValidationError('must be "fit", "none" or a fixed non-negative number')


class DirectionsOption(fields.Field):
    """Either ``"auto"`` or a list of direction classes (validated by the nested schema)."""

    def __init__(self, nested, *, max_length: int, **kwargs):
        super().__init__(**kwargs)
        self.nested = nested
        self.max_length = max_length
        self.list_field = fields.List(fields.Nested(nested))

    def _deserialize(self, value, attr, data, **kwargs):
        if value == "auto":
            return "auto"
        if not isinstance(value, list) or not 1 <= len(value) <= self.max_length:
            raise ValidationError(f'must be "auto" or a list of 1 to {self.max_length} direction classes')
        return self.list_field.deserialize(value, attr, data, **kwargs)


class Variants(fields.Field):
    """An object that takes one of several forms, each a schema of its own.

    The form is picked from the members present (or from a discriminating member) and
    the object is loaded with that form's schema, so members of another form are refused
    as unknown. Documented as ``oneOf`` (with a ``discriminator`` when there is one).

    Parameters
    ----------
    forms : mapping of str to Schema class
        Every form by a short name.
    pick : callable
        Given the JSON object, the name of its form; raises ``ValidationError`` when no
        form fits.
    discriminator : str, optional
        The member whose value is the form's name (documented with a mapping).
    dumped_as : callable, optional
        Given an object to dump, the name of its form, whose schema then dumps it; without
        it a value is dumped as it is (an object already in its JSON form).
    component : str, optional
        Document the union once, as this named component schema, and refer to it
        (generated clients then name the union type).
    omitted : str, optional
        The form of an object without the discriminator: the contract requires the
        discriminator (so that it tells the forms apart), the service still reads such
        an object as this form, with the discriminator filled in.
    accepted : str, optional
        The forms in words (e.g. ``"width and count, edges, or auto"``). With it, an object
        holding members of the picked form and members only another form has is refused
        at the object itself, naming the accepted forms, instead of as unknown members.
    """

    def __init__(
        self,
        forms: Mapping[str, type[Schema]],
        pick: Callable[[dict], str],
        *,
        discriminator: str | None = None,
        dumped_as: Callable[[object], str] | None = None,
        component: str | None = None,
        omitted: str | None = None,
        accepted: str | None = None,
        **kwargs,
    ):
        super().__init__(**kwargs)
        self.forms = dict(forms)
        self.accepted = accepted
        self.pick = pick
        self.discriminator = discriminator
        self.dumped_as = dumped_as
        self._dumpers: dict[str, Schema] = {}
        self.component = component
        self.omitted = omitted

    def _deserialize(self, value, attr, data, **kwargs):
        if not isinstance(value, dict):
            raise ValidationError("must be an object")
        if self.omitted is not None and self.discriminator is not None and self.discriminator not in value:
            value = {self.discriminator: self.omitted, **value}
        name = self.pick(value)
        if self.accepted is not None:
            self._refuse_mixed(value, name)
        return self.forms[name]().load(value)

    def _refuse_mixed(self, value: dict, name: str) -> None:
        """Refuse an object holding members that only forms other than ``name`` have."""

        def members(form: type[Schema]) -> set[str]:
            return {field.data_key or key for key, field in form._declared_fields.items()}

        own = members(self.forms[name])
        others = set().union(*(members(form) for other, form in self.forms.items() if other != name)) - own
        foreign = [key for key in value if key in others]
        if foreign:
            given = [key for key in value if key in own or key in others]
            raise ValidationError(f"give one form: {self.accepted}; the forms cannot be mixed (got {', '.join(given)})")

    def _serialize(self, value, attr, obj, **kwargs):
        if value is None or self.dumped_as is None:
            return value
        name = self.dumped_as(value)
        if name not in self._dumpers:
            self._dumpers[name] = self.forms[name]()
        return self._dumpers[name].dump(value)


def by_discriminator(member: str, names: tuple[str, ...]) -> Callable[[dict], str]:
    """A :class:`Variants` picker reading the form's name from ``member``."""

    def pick(value: dict) -> str:
        name = value.get(member)
        if name not in names:
            raise ValidationError({member: [f"must be one of: {', '.join(names)}"]})
        return name

    return pick


class AutoOr(fields.Field):
    """Either ``"auto"`` or a value of the ``inner`` field (e.g. the kriging options)."""

    def __init__(self, inner: fields.Field, **kwargs):
        super().__init__(**kwargs)
        self.inner = inner

    def _deserialize(self, value, attr, data, **kwargs):
        if value == "auto":
            return "auto"
        if not isinstance(value, dict):
            raise ValidationError('must be "auto" or an object')
        return self.inner.deserialize(value, attr, data, **kwargs)


# ---- apispec attribute functions (bound to the converter: ``self.resolve_nested_schema``) ----


def number_array_properties(self, field, **kwargs) -> dict:
    """Document :class:`NumberArray` as an array of numbers."""
    if isinstance(field, NumberArray):
        return {"type": "array", "items": {"type": "number", "minimum": -MAX_MAGNITUDE, "maximum": MAX_MAGNITUDE}}
    if isinstance(field, NullableNumberArray):
        return {
            "type": "array",
            "items": {"type": ["number", "null"], "minimum": -MAX_MAGNITUDE, "maximum": MAX_MAGNITUDE},
        }
    if isinstance(field, NamedColumns):
        return {"minProperties": field.min_names, "maxProperties": field.max_names}
    return {}


def choice_properties(self, field, **kwargs) -> dict:
    """Document :class:`AutoOrList`, :class:`NuggetOption` and :class:`DirectionsOption`."""
    if isinstance(field, AutoOrList):
        return {
            "oneOf": [
                {"type": "string", "enum": ["auto"]},
                {
                    "type": "array",
                    "minItems": 1,
                    "maxItems": MAX_FAMILIES,
                    "uniqueItems": True,
                    "items": {"type": "string", "enum": list(field.choices)},
                },
            ]
        }
    if isinstance(field, NuggetOption):
        return {"oneOf": [{"type": "string", "enum": ["fit", "none"]}, {"type": "number", "minimum": 0}]}
    if isinstance(field, DirectionsOption):
        return {
            "oneOf": [
                {"type": "string", "enum": ["auto"]},
                {
                    "type": "array",
                    "minItems": 1,
                    "maxItems": field.max_length,
                    "items": self.resolve_nested_schema(field.nested),
                },
            ]
        }
    if isinstance(field, AutoOr):
        return {"oneOf": [{"type": "string", "enum": ["auto"]}, self.field2property(field.inner)]}
    return {}


def variants_properties(self, field, **kwargs) -> dict:
    """Document :class:`Variants` as ``oneOf`` references (with the discriminator's mapping); a union
    with a ``component`` name is registered once and referred to."""
    if not isinstance(field, Variants):
        return {}
    if field.component is not None and field.component in self.spec.components.schemas:
        return {"$ref": f"#/components/schemas/{field.component}"}
    refs = {name: self.resolve_nested_schema(form) for name, form in field.forms.items()}
    out: dict = {"oneOf": list(refs.values())}
    if field.discriminator is not None:
        out["discriminator"] = {
            "propertyName": field.discriminator,
            "mapping": {name: ref["$ref"] for name, ref in refs.items()},
        }
    if field.component is None:
        return out
    self.spec.components.schema(field.component, out)
    return {"$ref": f"#/components/schemas/{field.component}"}
