"""Results are plain data: ``json.dumps`` takes them, they round-trip, their reprs are short.

Against the real service in-process (WSGI). The prediction made from a document that went
through ``json.dumps``/``json.loads`` is checked against numpy's least-squares polynomial
(``numpy.polyfit`` / ``numpy.polyval``) of the same data; the inversion against the root of
that polynomial (``numpy.roots``).
"""

from __future__ import annotations

import copy
import json
import pickle

import numpy as np
import pandas as pd
import pytest
from curvewise_client import (
    BatchItem,
    BatchResult,
    Coefficient,
    Estimates,
    Families,
    Figure,
    FitResult,
    InputError,
    Predictions,
)

RNG = np.random.default_rng(1919)  # seeded demo data
X = np.linspace(1.0, 6.0, 24)
Y = 0.5 + 1.2 * X + 0.15 * X ** 2 + RNG.normal(0.0, 0.2, X.size)  # rising: one root


@pytest.fixture(scope="module")
def fit(inprocess_client) -> FitResult:
    return inprocess_client.fit(X, Y, max_degree=4, grid={"count": 2000})


def test_fit_result_and_its_document_go_through_json_dumps(fit):
    text = json.dumps(fit.to_dict())
    assert json.loads(text) == json.loads(fit.to_json())
    assert json.loads(text)["grid"]["x"][-1] == pytest.approx(6.0)
    document = json.loads(json.dumps(fit.fitted_model))  # no conversion needed
    assert document["checksum"].startswith("sha256:") and isinstance(document["terms"], list)
    assert FitResult.from_dict(json.loads(text)) == fit
    assert FitResult.from_json(text) == fit


def test_a_document_stored_as_json_predicts_and_inverts_as_numpy_says(fit, inprocess_client):
    stored = json.loads(json.dumps({"model": fit.fitted_model}))["model"]
    coefficients = np.polyfit(X, Y, fit.chosen_degree)  # oracle: numpy least squares
    predictions = inprocess_client.predict(stored, [2.5, 3.5])
    assert [p.fit for p in predictions.predictions] == pytest.approx(
        np.polyval(coefficients, [2.5, 3.5]), rel=1e-9)
    target = float(np.polyval(coefficients, 2.0))
    estimates = inprocess_client.invert(stored, [target])
    roots = np.roots(coefficients - np.r_[np.zeros(coefficients.size - 1), target])
    in_range = [r.real for r in roots if abs(r.imag) < 1e-12 and X[0] <= r.real <= X[-1]]
    assert estimates.estimates[0].status == "ok"
    assert estimates.estimates[0].x == pytest.approx(in_range[0], rel=1e-9)


def test_every_result_type_round_trips_through_json(fit, inprocess_client):
    results = [
        fit,
        inprocess_client.predict(fit, [2.0]),
        inprocess_client.invert(fit, [10.0]),
        inprocess_client.batch([{"id": "a", "x": X, "y": Y}, {"id": "b", "x": [1], "y": [1]}],
                               model={"max_degree": 2}),
        inprocess_client.families(),
    ]
    assert [type(r) for r in results] == [FitResult, Predictions, Estimates, BatchResult,
                                          Families]
    batch = results[3]
    assert [item.status for item in batch.results] == ["ok", "error"]
    results += [batch.results[0], batch.results[1], fit.coefficients[0], fit.statistics,
                fit.selection, fit.flags[0] if fit.flags else fit.anova[0]]
    for result in results:
        again = type(result).from_dict(json.loads(json.dumps(result.to_dict())))
        assert again == result, type(result).__name__
    assert isinstance(batch.results[0], BatchItem)
    assert Coefficient.from_dict(fit.coefficients[1].to_dict()).term == "x"


def test_results_stay_read_only_but_copy_and_pickle(fit):
    with pytest.raises(TypeError, match="read-only"):
        fit.fitted_model["checksum"] = "forged"
    with pytest.raises(TypeError):
        fit.raw["grid"].update({})
    with pytest.raises(TypeError):
        fit.fitted_model |= {"n": 1}
    editable = dict(fit.fitted_model)
    editable["note"] = "mine"
    assert "note" not in fit.fitted_model
    assert pickle.loads(pickle.dumps(fit)) == fit
    assert copy.deepcopy(fit) == fit


def test_results_go_into_pandas_without_surprises(fit):
    coefficients = pd.DataFrame(fit.to_dict()["coefficients"])
    assert list(coefficients["term"]) == list(fit.model.terms)
    grid = pd.DataFrame({k: v for k, v in fit.to_dict()["grid"].items() if isinstance(v, list)})
    assert len(grid) == 2000 and grid["fit"].dtype == float


def test_reprs_are_short(fit):
    text = repr(fit)
    assert len(text) < 1500, len(text)
    assert "<2000 items>" in text and "Coefficient>" in text
    assert "sha256" not in text  # the document is shown by its size, not its members


def test_figures_show_their_size_not_their_bytes_and_display_in_notebooks(inprocess_client):
    png = inprocess_client.plot(X, Y, degree=2, panels=["fit", "studentized_residuals"])
    assert png.data[:8] == b"\x89PNG\r\n\x1a\n" and len(png.data) > 10_000
    assert len(repr(png)) < 100 and f"{len(png.data):,} bytes" in repr(png)
    assert png._repr_png_() == png.data and png._repr_svg_() is None
    svg = inprocess_client.plot(X, Y, degree=2, format="svg", width=640, height=480)
    assert svg._repr_png_() is None and "<svg" in svg._repr_svg_()
    plain = json.loads(json.dumps(png.to_dict()))
    assert plain["format"] == "png" and plain["size"] == len(png.data)
    assert Figure.from_dict(plain) == png
    with pytest.raises(InputError):
        Figure.from_dict({"content_type": "image/png"})


def test_from_dict_refuses_what_is_not_a_mapping():
    with pytest.raises(InputError, match="needs a mapping"):
        FitResult.from_dict([1, 2])
    with pytest.raises(InputError, match="not JSON"):
        FitResult.from_json("{")
