"""The :class:`Lagwise` client."""

from __future__ import annotations

import json
import uuid
from collections.abc import Mapping
from typing import Any

import requests

from .errors import LagwiseError, TransportError, ValidationError, error_for
from .models import VariogramModel
from .results import Analysis, CrossValidation, ExperimentalVariogram, ModelFit, Predictions, VariogramMap
from .retry import RETRY_STATUSES, RetryPolicy

DEFAULT_TIMEOUT = 120.0
SAMPLE_COLUMNS = ("x", "y", "z", "values", "ids")


def _column(value) -> list:
    """A list from a list, tuple, numpy array or pandas Series (no numpy import needed)."""
    if hasattr(value, "tolist"):
        return value.tolist()
    return list(value)


def samples_document(
    samples=None, *, x=None, y=None, z=None, values=None, ids=None, columns: Mapping[str, str] | None = None
) -> dict:
    """Build the ``samples`` member from columns or from a table.

    Parameters
    ----------
    samples : pandas.DataFrame or mapping, optional
        A table with columns x, y, z (optional), values and ids (optional); rename
        with ``columns``, e.g. ``{"values": "lead_mg_kg", "ids": "sample"}``. A mapping
        that already holds ``geojson`` is sent as it is.
    x, y, z, values, ids : sequence, optional
        Columns given one by one (lists, tuples, numpy arrays).
    """
    if samples is not None:
        if isinstance(samples, Mapping) and "geojson" in samples:
            return dict(samples)
        names = {name: name for name in SAMPLE_COLUMNS}
        names.update(columns or {})
        available = set(samples.keys()) if isinstance(samples, Mapping) else set(samples.columns)
        if names["values"] not in available and "value" in available and not columns:
            names["values"] = "value"
        return {name: _column(samples[source]) for name, source in names.items() if source in available}
    given = {"x": x, "y": y, "z": z, "values": values, "ids": ids}
    return {name: _column(column) for name, column in given.items() if column is not None}


def _given(options: dict) -> dict:
    """The options the caller set (None means: the service's default)."""
    return {k: v for k, v in options.items() if v is not None}


def _model(model) -> dict:
    return model.to_dict() if hasattr(model, "to_dict") else dict(model)


