"""Cost limits checked before heavy work.

Every limit is set by a ``LAGWISE_*`` environment variable in the service (see
``lagwise.api.settings``); the defaults below are those documented there.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from .errors import LimitExceeded

PNG_ELEMENT_FACTOR = 40  # a PNG figure draws its marks into pixels: 1e6 cells render in about 15 s


@dataclass(frozen=True)
class Limits:
    """Largest work a single request may ask for.

    Attributes
    ----------
    max_samples : int
        Samples per request (``LAGWISE_MAX_SAMPLES``).
    max_pairs : int
        Pair work of one request (``LAGWISE_MAX_PAIRS``): for each pass of the pair
        kernels, the candidate pairs that pass's kernel visits (the column sweep of the fast
        path, ``accumulate_horizontal``, about 1.03 per pair within the search radius on
        spread samples, plus 150 for each run of a column it takes; the sweep along x of the
        other kernels, every pair within the radius along x) plus the pairs within the search
        radius times the number of direction classes; the kernels run at about 1e8 of these a second.
    max_median_pairs : int
        Pairs whose differences the median-based estimator may hold in memory
        (8 bytes each, ``LAGWISE_MAX_MEDIAN_PAIRS``).
    max_scatter_pairs : int
        Pairs returned for one h-scattergram (``LAGWISE_MAX_SCATTER_PAIRS``).
    max_map_cells : int
        Cells per side of a variogram map, i.e. 2 * cells + 1 (``LAGWISE_MAX_MAP_CELLS``).
    max_unique_samples : int
        Samples for kriging with the unique neighbourhood, whose matrix is factorised
        whole (``LAGWISE_MAX_UNIQUE_SAMPLES``; 10,000 take about 30 s).
    max_targets : int
        Prediction targets per request (``LAGWISE_MAX_TARGETS``).
    max_kriging_flops : int
        Estimated operations (multiply-add equivalents, building and solving) of the
        kriging systems of one request (``LAGWISE_MAX_KRIGING_FLOPS``); one worker core
        does about 3e9 per second on a loaded machine, so 1e11 fits the default deadline.
    max_figure_elements : int
        Marks one SVG figure of an analysis may draw: the grid cells of a prediction or
        standard-deviation map plus its sample markers, or two markers per sample for the
        cross-validation figure; a PNG figure may draw 40 times as many
        (``LAGWISE_MAX_FIGURE_ELEMENTS``). SVG costs about 0.5 ms per map cell.
    memory_budget_bytes : int
        Working memory of one request's largest arrays (``LAGWISE_MEMORY_BUDGET_BYTES``,
        256 MiB): batched kriging solves and neighbour searches are cut to fit it, and
        dense matrices that cannot be cut (the unique neighbourhood) must fit it.
    max_simulation_values : int
        Values one conditional simulation may draw (``LAGWISE_MAX_SIMULATION_VALUES``):
        realisations x (grid nodes + embedding nodes x passes); about 1e7 a second.
    max_embedding_nodes : int
        Nodes of the torus of a simulation's circulant embedding (``LAGWISE_MAX_EMBEDDING_NODES``;
        48 bytes each while a field is drawn).
    max_returned_values : int
        Realisation values a simulation may return (``LAGWISE_MAX_RETURNED_VALUES``):
        realisations x grid nodes with ``return_realisations``; about 20 bytes of JSON each.
    max_analysis_seconds : int
        Estimated seconds of one core for a whole analysis (``LAGWISE_MAX_ANALYSIS_SECONDS``): its
        variograms, the variogram map (its pair work, or the grid method's transforms), fits, the
        cross-validation of every strategy, the prediction, simulation and figures, summed over the variables of a batch, at the rates of the limits above
        (``lagwise.core.analysis_cost``); raise it with the deadline.
    """

    max_samples: int = 200_000
    max_pairs: int = 2_000_000_000
    max_median_pairs: int = 5_000_000
    max_scatter_pairs: int = 100_000
    max_map_cells: int = 201
    max_unique_samples: int = 10_000
    max_targets: int = 2_000_000
    max_kriging_flops: int = 100_000_000_000
    max_figure_elements: int = 25_000
    memory_budget_bytes: int = 256 * 1024 * 1024
    max_simulation_values: int = 100_000_000
    max_embedding_nodes: int = 4_194_304
    max_returned_values: int = 2_000_000
    max_analysis_seconds: int = 60

    def check_samples(self, n: int) -> None:
        """Refuse more than ``max_samples`` samples."""
        if n > self.max_samples:
            raise LimitExceeded(
                "LAGWISE_MAX_SAMPLES",
                self.max_samples,
                n,
                "Send fewer samples per request (thin or split the data set).",
                "/samples",
            )

    def check_pairs(
        self, pairs: int, directions: int, pointer: str = "/lags", *, visits: Sequence[tuple[str, int]] = ()
    ) -> None:
        """Refuse when the pair work of a request exceeds ``max_pairs``.

        ``visits`` holds one (kernel, visiting work) per pass over the pairs, counted beforehand
        (:func:`lagwise.core.variography.pairs.pass_visits`): the candidates of the ``sweep along x``,
        or of the ``column sweep`` with a fixed work for each run it takes. The work is their sum plus,
        for every pass, ``pairs`` (within the search radius) x ``directions``.
        """
        passes = max(len(visits), 1)
        cost = sum(v for _, v in visits) + passes * pairs * max(directions, 1)
        if cost > self.max_pairs:
            by_kernel: dict[str, list[int]] = {}
            for kernel, count in visits:
                by_kernel.setdefault(kernel, []).append(count)
            visited = "; ".join(
                f"{len(counts)} by the {kernel} visiting {sum(counts):,}" for kernel, counts in by_kernel.items()
            )
            visited = f" ({visited})" if visited else ""
            raise LimitExceeded(
                "LAGWISE_MAX_PAIRS",
                self.max_pairs,
                cost,
                f"{passes} pass(es) over the pairs{visited}; each pass also weighs {pairs:,} pairs within the "
                f"search radius for {max(directions, 1)} direction class(es). Shorten the largest distance class, "
                "use fewer direction classes, fewer samples, or a statistic other than the median and no "
                "h-scattergram.",
                pointer,
            )

    def check_figure(self, name: str, elements: int, fmt: str) -> None:
        """Refuse a figure that would draw more marks than ``max_figure_elements`` allows for ``fmt``."""
        allowed = self.max_figure_elements * (PNG_ELEMENT_FACTOR if fmt == "png" else 1)
        if elements > allowed:
            raise LimitExceeded(
                "LAGWISE_MAX_FIGURE_ELEMENTS",
                allowed,
                elements,
                f"The {name} figure would draw {elements:,} marks in {fmt.upper()}. Ask for it as PNG "
                f"(figure_format, {PNG_ELEMENT_FACTOR} times as many marks), use a coarser prediction grid, "
                "or leave the figure out.",
                "/figures",
            )

    def check_median_pairs(self, pairs: int) -> None:
        """Refuse a median-based estimate that would hold more than ``max_median_pairs`` differences."""
        if pairs > self.max_median_pairs:
            raise LimitExceeded(
                "LAGWISE_MAX_MEDIAN_PAIRS",
                self.max_median_pairs,
                pairs,
                "The median-based estimator keeps every difference in memory; use 'semivariance_robust' "
                "or shorten the largest distance class.",
                "/statistic",
            )
