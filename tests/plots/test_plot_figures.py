"""What the panels draw equals what statsmodels computes for the same fit (oracle checks).

Sources: statsmodels OLS/WLS ``get_prediction`` (mean and new-observation intervals),
``OLSInfluence`` (hat values, internally/externally studentized residuals, Cook's
distance), OLS ``aic``/``bic``. Blom's plotting positions (i - 3/8)/(n + 1/4) and the
Cook's distance reference levels 0.5 and 1 are common practice. The data are seeded
random draws; statsmodels is the reference, never our own numbers.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats
from statsmodels.stats.outliers_influence import OLSInfluence

from service.core import FitOptions, GridSpec, ModelSpec, fit_series
from service.plots import PANELS, PlotOptions, build_figure, render

RTOL = 1e-9


def _series(seed: int = 7, n: int = 40):
    rng = np.random.default_rng(seed)
    x = np.sort(rng.uniform(0.0, 10.0, n))
    y = 3.0 + 1.2 * x - 0.08 * x**2 + rng.normal(0.0, 0.6, n)
    y[-1] += 6.0  # one point far off the curve, at the edge: high influence
    return x, y


def _axes(figure, name):
    titles = {"fit": "Data, fitted curve and bands", "leverage": "Residuals against leverage",
              "normal_quantiles": "Normal quantiles of studentized residuals",
              "residuals": "Residuals against fitted values",
              "scale_location": "Spread against fitted values",
              "selection": "Selection criteria by degree"}
    found = [ax for ax in figure.axes if ax.get_title(loc="left") == titles[name]]
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
    figure = build_figure(report, x, y, options=PlotOptions(panels=PANELS, width=1500,
                                                            height=900))
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


def test_residual_panels_match_statsmodels_influence(quadratic):
    fig, infl, model = quadratic["figure"], quadratic["influence"], quadratic["model"]
    (points,) = [ln for ln in _axes(fig, "residuals").get_lines() if ln.get_marker() == "o"]
    np.testing.assert_allclose(points.get_xdata(), model.fittedvalues, rtol=RTOL)
    np.testing.assert_allclose(points.get_ydata(), model.resid, rtol=1e-7, atol=1e-12)
    (spread,) = [ln for ln in _axes(fig, "scale_location").get_lines() if ln.get_marker() == "o"]
    np.testing.assert_allclose(spread.get_ydata(),
                               np.sqrt(np.abs(infl.resid_studentized_internal)), rtol=1e-7)
    (lev,) = [ln for ln in _axes(fig, "leverage").get_lines() if ln.get_marker() == "o"]
    np.testing.assert_allclose(lev.get_xdata(), infl.hat_matrix_diag, rtol=1e-9)
    np.testing.assert_allclose(lev.get_ydata(), infl.resid_studentized_internal, rtol=1e-7)


def test_normal_quantile_panel_uses_blom_positions_and_external_studentization(quadratic):
    (points,) = [ln for ln in _axes(quadratic["figure"], "normal_quantiles").get_lines()
                 if ln.get_marker() == "o"]
    n = quadratic["x"].size
    blom = stats.norm.ppf((np.arange(1, n + 1) - 0.375) / (n + 0.25))
    np.testing.assert_allclose(points.get_xdata(), blom, rtol=1e-12)
    np.testing.assert_allclose(points.get_ydata(),
                               np.sort(quadratic["influence"].resid_studentized_external),
                               rtol=1e-7)


def test_cooks_distance_contours_separate_points_as_statsmodels_does(quadratic):
    ax = _axes(quadratic["figure"], "leverage")
    contour = _line(ax, "Cook's distance 0.5 and 1")  # the upper D = 0.5 curve
    h = quadratic["influence"].hat_matrix_diag
    r = quadratic["influence"].resid_studentized_internal
    bound = np.interp(h, contour.get_xdata(), contour.get_ydata())
    cooks = quadratic["influence"].cooks_distance[0]
    assert cooks.max() > 0.5, "the seeded data must contain a point beyond the 0.5 contour"
    inside = np.abs(r) < bound
    clear = np.abs(cooks - 0.5) > 0.02  # ignore points sitting on the line (interpolation)
    np.testing.assert_array_equal(inside[clear], (cooks < 0.5)[clear])


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
    figure = build_figure(report, x, y, w, options=PlotOptions(panels=("fit", "residuals")))
    wls = sm.WLS(y, sm.add_constant(x), weights=w).fit()
    frame = wls.get_prediction(sm.add_constant(x), weights=w).summary_frame(alpha=0.05)
    np.testing.assert_allclose(_line(_axes(figure, "fit"), "fitted polynomial, degree 1")
                               .get_ydata(), frame["mean"], rtol=RTOL)
    (points,) = [ln for ln in _axes(figure, "residuals").get_lines() if ln.get_marker() == "o"]
    np.testing.assert_allclose(points.get_ydata(), np.sqrt(w) * wls.resid, rtol=1e-7)
    assert _axes(figure, "residuals").get_ylabel() == "Weighted residual"


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
        png = render(report, x, y, w, PlotOptions(panels=PANELS, width=1200, height=700))
    assert png.startswith(b"\x89PNG\r\n\x1a\n")
