"""grid.spacing over /v1/fit: log-spaced grids for dose-response curves on log x.

Oracles: numpy's ``geomspace`` (equal ratios between neighbours) and ``linspace``
(equal differences); the curve's own value at x = 0 from its equation (a logistic4 on
log x tends to y_left at x = 0, stated in its catalogue). Data are invented and seeded.
"""

from __future__ import annotations

import numpy as np
import pytest

from tests.api.helpers import assert_problem, post_json

DOSES = [0.01, 0.03, 0.1, 0.3, 1.0, 3.0, 10.0, 30.0, 100.0]


def _dose_response(blank: bool = False, seed: int = 20261205):
    """A seeded invented logistic4 series on log x (two replicates), optionally with blanks."""
    rng = np.random.default_rng(seed)
    doses = ([0.0] if blank else []) + DOSES
    x = np.array(doses * 2)
    with np.errstate(divide="ignore"):
        mean = 1.0 + 9.0 / (1.0 + (1.0 / x) ** 1.2)
    y = mean + rng.normal(0.0, 0.15, x.size)
    return x.tolist(), y.round(5).tolist()


def _fit(client, body):
    res = post_json(client, "/v1/fit", body)
    assert res.status_code == 200, res.data[:500]
    return res.get_json()


def test_log_x_curve_gets_a_log_spaced_grid_by_default(client):
    x, y = _dose_response()
    body = _fit(client, {"x": x, "y": y, "model": {"family": "logistic4"}, "grid": {"count": 21}})
    gx = np.array(body["grid"]["x"])
    np.testing.assert_allclose(gx, np.geomspace(0.01, 100.0, 21), rtol=1e-12)
    assert gx[0] == 0.01 and gx[-1] == 100.0          # the ends are the data's, exactly
    assert np.count_nonzero(gx < 1.0) == 10            # half the grid below the middle dose
    assert body["model"]["scale"] == "log"


def test_default_grid_of_a_log_x_curve_is_log_spaced_too(client):
    x, y = _dose_response()
    body = _fit(client, {"x": x, "y": y, "model": {"family": "logistic4"}})
    np.testing.assert_allclose(body["grid"]["x"], np.geomspace(0.01, 100.0, 200), rtol=1e-12)


def test_zero_dose_blank_is_its_own_first_grid_point(client):
    x, y = _dose_response(blank=True)
    body = _fit(client, {"x": x, "y": y, "model": {"family": "logistic4"}, "grid": {"count": 9}})
    grid = body["grid"]
    assert len(grid["x"]) == 9
    assert grid["x"][0] == 0.0
    np.testing.assert_allclose(grid["x"][1:], np.geomspace(0.01, 100.0, 8), rtol=1e-12)
    y_left = next(c["estimate"] for c in body["coefficients"] if c["term"] == "y_left")
    assert grid["fit"][0] == pytest.approx(y_left, rel=1e-9)   # the curve at x = 0 is y_left


def test_linear_spacing_asked_on_a_log_x_curve_is_even(client):
    x, y = _dose_response(blank=True)
    body = _fit(client, {"x": x, "y": y, "model": {"family": "logistic4"},
                         "grid": {"count": 11, "spacing": "linear"}})
    np.testing.assert_allclose(body["grid"]["x"], np.linspace(0.0, 100.0, 11), rtol=1e-12)


def test_polynomial_and_linear_scale_curves_keep_the_even_grid(client):
    x, y = _dose_response()
    poly = _fit(client, {"x": x, "y": y, "model": {"degree": 2}, "grid": {"count": 11}})
    np.testing.assert_allclose(poly["grid"]["x"], np.linspace(0.01, 100.0, 11), rtol=1e-12)
    assert "scale" not in poly["model"]
    t = np.linspace(0.5, 8.0, 16)
    rng = np.random.default_rng(7)
    rise = (5.0 * (1.0 - np.exp(-0.4 * t)) + rng.normal(0.0, 0.05, t.size)).tolist()
    curve = _fit(client, {"x": t.tolist(), "y": rise, "model": {"family": "exponential"},
                          "grid": {"count": 6}})
    np.testing.assert_allclose(curve["grid"]["x"], np.linspace(0.5, 8.0, 6), rtol=1e-12)
    assert curve["model"]["scale"] == "linear"


def test_log_spacing_asked_on_a_polynomial_with_positive_x(client):
    x, y = _dose_response()
    body = _fit(client, {"x": x, "y": y, "model": {"degree": 1},
                         "grid": {"count": 5, "spacing": "log"}})
    np.testing.assert_allclose(body["grid"]["x"], np.geomspace(0.01, 100.0, 5), rtol=1e-12)
    body = _fit(client, {"x": x, "y": y, "model": {"degree": 1},
                         "grid": {"start": 1.0, "stop": 1000.0, "count": 4, "spacing": "log"}})
    np.testing.assert_allclose(body["grid"]["x"], [1.0, 10.0, 100.0, 1000.0], rtol=1e-12)


@pytest.mark.parametrize("model, grid", [
    ({"degree": 1}, {"count": 5, "spacing": "log"}),                    # data x include 0
    ({"family": "logistic4"}, {"start": 0.0, "stop": 10.0, "count": 5, "spacing": "log"}),
    ({"family": "logistic4", "scale": "linear"}, {"count": 5, "spacing": "log"}),
])
def test_log_spacing_over_x_not_above_zero_is_refused(client, model, grid):
    x, y = _dose_response(blank=True)
    problem = assert_problem(post_json(client, "/v1/fit", {"x": x, "y": y, "model": model,
                                                           "grid": grid}),
                             422, "invalid_spec", "grid.spacing")
    assert "linear" in problem["errors"]["grid.spacing"][0] or "linear" in str(problem)


@pytest.mark.parametrize("grid, field", [
    ({"start": 1.0, "stop": 10.0, "step": 1.0, "spacing": "log"}, "grid.spacing"),
    ({"count": 5, "spacing": "geometric"}, "grid.spacing"),
    ({"x": [1.0, 2.0], "spacing": "log"}, "grid.x"),
])
def test_spacing_refusals_name_the_field(client, grid, field):
    x, y = _dose_response()
    assert_problem(post_json(client, "/v1/fit", {"x": x, "y": y, "grid": grid}), 422,
                   "validation_error", field)


def test_families_states_the_spacing_rule_the_fit_follows(client):
    # /v1/families' defaults are what a fit without grid.spacing does (this file's checks above)
    spacing = client.get("/v1/families").get_json()["defaults"]["grid_spacing"]
    assert spacing == {"default": "linear", "built_in_curve_on_log_x": "log"}
    x, y = _dose_response()
    curve = _fit(client, {"x": x, "y": y, "model": {"family": "logistic4"}, "grid": {"count": 5}})
    line = _fit(client, {"x": x, "y": y, "model": {"degree": 1}, "grid": {"count": 5}})
    np.testing.assert_allclose(curve["grid"]["x"], np.geomspace(0.01, 100.0, 5), rtol=1e-12)
    np.testing.assert_allclose(line["grid"]["x"], np.linspace(0.01, 100.0, 5), rtol=1e-12)
