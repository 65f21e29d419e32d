"""Custom marshmallow fields."""

from __future__ import annotations

import math

import numpy as np
from marshmallow import ValidationError, fields

NUMBER_TYPES = (int, float)


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
