"""The whole chain in one call: checks, summary, experimental variograms, fit,
cross-validation and optional predictions, with warnings and a plain-language verdict.

Every stage calls the same core functions as the separate endpoints, so its numbers
are theirs for the same inputs. Variograms, fits and cross-validation run on the
transformed values (reported in those units); predictions are back-transformed to the
original units (see :mod:`lagwise.core.data.transforms`).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from .data.samples import SampleSet
from .data.summary import Summary, summarise
from .data.transforms import Transform, fit_transform
from .errors import InvalidInput
from .kriging.cross_validation import CrossValidation, Scheme, cross_validate
from .kriging.neighbourhood import Neighbourhood
from .kriging.prediction import Grid, PredictionResult, predict
from .kriging.systems import KrigingSpec
from .limits import Limits
from .modelling.fitting import FitResult, fit_model, points_from_experimental
from .variography.directions import DirectionClass
from .variography.experimental import ExperimentalVariogram, experimental_variogram
from .variography.lags import LagRequest
from .variography.maps import VariogramMap, variogram_map

AUTO_FAN = tuple(DirectionClass(a, 15.0) for a in (0.0, 30.0, 60.0, 90.0, 120.0, 150.0))
FEW_SAMPLES = 50
UNIQUE_UP_TO = 1500


@dataclass(frozen=True)
class AnalysisOptions:
    """What to run (defaults filled in; see the endpoint's documentation)."""

    transform: str = "none"
    lags: LagRequest = LagRequest()
    directions: list[DirectionClass] | str | None = None
    statistic: str = "semivariance"
    min_pairs: int = 30
    families: str | list[str] = "auto"
    nugget: str | float = "fit"
    weighting: str = "pairs"
    kriging: KrigingSpec = KrigingSpec()
    neighbourhood: Neighbourhood | None = None
    scheme: Scheme = Scheme()
    grid: Grid | None = None
    with_map: bool = False


@dataclass(frozen=True)
class Anisotropy:
    """Anisotropy estimated from a fan of direction classes (degrees; ratio in (0, 1])."""

    azimuth: float
    ratio: float
    family: str


@dataclass(frozen=True)
class Analysis:
    """Result of :func:`analyse`."""

    transform: Transform
    summary: Summary
    transformed_summary: Summary
    omnidirectional: ExperimentalVariogram
    directional: ExperimentalVariogram | None
    anisotropy: Anisotropy | None
    fit: FitResult
    neighbourhood: Neighbourhood
    cross_validation: CrossValidation
    prediction: PredictionResult | None
    back_transformed: tuple[np.ndarray, np.ndarray] | None
    variogram_map: VariogramMap | None = None
    warnings: tuple[str, ...] = field(default=())
    verdict: str = ""

    @property
    def model(self):
        """The variogram model the cross-validation and the map used (working units)."""
        return self.fit.best.model


def _neighbourhood(options: AnalysisOptions, samples: SampleSet) -> Neighbourhood:
    if options.neighbourhood is not None:
        return options.neighbourhood
    return Neighbourhood() if samples.size <= UNIQUE_UP_TO else Neighbourhood(max_points=24, min_points=4)


def _estimate_anisotropy(samples, options, family, limits) -> tuple[ExperimentalVariogram, Anisotropy | None]:
    fan = experimental_variogram(
        samples,
        lags=options.lags,
        directions=list(AUTO_FAN),
        statistic=options.statistic,
        min_pairs=options.min_pairs,
        limits=limits,
    )
    points = points_from_experimental(fan, options.min_pairs)
    if len(np.unique(points.azimuth[points.usable])) < 2:
        return fan, None
    fit = fit_model(
        points,
        dimension=samples.dimension,
        families=[family],
        nugget=options.nugget,
        weighting=options.weighting,
        anisotropy="fit",
    )
    structure = fit.best.model.structures[0]
    return fan, Anisotropy(structure.anisotropy.azimuth, structure.anisotropy.ratio, family)


def _trend_share(samples: SampleSet) -> float:
    """R^2 of a linear regression of the values on the coordinates."""
    design = np.column_stack([np.ones(samples.size), samples.coords - samples.coords.mean(axis=0)])
    coefficients, *_ = np.linalg.lstsq(design, samples.values, rcond=None)
    residual = samples.values - design @ coefficients
    total = np.sum((samples.values - samples.values.mean()) ** 2)
    return float(1.0 - np.sum(residual**2) / total) if total > 0 else 0.0


def analyse(
    samples: SampleSet, options: AnalysisOptions = AnalysisOptions(), *, limits: Limits = Limits(), workers: int = 1
) -> Analysis:
    """Run the chain on ``samples`` (see the module docstring)."""
    transform = fit_transform(options.transform, samples.values, samples.source_index)
    working = replace(samples, values=transform.forward(samples.values))
    omni = experimental_variogram(
        working, lags=options.lags, statistic=options.statistic, min_pairs=options.min_pairs, limits=limits
    )
    fit = fit_model(
        points_from_experimental(omni, options.min_pairs),
        dimension=samples.dimension,
        families=options.families,
        nugget=options.nugget,
        weighting=options.weighting,
        sample_variance=omni.summary.variance,
    )
    directional, anisotropy = None, None
    if options.directions == "auto" and samples.dimension >= 2 and fit.best.model.structures:
        directional, anisotropy = _estimate_anisotropy(working, options, fit.best.model.structures[0].family, limits)
    elif isinstance(options.directions, list):
        directional = experimental_variogram(
            working,
            lags=options.lags,
            directions=options.directions,
            statistic=options.statistic,
            min_pairs=options.min_pairs,
            limits=limits,
        )
    hood = _neighbourhood(options, samples)
    model = fit.best.model
    cv, prediction, back, refused = None, None, None, None
    if model.structures or model.nugget > 0:
        try:
            cv = cross_validate(working, model, options.kriging, hood, options.scheme, limits=limits, workers=workers)
            if options.grid is not None:
                prediction = predict(
                    working,
                    model,
                    spec=options.kriging,
                    neighbourhood=hood,
                    grid=options.grid,
                    limits=limits,
                    workers=workers,
                )
                back = transform.back_estimate(prediction.prediction.estimate, prediction.prediction.variance)
        except InvalidInput as exc:
            # A model the kriging systems cannot use (e.g. a gaussian structure without nugget on
            # dense samples) still leaves the variogram and the fit worth reporting.
            refused = (
                f"kriging was not possible with the selected model ({exc.summary}); fit with a nugget or another family"
            )
    vmap = None
    if options.with_map and samples.dimension >= 2:
        # Cells from the automatic rule (about the typical sample spacing), as /v1/variogram-maps.
        vmap = variogram_map(working, statistic=options.statistic, min_pairs=options.min_pairs, limits=limits)
    notes = list(omni.warnings) + list(fit.warnings)
    notes += _warnings(samples, fit, cv, anisotropy)
    if refused:
        notes.append(refused)
    return Analysis(
        transform=transform,
        summary=summarise(samples.coords, samples.values),
        transformed_summary=omni.summary,
        omnidirectional=omni,
        directional=directional,
        anisotropy=anisotropy,
        fit=fit,
        neighbourhood=hood,
        cross_validation=cv,
        prediction=prediction,
        back_transformed=back,
        variogram_map=vmap,
        warnings=tuple(dict.fromkeys(notes)),
        verdict=_verdict(fit, cv, anisotropy, constant=omni.summary.variance == 0.0),
    )


def _warnings(
    samples: SampleSet, fit: FitResult, cv: CrossValidation | None, anisotropy: Anisotropy | None
) -> list[str]:
    notes = []
    if samples.size < FEW_SAMPLES:
        notes.append(f"only {samples.size} samples: fewer than about {FEW_SAMPLES} make variograms unreliable")
    share = _trend_share(samples)
    if share > 0.3:
        notes.append(
            f"a linear trend in the coordinates explains {share * 100:.0f} % of the variance: consider universal kriging (a drift)"
        )
    if cv is not None and cv.statistics["outliers"]:
        notes.append(
            f"{cv.statistics['outliers']} samples have large cross-validation errors (see cross_validation.samples.outlier)"
        )
    model = fit.best.model
    if model.structures and model.sill and model.nugget / model.sill > 0.8:
        notes.append(
            f"the nugget is {model.nugget / model.sill * 100:.0f} % of the sill: the fit barely beats a pure nugget (little spatial structure)"
        )
    if anisotropy is not None and anisotropy.ratio < 0.7:
        notes.append(
            f"continuity looks longer along azimuth {anisotropy.azimuth:.0f} (ratio {anisotropy.ratio:.2f}); the fitted model is isotropic"
        )
    return notes


def _verdict(
    fit: FitResult, cv: CrossValidation | None, anisotropy: Anisotropy | None, *, constant: bool = False
) -> str:
    model = fit.best.model
    if constant:
        return "All values are equal: there is no variation to model or map."
    if not model.structures:
        return "No spatial structure: the values vary as much between close samples as between distant ones, so kriging adds nothing to the mean."
    structure = model.structures[0]
    share = model.nugget / model.sill if model.sill else 0.0
    parts = [
        f"Spatial structure found: {fit.best.label}, practical range {structure.range:.4g}, nugget {share * 100:.0f} % of the sill."
    ]
    if anisotropy is not None:
        parts.append(
            f"Direction classes suggest the longest continuity along azimuth {anisotropy.azimuth:.0f} degrees (range ratio {anisotropy.ratio:.2f})."
        )
    if cv is None:
        parts.append(
            "Cross-validation could not run with this model (see the warnings); review the model before mapping."
        )
    elif cv.statistics["root_mean_square_standardized_error"] is not None:
        rmsse = cv.statistics["root_mean_square_standardized_error"]
        honest = 0.8 <= rmsse <= 1.2
        parts.append(
            f"Cross-validation: RMSSE {rmsse:.2f}, correlation {cv.statistics['correlation'] or 0:.2f}; "
            + (
                "the model predicts held-out samples honestly and is fit for mapping."
                if honest
                else "the kriging variances do not match the errors; review the model before mapping."
            )
        )
    if share > 0.8:
        parts.append("The structure is weak: maps will be smooth and close to the mean.")
    return " ".join(parts)
