"""A log x axis with zero-dose blanks: every point is fitted, the positive x are drawn.

Oracles: scipy.optimize.curve_fit of the logistic written again in numpy
(tests/core/nonlinear/builtin_designs.py) on all points, blanks included, so the drawn
curve is the fit of all the data; numpy's geomspace for where the curve is drawn. Data:
an invented, seeded plate with three blanks (demo data).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import optimize

from service.core import FitOptions, GridSpec, ModelSpec, fit_series
from service.plots import PlotOptions, build_figure
from service.plots.options import PANEL_TITLES
from tests.core.nonlinear.builtin_designs import log4

PANELS = ("fit", "studentized_residuals", "influence", "spread")
HEADER = "X-Points-Not-Drawn"


def _plate(seed: int = 20261205):
    """Three blanks (x = 0) and seven standards in triplicate; a logistic4 with noise."""
    rng = np.random.default_rng(seed)
    x = np.repeat([0.0, 0.03, 0.1, 0.3, 1.0, 3.0, 10.0, 30.0], 3)
    y = log4(x, 0.1, 2.0, 1.1, 0.8) + rng.normal(0.0, 0.03, x.size)
    return x, np.round(y, 5)


@pytest.fixture(scope="module")
def drawn():
    x, y = _plate()
    report = fit_series(x, y, model=ModelSpec(family="logistic4"),
                        options=FitOptions(grid=GridSpec(count=50)))
    figure = build_figure(report, x, y, options=PlotOptions(panels=PANELS, x_scale="log"))
    return x, y, report, figure


def _axes(figure, title):
    return next(ax for ax in figure.axes if ax.get_title(loc="left") == title)


def test_the_fit_uses_every_point_blanks_included(drawn):
    x, y, report, _ = drawn
    assert report.statistics.n == x.size
    start = report.model.estimates * 1.05
    oracle, _ = optimize.curve_fit(log4, x, y, p0=start, maxfev=20000)
    np.testing.assert_allclose(report.model.estimates, oracle, rtol=1e-5)


def test_the_curve_is_drawn_over_the_positive_x_on_the_log_axis(drawn):
    x, _, report, figure = drawn
    ax = _axes(figure, PANEL_TITLES["fit"])
    assert ax.get_xscale() == "log"
    line = next(ln for ln in ax.get_lines() if ln.get_label() == "fitted logistic4")
    xs = line.get_xdata()
    np.testing.assert_allclose(xs, np.geomspace(0.03, 30.0, xs.size), rtol=1e-12)
    np.testing.assert_allclose(line.get_ydata(), log4(xs, *report.model.estimates),
                               rtol=1e-10)
    assert ax.get_xlim()[0] > 0


def test_the_note_says_how_many_points_were_fitted_but_not_drawn(drawn):
    _, _, _, figure = drawn
    note = _axes(figure, PANEL_TITLES["fit"]).texts[0].get_text()
    assert "3 points at x ≤ 0 fitted, not drawn" in note, note
    assert "24 points" in note


def test_over_http_blanks_are_fitted_and_counted_in_a_header(client):
    x, y = _plate()
    body = {"x": x.tolist(), "y": y.tolist(), "model": {"family": "logistic4"},
            "plot": {"panels": list(PANELS), "x_scale": "log"}}
    for fmt, magic in (("png", b"\x89PNG"), ("svg", b"<?xml")):
        r = client.post("/v1/plot", json={**body, "plot": {**body["plot"], "format": fmt}})
        assert r.status_code == 200, r.data[:300]
        assert r.data.startswith(magic)
        assert r.headers[HEADER] == "3"
    r = client.post("/v1/plot", json={**body, "plot": {"x_scale": "linear"}})
    assert r.status_code == 200 and HEADER not in r.headers


def test_log_axis_with_nothing_positive_to_draw_is_refused(client):
    body = {"x": [-5.0, -4.0, -3.0, -2.0, -1.0, 0.0], "y": [1.0, 2.1, 2.9, 4.2, 5.0, 6.1],
            "model": {"degree": 1}, "plot": {"x_scale": "log"}}
    r = client.post("/v1/plot", json=body)
    assert r.status_code == 422
    problem = r.get_json()
    assert "plot.x_scale" in problem["errors"]
    assert "linear" in problem["errors"]["plot.x_scale"][0]


def test_the_client_reads_the_count_and_the_scale():
    from curvewise_client import Client, WSGITransport

    from service.app import create_app

    api = Client("http://curvewise.test", transport=WSGITransport(create_app({})))
    x, y = _plate()
    figure = api.plot(x.tolist(), y.tolist(), model={"family": "logistic4"}, x_scale="log")
    assert figure.format == "png" and figure.points_not_drawn == 3
    assert api.plot(x.tolist(), y.tolist(), degree=1).points_not_drawn is None
    fit = api.fit(x.tolist(), y.tolist(), model={"family": "logistic4"}, grid={"count": 5})
    assert fit.model.scale == "log"
    assert fit.grid.x[0] == 0.0 and fit.grid.x[1] == pytest.approx(0.03)
