"""x outside a built-in curve's domain: the fit's data, grid and /v1/predict refuse it (422,
code transform_domain, as for x outside a polynomial's x transform).

The rule is the families' own: a log-scale dose-response curve (x^slope) and the curves
raising x to a parameter (power, weibull) are defined for x >= 0, which the single fit
already enforces for data x (service/core/nonlinear/builtin/fit.py); the other families
take any x. Before, such a grid or prediction x came back as a silent null. The series
are seeded invented designs (demo data, tests/core/nonlinear/builtin_designs.py).
"""

from __future__ import annotations

import numpy as np
import pytest

from service.core.nonlinear.builtin.catalogue import BUILTINS
from service.core.nonlinear.builtin.definition import LOG
from service.core.nonlinear.builtin.domain import LOG_MARK, scale_of_equation
from service.core.nonlinear.builtin.spec_check import equation
from tests.api.helpers import assert_problem, post_json
from tests.core.nonlinear.builtin_designs import cases, log4

RESTRICTED = {"logistic4": "log", "logistic5": "log", "power": None, "weibull": None}


def _body(name: str, scale: str | None):
    if name == "logistic4":  # a log-dose plate with a seeded response (logistic5's cases
        rng = np.random.default_rng(2112)  # are all on log x; logistic4's vary)
        x = np.repeat(np.geomspace(0.01, 100.0, 9), 2)
        y = log4(x, 0.1, 2.0, 1.2, 1.5) + rng.normal(0.0, 0.03, x.size)
    else:
        case = cases(name, 1, 23)[0]
        x, y = case.x, case.y
    model = {"family": name} if scale is None else {"family": name, "scale": scale}
    return {"x": x.tolist(), "y": y.tolist(), "model": model}


@pytest.mark.parametrize("name", sorted(RESTRICTED))
def test_negative_grid_and_prediction_x_are_refused(client, name):
    body = _body(name, RESTRICTED[name])
    problem = assert_problem(post_json(client, "/v1/fit", {**body, "grid": {"x": [-1.0, 1.0]}}),
                             422, "transform_domain", "grid.x[0]")
    assert "x >= 0" in problem["detail"], problem
    assert_problem(post_json(client, "/v1/fit", {**body, "grid": {"start": -2.0, "stop": 1.0}}),
                   422, "transform_domain", "grid.start")
    fitted = post_json(client, "/v1/fit", body)
    assert fitted.status_code == 200, fitted.data[:400]
    document = fitted.get_json()["fitted_model"]
    problem = assert_problem(post_json(client, "/v1/predict", {
        "fitted_model": document, "x": [1.0, 0.0, -0.5]}), 422, "transform_domain", "x[2]")
    assert "send only x >= 0" in problem["detail"], problem
    ok = post_json(client, "/v1/predict", {"fitted_model": document, "x": [0.5, 2.0]})
    assert ok.status_code == 200, ok.data[:400]


def test_linear_scale_logistic_takes_negative_x(client):
    """On the linear scale logistic4 is exp(slope (x - ec50)): defined for every x."""
    case = cases("logistic4", 1, 11)[0]
    body = {"x": case.x.tolist(), "y": case.y.tolist(),
            "model": {"family": "logistic4", "scale": "linear"}}
    res = post_json(client, "/v1/fit", {**body, "grid": {"x": [-1.0, 1.0]}})
    assert res.status_code == 200, res.data[:400]
    assert all(v is not None for v in res.get_json()["grid"]["fit"])
    res = post_json(client, "/v1/predict", {"fitted_model": res.get_json()["fitted_model"],
                                            "x": [-1.0]})
    assert res.status_code == 200 and res.get_json()["predictions"][0]["fit"] is not None


def test_scale_is_read_back_from_every_equation():
    """The stored equation text tells the scale (log: x^slope) for every family and scale,
    with parameters free or held fixed."""
    for name, family in BUILTINS.items():
        for scale in family.scales:
            for fixed in ((), ((family.nonlinear[0], 1.0),)):
                text = equation(name, scale, fixed).text
                assert scale_of_equation(family, text) == scale, (name, scale, text)
                if len(family.scales) > 1:
                    assert (LOG_MARK in text.replace(" ", "")) == (scale == LOG), text


def test_data_grid_and_prediction_refusals_share_one_shape(client):
    """The three refusals of x < 0 (data, grid, /v1/predict) word the point, the reason and
    the fix alike (service.core.nonlinear.builtin.domain.refuse_negative)."""
    body = _body("logistic4", "log")
    x = list(body["x"])
    x[3] = -0.5
    data = assert_problem(post_json(client, "/v1/fit", {**body, "x": x}), 422, "transform_domain",
                          "x[3]")
    grid = assert_problem(post_json(client, "/v1/fit", {**body, "grid": {"x": [-1.0, 1.0]}}),
                          422, "transform_domain", "grid.x[0]")
    document = post_json(client, "/v1/fit", body).get_json()["fitted_model"]
    predicted = assert_problem(post_json(client, "/v1/predict", {
        "fitted_model": document, "x": [1.0, 0.0, -0.5]}), 422, "transform_domain", "x[2]")
    for problem, point, article in ((data, "x[3] = -0.5", "the"),
                                    (grid, "Grid point 0 (x = -1.0)", "the"),
                                    (predicted, "x[2] = -0.5", "the stored")):
        detail = problem["detail"]
        assert (f"{point} is negative, but {article} logistic4 curve is on log x: the curve is "
                "defined for x >= 0 only.") in detail, detail
        assert "This curve is on log x: " in detail and 'model.scale = "linear"' in detail
