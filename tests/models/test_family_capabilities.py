"""GET /v1/families says, per family, what /v1/invert answers for its fits; and it does.

Each claim is checked against the service's own behaviour on seeded invented series
(demo data; tests/core/nonlinear/builtin_designs.py): a family listed as invertible reads
a y on its fitted curve back to the x that produced it (to 1e-8), a family listed with a
working range gets one and the others get null, and a family listed with detection limits
gets them available for a fit that meets the stated condition.
"""

from __future__ import annotations

import numpy as np
import pytest

from tests.api.helpers import post_json
from tests.core.nonlinear.builtin_designs import cases


@pytest.fixture
def reading(client):
    res = client.get("/v1/families")
    assert res.status_code == 200
    return {f["name"]: f["reading"] for f in res.get_json()["families"]}


def _document(client, x, y, model) -> dict:
    res = post_json(client, "/v1/fit", {"x": list(map(float, x)), "y": list(map(float, y)),
                                        "model": model})
    assert res.status_code == 200, res.data[:300]
    return res.get_json()["fitted_model"]


def test_every_family_states_its_reading_capabilities(reading):
    assert set(reading) >= {"polynomial", "expression", "logistic4", "logistic5",
                            "exponential", "michaelis_menten"}
    for name, caps in reading.items():
        assert caps["invertible"] is True, name
        assert caps["invert_condition"]
        assert caps["working_range"] is (name in ("logistic4", "logistic5")), name
        assert bool(caps["working_range_condition"]) is caps["working_range"]
        assert caps["detection_limit"] is True and caps["detection_limit_condition"]
    assert "monotone" in reading["logistic4"]["invert_condition"]
    assert "quadratic" in reading["polynomial"]["detection_limit_condition"]


@pytest.mark.parametrize("family", ["logistic4", "exponential", "michaelis_menten"])
def test_the_answers_of_invert_match_the_stated_capabilities(client, reading, family):
    case = cases(family, 1, 11)[0]
    model = {"family": family, **({"scale": case.scale} if case.scale else {})}
    doc = _document(client, case.x, case.y, model)
    x0 = float(np.quantile(case.x[case.x > 0], 0.5))
    (on_curve,) = post_json(client, "/v1/predict", {"fitted_model": doc, "x": [x0]}
                            ).get_json()["predictions"]
    res = post_json(client, "/v1/invert", {"fitted_model": doc, "y": [on_curve["fit"]]})
    assert res.status_code == 200, res.data[:300]
    out = res.get_json()
    assert out["estimates"][0]["x"] == pytest.approx(x0, rel=1e-8)
    assert (out["working_range"] is not None) is reading[family]["working_range"]


def test_detection_limits_are_available_when_the_stated_condition_holds(client):
    # michaelis_menten: unweighted, finite at the blank x = 0 and monotone from 0 to x_max
    case = cases("michaelis_menten", 1, 11)[0]
    doc = _document(client, case.x, case.y, {"family": "michaelis_menten"})
    out = post_json(client, "/v1/invert", {"fitted_model": doc, "y": [1.0]}).get_json()
    assert out["calibration"]["available"] is True, out["calibration"]["reason"]
    assert 0 < out["calibration"]["detection_limit"] < doc["x_max"]
    x = np.linspace(0, 10, 12)  # a straight line with an intercept, unweighted
    y = 0.5 + 2.0 * x + np.random.default_rng(3).normal(0, 0.1, x.size)
    line = _document(client, x, y, {"family": "polynomial", "degree": 1})
    out = post_json(client, "/v1/invert", {"fitted_model": line, "y": [5.0]}).get_json()
    assert out["calibration"]["available"] is True
