"""The request's ``samples`` member, from columns given one by one or from a table.

A table is a mapping of column name to sequence (a ``dict``) or a pandas DataFrame. Every
sample member the service reads is taken from it when present, including the censoring
flags and detection limits; ``columns`` renames members to the table's own column names and
is checked before anything is sent.
"""

from __future__ import annotations

import math
import numbers
from collections.abc import Mapping
from typing import Any

from .errors import ColumnsError

SAMPLE_MEMBERS = ("x", "y", "z", "values", "ids", "censored", "detection_limits")


def column(value: Any) -> list:
    """A list from a list, tuple, numpy array or pandas Series (no numpy import needed)."""
    if hasattr(value, "tolist"):
        return value.tolist()
    return list(value)


def _identifier(value: Any) -> Any:
    # Integer ids (a DataFrame's default, numpy integers) travel as their decimal text; anything
    # else is sent as it is and the service names the offending index if it is not text.
    if isinstance(value, numbers.Integral) and not isinstance(value, bool):
        return str(int(value))
    return value


def _limit(value: Any) -> Any:
    # A table marks "no detection limit" with a missing value (NaN in pandas); JSON says null.
    if isinstance(value, float) and math.isnan(value):
        return None
    return value


NUMBER_MEMBERS = ("x", "y", "z", "values")


def _numbers(values: Any) -> Any:
    """A numpy array of numbers (or a pandas Series' array) as it is, else a list.

    Kept as an array, a column goes into an Arrow stream without a Python object per number;
    the JSON form turns it into a list when the body is encoded.
    """
    array = values.to_numpy() if hasattr(values, "to_numpy") else values
    if getattr(array, "ndim", None) == 1 and getattr(getattr(array, "dtype", None), "kind", "") in "fiu":
        return array
    return column(values)


def _member(name: str, values: Any, arrays: bool = False) -> Any:
    if arrays and name in NUMBER_MEMBERS:
        return _numbers(values)
    items = column(values)
    if name == "ids":
        return [_identifier(v) for v in items]
    if name == "detection_limits":
        return [_limit(v) for v in items]
    return items


def _table_columns(samples: Any) -> list:
    if isinstance(samples, Mapping):
        return list(samples.keys())
    if hasattr(samples, "columns"):
        return list(samples.columns)
    raise TypeError(f"samples must be a mapping of columns or a pandas DataFrame, got {type(samples).__name__}")


def _source_names(available: list, columns: Mapping[str, Any] | None) -> dict[str, Any]:
    """Member -> table column, after checking every key and column named in ``columns``."""
    names: dict[str, Any] = {name: name for name in SAMPLE_MEMBERS}
    for key, source in (columns or {}).items():
        if key not in SAMPLE_MEMBERS:
            raise ColumnsError(
                f"columns: {key!r} is not a sample member; the members are {', '.join(SAMPLE_MEMBERS)}",
                key=key,
                column=None,
                available=SAMPLE_MEMBERS,
            )
        if source not in available:
            raise ColumnsError(
                f"columns: {key!r} maps to {source!r}, which the table lacks; "
                f"its columns are {', '.join(map(str, available))}",
                key=key,
                column=source,
                available=available,
            )
        names[key] = source
    if "values" not in (columns or {}) and "values" not in available and "value" in available:
        names["values"] = "value"
    return names


def samples_document(
    samples: Any = None,
    *,
    x: Any = None,
    y: Any = None,
    z: Any = None,
    values: Any = None,
    ids: Any = None,
    censored: Any = None,
    detection_limits: Any = None,
    columns: Mapping[str, Any] | None = None,
    arrays: bool = False,
) -> dict:
    """Build the ``samples`` member from a table or from columns.

    Parameters
    ----------
    samples : pandas.DataFrame or mapping, optional
        A table whose columns x, y, z, values (or value), ids, censored and detection_limits
        are sent when present; rename with ``columns``, e.g. ``{"values": "lead_mg_kg",
        "ids": "sample"}``. ``{"values": ["lead", "zinc"]}`` sends several value columns as
        ``variables`` (named by their columns; missing values, None or NaN, as null: not
        measured). A mapping that holds ``raster``, ``geojson`` or ``variables`` (a mapping of
        columns, with ``units``, ``censored`` and ``detection_limits`` per variable) is an already
        built samples document and is sent as it is.
    x, y, z, values, ids, censored, detection_limits : sequence, optional
        Columns given one by one (lists, tuples, numpy arrays, pandas Series), instead of
        ``samples``.
    columns : mapping, optional
        Sample member -> the table's column name.
    arrays : bool
        Keep numpy arrays (and pandas Series) of numbers given for x, y, z and values as numpy
        arrays: the client sends them into an Arrow stream as they are, or encodes them as JSON lists.

    Returns
    -------
    dict
        Columns as lists (but see ``arrays``); integer ids as text; missing detection limits (NaN) as None; a
        table's missing value (NaN) at a censored sample as its detection limit (the service
        ignores the value of a censored sample).

    Raises
    ------
    ColumnsError
        ``columns`` names an unknown member or a column the table lacks.
    TypeError
        Both a table and separate columns are given, or ``columns`` without a table.
    """
    given = {
        "x": x,
        "y": y,
        "z": z,
        "values": values,
        "ids": ids,
        "censored": censored,
        "detection_limits": detection_limits,
    }
    separate = [name for name, value in given.items() if value is not None]
    if samples is None:
        if columns:
            raise TypeError("columns renames the columns of a table given as samples; no table was given")
        return {name: _member(name, given[name], arrays) for name in separate}
    if separate:
        raise TypeError(
            f"give the samples as a table or as separate columns, not both (also given: {', '.join(separate)})"
        )
    built = _built_document(samples)
    if built is not None:
        if columns:
            raise TypeError(f"columns applies to tables, not to {built}")
        return dict(samples)
    available = _table_columns(samples)
    several = (columns or {}).get("values")
    if isinstance(several, (list, tuple)):
        return _several_variables(samples, available, dict(columns or {}), list(several))
    names = _source_names(available, columns)
    document = {name: _member(name, samples[source], arrays) for name, source in names.items() if source in available}
    _fill_censored_values(document)
    return document


