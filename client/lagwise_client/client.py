"""The :class:`Lagwise` client."""

from __future__ import annotations

import json
import uuid
from collections.abc import Callable, Mapping
from typing import Any

import requests
from urllib3.exceptions import ReadTimeoutError  # urllib3 is requests' own transport

from . import columnar
from .errors import LagwiseError, ResponseError, TransportError, ValidationError, error_for
from .finite import DETAIL as NON_FINITE
from .finite import MAX_LISTED, non_finite_errors
from .joint import Cokriging, CokrigingCrossValidation, JointFit, JointModel, variables_samples
from .models import VariogramModel
from .results import (
    Analysis,
    CrossValidation,
    ExperimentalVariogram,
    ModelFit,
    Predictions,
    Response,
    SeveralVariograms,
    VariogramMap,
)
from .retry import RetryPolicy
from .samples import SAMPLE_MEMBERS, column, samples_document
from .simulation import Simulation

DEFAULT_TIMEOUT = 120.0

# Failures without an HTTP answer; a connection broken mid-answer counts as one.
NO_ANSWER = (requests.ConnectionError, requests.Timeout, requests.exceptions.ChunkedEncodingError)


def _is_read_timeout(exc: Exception) -> bool:
    """True when the request was sent and the answer did not come in time.

    requests raises ``ReadTimeout`` while waiting for the status line, and a ``ConnectionError``
    wrapping urllib3's ``ReadTimeoutError`` when the body stalls after the headers.
    """
    if isinstance(exc, requests.ReadTimeout):
        return True
    return isinstance(exc, requests.ConnectionError) and any(isinstance(a, ReadTimeoutError) for a in exc.args)


def _plain(value: Any) -> Any:
    """JSON form of numpy arrays (sample columns) and of numpy scalars that slipped into a list
    (``np.int64`` is not an ``int``)."""
    if hasattr(value, "tolist"):
        return value.tolist()
    if hasattr(value, "item"):
        return value.item()
    raise TypeError(f"a {type(value).__name__} value cannot be sent as JSON")


def _non_finite_refusal(
    errors: list[dict], total: int, request_id: str, why: str, unnamed: str = ""
) -> ValidationError:
    """The refusal of a request holding ``total`` NaN or Infinity values, the first ``errors`` listed
    (pointer and detail each), shaped as the service's invalid-input problem; ``why`` says who refuses
    them, ``unnamed`` stands for the pointers when none is known."""
    where = ", ".join(e["pointer"] for e in errors[:3]) + (", ..." if len(errors) > 3 else "")
    if total > 1:
        where = f"{total} values ({where})"
    detail = f"the request holds NaN or Infinity, which {why}: {where or unnamed}"
    problem: dict[str, Any] = {
        "type": "/problems/invalid-input",
        "title": "Invalid input",
        "detail": detail,
        "errors": errors,
    }
    if total > len(errors):
        problem["errors_omitted"] = total - len(errors)
    return ValidationError(detail, problem=problem, request_id=request_id)


def _encode(body: Mapping[str, Any], request_id: str) -> bytes:
    try:
        return json.dumps(body, allow_nan=False, separators=(",", ":"), default=_plain).encode()
    except ValueError as exc:
        errors, total = non_finite_errors(body)
        raise _non_finite_refusal(errors, total, request_id, "JSON cannot carry", str(exc)) from None


def _arrow_parts(body: Mapping[str, Any], table: Any, request_id: str) -> tuple[bytes, str]:
    """The multipart body (options as JSON, the samples' Arrow ``table``) and its Content-Type, after
    refusing NaN and Infinity in either part as :func:`_encode` does for a JSON body."""
    options = {name: value for name, value in body.items() if name != "samples"}
    prefix = "/samples"
    if columnar.raster(body["samples"]):  # the layout stays in the options, the values go as the stream
        options["samples"] = {"raster": {k: v for k, v in body["samples"]["raster"].items() if k != "values"}}
        prefix = "/samples/raster"
    pointers, total = columnar.non_finite(table, prefix, MAX_LISTED)
    errors = [{"pointer": p, "detail": NON_FINITE} for p in pointers]
    more, more_total = non_finite_errors(options, MAX_LISTED - len(errors))
    if total + more_total:
        raise _non_finite_refusal(errors + more, total + more_total, request_id, "the service refuses")
    return columnar.multipart_body(_encode(options, request_id), columnar.table_stream(table))


