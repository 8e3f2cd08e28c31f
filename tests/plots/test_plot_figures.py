"""The fit and selection panels draw what statsmodels computes for the same fit (oracle
checks), and every panel renders awkward fits without stray warnings.

Sources: statsmodels OLS/WLS ``get_prediction`` (mean and new-observation intervals),
``OLSInfluence`` (externally studentized residuals), OLS ``aic``/``bic``. The data are
seeded random draws; statsmodels is the reference, never our own numbers. The residual
panels are checked in ``test_plot_diagnostic_panels.py``.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import statsmodels.api as sm
from statsmodels.stats.outliers_influence import OLSInfluence

from service.core import FitOptions, GridSpec, ModelSpec, fit_series
from service.plots import PANELS, PlotOptions, build_figure, render
from service.plots.options import PANEL_TITLES

RTOL = 1e-9


def _series(seed: int = 7, n: int = 40):
    rng = np.random.default_rng(seed)
    x = np.sort(rng.uniform(0.0, 10.0, n))
    y = 3.0 + 1.2 * x - 0.08 * x**2 + rng.normal(0.0, 0.6, n)
    y[-1] += 6.0  # one point far off the curve, at the edge: high influence
    return x, y


def _axes(figure, name):
    found = [ax for ax in figure.axes if ax.get_title(loc="left") == PANEL_TITLES[name]]
    assert len(found) == 1, [ax.get_title(loc="left") for ax in figure.axes]
    return found[0]


def _line(ax, label):
    lines = [ln for ln in ax.get_lines() if ln.get_label() == label]
    assert len(lines) == 1, [ln.get_label() for ln in ax.get_lines()]
    return lines[0]


@pytest.fixture(scope="module")
def quadratic():
    x, y = _series()
    grid = np.linspace(x.min(), x.max(), 60)
    report = fit_series(x, y, model=ModelSpec(degree=2),
                        options=FitOptions(grid=GridSpec(count=None, x=tuple(grid))))
    design = np.vander(x, 3, increasing=True)
    model = sm.OLS(y, design).fit()
    frame = model.get_prediction(np.vander(grid, 3, increasing=True)).summary_frame(alpha=0.05)
    figure = build_figure(report, x, y, options=PlotOptions(panels=PANELS))
    return {"x": x, "y": y, "grid": grid, "report": report, "model": model, "frame": frame,
            "influence": OLSInfluence(model), "figure": figure}


def test_fit_panel_curve_and_bands_match_statsmodels(quadratic):
    ax, frame, grid = _axes(quadratic["figure"], "fit"), quadratic["frame"], quadratic["grid"]
    curve = _line(ax, "fitted polynomial, degree 2")
    np.testing.assert_allclose(curve.get_xdata(), grid, rtol=RTOL)
    np.testing.assert_allclose(curve.get_ydata(), frame["mean"], rtol=RTOL)
    obs = [ln for ln in ax.get_lines() if ln.get_linestyle() == "--"]
    lower = _line(ax, "95% band, new observation")
    np.testing.assert_allclose(lower.get_ydata(), frame["obs_ci_lower"], rtol=RTOL)
    assert len(obs) == 2  # lower and upper edges of the new-observation band
    upper = [ln for ln in obs if ln is not lower][0]
    np.testing.assert_allclose(upper.get_ydata(), frame["obs_ci_upper"], rtol=RTOL)
    (band,) = [c for c in ax.collections if c.get_label() == "95% band, mean"]
    vertices = band.get_paths()[0].vertices
    for xj, lo, hi in zip(grid[::7], frame["mean_ci_lower"][::7], frame["mean_ci_upper"][::7],
                          strict=True):
        ys = vertices[np.isclose(vertices[:, 0], xj, rtol=0, atol=1e-12), 1]
        np.testing.assert_allclose([ys.min(), ys.max()], [lo, hi], rtol=RTOL)
    data = _line(ax, "data")
    np.testing.assert_array_equal(data.get_xdata(), quadratic["x"])


def test_selection_panel_plots_the_information_criteria_of_each_degree():
    x, y = _series(seed=11, n=30)
    report = fit_series(x, y, model=ModelSpec(max_degree=4, select="bic"))
    figure = build_figure(report, x, y, options=PlotOptions(panels=("selection",)))
    ax = _axes(figure, "selection")
    for label, attr in (("AIC", "aic"), ("BIC", "bic")):
        line = _line(ax, label)
        expected = [getattr(sm.OLS(y, np.vander(x, d + 1, increasing=True)).fit(), attr)
                    for d in line.get_xdata().astype(int)]
        np.testing.assert_allclose(line.get_ydata(), expected, rtol=1e-9)
    chosen = _line(ax, f"chosen degree {report.selection.chosen_degree}")
    best = int(_line(ax, "BIC").get_xdata()[np.argmin(_line(ax, "BIC").get_ydata())])
    assert chosen.get_xdata()[0] == best  # BIC selection picks the lowest BIC


def test_weighted_fit_bands_match_statsmodels_wls():
    x, y = _series(seed=5, n=25)
    w = np.linspace(0.5, 4.0, x.size)
    report = fit_series(x, y, w, model=ModelSpec(degree=1),
                        options=FitOptions(grid=GridSpec(count=None, x=tuple(x))))
    figure = build_figure(report, x, y, w,
                          options=PlotOptions(panels=("fit", "studentized_residuals")))
    wls = sm.WLS(y, sm.add_constant(x), weights=w).fit()
    frame = wls.get_prediction(sm.add_constant(x), weights=w).summary_frame(alpha=0.05)
    np.testing.assert_allclose(_line(_axes(figure, "fit"), "fitted polynomial, degree 1")
                               .get_ydata(), frame["mean"], rtol=RTOL)
    (points,) = [ln for ln in _axes(figure, "studentized_residuals").get_lines()
                 if ln.get_marker() == "o"]
    np.testing.assert_allclose(points.get_xdata(), x, rtol=0)
    # weighted residual forms: OLS on sqrt(w) y against sqrt(w) X (the whitened model)
    whitened = sm.OLS(np.sqrt(w) * y, np.sqrt(w)[:, None] * sm.add_constant(x)).fit()
    np.testing.assert_allclose(points.get_ydata(),
                               OLSInfluence(whitened).resid_studentized_external, rtol=1e-7)


EDGE_CASES = {
    "exact_fit": (np.arange(8.0), np.arange(8.0) ** 2, None, ModelSpec(degree=2), {}),
    "one_residual_df": (np.arange(4.0), np.array([1.0, 3.0, 2.0, 5.0]), None,
                        ModelSpec(degree=2), {}),
    "constant_y": (np.arange(10.0), np.full(10, 4.2), None, ModelSpec(max_degree=3), {}),
    "intercept_only": (np.arange(10.0), np.arange(10.0) % 3, None, ModelSpec(degree=0), {}),
    "no_intercept_log_y": (np.arange(1.0, 12.0), np.exp(0.3 * np.arange(1.0, 12.0)), None,
                           ModelSpec(degree=1, intercept=False, transform_y="log"), {}),
    "missing_dropped": (np.array([1.0, 2, 3, 4, 5, 6, 7]),
                        np.array([1.0, np.nan, 2.9, 4.2, 5.1, 5.8, 7.2]), None,
                        ModelSpec(degree=1), {"missing": "drop"}),
    "no_grid_weighted": (np.arange(12.0), np.sin(np.arange(12.0)), np.arange(1.0, 13.0),
                         ModelSpec(max_degree=3, select="press"), {"grid": None}),
    "adj_r2_huge_values": (np.arange(10.0) * 1e150, np.arange(10.0) * 1e150, None,
                           ModelSpec(max_degree=2, select="adj_r2"), {}),
}


@pytest.mark.parametrize("case", sorted(EDGE_CASES))
def test_every_panel_renders_edge_cases_without_stray_warnings(case):
    x, y, w, model, extra = EDGE_CASES[case]
    report = fit_series(x, y, w, model=model, options=FitOptions(**extra))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        png = render(report, x, y, w, PlotOptions(panels=PANELS))
    assert png.startswith(b"\x89PNG\r\n\x1a\n")
