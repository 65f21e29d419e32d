"""Custom marshmallow fields."""

from __future__ import annotations

import math

import numpy as np
from marshmallow import ValidationError, fields

NUMBER_TYPES = (int, float)
MAX_ELEMENT_ERRORS = 20
MAX_FAMILIES = 32


def _element_error(value) -> str | None:
    if type(value) not in NUMBER_TYPES:
        return "not a number"
    try:
        if not math.isfinite(float(value)):
            return "not a finite number (overflows to infinity)"
    except OverflowError:
        return "not a finite number (overflows to infinity)"
    return None


class NumberArray(fields.Field):
    """A JSON array of finite numbers, deserialised to a float64 numpy array.

    Errors name each offending index (at most 20), e.g. ``{17: ["not a number"]}``.
    """

    def _deserialize(self, value, attr, data, **kwargs):
        if not isinstance(value, list):
            raise ValidationError("must be an array of numbers")
        if {type(v) for v in value} <= set(NUMBER_TYPES):
            try:
                array = np.array(value, dtype=np.float64)
                if np.isfinite(array).all():
                    return array
            except OverflowError:
                pass
        errors = {}
        for index, element in enumerate(value):
            message = _element_error(element)
            if message:
                errors[index] = [message]
                if len(errors) == 20:
                    break
        raise ValidationError(errors)

    def _serialize(self, value, attr, obj, **kwargs):
        return None if value is None else [float(v) for v in value]


def number_array_properties(self, field, **kwargs) -> dict:
    """apispec attribute function: document :class:`NumberArray` as an array of numbers."""
    if isinstance(field, NumberArray):
        return {"type": "array", "items": {"type": "number"}}
    return {}


class CappedList(fields.List):
    """A list whose element errors stop after :data:`MAX_ELEMENT_ERRORS` entries.

    marshmallow's list keeps one message per bad element, so a body of a million bad
    entries would build a million messages; this one stops early and reports how many
    elements it did not check under the key ``"_unchecked"``.
    """

    def _deserialize(self, value, attr, data, **kwargs):
        if not isinstance(value, list):
            raise ValidationError("must be an array")
        out, errors = [], {}
        for index, element in enumerate(value):
            try:
                out.append(self.inner.deserialize(element, **kwargs))
            except ValidationError as exc:
                errors[index] = exc.messages
                if len(errors) == MAX_ELEMENT_ERRORS:
                    if index + 1 < len(value):
                        errors["_unchecked"] = len(value) - index - 1
                    break
        if errors:
            raise ValidationError(errors)
        return out


class AutoOrList(fields.Field):
    """Either the string ``"auto"`` or a list of distinct strings (model families, at most :data:`MAX_FAMILIES`)."""

    def _deserialize(self, value, attr, data, **kwargs):
        if value == "auto":
            return "auto"
        if not (isinstance(value, list) and all(isinstance(v, str) for v in value)):
            raise ValidationError('must be "auto" or a list of family names')
        if len(value) > MAX_FAMILIES:
            raise ValidationError(f"at most {MAX_FAMILIES} families (each listed once)")
        seen: dict[str, int] = {}
        for index, name in enumerate(value):
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


def choice_properties(self, field, **kwargs) -> dict:
    """apispec attribute function documenting :class:`AutoOrList` and :class:`NuggetOption`."""
    if isinstance(field, AutoOrList):
        return {"oneOf": [{"type": "string", "enum": ["auto"]}, {"type": "array", "items": {"type": "string"}}]}
    if isinstance(field, NuggetOption):
        return {"oneOf": [{"type": "string", "enum": ["fit", "none"]}, {"type": "number", "minimum": 0}]}
    return {}


class DirectionsOption(fields.Field):
    """Either ``"auto"`` or a list of direction classes (validated by the nested schema)."""

    def __init__(self, nested, **kwargs):
        super().__init__(**kwargs)
        self.list_field = fields.List(fields.Nested(nested))

    def _deserialize(self, value, attr, data, **kwargs):
        if value == "auto":
            return "auto"
        if not isinstance(value, list) or not value:
            raise ValidationError('must be "auto" or a non-empty list of direction classes')
        return self.list_field.deserialize(value, attr, data, **kwargs)


def directions_properties(self, field, **kwargs) -> dict:
    """apispec attribute function documenting :class:`DirectionsOption`."""
    if isinstance(field, DirectionsOption):
        return {
            "oneOf": [
                {"type": "string", "enum": ["auto"]},
                {"type": "array", "items": {"$ref": "#/components/schemas/Direction"}},
            ]
        }
    return {}
