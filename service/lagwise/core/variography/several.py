"""Experimental variograms of several variables and of every pair of them, in one pass over the pairs.

Conventions
-----------
* Direct statistics of each variable are those of one variable
  (:mod:`lagwise.core.variography.statistics`), over the pairs where the variable is
  measured at both ends; they equal a single-variable request on the samples where it
  was measured whenever the classes agree (explicit classes, or automatic ones when every
  variable is measured everywhere), class standard errors and 95 % intervals included:
  the delete-one-block jackknife of :mod:`lagwise.core.variography.uncertainty` over the
  variable's own blocks, under the single-variable rules (skipped above
  ``MAX_UNCERTAINTY_PAIRS``, none for the median-based statistic), and within one budget for
  the whole request (``REQUEST_UNCERTAINTY_PAIRS``: a variable, then a cross pair, whose
  jackknife would exceed what is left gets none, with the reason). The variables whose
  jackknife runs take their sums from one pass of
  :func:`lagwise.core.variography.shared.on_shared_classes` (equal to the single-variable
  request to the bit); the others keep this module's sums (equal up to the order of summation).
* Cross statistics of the pair of variables (a, b), over the pairs where what they need
  is measured (N such pairs in the class; tail and head as for one variable):

  ``semivariance``            (1/2N) sum (a_head - a_tail)(b_head - b_tail), a and b
                              measured at both ends (the cross-semivariance; Matheron 1965,
                              Journel & Huijbregts 1978, Mining Geostatistics, ch. II)
  ``covariance``              (1/N) sum a_tail b_head - m_a,tail m_b,head, a measured at
                              the tail and b at the head (the cross-covariance C_ab(h))
  ``covariance_noncentered``  (1/N) sum a_tail b_head
  ``correlogram``             the cross-covariance / (s_a,tail s_b,head)

  The cross-semivariance is symmetric in a and b; the cross-covariance is not
  (C_ab(h) = C_ba(-h)). The other statistics have no cross form: with them only the
  direct variograms are returned (a warning says so).
* Class standard errors of the cross-semivariance: the same jackknife over the blocks of
  the samples measuring both variables (:mod:`lagwise.core.variography.cross_uncertainty`).
  The cross-covariance statistics have none: their pairs take one variable at the tail
  and the other at the head, so no one set of samples (and of blocks) is theirs.
* Distance classes are resolved on all sample locations (for ``auto``, the extent,
  spacing and pair counts of every location), so every variable and pair shares them.
* One pass: semivariances of every variable and pair come from one sweep whose work
  per pair grows with the number of variables p, not p squared (see
  :func:`lagwise.core.variography.kernels.accumulate_square_patterns`); the
  covariance-type statistics add their p x p sums per pair in one sweep; the median
  estimator keeps each variable's differences and runs one pass per variable.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numba
import numpy as np

from ..data.declustering import decluster
from ..data.samples import DuplicateReport, SampleSet
from ..data.summary import summarise
from ..data.variables import MultiSampleSet, escape_token
from ..deadline import check_deadline
from ..errors import FieldIssue, InvalidInput
from ..limits import Limits
from . import kernels as K
from .cross_uncertainty import cross_uncertainties
from .directions import DirectionClass
from .experimental import (
    DEFAULT_MIN_PAIRS,
    Classes,
    ClassRow,
    DirectionResult,
    ExperimentalVariogram,
    _class_medians,
    _class_warnings,
    _resolve_edges,
    _rows,
    assembled,
    on_classes,
    summed_fast,
    validate_options,
)
from .lags import LagRequest
from .pairs import (
    COLUMN_SWEEP,
    X_SWEEP,
    PreparedSamples,
    accumulate_squares,
    accumulate_variables,
    estimate_pairs_within,
    layout,
    measurement_patterns,
    pass_visits,
    prepare,
    prepare_variables,
    sweep_visits,
)
from .shared import Member, on_shared_classes
from .statistics import ACCUMULATION_MODE, CONSTANT_ENDS, COVARIANCE_TYPE, NO_PAIRS
from .uncertainty import MAX_UNCERTAINTY_PAIRS, UncertaintyPlan, plan_blocks, undefined

CROSS_MEANING = {
    "semivariance": "(1/2N) sum (a_head - a_tail)(b_head - b_tail), pairs with a and b measured at both ends",
    "covariance": "(1/N) sum a_tail b_head - m_a,tail m_b,head, pairs with a at the tail and b at the head",
    "covariance_noncentered": "(1/N) sum a_tail b_head, pairs with a at the tail and b at the head",
    "correlogram": "cross-covariance / (s_a,tail s_b,head), pairs with a at the tail and b at the head",
}
CROSS_STATISTICS = tuple(CROSS_MEANING)
CROSS_COVARIANCE_UNCERTAINTY = (
    "not computed for the cross-covariance statistics: their pairs take one variable at the tail and the other "
    "at the head, so no one set of samples (and of spatial blocks) is theirs; the cross-semivariance has them"
)
# Work per pair of the several-variable kernels relative to the single-variable kernel,
# measured on the variables benchmark (bench/variables.py): each variable adds about a
# twelfth with the semivariance, each p x p entry about a twelfth with covariances.
WORK_PER_ADDED_SUM = 1.0 / 12.0
HEAD_BUDGET_SHARE = 0.5
# One request spends on class uncertainties (direct jackknifes in the variables' order, then
# the cross pairs') no more pair work than one single-variable request may.
REQUEST_UNCERTAINTY_PAIRS = MAX_UNCERTAINTY_PAIRS
BUDGET_SPENT = (
    f"skipped: the request's {REQUEST_UNCERTAINTY_PAIRS:.0e} pairs of work for class standard errors are spent "
    "by the variables before this one; send it alone (or with fewer variables) for them"
)


@dataclass(frozen=True)
class VariableVariogram:
    """The direct experimental variogram of one variable.

    Attributes
    ----------
    name, unit : str, str or None
    result : ExperimentalVariogram
        Its classes per direction and its summary (the samples where it was measured).
    """

    name: str
    unit: str | None
    result: ExperimentalVariogram


@dataclass(frozen=True)
class CrossVariogram:
    """The cross statistic of a pair of variables per direction.

    Attributes
    ----------
    names : tuple of str
        (a, b): a is the tail variable of covariance-type statistics.
    directions : tuple of DirectionResult
    uncertainty : UncertaintyPlan or None
        Blocks of the cross-semivariance's class uncertainties
        (:mod:`lagwise.core.variography.cross_uncertainty`); None when none were computed.
    """

    names: tuple[str, str]
    directions: tuple[DirectionResult, ...]
    uncertainty: UncertaintyPlan | None = None


@dataclass(frozen=True)
class SeveralVariograms:
    """Result of :func:`several_variograms`.

    Attributes
    ----------
    variables : tuple of VariableVariogram
        In the samples' order.
    cross : tuple of CrossVariogram
        Every pair (a, b) with a before b in the samples' order; empty for statistics
        without a cross form.
    statistic : str
    min_pairs : int
    lag_method : str
    colocated_pairs : int
        Zero-distance pairs of locations.
    spacing : float or None
        Typical spacing of all locations (``equal_width`` classes), else None.
    warnings : tuple of str
    """

    variables: tuple[VariableVariogram, ...]
    cross: tuple[CrossVariogram, ...]
    statistic: str
    min_pairs: int
    lag_method: str
    colocated_pairs: int
    spacing: float | None = None
    warnings: tuple[str, ...] = field(default=())

    @property
    def pairs(self) -> int:
        """Pairs counted over every direct class (for the work metrics)."""
        return sum(row.pairs for v in self.variables for d in v.result.directions for row in d.classes)


def _locations(samples: MultiSampleSet) -> SampleSet:
    """Every location with a placeholder value 1 (for class resolution, which reads coordinates only)."""
    return SampleSet(
        coords=samples.coords,
        values=np.ones(samples.size),
        ids=samples.ids,
        source_index=samples.source_index,
        coordinates=samples.coordinates,
        input_hash=samples.input_hash,
        duplicates=DuplicateReport(samples.duplicates.policy, 0, 0),
        projection=samples.projection,
    )


def _check_positive(samples: MultiSampleSet) -> None:
    issues = []
    for k, name in enumerate(samples.names):
        column = samples.values[:, k]
        for i in np.flatnonzero(column <= 0)[:20]:
            pointer = f"/samples/variables/{escape_token(name)}/{samples.source_index[i]}"
            issues.append(FieldIssue(pointer, "pairwise_relative needs positive values"))
    if issues:
        raise InvalidInput(issues[:20])


def work_per_pair(statistic: str, variables: int) -> float:
    """Cost of one pair relative to one variable's kernel (the pair limit's weight)."""
    if statistic in COVARIANCE_TYPE:
        return 1.0 + 7.0 * variables * variables * WORK_PER_ADDED_SUM
    if statistic == "semivariance_median":
        return float(variables)
    return 1.0 + variables * WORK_PER_ADDED_SUM


def _reasons(samples: MultiSampleSet, classes, statistic: str, diagonal: np.ndarray) -> tuple[list, int]:
    """Why each variable's class uncertainties are undefined (None: its jackknife runs), and the
    budget the direct jackknifes leave for the cross pairs.

    Each variable follows the single-variable rule on its own samples and its pairs in the
    classes (``diagonal`` counts); then, in the variables' order, a jackknife runs only while
    the request's total work stays within :data:`REQUEST_UNCERTAINTY_PAIRS`.
    """
    shape = (classes.table.shape[0], classes.kmax)
    reasons, budget = [], REQUEST_UNCERTAINTY_PAIRS
    for a in range(samples.count):
        xs = np.sort(samples.coords[~np.isnan(samples.values[:, a]), 0])
        work = max(int(diagonal[:, :, K.COUNT, a].sum()), int(sweep_visits(xs, classes.search_radius).sum()))
        reason = plan_blocks(statistic, xs.size, shape, work)[1]
        if reason is None and work > budget:
            reason = BUDGET_SPENT
        elif reason is None:
            budget -= work
        reasons.append(reason)
    return reasons, budget


def _jackknifed(samples: MultiSampleSet, chosen: list[int], classes: Classes, statistic, min_pairs, lags, limits):
    """The variograms of the ``chosen`` variables with their class uncertainties: one shared pass
    when its sweep over every location stays within ``MAX_UNCERTAINTY_PAIRS`` visits (the
    single-variable jackknife's bound) and its tables fit, else each variable's own passes."""
    members = [
        Member(samples.variable(samples.names[a]), np.flatnonzero(~np.isnan(samples.values[:, a]))) for a in chosen
    ]
    radius = layout(classes.directions, classes.edges).search_radius
    if int(sweep_visits(np.sort(samples.coords[:, 0]), radius).sum()) <= MAX_UNCERTAINTY_PAIRS:
        found = on_shared_classes(
            samples.coords, members, classes, statistic=statistic, min_pairs=min_pairs, lags=lags, limits=limits
        )
        if found is not None:
            return found
    return [
        on_classes(
            m.samples, classes, statistic, min_pairs, lags, limits, decluster(m.samples.coords, m.samples.values)
        )
        for m in members
    ]


def _direct(samples, classes: Classes, statistic, min_pairs, lags, limits, sums, reasons, colocated):
    """Every variable's direct variogram: ``sums`` = (table (ndir, kmax, ACCUMULATORS, p) in
    single-variable columns, medians per variable, means, scales) of this module's pass, used
    for the variables whose jackknife does not run (``reasons``)."""
    table, medians, means, scales = sums
    chosen = [a for a, reason in enumerate(reasons) if reason is None]
    found = {}
    if chosen:
        found = dict(
            zip(chosen, _jackknifed(samples, chosen, classes, statistic, min_pairs, lags, limits), strict=True)
        )
    shape = (len(classes.directions), max(len(e) - 1 for e in classes.edges))
    out = []
    for a, name in enumerate(samples.names):
        if a in found:
            out.append(found[a])
            continue
        single = samples.variable(name)
        declustering = decluster(single.coords, single.values)
        summary = summarise(single.coords, single.values, declustering)
        prepared = PreparedSamples(np.empty((0, 3)), np.empty(0), float(means[a]), float(scales[a]), np.empty(0))
        uncertain = undefined(reasons[a], shape)
        results = tuple(
            DirectionResult(d, _rows(statistic, table[k, :, :, a], e, medians[a][k], min_pairs, prepared, uncertain[k]))
            for k, (d, e) in enumerate(zip(classes.directions, classes.edges, strict=True))
        )
        notes = [*single.warnings, *classes.notes, *_class_warnings(results, min_pairs, summary)]
        if declustering.warning:
            notes.append(declustering.warning)
        out.append(assembled(results, summary, statistic, min_pairs, lags, colocated, classes.spacing, None, notes))
    return out


def _square_tables(prepared, classes) -> tuple[np.ndarray, np.ndarray, int]:
    """Single-variable columns (ndir, kmax, ACCUMULATORS, p, p) of the semivariance sums of every pair."""
    squares, counts, distances, colocated = accumulate_squares(prepared, classes)
    ndir, kmax, p, _ = squares.shape
    table = np.zeros((ndir, kmax, K.ACCUMULATORS, p, p))
    table[:, :, K.COUNT] = counts
    table[:, :, K.DISTANCE] = distances
    table[:, :, K.SQUARE] = squares
    return table, counts, colocated


def _covariance_tables(prepared, classes) -> tuple[np.ndarray, int]:
    """Single-variable columns (ndir, kmax, ACCUMULATORS, p, p) of the covariance sums (a tail, b head)."""
    raw, colocated = accumulate_variables(prepared, classes, K.MODE_COVARIANCE, True)
    ndir, kmax, _, slots = raw.shape
    p = prepared.values.shape[1]
    table = np.zeros((ndir, kmax, K.ACCUMULATORS, p, p))
    for column, source in (
        (K.COUNT, K.MULTI_COUNT),
        (K.DISTANCE, K.MULTI_DISTANCE),
        (K.TAIL, K.MULTI_TAIL),
        (K.HEAD, K.MULTI_HEAD),
        (K.TAIL2, K.MULTI_TAIL2),
        (K.HEAD2, K.MULTI_HEAD2),
        (K.PRODUCT, K.MULTI_PRODUCT),
    ):
        table[:, :, column] = raw[:, :, source].reshape(ndir, kmax, p, p)
    return table, colocated


def _cross_value(statistic, row, mean_a, mean_b, scale):
    """(value, reason, moments) of a cross statistic from one accumulator row (see the module conventions)."""
    n = row[K.COUNT]
    if n == 0:
        return None, NO_PAIRS, {}
    if statistic == "semivariance":
        return row[K.SQUARE] / (2.0 * n), None, {}
    tail_c, head_c = row[K.TAIL] / n, row[K.HEAD] / n
    tail_sd = math.sqrt(max(row[K.TAIL2] / n - tail_c**2, 0.0))
    head_sd = math.sqrt(max(row[K.HEAD2] / n - head_c**2, 0.0))
    moments = dict(tail_mean=tail_c + mean_a, head_mean=head_c + mean_b, tail_sd=tail_sd, head_sd=head_sd)
    centred = row[K.PRODUCT] / n - tail_c * head_c
    if statistic == "covariance":
        return centred, None, moments
    if statistic == "covariance_noncentered":
        # sum (t + m_a)(h + m_b) / N with t, h centred on their variables' means.
        return (row[K.PRODUCT] + mean_b * row[K.TAIL] + mean_a * row[K.HEAD]) / n + mean_a * mean_b, None, moments
    noise = 1e-10 * max(scale, 1e-300)
    if tail_sd <= noise or head_sd <= noise:
        return None, CONSTANT_ENDS, moments
    return centred / (tail_sd * head_sd), None, moments


def _cross_uncertain(statistic, prepared, samples, classes, table, limits, budget: int) -> dict:
    """(rows[k][c], plan) of the class uncertainties of every cross pair (a, b), a < b, within
    ``budget`` pairs of jackknife work."""
    shape = (classes.table.shape[0], classes.kmax)
    if statistic != "semivariance":
        pairs = [(a, b) for a in range(samples.count) for b in range(a + 1, samples.count)]
        return {pair: (undefined(CROSS_COVARIANCE_UNCERTAINTY, shape), None) for pair in pairs}
    return cross_uncertainties(prepared, samples.coords, classes, table[:, :, K.COUNT], limits, budget)


def _cross_rows(statistic, table, edges, min_pairs, moments_of, uncertain) -> tuple[ClassRow, ...]:
    """The classes of one direction of a cross pair: ``moments_of`` = (mean of a, mean of b, scale)."""
    mean_a, mean_b, scale = moments_of
    rows = []
    for c in range(len(edges) - 1):
        row = table[c]
        n = int(row[K.COUNT])
        value, reason, moments = _cross_value(statistic, row, mean_a, mean_b, scale)
        known = value is not None
        rows.append(
            ClassRow(
                lower=float(edges[c]),
                upper=float(edges[c + 1]),
                mean_distance=float(row[K.DISTANCE] / n) if n else None,
                pairs=n,
                value=value,
                reason=reason,
                sparse=n < min_pairs,
                standard_error=uncertain[c].standard_error if known else None,
                interval_95=uncertain[c].interval_95 if known else None,
                uncertainty_reason=uncertain[c].reason if known else reason,
                **moments,
            )
        )
    return tuple(rows)


def _triangle_table(raw: np.ndarray, p: int) -> np.ndarray:
    """Single-variable columns (ndir, kmax, ACCUMULATORS, p, p) from the triangular slots of the direct kernel."""
    ndir, kmax = raw.shape[:2]
    table = np.zeros((ndir, kmax, K.ACCUMULATORS, p, p))
    s = 0
    for a in range(p):
        for b in range(a, p):
            for column, source in (
                (K.COUNT, K.MULTI_COUNT),
                (K.DISTANCE, K.MULTI_DISTANCE),
                (K.SQUARE, K.MULTI_SQUARE),
            ):
                table[:, :, column, a, b] = raw[:, :, source, s]
                table[:, :, column, b, a] = raw[:, :, source, s]
            s += 1
    return table


def _several_passes(lags: LagRequest, statistic: str, variables: int, fast: bool) -> list[str]:
    """The kernel of each pass of :func:`several_variograms`: the automatic classes' counts over the
    locations (:func:`~lagwise.core.variography.pairs.accumulate`: the column sweep when ``fast``), the
    several-variable sums (the sweep along x) and, for the median, each variable's differences (the
    sweep along x over its own samples, counted at the locations' as an upper bound)."""
    explicit = lags.width is not None or lags.edges is not None
    automatic = [] if explicit else [COLUMN_SWEEP if fast else X_SWEEP]
    return automatic + [X_SWEEP] * (1 + variables * (statistic == "semivariance_median"))