def _model(model: VariogramModel | JointModel | Mapping[str, Any]) -> dict:
    return model.to_dict() if isinstance(model, VariogramModel | JointModel) else dict(model)


def _experimental(experimental: Response | Mapping[str, Any]) -> dict:
    """A previous experimental response (typed or as its document) as its document."""
    return experimental.to_dict() if isinstance(experimental, Response) else dict(experimental)


def _targets(targets: Mapping[str, Any]) -> dict:
    return {name: column(values) for name, values in targets.items()}


# Arguments sent in another form than the caller gave them.
CONVERSIONS: dict[str, Callable[[Any], Any]] = {
    "model": _model,
    "experimental": _experimental,
    "targets": _targets,
    "figure_size": list,
}
SAMPLE_ARGUMENTS = frozenset({"self", "samples", "columns", *SAMPLE_MEMBERS})
# Arguments that shape how the client talks, not what it asks: never sent as members.
CLIENT_ARGUMENTS = frozenset({"arrow_answer"})
# Arguments of the joint methods that build the samples member rather than being sent as they are.
JOINT_ARGUMENTS = frozenset({"self", "samples", "variables", "columns"})


def request_body(arguments: Mapping[str, Any]) -> dict:
    """The JSON body of a computing request from an endpoint method's arguments.

    ``samples``, ``columns`` and the sample members (``x`` ... ``detection_limits``) become the
    ``samples`` member (see :func:`samples_document`); every other argument that is not None
    is sent under its own name (None means: the service's default).
    """
    members = {name: arguments.get(name) for name in SAMPLE_MEMBERS}
    sample_set = samples_document(arguments.get("samples"), columns=arguments.get("columns"), arrays=True, **members)
    body: dict[str, Any] = {"samples": sample_set} if sample_set else {}
    for name, value in arguments.items():
        if name in SAMPLE_ARGUMENTS or name in CLIENT_ARGUMENTS or value is None:
            continue
        convert = CONVERSIONS.get(name)
        body[name] = convert(value) if convert else value
    return body


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
        Retries on connection errors and on 429/502/503/504, never on a 503
        ``deadline-exceeded``; read timeouts of computing requests only with
        ``RetryPolicy(retry_read_timeouts=True)`` (see :mod:`lagwise_client.retry`).
    session : requests.Session, optional
        Reused for every call (connection pooling); one is created by default.
    arrow_above : int or None
        With pyarrow installed, columnar samples of at least this many samples (default
        20,000, about 1 MB of JSON), and rasters of at least this many cells, are sent as an
        Arrow stream in a multipart request (see :mod:`lagwise_client.columnar`); None sends
        JSON always. Results are the same.
    """

    def __init__(
        self,
        base_url: str,
        *,
        api_key: str | None = None,
        timeout: float = DEFAULT_TIMEOUT,
        retries: int | RetryPolicy = 3,
        session: requests.Session | None = None,
        arrow_above: int | None = columnar.ARROW_SAMPLES,
    ):
        if not base_url or "://" not in base_url:
            raise ValueError(f"base_url must be an http(s) URL such as http://127.0.0.1:8750, got {base_url!r}")
        self.base_url = base_url.rstrip("/")
        self.timeout = timeout
        self.retry = retries if isinstance(retries, RetryPolicy) else RetryPolicy(retries=retries)
        self.session = session or requests.Session()
        self.arrow_above = arrow_above
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

    # ---- the one request path ----------------------------------------------

    def _arrow_table(self, body: Mapping[str, Any]) -> Any:
        """The Arrow table of the body's samples when they are to go as Arrow (see ``arrow_above``), else None."""
        samples = body.get("samples")
        if self.arrow_above is None or samples is None or not columnar.available():
            return None
        if columnar.raster(samples):
            values = samples["raster"]["values"]
            return columnar.raster_table(values) if len(values) >= self.arrow_above else None
        if not columnar.columnar(samples) or len(samples["values"]) < self.arrow_above:
            return None
        return columnar.samples_table(samples)

    def request(
        self, method: str, path: str, body: Mapping[str, Any] | None = None, *, arrow_answer: bool = False
    ) -> dict:
        """Send one request with retries; returns the JSON document or raises :class:`LagwiseError`.

        Every attempt carries the same ``X-Request-ID``. ``POST`` requests compute: their read
        timeouts are retried only with ``RetryPolicy(retry_read_timeouts=True)``. Large columnar
        samples go as an Arrow stream (``arrow_above``); ``arrow_answer`` asks for an Arrow answer
        (needs pyarrow), returned as the same document as the JSON answer.
        """
        request_id = uuid.uuid4().hex
        headers = {"X-Request-ID": request_id}
        data = None
        if body is not None:
            table = self._arrow_table(body)
            if table is not None:
                data, headers["Content-Type"] = _arrow_parts(body, table, request_id)
            else:
                data = _encode(body, request_id)
                headers["Content-Type"] = "application/json"
        if arrow_answer:
            headers["Accept"] = f"{columnar.ARROW_MEDIA_TYPE}, application/problem+json"
        url = self.base_url + path
        computing = method.upper() == "POST"
        attempt = 0
        while True:
            try:
                response = self.session.request(method, url, data=data, headers=headers, timeout=self.timeout)
            except NO_ANSWER as exc:
                read_timeout = _is_read_timeout(exc)
                if attempt < self.retry.retries and self.retry.retries_failure(
                    read_timeout=read_timeout, computing=computing
                ):
                    self.retry.sleep(self.retry.delay(attempt))
                    attempt += 1
                    continue
                raise TransportError(
                    self._no_answer(url, attempt, exc, read_timeout, computing), request_id=request_id
                ) from exc
            if response.status_code < 400 and response.headers.get("Content-Type") == columnar.ARROW_MEDIA_TYPE:
                return columnar.answer_document(response.content)
            document = self._read(response)
            if response.status_code < 400:
                if not isinstance(document, dict):
                    raise ResponseError(
                        f"{url} answered {response.status_code} without a JSON object",
                        status=response.status_code,
                        request_id=request_id,
                    )
                return document
            problem = document if isinstance(document, dict) else {"detail": str(document)[:500]}
            if attempt < self.retry.retries and self.retry.retries_status(response.status_code, problem.get("type")):
                self.retry.sleep(self.retry.delay(attempt, response.headers.get("Retry-After")))
                attempt += 1
                continue
            raise error_for(response.status_code, problem, request_id)

    def _no_answer(self, url: str, attempt: int, exc: Exception, read_timeout: bool, computing: bool) -> str:
        if read_timeout and computing and not self.retry.retry_read_timeouts:
            return (
                f"no answer from {url} within {self.timeout} s after {attempt + 1} attempts; not resent, since "
                f"the service is probably still computing (raise timeout, or retry with "
                f"RetryPolicy(retry_read_timeouts=True)): {exc}"
            )
        return f"no answer from {url} after {attempt + 1} attempts: {exc}"

    @staticmethod
    def _read(response: requests.Response) -> Any:
        """The JSON body, or for a body that is not JSON a problem-like document with its text."""
        try:
            return response.json()
        except ValueError:
            return {"detail": response.text[:500] or response.reason}

    def _compute(self, path: str, result: Any, arguments: Mapping[str, Any]) -> Any:
        """POST the body built from an endpoint method's ``arguments`` and read the result.

        Each endpoint method's keyword names are the request's member names, so the method
        passes ``locals()`` and its signature is the one definition of what it sends.
        """
        answer = bool(arguments.get("arrow_answer"))
        return result.from_response(self.request("POST", path, request_body(arguments), arrow_answer=answer))

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
        censored=None,
        detection_limits=None,
        columns: Mapping[str, Any] | None = None,
        lags: Mapping[str, Any] | None = None,
        directions: list[Mapping[str, Any]] | None = None,
        statistic: str | None = None,
        min_pairs: int | None = None,
        censoring: str | None = None,
        coordinates: str | None = None,
        duplicates: str | None = None,
        pairs_for_class: Mapping[str, int] | None = None,
        method: str | None = None,
        tolerance: float | None = None,
        variable: str | None = None,
    ) -> ExperimentalVariogram | SeveralVariograms:
        """Experimental variogram per direction class (``POST /v1/experimental-variograms``).

        With several value columns (``columns={"values": ["lead", "zinc"]}``) or a samples
        document with ``variables``, the result is a :class:`SeveralVariograms` (every direct
        and cross variogram, tidy DataFrames per variable and pair), unless ``variable`` names
        the one to use.

        Samples come as a table (``samples``, see :func:`samples_document`), as a raster
        (``samples=raster_samples(grid, origin, spacing)``) or as columns (``x``, ``y``, ``z``,
        ``values``, ``ids``, ``censored``, ``detection_limits``); options are those of the API
        (``method``: ``exact``, ``grid`` or ``auto``) and default on the service.
        """
        return self._compute("/v1/experimental-variograms", ExperimentalVariogram, locals())

    def variogram_map(
        self,
        samples=None,
        *,
        cell_size: float | None = None,
        cells: int | None = None,
        x=None,
        y=None,
        z=None,
        values=None,
        ids=None,
        censored=None,
        detection_limits=None,
        columns: Mapping[str, Any] | None = None,
        statistic: str | None = None,
        censoring: str | None = None,
        coordinates: str | None = None,
        duplicates: str | None = None,
        variable: str | None = None,
        method: str | None = None,
        tolerance: float | None = None,
    ) -> VariogramMap:
        """Variogram map on (2 cells + 1)^2 square cells of side ``cell_size`` (``POST /v1/variogram-maps``).

        The service chooses ``cell_size`` and ``cells`` from the samples' spacing when they are omitted.
        ``method``: ``exact``, ``grid`` (binned on a fine grid, by FFT; the result carries ``error_bound``,
        ``pair_bound`` and ``bound_exceeded`` per cell, flagged above ``tolerance``) or ``auto``.
        """
        return self._compute("/v1/variogram-maps", VariogramMap, locals())

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
        censored=None,
        detection_limits=None,
        columns: Mapping[str, Any] | None = None,
        families: str | list[str] | None = None,
        nugget: str | float | None = None,
        weighting: str | None = None,
        anisotropy: str | None = None,
        structures: int | None = None,
        transform: str | None = None,
        lags: Mapping[str, Any] | None = None,
        directions: list[Mapping[str, Any]] | None = None,
        statistic: str | None = None,
        min_pairs: int | None = None,
        censoring: str | None = None,
        coordinates: str | None = None,
        duplicates: str | None = None,
        variable: str | None = None,
    ) -> ModelFit:
        """Fit variogram models (``POST /v1/model-fits``) to samples or to a previous experimental result.

        ``families`` is ``"auto"`` (default on the service) or a list of names; ``nugget`` is
        ``"fit"``, ``"none"`` or a fixed value; ``anisotropy="fit"`` fits azimuth and ratio
        jointly over the direction classes. ``transform`` (samples only) fits to the transformed
        values; the model echoes it, so predictions with it back-transform.
        """
        return self._compute("/v1/model-fits", ModelFit, locals())

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
        censored=None,
        detection_limits=None,
        columns: Mapping[str, Any] | None = None,
        kriging: Mapping[str, Any] | None = None,
        neighbourhood: Mapping[str, Any] | None = None,
        scheme: Mapping[str, Any] | None = None,
        outlier_threshold: float | None = None,
        transform: str | None = None,
        censoring: str | None = None,
        coordinates: str | None = None,
        duplicates: str | None = None,
        variable: str | None = None,
    ) -> CrossValidation:
        """Cross-validate kriging with ``model`` (``POST /v1/cross-validations``).

        ``kriging`` e.g. ``{"type": "ordinary"}``; ``neighbourhood`` e.g. ``{"max_points": 24}``
        (omit it for all samples); ``scheme`` ``{"type": "leave_one_out"}`` (default) or
        ``{"type": "k_fold", "folds": 10, "seed": 1}``. ``transform`` (``log``,
        ``normal_score``; default: the model's) krige the transformed values; errors come
        back in original units, standardized errors in the transformed space.
        """
        return self._compute("/v1/cross-validations", CrossValidation, locals())

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
        censored=None,
        detection_limits=None,
        columns: Mapping[str, Any] | None = None,
        kriging: Mapping[str, Any] | None = None,
        neighbourhood: Mapping[str, Any] | None = None,
        return_weights: list[int] | None = None,
        transform: str | None = None,
        thresholds: list[float] | None = None,
        blocks: Mapping[str, Any] | None = None,
        censoring: str | None = None,
        coordinates: str | None = None,
        duplicates: str | None = None,
        arrow_answer: bool = False,
        variable: str | None = None,
    ) -> Predictions:
        """Kriging estimates and variances (``POST /v1/predictions``) at ``targets``
        (``{"x": [...], "y": [...]}``) or on ``grid`` (``{"origin", "spacing", "shape"}``).

        ``transform`` (default: the model's) krige transformed values and back-transform;
        ``thresholds`` (original units) add P(value > t) per target (``exceedance_grid``);
        ``blocks={"size": [bx, by], "discretisation": [nx, ny]}`` estimate block averages
        (no transform).

        ``arrow_answer=True`` (needs pyarrow) has the service answer the per-target columns as an
        Arrow stream, which is quicker for many targets; the result is the same."""
        return self._compute("/v1/predictions", Predictions, locals())

    def simulate(
        self,
        samples=None,
        *,
        model: VariogramModel | Mapping[str, Any],
        grid: Mapping[str, Any],
        x=None,
        y=None,
        values=None,
        ids=None,
        censored=None,
        detection_limits=None,
        columns: Mapping[str, Any] | None = None,
        transform: str | None = None,
        kriging: Mapping[str, Any] | None = None,
        neighbourhood: Mapping[str, Any] | None = None,
        realisations: int | None = None,
        seed: int | None = None,
        thresholds: list[float] | None = None,
        blocks: Mapping[str, Any] | None = None,
        return_realisations: bool | None = None,
        censoring: str | None = None,
        coordinates: str | None = None,
        duplicates: str | None = None,
        arrow_answer: bool = False,
    ) -> Simulation:
        """Gaussian conditional simulation on a 2-D ``grid`` (``POST /v1/simulations``).

        ``model`` is in transformed units (normal scores by default); ``kriging`` is
        ``{"type": "simple", "mean": m}`` (default, mean: the declustered mean of the
        transformed values) or ``{"type": "ordinary"}``; ``blocks={"size": [bx, by]}`` in
        coordinate units tiling the grid. The service's defaults: 100 realisations, seed 1.
        The result converts to 2-D numpy arrays per node statistic, threshold and realisation.

        ``arrow_answer=True`` (needs pyarrow) has the service answer the per-node columns (and the
        realisations) as an Arrow stream; the result is the same."""
        return self._compute("/v1/simulations", Simulation, locals())

    def _joint(self, path: str, result: Any, arguments: Mapping[str, Any]) -> Any:
        """POST a several-variable request built from a joint method's ``arguments`` and read the result.

        As for :meth:`_compute`, each keyword is the request member of the same name (None: the
        service's default); ``samples`` with ``variables`` is a table sent through
        :func:`variables_samples` (``columns`` naming its coordinate columns), without
        ``variables`` an already built samples document; ``model`` may be a :class:`JointModel`.
        """
        body: dict[str, Any] = {}
        samples, variables = arguments.get("samples"), arguments.get("variables")
        if samples is not None:
            columns = dict(arguments.get("columns") or {})
            body["samples"] = samples if variables is None else variables_samples(samples, variables, **columns)
        for name, value in arguments.items():
            if name in JOINT_ARGUMENTS or value is None:
                continue
            convert = CONVERSIONS.get(name)
            body[name] = convert(value) if convert else value
        return result.from_response(self.request("POST", path, body))

    def fit_joint_model(
        self,
        samples=None,
        *,
        experimental: SeveralVariograms | Mapping[str, Any] | None = None,
        variables: list[str] | None = None,
        columns: Mapping[str, str | None] | None = None,
        lags: Mapping[str, Any] | None = None,
        directions: list[Mapping[str, Any]] | None = None,
        families: str | list[str] | None = None,
        nugget: str | None = None,
        weighting: str | None = None,
        anisotropy: str | None = None,
        structures: int | None = None,
        min_pairs: int | None = None,
        coordinates: str | None = None,
        duplicates: str | None = None,
    ) -> JointFit:
        """Fit a joint model of several variables (``POST /v1/model-fits``).

        Give ``samples`` (a table whose ``variables`` columns are sent, as for :meth:`cokrige`, or a
        samples document with several variables; ``lags`` and ``directions`` shape the direct and
        cross variograms computed first) or ``experimental``, a several-variable experimental
        response (a :class:`SeveralVariograms` or its document: its ``variables`` and ``cross``). ``nugget`` is ``"fit"`` (default) or ``"none"``;
        ``weighting`` ``pairs``, ``pairs_over_distance`` or ``uniform``.
        """
        if (samples is None) == (experimental is None):
            raise TypeError("give samples or experimental, not both")
        return self._joint("/v1/model-fits", JointFit, locals())

    def cokrige(
        self,
        samples,
        *,
        model: JointModel | Mapping[str, Any],
        primary: str | None = None,
        variables: list[str] | None = None,
        columns: Mapping[str, str | None] | None = None,
        targets: Mapping[str, Any] | None = None,
        grid: Mapping[str, Any] | None = None,
        kriging: Mapping[str, Any] | None = None,
        neighbourhood: Mapping[str, Any] | None = None,
        coordinates: str | None = None,
        duplicates: str | None = None,
    ) -> Cokriging:
        """Cokriging of ``primary`` from every variable of the joint ``model`` (``POST /v1/predictions``).

        ``samples`` is a table (mapping of columns or DataFrame) whose ``variables`` columns are
        sent (NaN or None where not measured; ``columns`` names the x, y, z and ids columns, default
        ``x`` and ``y``), or an already built samples document when ``variables`` is None.
        ``kriging`` ``{"type": "ordinary"}`` (default) or ``{"type": "simple", "means": {...}}``.
        The result's ``cokriging`` shows the variance with and without the secondaries.
        """
        return self._joint("/v1/predictions", Cokriging, locals())

    def cross_validate_cokriging(
        self,
        samples,
        *,
        model: JointModel | Mapping[str, Any],
        primary: str | None = None,
        variables: list[str] | None = None,
        columns: Mapping[str, str | None] | None = None,
        kriging: Mapping[str, Any] | None = None,
        neighbourhood: Mapping[str, Any] | None = None,
        scheme: Mapping[str, Any] | None = None,
        outlier_threshold: float | None = None,
        coordinates: str | None = None,
        duplicates: str | None = None,
    ) -> CokrigingCrossValidation:
        """Cross-validation of ``primary`` by cokriging (``POST /v1/cross-validations``); samples as
        for :meth:`cokrige`. Only primary values are left out."""
        return self._joint("/v1/cross-validations", CokrigingCrossValidation, locals())

    def analyze(
        self,
        samples=None,
        *,
        x=None,
        y=None,
        z=None,
        values=None,
        ids=None,
        censored=None,
        detection_limits=None,
        columns: Mapping[str, Any] | None = None,
        transform: str | None = None,
        variogram: Mapping[str, Any] | None = None,
        fit: Mapping[str, Any] | None = None,
        cross_validation: Mapping[str, Any] | None = None,
        prediction: Mapping[str, Any] | None = None,
        figures: list[str] | None = None,
        figure_format: str | None = None,
        figure_size: tuple[int, int] | None = None,
        figure_colour_scale: str | None = None,
        variable: Mapping[str, Any] | None = None,
        coordinate_unit: str | None = None,
        censoring: str | None = None,
        coordinates: str | None = None,
        duplicates: str | None = None,
        thresholds: list[float] | None = None,
        blocks: Mapping[str, Any] | None = None,
        variogram_map: Mapping[str, Any] | None = None,
    ) -> Analysis:
        """The whole chain in one call (``POST /v1/analyses``).

        ``variogram`` e.g. ``{"directions": "auto"}``; ``prediction`` ``{"grid": {...},
        "thresholds": [...], "blocks": {...}, "simulation": {"realisations": 100, "blocks":
        {"size": [bx, by]}}}``; ``thresholds`` and ``blocks`` given here go into ``prediction``;
        ``figures`` any of variogram, variogram_map, cross_validation, prediction_map,
        standard_deviation_map, probability_map; ``variable`` ``{"name": "lead", "unit":
        "mg/kg"}`` and ``coordinate_unit`` (e.g. ``"m"``) label the figures;
        ``figure_colour_scale`` auto, linear, log or quantile; ``variogram_map`` ``{"method":
        "auto" | "exact" | "grid", "tolerance": 0.01}`` for the variogram_map figure (the
        method used is in ``parameters["variogram_map"]``).
        """
        arguments = dict(locals())
        staged = {k: v for k in ("thresholds", "blocks") if (v := arguments.pop(k)) is not None}
        if staged:
            if prediction is None:
                raise ValueError("thresholds and blocks belong to the prediction stage: give prediction={'grid': ...}")
            arguments["prediction"] = {**prediction, **staged}
        return self._compute("/v1/analyses", Analysis, arguments)

    def model_families(self) -> list[dict]:
        """The model families with their parameters, units, bounds and validity (``GET /v1/model-families``)."""
        document = self.request("GET", "/v1/model-families")
        if not isinstance(document.get("families"), list):
            raise ResponseError("the model-families answer has no families list")
        return document["families"]

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
