"""The schema_version 2 document of the nonlinear families: round trip and refusals.

Property (the reference is the service's own in-memory fit, as for version 1): a fit of
the expression family or of any built-in family writes a document that, after a JSON
round trip, predicts bit for bit what the in-memory fit predicts. Conversely every field,
missing, of the wrong type or inconsistent with the others, is refused naming it; a value
edit that keeps the document well formed is caught by the checksum. The series are the
seeded invented designs of tests/core/nonlinear/builtin_designs.py (demo data: these tests
compare the service with itself).
"""

from __future__ import annotations

import copy

import numpy as np
import orjson
import pytest

from service.core import ModelSpec, fit_series, predict, read_document
from service.core.errors import DocumentError
from service.core.families import family_of
from service.core.models.canonical import checksum
from service.core.models.curve_document import (
    CURVE_FIELDS,
    from_curve_document,
    to_curve_document,
)
from service.core.nonlinear.builtin.catalogue import BUILTINS
from service.core.spec import FitOptions
from tests.core.nonlinear.builtin_designs import cases

PREDICTION_FIELDS = ("fit", "se_mean", "mean_lower", "mean_upper", "obs_lower", "obs_upper",
                     "band_lower", "band_upper", "extrapolated")


def _builtin_fit(name: str, weighting: str = "relative"):
    case = cases(name, 1, 11)[0]
    model = ModelSpec(family=name) if case.scale is None else ModelSpec(family=name,
                                                                        scale=case.scale)
    weights = None if weighting == "relative" else np.full(case.x.size, 4.0)
    return case, fit_series(case.x, case.y, weights, model=model,
                            options=FitOptions(weighting=weighting))


def _expression_fit():
    rng = np.random.default_rng(20261204)
    x = np.linspace(0.5, 10.0, 25)
    y = 3.0 * (1.0 - np.exp(-0.4 * x)) + 0.02 * rng.standard_normal(x.size)
    model = ModelSpec(family="expression", expression="a*(1 - exp(-k*x))",
                      parameters=(("a", 2.0), ("k", 0.3)))
    return x, fit_series(x, y, model=model)


def _transported(fitted) -> dict:
    return orjson.loads(orjson.dumps(family_of(fitted).write_document(fitted)))


def _assert_same_predictions(a, b):
    for name in PREDICTION_FIELDS:
        assert np.array_equal(getattr(a, name), getattr(b, name), equal_nan=True), name


@pytest.mark.parametrize("name", list(BUILTINS))
def test_every_builtin_family_round_trips_bit_for_bit(name):
    case, report = _builtin_fit(name)
    doc = _transported(report.model)
    assert doc["schema_version"] == 2 and doc["family"] == name
    fitted = read_document(doc, field_prefix="fitted_model.")
    xs = np.linspace(case.x.min() - 0.1 * np.ptp(case.x), case.x.max(), 41)
    xs = xs[xs > 0] if case.scale == "log" or name in ("power", "weibull") else xs
    for level, m in ((None, 1), (0.9, 3)):
        _assert_same_predictions(predict(fitted, xs, level=level, m=m),
                                 predict(report.model, xs, level=level, m=m))
    assert fitted.expression == report.model.expression
    assert np.array_equal(fitted.covariance, report.model.covariance, equal_nan=True)


def test_the_expression_family_round_trips_bit_for_bit():
    x, report = _expression_fit()
    doc = _transported(report.model)
    assert doc["family"] == "expression" and doc["parameter_names"] == ["a", "k"]
    fitted = read_document(doc)
    xs = np.linspace(0.0, 12.0, 50)
    _assert_same_predictions(predict(fitted, xs), predict(report.model, xs))
    # writing the read document again gives the same document (same checksum)
    assert to_curve_document(fitted) == doc


def test_known_sds_round_trip_with_the_normal_distribution():
    case, report = _builtin_fit("exponential", weighting="known_sd")
    doc = _transported(report.model)
    assert (doc["weighting"], doc["distribution"], doc["noise_variance"]) == (
        "known_sd", "normal", 1.0)
    _assert_same_predictions(predict(read_document(doc), case.x),
                             predict(report.model, case.x))