def _semivariance_table(prepared, classes, limits: Limits) -> tuple[np.ndarray, int]:
    """Semivariance sums of every pair of variables: the O(p)-per-pair kernel when its per-sample
    counts fit half the memory budget, else the kernel that adds the p x p sums per pair."""
    patterns, _ = measurement_patterns(prepared.measured)
    bins = classes.table.shape[0] * classes.kmax
    head_bytes = 4 * patterns.shape[0] * bins * prepared.points.shape[0] * numba.get_num_threads()
    if head_bytes > HEAD_BUDGET_SHARE * limits.memory_budget_bytes:
        raw, colocated = accumulate_variables(prepared, classes, K.MODE_SQUARE, True)
        return _triangle_table(raw, prepared.values.shape[1]), colocated
    table, _, colocated = _square_tables(prepared, classes)
    return table, colocated


def several_variograms(
    samples: MultiSampleSet,
    *,
    lags: LagRequest = LagRequest(),
    directions: list[DirectionClass] | None = None,
    statistic: str = "semivariance",
    min_pairs: int = DEFAULT_MIN_PAIRS,
    limits: Limits = Limits(),
) -> SeveralVariograms:
    """Direct experimental variograms of every variable and cross statistics of every pair of them.

    Parameters
    ----------
    samples : MultiSampleSet
        Validated samples carrying several variables.
    lags, directions, statistic, min_pairs, limits
        As for :func:`lagwise.core.variography.experimental.experimental_variogram`; the
        pair limit weighs each pair by :func:`work_per_pair`.

    Raises
    ------
    InvalidInput, LimitExceeded
    """
    limits.check_samples(samples.size)
    if statistic == "pairwise_relative":
        _check_positive(samples)
    locations = _locations(samples)
    resolved, warnings = validate_options(locations, statistic, min_pairs, directions)
    placement = summarise(locations.coords, locations.values, decluster(locations.coords, np.zeros(samples.size)))
    located = prepare(locations.coords, np.zeros(samples.size))
    passes = _several_passes(lags, statistic, samples.count, summed_fast(resolved, lags))
    edges, spacing = _resolve_edges(locations, placement, located, lags, resolved, min_pairs, limits, passes)
    classes = layout(resolved, edges)
    radius = classes.search_radius
    pairs = estimate_pairs_within(locations.coords, radius)
    limits.check_pairs(
        int(math.ceil(pairs * work_per_pair(statistic, samples.count))),
        len(resolved),
        visits=pass_visits(located, radius, _several_passes(lags, statistic, samples.count, classes.fast)),
    )
    prepared = prepare_variables(samples.coords, samples.values)
    if statistic == "semivariance":
        table, colocated = _semivariance_table(prepared, classes, limits)
    elif statistic in COVARIANCE_TYPE:
        table, colocated = _covariance_tables(prepared, classes)
    else:
        raw, colocated = accumulate_variables(prepared, classes, ACCUMULATION_MODE[statistic], False)
        table = np.zeros(raw.shape + (samples.count,))
        for a in range(samples.count):
            table[..., a, a] = raw[..., a]
    check_deadline()
    p = samples.count
    diagonal = np.stack([table[..., a, a] for a in range(p)], axis=-1)  # (ndir, kmax, ACCUMULATORS, p)
    medians = [np.full((len(resolved), classes.kmax), np.nan)] * p
    if statistic == "semivariance_median":
        medians = []
        for name in samples.names:
            single = samples.variable(name)
            one = prepare(single.coords, single.values)
            counts = diagonal[:, :, K.COUNT, len(medians)]
            medians.append(_class_medians(statistic, one, classes, counts, limits))
    given = Classes(resolved, edges, spacing, tuple(warnings))
    reasons, budget = _reasons(samples, classes, statistic, diagonal)
    sums = (diagonal, medians, prepared.means, prepared.scales)
    direct = _direct(samples, given, statistic, min_pairs, lags, limits, sums, reasons, colocated)
    variables = []
    for a, (name, result) in enumerate(zip(samples.names, direct, strict=True)):
        warnings.extend(
            f"variable {name!r}: {w}" for w in _class_warnings(result.directions, min_pairs, result.summary)
        )
        variables.append(VariableVariogram(name, samples.units[a], result))
    cross = []
    if statistic in CROSS_STATISTICS:
        found = _cross_uncertain(statistic, prepared, samples, classes, table, limits, budget)
        for a in range(p):
            for b in range(a + 1, p):
                scale = float(max(prepared.scales[a], prepared.scales[b]))
                uncertain, plan = found[(a, b)]
                rows = tuple(
                    DirectionResult(
                        d,
                        _cross_rows(
                            statistic,
                            table[k, :, :, a, b],
                            edges[k],
                            min_pairs,
                            (prepared.means[a], prepared.means[b], scale),
                            uncertain[k],
                        ),
                    )
                    for k, d in enumerate(resolved)
                )
                cross.append(CrossVariogram((samples.names[a], samples.names[b]), rows, plan))
    elif p > 1:
        warnings.append(f"{statistic} has no cross form; only the direct variograms are returned")
    return SeveralVariograms(
        variables=tuple(variables),
        cross=tuple(cross),
        statistic=statistic,
        min_pairs=min_pairs,
        lag_method=lags.method,
        colocated_pairs=colocated,
        spacing=spacing,
        warnings=tuple(list(samples.warnings) + warnings),
    )