# Samples documents sent as they are, by the member that marks them, and how to name them.
BUILT_DOCUMENTS = {
    "raster": "a raster",
    "geojson": "GeoJSON samples (use value_property, id_property)",
    "variables": "a samples document with variables (name a table's value columns instead)",
}


def _built_document(samples: Any) -> str | None:
    """What ``samples`` is when it is an already built samples document (raster, GeoJSON or
    several variables, whose ``variables`` member is a mapping of columns), else None."""
    if not isinstance(samples, Mapping):
        return None
    for member, kind in BUILT_DOCUMENTS.items():
        if member in samples and (member != "variables" or isinstance(samples[member], Mapping)):
            return kind
    return None


def _not_measured(value: Any) -> Any:
    # A table's missing value (None, or NaN in pandas) is a variable not measured at the sample.
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return None
    return value


def _several_variables(table: Any, available: list, columns: dict, value_columns: list) -> dict:
    """``samples.variables`` from a table whose ``columns["values"]`` names several value columns."""
    if not value_columns:
        raise ColumnsError("columns: values names no column", key="values", column="", available=available)
    del columns["values"]
    lacking = [c for c in value_columns if c not in available]
    if lacking:
        raise ColumnsError(
            f"columns: values names {lacking[0]!r}, which the table lacks; its columns are {', '.join(map(str, available))}",
            key="values",
            column=str(lacking[0]),
            available=[str(c) for c in available],
        )
    for member in ("censored", "detection_limits"):
        if member in columns:
            raise TypeError(
                f"columns: {member} applies to one value column; send several variables' {member} as a dict"
            )
    names = _source_names(available, columns)
    document: dict[str, Any] = {
        name: _member(name, table[source])
        for name, source in names.items()
        if source in available and name in ("x", "y", "z", "ids")
    }
    document["variables"] = {str(c): [_not_measured(v) for v in column(table[c])] for c in value_columns}
    return document


def _fill_censored_values(document: dict) -> None:
    """Send a censored sample's missing value (NaN in a table) as its detection limit.

    The service ignores the value of a censored sample, but JSON cannot carry NaN.
    """
    flags, values, limits = (document.get(k) for k in ("censored", "values", "detection_limits"))
    if flags is None or values is None or limits is None or not len(flags) == len(values) == len(limits):
        return
    values = column(values)
    for i, (flag, value, limit) in enumerate(zip(flags, values, limits, strict=True)):
        if flag is True and isinstance(value, float) and math.isnan(value) and limit is not None:
            values[i] = limit
    document["values"] = values


def raster_samples(grid: Any, origin: Any = (0.0, 0.0), spacing: Any = (1.0, 1.0)) -> dict:
    """The ``samples`` member of a raster, from rows of values (row j at y0 + j dy, column i at x0 + i dx).

    Parameters
    ----------
    grid : 2-D sequence or numpy array, shape (ny, nx)
        Values by row; NaN or None marks a missing cell.
    origin, spacing : pair of float
        Node (0, 0) and the node spacing (dx, dy), coordinate units.

    Returns
    -------
    dict
        ``{"raster": {"origin", "spacing", "shape": [nx, ny], "values"}}``, values x fastest,
        missing cells as None (JSON null).
    """
    shape_message = "grid must be a non-empty rectangle of rows of equal length"
    try:
        rows = [column(row) for row in column(grid)]
    except TypeError:  # a flat sequence or a scalar: its elements are not rows
        raise TypeError(f"{shape_message} (a 2-D sequence, shape (ny, nx))") from None
    if not rows or any(len(row) != len(rows[0]) for row in rows):
        raise TypeError(shape_message)
    values = [None if v is None or (isinstance(v, float) and math.isnan(v)) else v for row in rows for v in row]
    return {
        "raster": {
            "origin": [float(v) for v in origin],
            "spacing": [float(v) for v in spacing],
            "shape": [len(rows[0]), len(rows)],
            "values": values,
        }
    }
