"""What the client accepts and refuses before sending anything.

Accepted: lists, tuples, numpy arrays and scalars, pandas Series of plain and nullable dtypes
(Float64, Int64), with missing values (None, NaN, pd.NA, pd.NaT, numpy NaT) sent as null.
Refused: every argument the client cannot send raises an ``InputError`` (a
``CurvewiseError`` and a ``ValueError``); a misspelt keyword is Python's ``TypeError``.
Neither sends a request. The fit with missing values dropped is checked against numpy's
least-squares polynomial fit (``numpy.polyfit``) of the complete rows.
"""

from __future__ import annotations

import inspect
import json
import math

import numpy as np
import pandas as pd
import pytest
from curvewise_client import Client, CurvewiseError, FitResult, InputError, WSGITransport


class RecordingApp:
    """A WSGI app that records each request body and answers a fixed JSON object."""

    def __init__(self, answer: dict | None = None):
        self.bodies: list[bytes] = []
        self.answer = json.dumps(answer or {"predictions": []}).encode()

    def __call__(self, environ, start_response):
        self.bodies.append(environ["wsgi.input"].read())
        start_response("200 OK", [("Content-Type", "application/json")])
        return [self.answer]


def _client(app) -> Client:
    return Client("http://t", transport=WSGITransport(app))


def _sent(values) -> list:
    app = RecordingApp()
    _client(app).predict({"schema_version": 1}, values)
    return json.loads(app.bodies[0])["x"]


@pytest.mark.parametrize("values, expected", [
    (pd.Series([1.5, pd.NA, 3.0], dtype="Float64"), [1.5, None, 3.0]),
    (pd.Series([1, pd.NA, 3], dtype="Int64"), [1, None, 3]),
    (pd.array([2, None], dtype="Int64"), [2, None]),
    (pd.Series([1.0, None, np.nan]), [1.0, None, None]),
    (pd.Series([1.0, pd.NaT, None], dtype=object), [1.0, None, None]),
    ([np.float64(0.1), np.int64(2), np.float32(0.5), pd.NA, np.datetime64("NaT")],
     [0.1, 2, 0.5, None, None]),
    (np.array([0.25, np.nan], dtype=np.float32), [0.25, None]),
    (np.ma.masked_array([1.0, 2.0], mask=[False, True]), [1.0, None]),
    ((1, 2.5), [1, 2.5]),
    (range(3), [0, 1, 2]),
])
def test_array_likes_are_sent_as_plain_numbers_with_missing_as_null(values, expected):
    assert _sent(values) == expected



@pytest.mark.parametrize("count", [np.int64(3), np.int32(3), np.array(3)])
def test_one_numpy_count_for_every_reading_is_sent_as_a_number(count):
    # /v1/invert takes replicates as "one integer for all" (docs/fitted-model.md); the
    # README says numpy scalars are sent as plain numbers
    app = RecordingApp()
    _client(app).invert({"n": 1}, [1.0, 2.0], replicates=count)
    assert json.loads(app.bodies[0])["replicates"] == 3


def test_numpy_scalars_in_options_and_documents_are_sent_as_numbers():
    app = RecordingApp()
    _client(app).invert({"n": np.int64(3)}, np.array([1.0]),
                        replicates=pd.Series([2], dtype="Int64"), level=np.float64(0.9))
    body = json.loads(app.bodies[0])
    assert body == {"fitted_model": {"n": 3}, "y": [1.0], "replicates": [2], "level": 0.9}


def test_missing_values_dropped_by_the_service_give_numpy_polyfits_coefficients(
        inprocess_client):
    rng = np.random.default_rng(19)  # seeded demo data
    x = np.linspace(0.0, 4.0, 30)
    y = 1.0 + 0.5 * x - 0.25 * x ** 2 + rng.normal(0.0, 0.1, x.size)
    missing = np.zeros(x.size, bool)
    missing[[3, 11, 20]] = True
    x_series = pd.Series(np.where(missing, np.nan, x), dtype="Float64")
    x_series[missing] = pd.NA
    fit = inprocess_client.fit(x_series, pd.Series(y), degree=2, missing="drop")
    assert fit.n == 27 and fit.n_input == 30 and sorted(fit.dropped) == [3, 11, 20]
    oracle = np.polyfit(x[~missing], y[~missing], 2)[::-1]  # numpy least squares, lowest first
    estimates = [c.estimate for c in fit.coefficients]
    assert estimates == pytest.approx(oracle, rel=1e-9)