class Lagwise:
    """Client of one Lagwise service.

    Parameters
    ----------
    base_url : str
        E.g. ``http://127.0.0.1:8750``.
    api_key : str, optional
        Sent as ``Authorization: Bearer <key>``.
    timeout : float, seconds
        Per-attempt timeout (connect and read).
    retries : int or RetryPolicy
        Retries on connection errors and on 429/502/503/504 (every computing
        endpoint is idempotent, so retrying is safe).
    session : requests.Session, optional
        Reused for every call (connection pooling); one is created by default.
    """

    def __init__(
        self,
        base_url: str,
        *,
        api_key: str | None = None,
        timeout: float = DEFAULT_TIMEOUT,
        retries: int | RetryPolicy = 3,
        session: requests.Session | None = None,
    ):
        if not base_url or "://" not in base_url:
            raise ValueError(f"base_url must be an http(s) URL such as http://127.0.0.1:8750, got {base_url!r}")
        self.base_url = base_url.rstrip("/")
        self.timeout = timeout
        self.retry = retries if isinstance(retries, RetryPolicy) else RetryPolicy(retries=retries)
        self.session = session or requests.Session()
        self.session.headers["Accept"] = "application/json, application/problem+json"
        if api_key:
            self.session.headers["Authorization"] = f"Bearer {api_key}"

    def __enter__(self) -> Lagwise:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def close(self) -> None:
        """Close pooled connections."""
        self.session.close()

    def __repr__(self) -> str:
        return f"Lagwise({self.base_url!r})"

    # ---- transport ---------------------------------------------------------

    def request(self, method: str, path: str, body: dict | None = None) -> dict:
        """Send one request with retries; returns the JSON document or raises :class:`LagwiseError`."""
        request_id = uuid.uuid4().hex
        headers = {"X-Request-ID": request_id}
        data = None
        if body is not None:
            try:
                data = json.dumps(body, allow_nan=False, separators=(",", ":")).encode()
            except ValueError as exc:
                raise ValidationError(
                    f"the request holds NaN or Infinity, which JSON cannot carry: {exc}", request_id=request_id
                ) from None
            headers["Content-Type"] = "application/json"
        url = self.base_url + path
        attempt = 0
        while True:
            try:
                response = self.session.request(method, url, data=data, headers=headers, timeout=self.timeout)
            except (requests.ConnectionError, requests.Timeout, requests.exceptions.ChunkedEncodingError) as exc:
                # A connection broken mid-answer is retried too: every endpoint is idempotent.
                if attempt >= self.retry.retries:
                    raise TransportError(
                        f"no answer from {url} after {attempt + 1} attempts: {exc}", request_id=request_id
                    ) from exc
                self.retry.sleep(self.retry.delay(attempt))
                attempt += 1
                continue
            if response.status_code in RETRY_STATUSES and attempt < self.retry.retries:
                self.retry.sleep(self.retry.delay(attempt, response.headers.get("Retry-After")))
                attempt += 1
                continue
            return self._document(response, request_id)

    @staticmethod
    def _document(response: requests.Response, request_id: str) -> dict:
        try:
            document = response.json()
        except ValueError:
            document = {"detail": response.text[:500] or response.reason}
        if response.status_code >= 400:
            raise error_for(response.status_code, document if isinstance(document, dict) else {}, request_id)
        if not isinstance(document, dict):
            raise LagwiseError("unexpected response body", status=response.status_code, request_id=request_id)
        return document

    # ---- endpoints ---------------------------------------------------------

    def experimental_variogram(
        self,
        samples=None,
        *,
        x=None,
        y=None,
        z=None,
        values=None,
        ids=None,
        columns: Mapping[str, str] | None = None,
        lags: Mapping[str, Any] | None = None,
        directions: list[Mapping[str, Any]] | None = None,
        statistic: str | None = None,
        min_pairs: int | None = None,
        coordinates: str | None = None,
        duplicates: str | None = None,
        pairs_for_class: Mapping[str, int] | None = None,
    ) -> ExperimentalVariogram:
        """Experimental variogram per direction class (``POST /v1/experimental-variograms``).

        Samples come as a table (``samples``) or as columns (``x``, ``y``, ``z``,
        ``values``, ``ids``); options are those of the API and default on the service.
        """
        body = {"samples": samples_document(samples, x=x, y=y, z=z, values=values, ids=ids, columns=columns)}
        options = dict(
            lags=lags,
            directions=directions,
            statistic=statistic,
            min_pairs=min_pairs,
            coordinates=coordinates,
            duplicates=duplicates,
            pairs_for_class=pairs_for_class,
        )
        body.update(_given(options))
        return ExperimentalVariogram.from_response(self.request("POST", "/v1/experimental-variograms", body))

    def variogram_map(
        self,
        samples=None,
        *,
        cell_size: float,
        cells: int,
        x=None,
        y=None,
        z=None,
        values=None,
        ids=None,
        columns: Mapping[str, str] | None = None,
        statistic: str | None = None,
        coordinates: str | None = None,
        duplicates: str | None = None,
    ) -> VariogramMap:
        """Variogram map on (2 cells + 1)^2 square cells of side ``cell_size`` (``POST /v1/variogram-maps``)."""
        body = {
            "samples": samples_document(samples, x=x, y=y, z=z, values=values, ids=ids, columns=columns),
            "cell_size": cell_size,
            "cells": cells,
        }
        options = dict(statistic=statistic, coordinates=coordinates, duplicates=duplicates)
        body.update(_given(options))
        return VariogramMap.from_response(self.request("POST", "/v1/variogram-maps", body))

    def fit_model(
        self,
        samples=None,
        *,
        experimental: ExperimentalVariogram | Mapping[str, Any] | None = None,
        x=None,
        y=None,
        z=None,
        values=None,
        ids=None,
        columns: Mapping[str, str] | None = None,
        families: str | list[str] | None = None,
        nugget: str | float | None = None,
        weighting: str | None = None,
        anisotropy: str | None = None,
        structures: int | None = None,
        lags: Mapping[str, Any] | None = None,
        directions: list[Mapping[str, Any]] | None = None,
        statistic: str | None = None,
        min_pairs: int | None = None,
        coordinates: str | None = None,
        duplicates: str | None = None,
    ) -> ModelFit:
        """Fit variogram models (``POST /v1/model-fits``) to samples or to a previous experimental result.

        ``families`` is ``"auto"`` (default on the service) or a list of names; ``nugget`` is
        ``"fit"``, ``"none"`` or a fixed value; ``anisotropy="fit"`` fits azimuth and ratio
        jointly over the direction classes.
        """
        if experimental is not None:
            body: dict = {
                "experimental": experimental.to_dict() if hasattr(experimental, "to_dict") else dict(experimental)
            }
        else:
            body = {"samples": samples_document(samples, x=x, y=y, z=z, values=values, ids=ids, columns=columns)}
        options = dict(
            families=families,
            nugget=nugget,
            weighting=weighting,
            anisotropy=anisotropy,
            structures=structures,
            lags=lags,
            directions=directions,
            statistic=statistic,
            min_pairs=min_pairs,
            coordinates=coordinates,
            duplicates=duplicates,
        )
        body.update(_given(options))
        return ModelFit.from_response(self.request("POST", "/v1/model-fits", body))

    def cross_validate(
        self,
        samples=None,
        *,
        model: VariogramModel | Mapping[str, Any],
        x=None,
        y=None,
        z=None,
        values=None,
        ids=None,
        columns: Mapping[str, str] | None = None,
        kriging: Mapping[str, Any] | None = None,
        neighbourhood: Mapping[str, Any] | None = None,
        scheme: Mapping[str, Any] | None = None,
        outlier_threshold: float | None = None,
        coordinates: str | None = None,
        duplicates: str | None = None,
    ) -> CrossValidation:
        """Cross-validate kriging with ``model`` (``POST /v1/cross-validations``).

        ``kriging`` e.g. ``{"type": "ordinary"}``; ``neighbourhood`` e.g. ``{"max_points": 24}``
        (omit it for all samples); ``scheme`` ``{"type": "leave_one_out"}`` (default) or
        ``{"type": "k_fold", "folds": 10, "seed": 1}``.
        """
        body = {
            "samples": samples_document(samples, x=x, y=y, z=z, values=values, ids=ids, columns=columns),
            "model": _model(model),
        }
        options = dict(
            kriging=kriging,
            neighbourhood=neighbourhood,
            scheme=scheme,
            outlier_threshold=outlier_threshold,
            coordinates=coordinates,
            duplicates=duplicates,
        )
        body.update(_given(options))
        return CrossValidation.from_response(self.request("POST", "/v1/cross-validations", body))

    def predict(
        self,
        samples=None,
        *,
        model: VariogramModel | Mapping[str, Any],
        targets: Mapping[str, Any] | None = None,
        grid: Mapping[str, Any] | None = None,
        x=None,
        y=None,
        z=None,
        values=None,
        ids=None,
        columns: Mapping[str, str] | None = None,
        kriging: Mapping[str, Any] | None = None,
        neighbourhood: Mapping[str, Any] | None = None,
        return_weights: list[int] | None = None,
        coordinates: str | None = None,
        duplicates: str | None = None,
    ) -> Predictions:
        """Kriging estimates and variances (``POST /v1/predictions``) at ``targets``
        (``{"x": [...], "y": [...]}``) or on ``grid`` (``{"origin", "spacing", "shape"}``)."""
        body = {
            "samples": samples_document(samples, x=x, y=y, z=z, values=values, ids=ids, columns=columns),
            "model": _model(model),
        }
        if targets is not None:
            body["targets"] = {k: _column(v) for k, v in targets.items()}
        options = dict(
            grid=grid,
            kriging=kriging,
            neighbourhood=neighbourhood,
            return_weights=return_weights,
            coordinates=coordinates,
            duplicates=duplicates,
        )
        body.update(_given(options))
        return Predictions.from_response(self.request("POST", "/v1/predictions", body))

    def analyze(
        self,
        samples=None,
        *,
        x=None,
        y=None,
        z=None,
        values=None,
        ids=None,
        columns: Mapping[str, str] | None = None,
        transform: str | None = None,
        variogram: Mapping[str, Any] | None = None,
        fit: Mapping[str, Any] | None = None,
        cross_validation: Mapping[str, Any] | None = None,
        prediction: Mapping[str, Any] | None = None,
        figures: list[str] | None = None,
        figure_format: str | None = None,
        figure_size: tuple[int, int] | None = None,
        censoring: str | None = None,
        coordinates: str | None = None,
        duplicates: str | None = None,
    ) -> Analysis:
        """The whole chain in one call (``POST /v1/analyses``).

        ``variogram`` e.g. ``{"directions": "auto"}``; ``prediction`` ``{"grid": {...}}``;
        ``figures`` any of variogram, variogram_map, cross_validation, prediction_map.
        """
        body = {"samples": samples_document(samples, x=x, y=y, z=z, values=values, ids=ids, columns=columns)}
        options = dict(
            transform=transform,
            variogram=variogram,
            fit=fit,
            cross_validation=cross_validation,
            prediction=prediction,
            figures=figures,
            figure_format=figure_format,
            figure_size=list(figure_size) if figure_size else None,
            censoring=censoring,
            coordinates=coordinates,
            duplicates=duplicates,
        )
        body.update(_given(options))
        return Analysis.from_response(self.request("POST", "/v1/analyses", body))

    def model_families(self) -> list[dict]:
        """The model families with their parameters, units, bounds and validity (``GET /v1/model-families``)."""
        return self.request("GET", "/v1/model-families")["families"]

    def health(self) -> dict:
        """``GET /healthz``."""
        return self.request("GET", "/healthz")

    def ready(self) -> bool:
        """True when ``GET /readyz`` answers 200."""
        try:
            self.request("GET", "/readyz")
        except LagwiseError:
            return False
        return True
