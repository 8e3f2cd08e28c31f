"""Figures of nonlinear fits: curve and bands, log-x axis, residual panels, candidates.

Oracles, independent of the service's code: the logistic curves written again in numpy
(tests/core/nonlinear/builtin_designs.py), their gradients by central finite differences
(the delta-method band, Bates & Watts 1988, §2.3: se² = g' C g), the tangent-plane hat
matrix from statsmodels' OLSInfluence on that finite-difference Jacobian, the
Breusch-Pagan regression refitted with numpy (squared residuals on 1, x), and
scipy.stats.t for the critical value. Data: the invented immunoassay plate of
scripts/demo_data.py (demo data).
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats
from statsmodels.stats.outliers_influence import OLSInfluence

from scripts.demo_data import assay
from service.core import FitOptions, GridSpec, ModelSpec, fit_series
from service.core.compare import compare
from service.plots import PlotOptions, build_figure
from service.plots.basis import residual_basis
from service.plots.options import COMPARISON_TITLE, PANEL_TITLES
from tests.core.nonlinear.builtin_designs import _log5 as log5
from tests.core.nonlinear.builtin_designs import log4

ALL = ("fit", "studentized_residuals", "influence", "spread", "half_normal")
OPTIONS = FitOptions(grid=GridSpec(count=100))


@pytest.fixture(scope="module")
def plate():
    body = assay()
    x, y = np.array(body["x"]), np.array(body["y"])
    report = fit_series(x, y, model=ModelSpec(family="logistic4"), options=OPTIONS)
    assert report.model.parameter_names == ("y_left", "y_right", "slope", "ec50")
    figure = build_figure(report, x, y, options=PlotOptions(panels=ALL, x_scale="log"))
    return {"x": x, "y": y, "report": report, "figure": figure, "body": body}


def _axes(figure, title):
    found = [ax for ax in figure.axes if ax.get_title(loc="left") == title]
    assert len(found) == 1, [ax.get_title(loc="left") for ax in figure.axes]
    return found[0]


def _line(ax, label):
    lines = [ln for ln in ax.get_lines() if ln.get_label() == label]
    assert len(lines) == 1, [ln.get_label() for ln in ax.get_lines()]
    return lines[0]


def _jacobian(curve, x, theta):
    """Central finite differences of a numpy curve in its parameters."""
    columns = []
    for j in range(theta.size):
        h = 1e-6 * max(abs(theta[j]), 1e-3)
        up, down = theta.copy(), theta.copy()
        up[j] += h
        down[j] -= h
        columns.append((curve(x, *up) - curve(x, *down)) / (2 * h))
    return np.column_stack(columns)


def test_the_curve_and_bands_are_the_logistic_and_its_delta_method_band(plate):
    fitted = plate["report"].model
    ax = _axes(plate["figure"], PANEL_TITLES["fit"])
    curve = _line(ax, "fitted logistic4")
    xs, ys = curve.get_xdata(), curve.get_ydata()
    ratios = xs[1:] / xs[:-1]  # geometric spacing: smooth on the log axis
    np.testing.assert_allclose(ratios, ratios[0], rtol=1e-9)
    assert (xs[0], xs[-1]) == pytest.approx((fitted.x_min, fitted.x_max), rel=1e-12)
    np.testing.assert_allclose(ys, log4(xs, *fitted.estimates), rtol=1e-10)
    g = _jacobian(log4, xs, fitted.estimates.copy())
    se = np.sqrt(np.einsum("ij,jk,ik->i", g, fitted.covariance, g))
    crit = stats.t.ppf(0.975, fitted.df_residual)
    lower = _line(ax, "95% band, new observation").get_ydata()  # the labelled lower edge
    np.testing.assert_allclose(lower, ys - crit * np.sqrt(se**2 + fitted.sigma**2), rtol=1e-6)


def test_the_log_axis_has_plain_tick_labels(plate):
    for title in (PANEL_TITLES["fit"], PANEL_TITLES["studentized_residuals"],
                  PANEL_TITLES["spread"]):
        ax = _axes(plate["figure"], title)
        assert ax.get_xscale() == "log"
    plate["figure"].canvas.draw()
    ax = _axes(plate["figure"], PANEL_TITLES["studentized_residuals"])
    labels = [t.get_text() for t in ax.get_xticklabels() if t.get_text()]
    assert {"0.1", "1", "10", "100"} <= set(labels), labels
    assert not any("$" in label or "mathdefault" in label for label in labels)


def test_leverages_and_envelope_basis_are_the_tangent_plane_hat_matrix(plate):
    fitted, x = plate["report"].model, plate["x"]
    jacobian = _jacobian(log4, x, fitted.estimates.copy())
    hat = OLSInfluence(sm.OLS(plate["y"], jacobian).fit()).hat_matrix_diag
    q = residual_basis(fitted, x, None)
    np.testing.assert_allclose(np.sum(q * q, axis=1), hat, rtol=1e-6)
    np.testing.assert_allclose(plate["report"].diagnostics.leverage, hat, rtol=1e-6)
    ax = _axes(plate["figure"], PANEL_TITLES["half_normal"])
    assert any(c.get_label().startswith("envelope of 99") for c in ax.collections)


def test_the_spread_panel_redraws_the_breusch_pagan_line_in_x(plate):
    fitted, x = plate["report"].model, plate["x"]
    e = plate["y"] - log4(x, *fitted.estimates)
    scaled = e**2 / np.mean(e**2)
    ax = _axes(plate["figure"], PANEL_TITLES["spread"])
    (curve,) = [ln for ln in ax.get_lines() if ln.get_label().startswith("Breusch")]
    slope, intercept = np.polyfit(x, scaled, 1)
    np.testing.assert_allclose(curve.get_ydata(), intercept + slope * curve.get_xdata(),
                               rtol=1e-6, atol=1e-9)
    r2 = 1 - np.sum((scaled - intercept - slope * x) ** 2) / np.sum((scaled - scaled.mean())**2)
    p_value = stats.chi2.sf(x.size * r2, 1)  # Koenker's n R², 1 df
    assert f"p = {p_value:.2g}" in ax.texts[0].get_text()


def test_the_candidates_panel_overlays_every_fitted_candidate(plate):
    body = plate["body"]
    x, y = plate["x"], plate["y"]
    candidates = (ModelSpec(family="logistic4"), ModelSpec(family="logistic5"))
    comparison = compare(x, y, candidates=candidates, select="aicc", options=OPTIONS)
    figure = build_figure(comparison.report, x, y, options=PlotOptions(
        panels=("fit", "selection"), x_scale="log"), comparison=comparison)
    ax = _axes(figure, COMPARISON_TITLE)
    assert ax.get_xscale() == "log"
    chosen = comparison.candidates[comparison.chosen]
    for row, report, curve in zip(comparison.candidates, comparison.reports, (log4, log5),
                                  strict=True):
        tag = "chosen: " if row is chosen else ""
        line = _line(ax, f"{tag}{row.label}, AICc {row.aicc:.4g}")
        np.testing.assert_allclose(line.get_ydata(),
                                   curve(line.get_xdata(), *report.model.estimates),
                                   rtol=1e-10)
    assert body["model"]["candidates"][1]["family"] == chosen.family == "logistic5"
    assert _line(ax, f"chosen: {chosen.label}, AICc {chosen.aicc:.4g}").get_linewidth() > 2


def test_over_http_nonlinear_figures_draw_and_bad_requests_name_the_field(client):
    body = assay()
    body["plot"] = {"panels": [*ALL, "selection"], "x_scale": "log"}
    r = client.post("/v1/plot", json=body)
    assert r.status_code == 200 and r.data.startswith(b"\x89PNG")
    single = {**body, "model": {"family": "logistic4"}}
    r = client.post("/v1/plot", json=single)
    assert r.status_code == 422 and "plot.panels" in r.get_json()["errors"]
    blank = {**single, "x": [0.0, *body["x"][1:]], "plot": {"x_scale": "log"}}
    r = client.post("/v1/plot", json=blank)  # a blank is fitted, not drawn, and counted
    assert r.status_code == 200 and r.headers["X-Points-Not-Drawn"] == "1"
    r = client.post("/v1/plot", json={**single, "plot": {"x_scale": "ln"}})
    assert r.status_code == 422 and "plot.x_scale" in r.get_json()["errors"]
    enzyme = {"x": [0.25, 0.5, 1, 2, 4, 8, 16, 32], "y": [1.1, 1.9, 3.4, 5.0, 7.1, 9.0, 10.2, 11.1],
              "model": {"family": "expression", "expression": "vmax*x/(km + x)",
                        "parameters": {"vmax": 10, "km": 1}},
              "plot": {"panels": list(ALL), "format": "svg"}}
    r = client.post("/v1/plot", json=enzyme)
    assert r.status_code == 200 and r.mimetype == "image/svg+xml"