@pytest.fixture(scope="module")
def document() -> dict:
    return _transported(_builtin_fit("logistic4")[1].model)


def _refused(doc, *, resign: bool = False) -> DocumentError:
    if resign:  # a forger who recomputes the checksum: the field's own check must catch it
        doc["checksum"] = checksum(doc)
    with pytest.raises(DocumentError) as info:
        from_curve_document(doc, field_prefix="fitted_model.")
    return info.value


@pytest.mark.parametrize("field", list(CURVE_FIELDS))
def test_every_field_missing_or_of_the_wrong_type_is_refused_by_name(document, field):
    doc = copy.deepcopy(document)
    del doc[field]
    assert _refused(doc).field == f"fitted_model.{field}"
    doc = copy.deepcopy(document)
    doc[field] = {"an": "object"}
    assert _refused(doc).field.startswith(f"fitted_model.{field}")


def _edit(doc, field, value):
    doc[field] = value
    return doc


FORGERIES = {
    # field named -> edit keeping every type valid (checksum recomputed by the forger)
    "family": lambda d: _edit(d, "family", "polynomial"),
    "expression": lambda d: _edit(d, "expression", d["expression"] + " + unknown_name"),
    "parameter_names": lambda d: _edit(d, "parameter_names", ["slope"] * 4),
    "estimates": lambda d: _edit(d, "estimates", d["estimates"][:3]),
    "covariance": lambda d: _edit(d, "covariance",
                                  [row[:] for row in d["covariance"]][:-1]),
    "df_residual": lambda d: _edit(d, "df_residual", d["df_residual"] - 1),
    "n": lambda d: _edit(d, "n", 2),
    "sigma": lambda d: _edit(d, "sigma", -1.0),
    "noise_variance": lambda d: _edit(d, "noise_variance", d["noise_variance"] * 2.0),
    "x_min": lambda d: _edit(d, "x_min", d["x_max"] + 1.0),
    "weighting": lambda d: _edit(d, "weighting", "inverse"),
    "distribution": lambda d: _edit(d, "distribution", "normal"),
    "level": lambda d: _edit(d, "level", 1.5),
    "schema_version": lambda d: _edit(d, "schema_version", 1),
    "checksum": lambda d: _edit(d, "checksum", "sha256:0"),
}


@pytest.mark.parametrize("field", list(FORGERIES))
def test_inconsistent_fields_are_refused_by_name_even_with_a_fresh_checksum(document, field):
    doc = FORGERIES[field](copy.deepcopy(document))
    assert _refused(doc, resign=field != "checksum").field == f"fitted_model.{field}"


def test_an_asymmetric_covariance_is_refused_by_name(document):
    doc = copy.deepcopy(document)
    doc["covariance"][0][1] = doc["covariance"][0][1] * (1 + 1e-6) + 1e-300
    assert _refused(doc, resign=True).field == "fitted_model.covariance"


def test_an_equation_in_another_spelling_is_refused(document):
    doc = copy.deepcopy(document)
    doc["expression"] = "(" + doc["expression"] + ")"
    error = _refused(doc, resign=True)
    assert error.field == "fitted_model.expression" and "canonical" in str(error)


@pytest.mark.parametrize("field", ["estimates", "covariance", "x_max", "level", "weighted"])
def test_a_well_formed_value_edit_is_caught_by_the_checksum(document, field):
    doc = copy.deepcopy(document)
    if field == "estimates":
        doc["estimates"][0] = doc["estimates"][0] * (1 + 1e-15) + 1e-300
    elif field == "covariance":
        doc["covariance"][1][1] = doc["covariance"][1][1] * 1.001
    elif field == "weighted":
        doc["weighted"] = not doc["weighted"]
    else:
        doc[field] = doc[field] * 0.999
    assert _refused(doc).field == "fitted_model.checksum"