NOT_SENT = [
    ("infinite y", lambda c: c.fit([1, 2, 3], [1.0, math.inf, 2.0]), r"y\[1\] is infinite"),
    ("string x", lambda c: c.fit("123", [1, 2, 3]), "x must be a one-dimensional"),
    ("scalar x", lambda c: c.fit(3.0, [1, 2, 3]), "x must be a sequence"),
    ("2-D array", lambda c: c.fit(np.ones((3, 2)), [1, 2, 3]), r"shape \(3, 2\)"),
    ("data frame", lambda c: c.fit(pd.DataFrame({"a": [1, 2]}), [1, 2]), "shape"),
    ("dict x", lambda c: c.fit({"a": 1}, [1]), "x must be"),
    ("model not a mapping", lambda c: c.fit([1, 2], [1, 2], model=2), "model must be a mapping"),
    ("one include string", lambda c: c.fit([1, 2], [1, 2], include="coefficients"),
     "include must be a list"),
    ("plot format", lambda c: c.plot([1, 2], [1, 2], format="jpeg"), "format must be one of"),
    ("panels string", lambda c: c.plot([1, 2], [1, 2], panels="fit"), "panels must be a list"),
    ("series not mappings", lambda c: c.batch([[1, 2]]), r"series\[0\] must be a mapping"),
    ("series a mapping", lambda c: c.batch({"x": [1]}), "series must be a list"),
    ("series array", lambda c: c.batch([{"id": 1, "x": "12", "y": [1, 2]}]), r"series\[0\]\.x"),
    ("fit without document", lambda c: c.predict(FitResult(), [1.0]), "no fitted_model"),
    ("document not a mapping", lambda c: c.invert("doc", [1.0]), "fitted_model must be"),
    ("grid a list", lambda c: c.fit([1, 2], [1, 2], grid=[1, 2]), "grid must be a mapping"),
    ("batch grid a list", lambda c: c.batch([], grid=[1]), "grid must be a mapping"),
    ("batch model a number", lambda c: c.batch([], model=3), "model must be a mapping"),
    ("panels a number", lambda c: c.plot([1, 2], [1, 2], panels=3), "panels must be a list"),
    ("object in an option", lambda c: c.fit([1, 2], [1, 2], grid={"x": object()}),
     "cannot send a object"),
]


@pytest.mark.parametrize("name, call, message", NOT_SENT, ids=[n for n, *_ in NOT_SENT])
def test_client_side_input_errors_are_curvewise_errors_and_value_errors(name, call, message):
    app = RecordingApp()
    with pytest.raises(InputError, match=message) as info:
        call(_client(app))
    assert isinstance(info.value, CurvewiseError) and isinstance(info.value, ValueError)
    assert app.bodies == []  # nothing was sent


def test_a_streamed_batch_refuses_a_bad_series_as_an_input_error():
    app = RecordingApp()
    with pytest.raises(InputError, match=r"series\[1\] must be a mapping"):
        list(_client(app).batch_stream(iter([{"id": 1, "x": [1], "y": [1]}, 7])))


@pytest.mark.parametrize("kwargs, message", [
    ({"retries": 11}, "retries"), ({"retries": -1}, "retries"), ({"retries": 1.5}, "retries"),
    ({"timeout": 0}, "timeout"), ({"timeout": "30"}, "timeout"), ({"backoff": -1}, "backoff"),
    ({"backoff_cap": None}, "backoff_cap"), ({"token": 123}, "token")])
def test_client_settings_are_checked(kwargs, message):
    with pytest.raises(InputError, match=message):
        Client("http://t", **kwargs)
    with pytest.raises(InputError, match="base_url"):
        Client("127.0.0.1:8000")


def test_the_client_repr_names_its_server_but_never_its_token():
    text = repr(Client("http://svc.test:8080/", token="s3cret", retries=1))
    assert "http://svc.test:8080" in text and "s3cret" not in text and "retries=1" in text


def _public_methods():
    return [name for name, member in inspect.getmembers(Client, inspect.isfunction)
            if not name.startswith("_")]


MINIMAL_ARGS = {"fit": ([1, 2], [1, 2]), "plot": ([1, 2], [1, 2]), "batch": ([],),
                "batch_stream": ([],), "predict": ({}, [1]), "invert": ({}, [1]),
                "batch_frame": ({"id": [], "x": [], "y": []},),
                "families": (), "health": ()}


def test_every_public_method_is_listed_here():
    assert sorted(_public_methods()) == sorted(MINIMAL_ARGS)


@pytest.mark.parametrize("method", sorted(MINIMAL_ARGS))
def test_an_unknown_keyword_is_a_type_error_before_any_request(method):
    app = RecordingApp()
    client = _client(app)
    assert not any(p.kind is p.VAR_KEYWORD
                   for p in inspect.signature(getattr(Client, method)).parameters.values())
    with pytest.raises(TypeError, match="no_such_member"):
        getattr(client, method)(*MINIMAL_ARGS[method], no_such_member=1)
    assert app.bodies == []


def test_every_request_member_of_the_contract_is_a_keyword():
    """No member became unreachable when the catch-all keyword arguments went away."""
    from schemas.batch import BatchRequestSchema
    from schemas.fit import FitRequestSchema
    from schemas.models import InvertRequestSchema, PredictRequestSchema
    from schemas.plots import PlotOptionsSchema, PlotRequestSchema

    def keywords(method):
        return {p.name for p in inspect.signature(getattr(Client, method)).parameters.values()
                if p.kind is p.KEYWORD_ONLY}

    assert set(FitRequestSchema().fields) - {"x", "y"} <= keywords("fit")
    assert (set(PlotRequestSchema().fields) | set(PlotOptionsSchema().fields)) \
        - {"x", "y", "plot"} <= keywords("plot")
    for method in ("batch", "batch_stream"):
        assert set(BatchRequestSchema().fields) - {"series"} <= keywords(method)
    assert set(PredictRequestSchema().fields) - {"fitted_model", "x"} <= keywords("predict")
    assert set(InvertRequestSchema().fields) - {"fitted_model", "y"} <= keywords("invert")
