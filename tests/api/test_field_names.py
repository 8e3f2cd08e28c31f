"""Field names follow textbook vocabulary: a list of every name the service answers with,
checked against the names it replaced (sum_sq, mean_sq, se_fit, predicted_r_squared)."""

from __future__ import annotations

import numpy as np

RETIRED = {"sum_sq": "sum_of_squares", "mean_sq": "mean_square", "se_fit": "se_mean",
           "predicted_r_squared": "press_r_squared"}


def _keys(node, found: set[str]) -> set[str]:
    if isinstance(node, dict):
        for key, value in node.items():
            found.add(key)
            _keys(value, found)
    elif isinstance(node, list):
        for value in node:
            _keys(value, found)
    return found


def _properties(node, found: set[str]) -> set[str]:
    if isinstance(node, dict):
        found.update(node.get("properties", {}))
        for value in node.values():
            _properties(value, found)
    elif isinstance(node, list):
        for value in node:
            _properties(value, found)
    return found


def test_no_retired_name_in_the_contract_or_in_answers(client):
    spec = client.get("/openapi.json").get_json()
    documented = _properties(spec, set())
    x = np.linspace(0.0, 4.0, 15)
    y = 1.0 + 0.5 * x + 0.2 * x * x + 0.05 * np.cos(5 * x)
    fit = client.post("/v1/fit", json={"x": x.tolist(), "y": y.tolist(),
                                       "model": {"degree": 2}, "grid": {"x": [1.0, 5.0]}})
    assert fit.status_code == 200
    answered = _keys(fit.get_json(), set())
    doc = fit.get_json()["fitted_model"]
    pred = client.post("/v1/predict", json={"fitted_model": doc, "x": [2.0]})
    assert pred.status_code == 200
    answered |= _keys(pred.get_json(), set())
    for old in RETIRED:
        assert old not in documented and old not in answered, old
    # the new names are really there (so this test would see a regression)
    assert {"sum_of_squares", "mean_square", "press_r_squared"} <= answered
    assert "se_mean" in answered and set(RETIRED.values()) <= documented
