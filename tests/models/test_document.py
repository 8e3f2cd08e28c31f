"""The fitted-model document: exact round trips, and refusal of bad documents naming the field.

References: NIST StRD data sets (../shared/reference/nist-strd) as realistic fits, from
well-conditioned (Norris) to very ill-conditioned (Filip); exactness is checked against the
original in-memory model (bit-for-bit), which needs no outside oracle. Canonical JSON
(sorted keys, no whitespace, shortest round-trip float repr) is common practice for hashing
JSON (cf. RFC 8785, which also uses shortest round-trip numbers).
"""

from __future__ import annotations

import copy
import hashlib
import json

import numpy as np
import orjson
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from service.core import DocumentError, FitOptions, GridSpec, ModelSpec, fit_series, predict
from service.core.models.document import canonical_bytes, checksum, from_document, to_document
from tests.conftest import load_nist

POLYNOMIAL_SETS = {"norris": 1, "pontius": 2, "noint1": 1, "noint2": 1, "filip": 10,
                   "wampler1": 5, "wampler2": 5}


def _report(name: str):
    ref = load_nist(name)
    model = ModelSpec(degree=POLYNOMIAL_SETS[name], intercept=ref["intercept"])
    return fit_series(ref["data"]["x"], ref["data"]["y"], model=model,
                      options=FitOptions(grid=GridSpec(count=101)))


def _transport(doc: dict) -> dict:
    return orjson.loads(orjson.dumps(doc))


@pytest.fixture(scope="module")
def pontius_doc() -> dict:
    return to_document(_report("pontius").model)


@pytest.mark.parametrize("name", sorted(POLYNOMIAL_SETS))
def test_round_trip_through_orjson_is_bit_exact(name):
    # Source: NIST StRD data; the check is exactness against the in-memory model itself.
    report = _report(name)
    back = from_document(_transport(to_document(report.model)))
    for field in ("basis_coefficients", "r_factor", "raw_coefficients"):
        assert np.array_equal(getattr(back, field), getattr(report.model, field)), field
    assert np.array_equal(back.raw_covariance, report.model.raw_covariance, equal_nan=True)
    for field in ("x_shift", "x_scale", "x_min", "x_max", "df_residual", "n", "degree",
                  "intercept", "transform_x", "transform_y", "terms", "level", "weighted"):
        assert getattr(back, field) == getattr(report.model, field), field
    assert back.sigma == report.model.sigma or (np.isnan(back.sigma)
                                                and np.isnan(report.model.sigma))


@pytest.mark.parametrize("name", sorted(POLYNOMIAL_SETS))
def test_fit_document_predict_reproduces_the_fit_grid(name):
    # Requirement of issue 5: fit -> document -> predict equals the fit's grid to 1e-12 relative.
    report = _report(name)
    model = from_document(_transport(to_document(report.model)))
    again = predict(model, report.grid.x, level=report.grid.level)
    for column in ("fit", "mean_lower", "mean_upper", "obs_lower", "obs_upper"):
        want, got = getattr(report.grid, column), getattr(again, column)
        finite = np.isfinite(want)
        assert np.array_equal(finite, np.isfinite(got))
        np.testing.assert_allclose(got[finite], want[finite], rtol=1e-12, atol=0)


def test_document_with_raw_coefficients_beyond_double_range_still_works():
    # Seeded degree-10 data on x in [0, 1e40]: raw powers leave the double range and the core
    # reports them as null; the scaled basis still predicts, so the document must round-trip
    # and reproduce the fit's grid (exactness check against the in-memory fit).
    rng = np.random.default_rng(1)
    x = np.linspace(0.0, 1e40, 30)
    y = 1 + 2 * (x / 1e40) + 3 * (x / 1e40) ** 4 + rng.normal(0, 0.01, x.size)
    report = fit_series(x, y, model=ModelSpec(degree=10),
                        options=FitOptions(grid=GridSpec(count=9)))
    doc = _transport(to_document(report.model))
    assert None in doc["raw_coefficients"]
    again = predict(from_document(doc), report.grid.x)
    np.testing.assert_allclose(again.fit, report.grid.fit, rtol=1e-12, atol=0)


