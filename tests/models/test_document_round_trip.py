"""Every document the service writes is accepted back; documents it never writes are refused.

Property (no outside oracle needed: the reference is the service's own writer): a fit of any
data the fit accepts, at any offset and span of x, with any transforms, degree and intercept,
writes a fitted-model document that /v1/predict and /v1/invert read back unchanged. The scan
of offsets 1e6..1e15 and spans 1e-6..1e3 is the one a hostile-input campaign ran (104 of 288
documents were refused before the reader recomputed the scaling to rounding).

Conversely, forged scalings with a naively recomputed checksum (x_scale = 1e308, or ends far
beyond what a fit accepts) are refused naming the field.
"""

from __future__ import annotations

import copy
import itertools

import numpy as np
import orjson
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from service.core import FitError, ModelSpec, fit_series, predict
from service.core.models.document import checksum, from_document, to_document
from service.core.models.inverse import invert

X_TRANSFORMS = ("none", "log", "log10", "sqrt", "reciprocal")
Y_TRANSFORMS = ("none", "log", "reciprocal")


def _document_of(x, y, model: ModelSpec):
    """The transported document of a fit, or None when the fit itself refuses the data."""
    try:
        report = fit_series(x, y, model=model)
    except FitError:
        return None
    return orjson.loads(orjson.dumps(to_document(report.model)))


def _read_back(doc: dict) -> None:
    fitted = from_document(doc, field_prefix="fitted_model.")
    ends = [doc["x_min"], doc["x_max"]]
    prediction = predict(fitted, ends)
    assert prediction.fit.shape == (2,)
    if fitted.degree >= 1:  # a constant cannot be read backwards (a refusal of the request)
        invert(fitted, [float(v) for v in prediction.fit if np.isfinite(v)] or [0.0])


def _series(offset: float, span: float, n: int, seed: int):
    rng = np.random.default_rng(seed)
    x = offset + span * np.linspace(0.0, 1.0, n)
    y = 1.0 + 0.5 * np.linspace(0.0, 1.0, n) + 0.05 * rng.standard_normal(n)
    return x, y


@pytest.mark.parametrize("transform_x", ["none", "log", "sqrt", "reciprocal"])
def test_scan_of_offsets_and_spans_round_trips(transform_x):
    refused = []
    for k, s in itertools.product(range(6, 16), range(-6, 4)):
        x, y = _series(10.0**k, 10.0**s, 5, seed=k * 100 + s)
        doc = _document_of(x, y, ModelSpec(degree=1, transform_x=transform_x))
        if doc is None:
            continue
        try:
            _read_back(doc)
        except FitError as exc:
            refused.append((k, s, exc.field, exc.message))
    assert not refused, refused


def test_the_campaign_example_round_trips_over_http(client):
    x = [1e9 + 0.025 * i for i in range(5)]
    fit = client.post("/v1/fit", json={"x": x, "y": [1, 1.1, 1.2, 1.3, 1.5],
                                       "model": {"degree": 1}})
    assert fit.status_code == 200
    doc = fit.get_json()["fitted_model"]
    answer = client.post("/v1/predict", json={"fitted_model": doc, "x": x})
    assert answer.status_code == 200, answer.get_json()
    answer = client.post("/v1/invert", json={"fitted_model": doc, "y": [1.2]})
    assert answer.status_code == 200, answer.get_json()


@settings(max_examples=150, deadline=None, database=None, derandomize=True,
          suppress_health_check=list(HealthCheck))
@given(offset=st.integers(-15, 15), span=st.integers(-8, 4), negative=st.booleans(),
       n=st.integers(3, 12), degree=st.integers(0, 3), intercept=st.booleans(),
       transform_x=st.sampled_from(X_TRANSFORMS), transform_y=st.sampled_from(Y_TRANSFORMS),
       seed=st.integers(0, 2**16))
def test_every_written_document_is_accepted_back(offset, span, negative, n, degree, intercept,
                                                 transform_x, transform_y, seed):
    x, y = _series(10.0**offset, 10.0**span, n, seed)
    if negative and transform_x in ("none", "reciprocal"):
        x = -x
    if not intercept and degree == 0:
        degree = 1
    doc = _document_of(x, y, ModelSpec(degree=degree, intercept=intercept,
                                       transform_x=transform_x, transform_y=transform_y))
    if doc is not None:
        _read_back(doc)


@pytest.fixture(scope="module")
def line_doc() -> dict:
    x, y = _series(1e9, 0.1, 5, seed=1)
    doc = _document_of(x, y, ModelSpec(degree=2))
    assert doc is not None
    return doc


def _forged(doc: dict, **changes) -> dict:
    forged = copy.deepcopy(doc)
    forged.update(changes)
    forged["checksum"] = checksum(forged)  # a naive forger recomputes the checksum
    return forged


@pytest.mark.parametrize("changes, field", [
    ({"x_scale": 1e308}, "fitted_model.x_scale"),
    ({"x_scale": 1e-300}, "fitted_model.x_scale"),
    ({"x_shift": 0.0}, "fitted_model.x_shift"),
    ({"x_min": -1e308, "x_max": 1e308, "x_shift": 0.0, "x_scale": 1e308},
     "fitted_model.x_min"),
])
def test_forged_scaling_with_a_recomputed_checksum_is_refused(line_doc, changes, field):
    with pytest.raises(FitError) as caught:
        from_document(_forged(line_doc, **changes), field_prefix="fitted_model.")
    assert caught.value.field == field, caught.value.message


def test_forged_raw_coefficients_are_compared_even_where_double_powers_overflow():
    # x near 1e150: u**3 overflows double, so the raw-vs-basis check must not be skipped
    x, y = _series(1e150, 1e149, 6, seed=3)
    doc = _document_of(x, y, ModelSpec(degree=3))
    assert doc is not None
    _read_back(doc)
    raw = list(doc["raw_coefficients"])
    index = next(i for i, v in enumerate(raw) if v is not None and v != 0.0)
    raw[index] *= 3.0
    with pytest.raises(FitError) as caught:
        from_document(_forged(doc, raw_coefficients=raw), field_prefix="fitted_model.")
    assert caught.value.field == "fitted_model.raw_coefficients"
