"""Validated sample sets: coordinates, values, identifiers and duplicate handling.

Conventions
-----------
* ``x`` is required; ``y`` makes the set 2-D; ``z`` (elevation, positive up, same
  unit as x and y) makes it 3-D and needs ``y``.
* ``coordinates="planar"``: any consistent length unit. ``"geographic"``: x is
  longitude and y latitude in WGS84 degrees; they are projected to metres about
  the data centroid (see :mod:`lagwise.core.data.geographic`); z stays in metres.
* Samples at the same location are duplicates: ``"average"`` (default) keeps one
  sample with the mean value, ``"first"`` keeps the first, ``"reject"`` refuses.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace

import numpy as np

from ..errors import FieldIssue, InvalidInput
from .censoring import substitute
from .geographic import ACCURATE_SPAN_M, LocalProjection, centroid
from .identifiers import check_distinct, given_ids, pick_ids
from .locations import kept_rows, repeated_locations

COORDINATE_SYSTEMS = ("planar", "geographic")
DUPLICATE_POLICIES = ("average", "first", "reject")
MAX_SPREAD = 1e150
MIN_SPREAD = 1e-150

PointerFor = Callable[[str, int | None], str]


def columnar_pointer(name: str, index: int | None) -> str:
    """JSON Pointer of a columnar sample field (``/samples/values/17``)."""
    return f"/samples/{name}" if index is None else f"/samples/{name}/{index}"


@dataclass(frozen=True)
class DuplicateReport:
    """What the duplicates policy did.

    Attributes
    ----------
    policy : str
        ``average``, ``first`` or ``reject``.
    locations : int
        Number of locations that held more than one sample.
    removed : int
        Number of samples merged away or dropped.
    """

    policy: str
    locations: int
    removed: int


@dataclass(frozen=True)
class SampleSet:
    """A validated set of samples ready for computation.

    Attributes
    ----------
    coords : ndarray, shape (n, d)
        Working coordinates: as given for planar sets, metres east/north/up of the
        projection centre for geographic sets. d is 1, 2 or 3.
    values : ndarray, shape (n,)
        Measured values, finite.
    ids : sequence of str
        Sample identifiers: given (a tuple of str, or held compactly as integers or UTF-8 bytes:
        :mod:`lagwise.core.data.identifiers`), or the 0-based input index as text.
    source_index : ndarray of int, shape (n,)
        Input index of each kept sample (the first of a duplicate group).
    coordinates : str
        ``planar`` or ``geographic``.
    input_hash : str
        SHA-256 (hex) of the little-endian float64 bytes of x, y, z (those present)
        and values, in that order, as parsed and before duplicate handling.
    duplicates : DuplicateReport
        What the duplicates policy did.
    projection : LocalProjection or None
        Projection centre for geographic sets.
    warnings : tuple of str
        Plain-language notes about the input (duplicates merged, censored values, wide span).
    censored : int
        Samples below their detection limit, substituted per ``censoring``.
    censoring : str
        The censoring policy applied.
    """

    coords: np.ndarray
    values: np.ndarray
    ids: Sequence[str]
    source_index: np.ndarray
    coordinates: str
    input_hash: str
    duplicates: DuplicateReport
    projection: LocalProjection | None = None
    warnings: tuple[str, ...] = field(default=())
    censored: int = 0
    censoring: str = "half_limit"

    @property
    def dimension(self) -> int:
        """Number of coordinate axes (1, 2 or 3)."""
        return int(self.coords.shape[1])

    @property
    def size(self) -> int:
        """Number of samples after duplicate handling."""
        return int(self.values.shape[0])

    def subset(self, keep: np.ndarray) -> SampleSet:
        """The samples where the boolean mask ``keep`` is true (e.g. the training part of a fold)."""
        return replace(
            self,
            coords=self.coords[keep],
            values=self.values[keep],
            ids=pick_ids(self.ids, keep),
            source_index=self.source_index[keep],
        )


def input_hash(columns: Sequence[np.ndarray]) -> str:
    """SHA-256 over the little-endian float64 bytes of the given columns in order."""
    digest = hashlib.sha256()
    for column in columns:
        digest.update(np.ascontiguousarray(column, dtype="<f8").data)
    return digest.hexdigest()


def _check_column(name: str, column: np.ndarray, pointer_for: PointerFor) -> list[FieldIssue]:
    bad = np.flatnonzero(~np.isfinite(column))
    return [FieldIssue(pointer_for(name, int(i)), "not a finite number") for i in bad[:20]]


def _check_columns(x, y, z, values, ids, coordinates, pointer_for) -> None:
    issues: list[FieldIssue] = []
    n = len(values)
    if n < 2:
        issues.append(FieldIssue(pointer_for("values", None), f"needs at least 2 samples, got {n}"))
    for name, column in (("x", x), ("y", y), ("z", z)):
        if column is not None and len(column) != n:
            issues.append(FieldIssue(pointer_for(name, None), f"has {len(column)} entries but values has {n}"))
    if ids is not None and len(ids) != n:
        issues.append(FieldIssue(pointer_for("ids", None), f"has {len(ids)} entries but values has {n}"))
    if z is not None and y is None:
        issues.append(FieldIssue(pointer_for("y", None), "is required when z is given (3-D samples)"))
    if coordinates == "geographic" and y is None:
        issues.append(FieldIssue(pointer_for("y", None), "latitude is required for geographic coordinates"))
    if issues:
        raise InvalidInput(issues)
    for name, column in (("x", x), ("y", y), ("z", z), ("values", values)):
        if column is not None:
            issues.extend(_check_column(name, column, pointer_for))
    if coordinates == "geographic" and not issues:
        for i in np.flatnonzero(np.abs(y) > 90)[:20]:
            issues.append(FieldIssue(pointer_for("y", int(i)), "latitude must lie in [-90, 90] degrees"))
        for i in np.flatnonzero(np.abs(x) > 180)[:20]:
            issues.append(FieldIssue(pointer_for("x", int(i)), "longitude must lie in [-180, 180] degrees"))
    if issues:
        raise InvalidInput(issues)
    _check_scale(x, y, z, values, pointer_for)


def _check_scale(x, y, z, values, pointer_for) -> None:
    """Refuse spreads whose squares leave float64: pair statistics square differences.

    Values spread over more than :data:`MAX_SPREAD` give squared differences that
    overflow; values that differ, but by less than :data:`MIN_SPREAD`, give squared
    differences that underflow to 0 (they would look constant). Coordinates spread
    over more than :data:`MAX_SPREAD` overflow squared distances; coordinates whose widest
    axis spans less than :data:`MIN_SPREAD` (but more than 0) underflow them.
    """
    issues = []
    spread = float(np.ptp(values))
    if spread > MAX_SPREAD or 0.0 < spread < MIN_SPREAD:
        where = int(np.argmax(values))
        size = "more" if spread > MAX_SPREAD else "less"
        issues.append(
            FieldIssue(
                pointer_for("values", where),
                f"values span {spread:.3g} ({size} than the {MAX_SPREAD if size == 'more' else MIN_SPREAD:g} "
                "whose squares float64 can hold); rescale the values (another unit)",
            )
        )
    spans = {}
    for name, column in (("x", x), ("y", y), ("z", z)):
        if column is not None:
            spans[name] = float(np.ptp(column))
        if column is not None and spans[name] > MAX_SPREAD:
            issues.append(
                FieldIssue(
                    pointer_for(name, int(np.argmax(np.abs(column)))),
                    f"coordinates span more than {MAX_SPREAD:g}, whose squared distances overflow; use another unit",
                )
            )
    widest = max(spans, key=spans.__getitem__, default=None)
    if widest is not None and 0.0 < spans[widest] < MIN_SPREAD:
        issues.append(
            FieldIssue(
                pointer_for(widest, None),
                f"coordinates span at most {spans[widest]:.3g} (less than {MIN_SPREAD:g}), whose squared distances "
                "underflow to 0; use another unit",
            )
        )
    if issues:
        raise InvalidInput(issues)


def _normalise_degrees(lon: np.ndarray, lat: np.ndarray) -> np.ndarray:
    """One longitude per place: -180 becomes 180, and the poles take longitude 0."""
    lon = np.where(lon == -180.0, 180.0, lon)
    return np.where(np.abs(lat) == 90.0, 0.0, lon)


def _resolve_duplicates(coords, values, ids, policy, pointer_for):
    group, counts = repeated_locations(coords)
    n = values.size
    if counts.size == 0:
        return coords, values, ids, np.arange(n), DuplicateReport(policy, 0, 0)
    if policy == "reject":
        issues = []
        members = np.flatnonzero(group >= 0)
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
    kept_values = values[order]
    if policy == "average":
        members = np.flatnonzero(group >= 0)
        means = np.bincount(group[members], weights=values[members], minlength=counts.size) / counts
        merged = group[order] >= 0
        kept_values[merged] = means[group[order][merged]]
    report = DuplicateReport(policy, int(counts.size), int(n - order.size))
    return coords[order], kept_values, pick_ids(ids, order), order, report


def build_sample_set(
    values: np.ndarray,
    x: np.ndarray,
    y: np.ndarray | None = None,
    z: np.ndarray | None = None,
    *,
    ids: Sequence[str] | None = None,
    coordinates: str = "planar",
    duplicates: str = "average",
    pointer_for: PointerFor = columnar_pointer,
    censored: np.ndarray | None = None,
    detection_limits: np.ndarray | None = None,
    censoring: str = "half_limit",
) -> SampleSet:
    """Validate sample columns and build a :class:`SampleSet`.

    Parameters
    ----------
    values : array_like, shape (n,)
        Measured values.
    x, y, z : array_like, shape (n,)
        Coordinates (see the module conventions); y and z optional.
    ids : sequence of str, optional
        Identifiers echoed in per-sample outputs (str, or a compact
        :class:`~lagwise.core.data.identifiers.CompactIds`); default the input index.
    coordinates : {"planar", "geographic"}
        How to read x and y.
    duplicates : {"average", "first", "reject"}
        Policy for samples at the same location.
    pointer_for : callable
        Maps (field, index) to the JSON Pointer used in error messages, so that
        errors point into the caller's own input layout (columnar or GeoJSON).
    censored, detection_limits, censoring
        Values below a detection limit (see :mod:`lagwise.core.data.censoring`); the input
        hash covers the values after substitution.

    Raises
    ------
    InvalidInput
        With one issue per offending field and sample index.
    """
    values = np.asarray(values, dtype=np.float64)
    x = np.asarray(x, dtype=np.float64)
    y = None if y is None else np.asarray(y, dtype=np.float64)
    z = None if z is None else np.asarray(z, dtype=np.float64)
    censored_flags = None if censored is None else np.asarray(censored, dtype=bool)
    limits = None if detection_limits is None else np.asarray(detection_limits, dtype=np.float64)
    if censored_flags is not None and censored_flags.size == values.size:
        # Censored entries carry no measurement: validate the substituted values.
        values = np.where(censored_flags, 0.0, values)
    _check_columns(x, y, z, values, ids, coordinates, pointer_for)
    values, censored_count = substitute(values, censored_flags, limits, censoring, pointer_for)
    digest = input_hash([c for c in (x, y, z) if c is not None] + [values])

    warnings: list[str] = []
    if censored_count:
        warnings.append(
            f"{censored_count} samples were below their detection limit; the '{censoring}' policy set their values"
        )
    projection = None
    if coordinates == "geographic":
        assert y is not None  # _check_columns requires latitude for geographic coordinates
        lon = _normalise_degrees(x, y)
        projection = centroid(lon, y)
        px, py = projection.forward(lon, y)
        columns = [px, py] + ([z] if z is not None else [])
    else:
        columns = [c for c in (x, y, z) if c is not None]
    coords = np.column_stack(columns)
    held_ids = given_ids(ids, values.size)
    if ids is not None:
        check_distinct(held_ids, pointer_for)

    coords, values, kept_ids, source_index, report = _resolve_duplicates(
        coords, values, held_ids, duplicates, pointer_for
    )
    if report.locations:
        action = "averaged" if duplicates == "average" else "kept the first of"
        warnings.append(
            f"{report.locations} locations held more than one sample; {action} them "
            f"({report.removed} samples removed by the '{duplicates}' duplicates policy)"
        )
    if values.size < 2:
        raise InvalidInput.at(
            pointer_for("x", None), "all samples are at one location; at least two locations are needed"
        )
    if projection is not None:
        span = float(np.max(np.ptp(coords[:, :2], axis=0)))
        if span > ACCURATE_SPAN_M:
            warnings.append(
                f"the samples span {span / 1000:.0f} km; the local projection used for geographic "
                "coordinates loses accuracy beyond about 300 km (distance errors above 0.01 %)"
            )
    return SampleSet(
        coords=coords,
        values=values,
        ids=kept_ids,
        source_index=source_index,
        coordinates=coordinates,
        input_hash=digest,
        duplicates=report,
        projection=projection,
        warnings=tuple(warnings),
        censored=censored_count,
        censoring=censoring,
    )