def test_checksum_survives_a_transport_that_writes_whole_floats_as_integers(pontius_doc):
    # A JavaScript client writes 150000.0 as 150000; the canonical form normalizes types first.
    doc = _transport(pontius_doc)
    doc["x_min"] = int(doc["x_min"])
    doc["level"] = 0.95
    assert isinstance(doc["x_min"], int)
    assert from_document(doc).x_min == pontius_doc["x_min"]


def test_checksum_survives_a_tool_that_drops_the_sign_of_zero(pontius_doc):
    # jq 1.6 and JavaScript write -0.0 as 0; the canonical form writes every zero as 0.0.
    doc = _transport(pontius_doc)
    doc["r_factor"][1][0] = -0.0
    doc["checksum"] = checksum(doc)
    as_tool_writes = _transport(doc)
    as_tool_writes["r_factor"][1][0] = 0
    assert from_document(as_tool_writes).r_factor[1, 0] == 0.0


def test_canonical_form_is_sorted_compact_ascii_json_with_repr_floats(pontius_doc):
    # The documented canonical form, re-derived here with the standard library.
    payload = {k: v for k, v in pontius_doc.items() if k != "checksum"}
    expected = json.dumps(payload, sort_keys=True, separators=(",", ":")).encode()
    assert canonical_bytes(pontius_doc) == expected
    assert pontius_doc["checksum"] == "sha256:" + hashlib.sha256(expected).hexdigest()


@settings(max_examples=300, deadline=None)
@given(st.floats(allow_nan=False, allow_infinity=False))
def test_any_finite_float_round_trips_exactly_through_orjson_and_the_checksum(value):
    # Property: orjson writes shortest round-trip digits, so a value and its checksum survive.
    doc = {"a": value, "b": [value, -value]}
    back = orjson.loads(orjson.dumps(doc))
    assert back["a"] == value and repr(back["a"]) == repr(value)
    assert checksum(back) == checksum(doc)


def _expect(doc, field: str, words: str):
    with pytest.raises(DocumentError) as info:
        from_document(doc, field_prefix="fitted_model.")
    assert info.value.field == f"fitted_model.{field}"
    assert words in info.value.message
    assert info.value.fix
    return info.value


def test_tampered_raw_coefficient_is_refused_naming_the_coefficients(pontius_doc):
    doc = copy.deepcopy(pontius_doc)
    doc["raw_coefficients"][1] *= 1.001
    _expect(doc, "raw_coefficients", "describe different curves")


def test_tampered_basis_coefficient_is_refused(pontius_doc):
    doc = copy.deepcopy(pontius_doc)
    doc["basis_coefficients"][2] *= 1.01
    _expect(doc, "raw_coefficients", "describe different curves")


def test_consistent_edit_without_new_checksum_fails_the_checksum(pontius_doc):
    doc = copy.deepcopy(pontius_doc)
    doc["sigma"] *= 1.0000000001
    _expect(doc, "checksum", "does not match")


def test_wrong_version_is_refused_naming_schema_version(pontius_doc):
    doc = copy.deepcopy(pontius_doc)
    doc["schema_version"] = 2
    _expect(doc, "schema_version", "Unsupported schema_version 2")


@pytest.mark.parametrize("field", ["sigma", "r_factor", "checksum", "x_min", "terms"])
def test_missing_field_is_refused_naming_it(pontius_doc, field):
    doc = copy.deepcopy(pontius_doc)
    del doc[field]
    _expect(doc, field, "missing the required field")


def test_unknown_field_and_bad_shapes_are_named(pontius_doc):
    doc = copy.deepcopy(pontius_doc)
    doc["note"] = "hello"
    _expect(doc, "note", "Unknown field")
    doc = copy.deepcopy(pontius_doc)
    doc["r_factor"][2][0] = 1.0
    _expect(doc, "r_factor", "upper triangular")
    doc = copy.deepcopy(pontius_doc)
    doc["basis_coefficients"].append(0.0)
    _expect(doc, "basis_coefficients", "must have 3 entries")
    doc = copy.deepcopy(pontius_doc)
    doc["x_scale"] = "1e6"
    _expect(doc, "x_scale", "must be a number")
    doc = copy.deepcopy(pontius_doc)
    doc["checksum"] = "md5:abc"
    _expect(doc, "checksum", "sha256")


def test_not_an_object_is_refused():
    with pytest.raises(DocumentError) as info:
        from_document([1, 2, 3], field_prefix="fitted_model.")
    assert info.value.field == "fitted_model"
