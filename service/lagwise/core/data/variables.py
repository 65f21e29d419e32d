"""Several variables measured at one set of samples (heterotopic: not every variable everywhere).

Conventions
-----------
* The sample set holds one table ``values`` of shape (n, p): column k is the variable
  ``names[k]``, NaN where that variable was not measured at a sample. Coordinates,
  identifiers, coordinate systems and duplicate policies are those of one variable
  (:mod:`lagwise.core.data.samples`).
* Censoring is per variable, with the policies of :mod:`lagwise.core.data.censoring`;
  a censored entry counts as measured (its substituted value takes part).
* Duplicates, per variable: ``average`` takes the mean of the values measured at the
  location (NaN when none was), ``first`` the first measured value there; ``reject``
  refuses any repeated location.
* Every variable needs at least two measured values at distinct locations.
* Input hash: SHA-256 over the little-endian float64 bytes of x, y, z (those present),
  then each variable's column in the given order (NaN where not measured, as
  ``numpy.nan``'s bytes), after censoring substitution and before duplicate handling.
* Error pointers name the variable: ``/samples/variables/lead/17`` (RFC 6901 escapes
  ``~`` and ``/`` in names), ``/samples/censored/lead/17``,
  ``/samples/detection_limits/lead/17``.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace

import numpy as np

from ..errors import FieldIssue, InvalidInput
from .censoring import substitute
from .geographic import ACCURATE_SPAN_M, LocalProjection, centroid
from .identifiers import check_distinct, given_ids, pick_ids
from .locations import kept_rows, repeated_locations
from .samples import (
    MAX_SPREAD,
    MIN_SPREAD,
    DuplicateReport,
    PointerFor,
    SampleSet,
    columnar_pointer,
    input_hash,
)

MAX_VARIABLES = 24
MAX_NAME_LENGTH = 60


def escape_token(name: str) -> str:
    """A JSON Pointer reference token for ``name`` (RFC 6901: ``~`` → ``~0``, ``/`` → ``~1``)."""
    return name.replace("~", "~0").replace("/", "~1")


@dataclass(frozen=True)
class VariableInput:
    """One variable as given, before validation.

    Attributes
    ----------
    name : str
        The variable's name (unique in the set).
    values : array_like, shape (n,)
        Measured values, NaN (or None) where not measured; a censored entry's value is ignored.
    censored : array_like of bool, shape (n,), optional
        True where the result is below its detection limit.
    detection_limits : array_like, shape (n,), optional
        Detection limits (the variable's unit), needed where censored is true.
    unit : str, optional
        The variable's unit (echoed and used in labels).
    """

    name: str
    values: Sequence[float | None] | np.ndarray
    censored: Sequence[bool] | np.ndarray | None = None
    detection_limits: Sequence[float | None] | np.ndarray | None = None
    unit: str | None = None


@dataclass(frozen=True)
class MultiSampleSet:
    """A validated set of samples carrying several variables.

    Attributes
    ----------
    coords : ndarray, shape (n, d)
        Working coordinates (as for :class:`~lagwise.core.data.samples.SampleSet`).
    names : tuple of str, length p
        Variable names in the given order.
    values : ndarray, shape (n, p)
        Column k holds variable ``names[k]``; NaN where it was not measured.
    units : tuple of (str or None), length p
        Each variable's unit, when given.
    ids : sequence of str
        Sample identifiers (given as str or compactly, or the 0-based input index as text:
        :mod:`lagwise.core.data.identifiers`).
    source_index : ndarray of int, shape (n,)
        Input index of each kept sample (the first of a duplicate group).
    coordinates : str
        ``planar`` or ``geographic``.
    input_hash : str
        SHA-256 (hex), see the module conventions.
    duplicates : DuplicateReport
        What the duplicates policy did.
    projection : LocalProjection or None
        Projection centre for geographic sets.
    warnings : tuple of str
        Plain-language notes about the input.
    censored : tuple of int, length p
        Per variable, the entries below their detection limit (substituted per ``censoring``).
    censoring : str
        The censoring policy applied.
    """

    coords: np.ndarray
    names: tuple[str, ...]
    values: np.ndarray
    units: tuple[str | None, ...]
    ids: Sequence[str]
    source_index: np.ndarray
    coordinates: str
    input_hash: str
    duplicates: DuplicateReport
    projection: LocalProjection | None = None
    warnings: tuple[str, ...] = field(default=())
    censored: tuple[int, ...] = field(default=())
    censoring: str = "half_limit"

    @property
    def dimension(self) -> int:
        """Number of coordinate axes (1, 2 or 3)."""
        return int(self.coords.shape[1])

    @property
    def size(self) -> int:
        """Number of samples (locations) after duplicate handling."""
        return int(self.coords.shape[0])

    @property
    def count(self) -> int:
        """Number of variables p."""
        return len(self.names)

    @property
    def measured(self) -> np.ndarray:
        """Boolean (n, p): where each variable was measured."""
        return ~np.isnan(self.values)

    def index(self, name: str) -> int:
        """Column of the variable ``name``; KeyError when the set has no such variable."""
        if name not in self.names:
            raise KeyError(name)
        return self.names.index(name)

    def variable(self, name: str) -> SampleSet:
        """One variable as a single-variable :class:`SampleSet` (the samples where it was measured).

        The result is what a single-variable request with those samples would build
        (same coordinates, values, identifiers and duplicate handling); its input hash
        is the whole set's, so provenance names the request that was sent.
        """
        k = self.index(name)
        keep = ~np.isnan(self.values[:, k])
        notes = [w for w in self.warnings if not w.startswith("variable ") or w.startswith(f"variable {name!r}")]
        return SampleSet(
            coords=self.coords[keep],
            values=self.values[keep, k],
            ids=pick_ids(self.ids, keep),
            source_index=self.source_index[keep],
            coordinates=self.coordinates,
            input_hash=self.input_hash,
            duplicates=self.duplicates,
            projection=self.projection,
            warnings=tuple(notes),
            censored=self.censored[k],
            censoring=self.censoring,
        )

    def subset(self, keep: np.ndarray) -> MultiSampleSet:
        """The samples where the boolean mask ``keep`` is true (every variable kept)."""
        return replace(
            self,
            coords=self.coords[keep],
            values=self.values[keep],
            ids=pick_ids(self.ids, keep),
            source_index=self.source_index[keep],
        )


def variable_pointer(pointer_for: PointerFor, name: str) -> PointerFor:
    """Pointers for one variable's fields: ``values`` → ``variables/<name>``, ``censored`` → ``censored/<name>``."""
    token = escape_token(name)

    def pointer(member: str, index: int | None) -> str:
        key = "variables" if member == "values" else member
        return pointer_for(f"{key}/{token}", index)

    return pointer


def _check_coordinates(x, y, z, ids, n, coordinates, pointer_for) -> None:
    issues: list[FieldIssue] = []
    for name, column in (("y", y), ("z", z)):
        if column is not None and len(column) != n:
            issues.append(FieldIssue(pointer_for(name, None), f"has {len(column)} entries but x has {n}"))
    if ids is not None and len(ids) != n:
        issues.append(FieldIssue(pointer_for("ids", None), f"has {len(ids)} entries but x has {n}"))
    if z is not None and y is None:
        issues.append(FieldIssue(pointer_for("y", None), "is required when z is given (3-D samples)"))
    if coordinates == "geographic" and y is None:
        issues.append(FieldIssue(pointer_for("y", None), "latitude is required for geographic coordinates"))
    if n < 2:
        issues.append(FieldIssue(pointer_for("x", None), f"needs at least 2 samples, got {n}"))
    if issues:
        raise InvalidInput(issues)
    for name, column in (("x", x), ("y", y), ("z", z)):
        if column is not None:
            bad = np.flatnonzero(~np.isfinite(column))
            issues.extend(FieldIssue(pointer_for(name, int(i)), "not a finite number") for i in bad[:20])
    if coordinates == "geographic" and not issues:
        for i in np.flatnonzero(np.abs(y) > 90)[:20]:
            issues.append(FieldIssue(pointer_for("y", int(i)), "latitude must lie in [-90, 90] degrees"))
        for i in np.flatnonzero(np.abs(x) > 180)[:20]:
            issues.append(FieldIssue(pointer_for("x", int(i)), "longitude must lie in [-180, 180] degrees"))
    for name, column in (("x", x), ("y", y), ("z", z)):
        if column is not None and not issues and float(np.ptp(column)) > MAX_SPREAD:
            issues.append(
                FieldIssue(
                    pointer_for(name, int(np.argmax(np.abs(column)))),
                    f"coordinates span more than {MAX_SPREAD:g}, whose squared distances overflow; use another unit",
                )
            )
    if issues:
        raise InvalidInput(issues)


def _as_column(raw) -> np.ndarray:
    """A float64 column; None entries (JSON null) become NaN."""
    if isinstance(raw, np.ndarray):
        return np.asarray(raw, dtype=np.float64)
    return np.array([np.nan if v is None else v for v in raw], dtype=np.float64)


def _variable_column(given: VariableInput, n: int, censoring: str, pointer_for: PointerFor) -> tuple[np.ndarray, int]:
    """One variable's validated column (NaN where not measured) and its censored count."""
    pointer = variable_pointer(pointer_for, given.name)
    values = _as_column(given.values)
    if values.size != n:
        raise InvalidInput.at(pointer("values", None), f"has {values.size} entries but x has {n}")
    flags = None if given.censored is None else np.asarray(given.censored, dtype=bool)
    limits = None if given.detection_limits is None else _as_column(given.detection_limits)
    if flags is not None and flags.size == n:
        # A censored entry carries no measurement of its own: its limit decides.
        values = np.where(flags, 0.0, values)
    bad = np.flatnonzero(np.isinf(values))
    if bad.size:
        raise InvalidInput([FieldIssue(pointer("values", int(i)), "not a finite number") for i in bad[:20]])
    missing = np.isnan(values)
    values, censored = substitute(np.where(missing, 0.0, values), flags, limits, censoring, pointer)
    values = np.where(missing, np.nan, values)
    measured = np.flatnonzero(~missing)
    if measured.size == 0:
        raise InvalidInput.at(pointer("values", None), "no measured values (every entry is null)")
    if measured.size < 2:
        raise InvalidInput.at(pointer("values", None), f"needs at least 2 measured values, got {measured.size}")
    spread = float(np.ptp(values[measured]))
    if spread > MAX_SPREAD or 0.0 < spread < MIN_SPREAD:
        size = "more" if spread > MAX_SPREAD else "less"
        raise InvalidInput.at(
            pointer("values", int(measured[np.argmax(values[measured])])),
            f"values span {spread:.3g} ({size} than the {MAX_SPREAD if size == 'more' else MIN_SPREAD:g} "
            "whose squares float64 can hold); rescale the values (another unit)",
        )
    return values, censored


def _check_names(variables: Sequence[VariableInput], pointer_for: PointerFor) -> None:
    if not variables:
        raise InvalidInput.at(pointer_for("variables", None), "needs at least one variable")
    if len(variables) > MAX_VARIABLES:
        raise InvalidInput.at(
            pointer_for("variables", None), f"has {len(variables)} variables; at most {MAX_VARIABLES} are accepted"
        )
    seen: set[str] = set()
    for given in variables:
        if not given.name or len(given.name) > MAX_NAME_LENGTH:
            raise InvalidInput.at(
                pointer_for("variables", None), f"variable names have 1 to {MAX_NAME_LENGTH} characters"
            )
        if given.name in seen:
            raise InvalidInput.at(variable_pointer(pointer_for, given.name)("values", None), "is given twice")
        seen.add(given.name)


def _merge_duplicates(coords, table, ids, policy, pointer_for):
    """Duplicate locations resolved per variable (see the module conventions)."""
    group, counts = repeated_locations(coords)
    n = coords.shape[0]
    if counts.size == 0:
        return coords, table, ids, np.arange(n), DuplicateReport(policy, 0, 0)
    members = np.flatnonzero(group >= 0)
    if policy == "reject":
        issues = []
        for number in range(min(counts.size, 20)):
            first, second = members[group[members] == number][:2]
            issues.append(
                FieldIssue(
                    pointer_for("x", int(second)),
                    f"sample {second} is at the same location as sample {first} (duplicates policy is 'reject')",
                )
            )
        raise InvalidInput(issues)
    order = kept_rows(group)
    groups = counts.size
    merged = np.full((groups, table.shape[1]), np.nan)
    inverse = group[members]
    for k in range(table.shape[1]):
        column = table[members, k]
        measured = ~np.isnan(column)
        if policy == "average":
            sums = np.bincount(inverse[measured], weights=column[measured], minlength=groups)
            seen = np.bincount(inverse[measured], minlength=groups)
            with np.errstate(invalid="ignore", divide="ignore"):
                merged[:, k] = np.where(seen > 0, sums / np.maximum(seen, 1), np.nan)
        else:
            rows = np.flatnonzero(measured)
            found, first = np.unique(inverse[rows], return_index=True)
            merged[found, k] = column[rows[first]]
    kept = table[order]
    repeated = group[order] >= 0
    kept[repeated] = merged[group[order][repeated]]
    report = DuplicateReport(policy, int(groups), int(n - order.size))
    return coords[order], kept, pick_ids(ids, order), order, report


def build_multi_sample_set(
    variables: Sequence[VariableInput],
    x: np.ndarray,
    y: np.ndarray | None = None,
    z: np.ndarray | None = None,
    *,
    ids: Sequence[str] | None = None,
    coordinates: str = "planar",
    duplicates: str = "average",
    pointer_for: PointerFor = columnar_pointer,
    censoring: str = "half_limit",
) -> MultiSampleSet:
    """Validate coordinates and several variables and build a :class:`MultiSampleSet`.

    Parameters
    ----------
    variables : sequence of VariableInput
        The variables in order (1 to :data:`MAX_VARIABLES`, distinct names).
    x, y, z : array_like, shape (n,)
        Coordinates (see :mod:`lagwise.core.data.samples`); y and z optional.
    ids : sequence of str, optional
        Identifiers echoed in per-sample outputs; default the input index.
    coordinates : {"planar", "geographic"}
        How to read x and y.
    duplicates : {"average", "first", "reject"}
        Policy for samples at the same location (applied per variable).
    pointer_for : callable
        Maps (field, index) to the JSON Pointer used in error messages; a variable's
        fields are named ``variables/<name>``, ``censored/<name>``, ``detection_limits/<name>``.
    censoring : str
        Policy for values below a detection limit (every variable).

    Raises
    ------
    InvalidInput
        Naming the offending field (and variable) and sample index: columns of different
        lengths, non-finite values, a variable with no or one measured value, repeated names.
    """
    x = np.asarray(x, dtype=np.float64)
    y = None if y is None else np.asarray(y, dtype=np.float64)
    z = None if z is None else np.asarray(z, dtype=np.float64)
    n = int(x.size)
    _check_names(variables, pointer_for)
    _check_coordinates(x, y, z, ids, n, coordinates, pointer_for)
    columns, censored = [], []
    for given in variables:
        column, count = _variable_column(given, n, censoring, pointer_for)
        columns.append(column)
        censored.append(count)
    table = np.column_stack(columns)
    digest = input_hash([c for c in (x, y, z) if c is not None] + columns)

    warnings: list[str] = []
    for given, count in zip(variables, censored, strict=True):
        if count:
            warnings.append(
                f"variable {given.name!r}: {count} samples were below their detection limit; "
                f"the '{censoring}' policy set their values"
            )
    projection = None
    if coordinates == "geographic":
        assert y is not None  # _check_coordinates requires latitude for geographic coordinates
        lon = np.where(x == -180.0, 180.0, x)
        lon = np.where(np.abs(y) == 90.0, 0.0, lon)
        projection = centroid(lon, y)
        px, py = projection.forward(lon, y)
        axes = [px, py] + ([z] if z is not None else [])
    else:
        axes = [c for c in (x, y, z) if c is not None]
    coords = np.column_stack(axes)
    held_ids = given_ids(ids, n)
    if ids is not None:
        check_distinct(held_ids, pointer_for)
    coords, table, kept_ids, source_index, report = _merge_duplicates(coords, table, held_ids, duplicates, pointer_for)
    if report.locations:
        action = "averaged" if duplicates == "average" else "kept the first measured value of"
        warnings.append(
            f"{report.locations} locations held more than one sample; {action} each variable there "
            f"({report.removed} samples removed by the '{duplicates}' duplicates policy)"
        )
    for k, given in enumerate(variables):
        if np.count_nonzero(~np.isnan(table[:, k])) < 2:
            raise InvalidInput.at(
                variable_pointer(pointer_for, given.name)("values", None),
                "is measured at only one location; at least two locations are needed",
            )
    empty = int(np.count_nonzero(np.isnan(table).all(axis=1)))
    if empty:
        warnings.append(f"{empty} samples have no measured variable; they take part in no statistic")
    if projection is not None:
        span = float(np.max(np.ptp(coords[:, :2], axis=0)))
        if span > ACCURATE_SPAN_M:
            warnings.append(
                f"the samples span {span / 1000:.0f} km; the local projection used for geographic "
                "coordinates loses accuracy beyond about 300 km (distance errors above 0.01 %)"
            )
    return MultiSampleSet(
        coords=coords,
        names=tuple(v.name for v in variables),
        values=table,
        units=tuple(v.unit for v in variables),
        ids=kept_ids,
        source_index=source_index,
        coordinates=coordinates,
        input_hash=digest,
        duplicates=report,
        projection=projection,
        warnings=tuple(warnings),
        censored=tuple(censored),
        censoring=censoring,
    )


def variables_from_mapping(
    columns: Mapping[str, Sequence[float | None] | np.ndarray],
    *,
    censored: Mapping[str, Sequence[bool]] | None = None,
    detection_limits: Mapping[str, Sequence[float | None]] | None = None,
    units: Mapping[str, str | None] | None = None,
) -> list[VariableInput]:
    """Variable inputs from name-keyed columns (the columnar request layout), in the mapping's order.

    Raises
    ------
    InvalidInput
        When censoring, limits or units name a variable that ``columns`` lacks.
    """
    for member, given in (("censored", censored), ("detection_limits", detection_limits), ("units", units)):
        for name in given or {}:
            if name not in columns:
                raise InvalidInput.at(
                    columnar_pointer(f"{member}/{escape_token(name)}", None), "names no variable of samples.variables"
                )
    return [
        VariableInput(
            name=name,
            values=values,
            censored=(censored or {}).get(name),
            detection_limits=(detection_limits or {}).get(name),
            unit=(units or {}).get(name),
        )
        for name, values in columns.items()
    ]
