"""The client: one method per endpoint, typed results, errors from ``curvewise_client.errors``."""

from __future__ import annotations

from collections.abc import Iterable, Iterator, Mapping, Sequence
from typing import Any

from curvewise_client.bodies import (
    document,
    drop_none,
    encode,
    fit_body,
    iterable_series,
    numbers,
    series_body,
    shared_members,
    strings,
)
from curvewise_client.calls import Caller
from curvewise_client.errors import InputError, ProtocolError
from curvewise_client.results import (
    BatchResult,
    Estimates,
    Families,
    Figure,
    FitResult,
    Predictions,
    build,
    freeze,
)
from curvewise_client.streaming import BatchStream

NDJSON = "application/x-ndjson"
IMAGE_TYPES = {"png": "image/png", "svg": "image/svg+xml"}


class Client(Caller):
    """Talk to one Curvewise service.

    Parameters
    ----------
    base_url : str
        For example ``"http://127.0.0.1:8000"``.
    token : str, optional
        Sent as ``Authorization: Bearer <token>`` when the service has auth on.
    timeout : float
        Seconds allowed for connecting and for each wait for data.
    retries : int
        Extra attempts after a failure that is safe to repeat (see
        :mod:`curvewise_client.errors`): a 503, a failed connection, a GET timeout.
    backoff : float
        First pause between attempts in seconds; doubles each time up to ``backoff_cap``.
    transport : object, optional
        Defaults to :class:`~curvewise_client.transport.HTTPTransport`; pass
        ``WSGITransport(app)`` to call an app in-process.
    """

    def __repr__(self) -> str:
        auth = ", token=***" if self.token else ""
        return (f"Client({self.base_url!r}{auth}, timeout={self.timeout}, "
                f"retries={self.retries}, transport={type(self.transport).__name__})")

    # -- endpoints: every keyword is a wire member (a misspelt one is a TypeError, unsent) ---

    def fit(self, x: Sequence[float], y: Sequence[float], *, weights: Sequence[float] | None = None,
            model: Mapping[str, Any] | None = None, degree: int | None = None,
            max_degree: int | None = None, select: str | None = None,
            grid: Mapping[str, Any] | None = None, level: float | None = None,
            missing: str | None = None, weighting: str | None = None,
            include: Sequence[str] | None = None) -> FitResult:
        """Fit one series (``POST /v1/fit``).

        ``degree``, ``max_degree`` and ``select`` are shortcuts merged into ``model``;
        the other keywords are the request members of the same name.
        """
        body = fit_body(x, y, weights=weights, model=model, degree=degree,
                        max_degree=max_degree, select=select, grid=grid, level=level,
                        missing=missing, weighting=weighting, include=include)
        return build(FitResult, self._json("POST", "/v1/fit", body))

    def plot(self, x: Sequence[float], y: Sequence[float], *,
             panels: Sequence[str] | None = None, format: str = "png",
             width: int | None = None, height: int | None = None, dpi: int | None = None,
             simultaneous: bool | None = None, title: str | None = None,
             x_label: str | None = None, y_label: str | None = None,
             x_scale: str | None = None,
             weights: Sequence[float] | None = None, model: Mapping[str, Any] | None = None,
             degree: int | None = None, max_degree: int | None = None,
             select: str | None = None, grid: Mapping[str, Any] | None = None,
             level: float | None = None, missing: str | None = None,
             weighting: str | None = None, include: Sequence[str] | None = None) -> Figure:
        """Render a figure of a fit (``POST /v1/plot``); the fit keywords as for :meth:`fit`.

        Panels: ``fit``, ``studentized_residuals``, ``influence``, ``spread``,
        ``half_normal``, ``selection`` (default ``["fit"]``); sizes in pixels (left out,
        the figure grows to fit its panels); ``x_scale="log"`` draws x on a log axis (points
        at x <= 0 are fitted but not drawn: ``Figure.points_not_drawn`` counts them).
        """
        if format not in IMAGE_TYPES:
            raise InputError(f"format must be one of {sorted(IMAGE_TYPES)}, not {format!r}")
        plot = {"format": format, "panels": strings(panels, "panels"),
                "width": width, "height": height, "dpi": dpi, "simultaneous": simultaneous,
                "title": title, "x_label": x_label, "y_label": y_label, "x_scale": x_scale}
        body = fit_body(x, y, weights=weights, model=model, degree=degree,
                        max_degree=max_degree, select=select, grid=grid, level=level,
                        missing=missing, weighting=weighting, include=include)
        body["plot"] = {k: v for k, v in plot.items() if v is not None}
        response = self._request("POST", "/v1/plot", encode(body), accept=IMAGE_TYPES[format])
        data = response.read()
        if not response.content_type.startswith("image/"):
            raise ProtocolError(f"/v1/plot answered {response.content_type!r}, not an image")
        hidden = response.headers.get("x-points-not-drawn")
        return Figure(content_type=response.content_type, data=data,
                      points_not_drawn=None if hidden is None else int(hidden))

    def batch(self, series: Iterable[Mapping[str, Any]], *,
              model: Mapping[str, Any] | None = None, detail: str | None = None,
              level: float | None = None, missing: str | None = None,
              weighting: str | None = None, include: Sequence[str] | None = None,
              grid: Mapping[str, Any] | None = None) -> BatchResult:
        """Fit many series in one JSON call (``POST /v1/batch``), results in order.

        Each series is a mapping with ``id``, ``x``, ``y`` and optionally ``weights`` and
        ``model``; the keywords are the shared request members of the same name.
        """
        body = {"series": [series_body(s, i) for i, s in enumerate(iterable_series(series))],
                **shared_members(model=model, detail=detail, level=level, missing=missing,
                                 weighting=weighting, include=include, grid=grid)}
        return build(BatchResult, self._json("POST", "/v1/batch", body))

    def batch_stream(self, series: Iterable[Mapping[str, Any]], *,
                     model: Mapping[str, Any] | None = None, detail: str | None = None,
                     level: float | None = None, missing: str | None = None,
                     weighting: str | None = None, include: Sequence[str] | None = None,
                     grid: Mapping[str, Any] | None = None) -> BatchStream:
        """Stream series as NDJSON and yield each result as it arrives (never retried).

        ``series`` may be any iterator (a generator reading a huge file): it is
        consumed lazily while results come back. Shared options (``model``,
        ``detail``...) travel in the first line as ``{"options": {...}}``.
        """
        shared = shared_members(model=model, detail=detail, level=level, missing=missing,
                                weighting=weighting, include=include, grid=grid)
        series = iterable_series(series)
        first_line = encode({"options": shared}) + b"\n" if shared else b""

        def lines() -> Iterator[bytes]:
            if first_line:
                yield first_line
            for position, item in enumerate(series):
                yield encode(series_body(item, position)) + b"\n"

        response = self._request("POST", "/v1/batch", lines(), content_type=NDJSON,
                                 accept=NDJSON, retry=False)
        if response.content_type != NDJSON:
            response.close()
            raise ProtocolError(f"/v1/batch answered {response.content_type!r}, not NDJSON")
        return BatchStream(response)

    def batch_frame(self, data: Any, *, id: str = "id", x: str = "x", y: str = "y",  # noqa: A002
                    weight: str | None = None, model: Mapping[str, Any] | None = None,
                    options: Mapping[str, Any] | None = None):
        """Fit one curve per ``id`` of a long table, sent as Arrow; a tidy DataFrame back.

        ``data`` is a pandas DataFrame or a pyarrow Table with one row per point; ``id``,
        ``x``, ``y`` and ``weight`` name its columns (ids strings or integers; rows in any
        order, the points of a series in their row order). ``model`` and ``options``
        (``level``, ``missing``, ``weighting``) are the JSON batch's shared members.
        Returns one row per series, in order of each id's first row, one scalar per cell
        (``coef_0``, ``se_0``, ..., ``flag_codes``, ``error_code``...: see
        :mod:`curvewise_client.arrow`); a series that cannot be fitted is a row with
        ``status == "error"``, never an exception. Needs the ``arrow`` extra.
        """
        from curvewise_client import arrow

        body = arrow.encode_long(data, id=id, x=x, y=y, weight=weight)
        path = "/v1/batch" + arrow.options_query(model, options)
        response = self._request("POST", path, body, content_type=arrow.ARROW_STREAM,
                                 accept=arrow.ARROW_STREAM)
        payload = response.read()
        if response.content_type != arrow.ARROW_STREAM:
            raise ProtocolError(f"/v1/batch answered {response.content_type!r}, not Arrow")
        return arrow.decode_tidy(payload, id=id)

    def predict(self, fitted_model: Mapping[str, Any] | FitResult, x: Sequence[float], *,
                level: float | None = None, replicates: int | None = None,
                weights: Sequence[float] | None = None) -> Predictions:
        """Predict at new x with a stored fitted-model document (``POST /v1/predict``).

        ``fitted_model`` is a :class:`FitResult` or its ``fitted_model`` (as stored, e.g.
        after ``json.loads``). ``replicates`` = m widens the observation band to cover the
        mean of m future observations (default 1). ``weights`` (one per x) is the weight a
        new observation there carries on the fit's weight scale, its variance
        sigma^2 / weight (e.g. 1/y^2 for a fit weighted 1/y^2; default 1).
        """
        body = {"fitted_model": document(fitted_model), "x": numbers(x, "x"),
                **drop_none(level=level, replicates=replicates,
                            weights=None if weights is None else numbers(weights, "weights"))}
        return build(Predictions, self._json("POST", "/v1/predict", body))

    def invert(self, fitted_model: Mapping[str, Any] | FitResult, y: Sequence[float], *,
               replicates: int | Sequence[int] | None = None, level: float | None = None,
               detection_alpha: float | None = None, detection_beta: float | None = None,
               cv_limit: float | None = None, weights: Sequence[float] | None = None
               ) -> Estimates:
        """Read x back from observed y (``POST /v1/invert``).

        ``replicates`` is one count for every reading or one per reading; ``weights`` (one
        per reading, default 1) is each reading's weight on the fit's weight scale, its
        variance sigma^2 / weight; the detection and working-range keywords are the request
        members of the same name.
        """
        if replicates is not None and not isinstance(replicates, int):
            replicates = (numbers([replicates], "replicates")[0]   # one numpy count for all
                          if getattr(replicates, "ndim", None) == 0
                          else numbers(replicates, "replicates"))
        body = {"fitted_model": document(fitted_model), "y": numbers(y, "y"),
                **drop_none(replicates=replicates, level=level,
                            detection_alpha=detection_alpha, detection_beta=detection_beta,
                            cv_limit=cv_limit,
                            weights=None if weights is None else numbers(weights, "weights"))}
        return build(Estimates, self._json("POST", "/v1/invert", body))

    def families(self) -> Families:
        """Model families, their options and the service limits (``GET /v1/families``)."""
        return build(Families, self._json("GET", "/v1/families"))

    def health(self) -> Mapping[str, Any]:
        """Liveness (``GET /healthz``)."""
        return freeze(self._json("GET", "/healthz"))
