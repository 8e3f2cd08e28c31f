"""The family registry (service.core.families) drives /v1/families, the fit dispatch and the
document reader: a family added to the registry appears everywhere without editing a view."""

from __future__ import annotations

import dataclasses
from types import MappingProxyType

import numpy as np
import pytest

from schemas import families as family_schemas
from service.core import families
from service.core.errors import SpecError


@pytest.fixture
def extra_family(monkeypatch):
    """A second family: the polynomial entry under another name, with its own options schema."""
    twin = dataclasses.replace(families.POLYNOMIAL, name="twin", description="A test twin.",
                               select_methods=("aic",), transforms=("none",))
    monkeypatch.setattr(families, "FAMILIES",
                        MappingProxyType({**families.FAMILIES, "twin": twin}))
    monkeypatch.setitem(family_schemas.MODEL_SCHEMAS, "twin",
                        family_schemas.MODEL_SCHEMAS["polynomial"])
    return twin


def test_families_lists_every_registered_family(client, extra_family):
    body = client.get("/v1/families").get_json()
    listed = {f["name"]: f for f in body["families"]}
    assert list(listed) == list(families.FAMILIES)          # registry order, twin last
    assert list(listed)[-1] == "twin" and "polynomial" in listed
    assert listed["twin"]["description"] == "A test twin."
    assert listed["twin"]["select_methods"] == ["aic"]
    assert listed["twin"]["transforms"] == ["none"]
    assert listed["polynomial"]["select_methods"] == list(families.POLYNOMIAL.select_methods)


def test_families_lists_only_the_registry(client):
    body = client.get("/v1/families").get_json()
    assert [f["name"] for f in body["families"]] == list(families.FAMILIES)


def test_fit_dispatches_on_the_family_name(monkeypatch):
    seen = []

    def fit(x, y, weights, *, model, options):
        seen.append(model.family)
        return "report"

    twin = dataclasses.replace(families.POLYNOMIAL, name="twin", fit=fit)
    monkeypatch.setattr(families, "FAMILIES",
                        MappingProxyType({**families.FAMILIES, "twin": twin}))
    from service.core.spec import ModelSpec

    assert families.fit_series([1.0, 2.0], [1.0, 2.0], model=ModelSpec(family="twin")) == "report"
    assert seen == ["twin"]


def test_unknown_family_names_the_field():
    with pytest.raises(SpecError) as info:
        families.family("sigmoid")
    assert info.value.field == "model.family"
    assert "polynomial" in info.value.fix


def test_documents_and_predictions_find_their_family():
    from service.core import ModelSpec, fit_series, predict, read_document

    x = np.linspace(0.0, 1.0, 12)
    report = fit_series(x, 1 + 2 * x + 0.01 * np.sin(7 * x), model=ModelSpec(degree=1))
    doc = families.family_of(report.model).write_document(report.model)
    fitted = read_document(doc)
    assert families.family_of(fitted) is families.POLYNOMIAL
    assert np.array_equal(predict(fitted, [0.5]).fit, predict(report.model, [0.5]).fit)
