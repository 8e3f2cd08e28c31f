"""The residual panels draw statsmodels' numbers and the fit's own cut-offs.

Oracles: statsmodels ``OLSInfluence`` (hat values, externally studentized residuals,
Cook's distance) and ``het_breuschpagan(..., robust=True)`` (Koenker's studentized
Breusch-Pagan LM and p-value); scipy's half-normal quantile function. Every limit,
contour and cut-off line is read back from the matplotlib artists and compared with
``Diagnostics.thresholds`` (the numbers the flags used), never with constants here, so
these checks hold whatever rule the core calibrates. The relation between internally
(r) and externally (t) studentized residuals, t² = r² (df - 1) / (df - r²), and Cook's
distance D = r² h / (p (1 - h)) are common practice. The data are seeded random draws.
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats
from statsmodels.stats.diagnostic import het_breuschpagan
from statsmodels.stats.outliers_influence import OLSInfluence

from service.core import FitOptions, ModelSpec, fit_series
from service.plots import PlotOptions, build_figure, envelope
from service.plots.basis import residual_basis
from service.plots.options import PANEL_TITLES

RTOL = 1e-9
DIAGNOSTIC = ("fit", "studentized_residuals", "influence", "spread", "half_normal")


def _series(seed: int, n: int):
    rng = np.random.default_rng(seed)
    x = np.concatenate([np.sort(rng.uniform(0.0, 8.0, n - 1)), [14.0]])
    y = 2.0 + 1.5 * x - 0.12 * x**2 + rng.normal(0.0, 0.5, n) * (1 + 0.1 * x)
    y[n // 3] += 3.5   # far off the curve: an outlier
    y[-1] += 3.0       # far out in x and off the curve: leverage and influence
    return x, y


def _axes(figure, name):
    found = [ax for ax in figure.axes if ax.get_title(loc="left") == PANEL_TITLES[name]]
    assert len(found) == 1, [ax.get_title(loc="left") for ax in figure.axes]
    return found[0]


def _lines(ax, label):
    return [ln for ln in ax.get_lines() if ln.get_label() == label]


def _note(ax) -> str:
    return " ".join(t.get_text() for t in ax.texts)


def _points(ax):
    (points,) = [ln for ln in ax.get_lines() if ln.get_marker() == "o"]
    return np.asarray(points.get_xdata(), float), np.asarray(points.get_ydata(), float)


@pytest.fixture(scope="module")
def cubic():
    x, y = _series(seed=1, n=30)
    report = fit_series(x, y, model=ModelSpec(degree=3), options=FitOptions(grid=None))
    design = np.vander(x, 4, increasing=True)
    model = sm.OLS(y, design).fit()
    figure = build_figure(report, x, y, options=PlotOptions(panels=DIAGNOSTIC))
    diag = report.diagnostics
    assert diag.outliers and diag.high_leverage and diag.influential, "seeded data must flag"
    return {"x": x, "y": y, "design": design, "report": report, "model": model,
            "influence": OLSInfluence(model), "figure": figure,
            "thresholds": diag.thresholds}


def test_studentized_residuals_against_x_with_the_outlier_limits(cubic):
    ax, cut = _axes(cubic["figure"], "studentized_residuals"), cubic["thresholds"]["outlier_t"]
    xs, ts = _points(ax)
    np.testing.assert_array_equal(xs, cubic["x"])
    np.testing.assert_allclose(ts, cubic["influence"].resid_studentized_external, rtol=1e-7)
    (upper,) = _lines(ax, f"outlier limits ±{cut:.3g}")
    lower = [ln for ln in ax.get_lines() if ln is not upper and ln.get_linestyle() == "--"]
    assert upper.get_ydata()[0] == cut and [ln.get_ydata()[0] for ln in lower] == [-cut]
    assert ax.get_shared_x_axes().joined(ax, _axes(cubic["figure"], "fit"))
    beyond = np.flatnonzero(np.abs(cubic["influence"].resid_studentized_external) > cut)
    (ringed,) = _lines(ax, "outlier")  # every point past the limits carries the outlier mark
    np.testing.assert_array_equal(ringed.get_xdata(), cubic["x"][beyond])


def test_influence_map_draws_the_flags_own_cut_offs(cubic):
    ax, cuts = _axes(cubic["figure"], "influence"), cubic["thresholds"]
    infl = cubic["influence"]
    hs, ts = _points(ax)
    np.testing.assert_allclose(hs, infl.hat_matrix_diag, rtol=1e-9)
    np.testing.assert_allclose(ts, infl.resid_studentized_external, rtol=1e-7)
    (lev,) = _lines(ax, f"leverage cut-off {cuts['leverage']:.3g}")
    assert list(lev.get_xdata()) == [cuts["leverage"]] * 2
    (limit,) = _lines(ax, f"outlier limits ±{cuts['outlier_t']:.3g}")
    assert limit.get_ydata()[0] == cuts["outlier_t"]
    (contour,) = _lines(ax, f"Cook's distance cut-off {cuts['cooks_distance']:.3g}")
    h, t = np.asarray(contour.get_xdata()), np.asarray(contour.get_ydata())
    n, p = cubic["x"].size, cubic["design"].shape[1]
    df = n - p
    r2 = t**2 * df / (df - 1 + t**2)          # back to internally studentized
    cook_on_line = r2 * h / (p * (1 - h))
    np.testing.assert_allclose(cook_on_line, cuts["cooks_distance"], rtol=1e-9)
    mirrored = [ln for ln in ax.get_lines() if ln is not contour
                and ln.get_linestyle() == contour.get_linestyle()]
    assert len(mirrored) == 1 and np.allclose(mirrored[0].get_ydata(), -t)
    # the contour parts statsmodels' Cook's distances at the cut-off
    bound = np.interp(infl.hat_matrix_diag, h, t, left=np.inf)
    cooks = infl.cooks_distance[0]
    clear = np.abs(cooks / cuts["cooks_distance"] - 1) > 0.02
    outside = np.abs(infl.resid_studentized_external) > bound
    np.testing.assert_array_equal(outside[clear], (cooks > cuts["cooks_distance"])[clear])


def test_influence_map_marks_each_flag_with_its_own_shape(cubic):
    ax, diag = _axes(cubic["figure"], "influence"), cubic["report"].diagnostics
    infl = cubic["influence"]
    shapes = set()
    for label, positions in (("outlier", diag.outliers), ("high leverage", diag.high_leverage),
                             ("influential", diag.influential)):
        (marks,) = _lines(ax, label)
        np.testing.assert_allclose(marks.get_xdata(), infl.hat_matrix_diag[list(positions)],
                                   rtol=1e-9)
        shapes.add(marks.get_marker())
    assert len(shapes) == 3
    # statsmodels' measures against the thresholds give the same flagged points
    cuts = cubic["thresholds"]
    assert set(diag.influential) == set(np.flatnonzero(
        infl.cooks_distance[0] > cuts["cooks_distance"]))
    assert set(diag.high_leverage) == set(np.flatnonzero(
        infl.hat_matrix_diag > cuts["leverage"]))


def test_spread_panel_redraws_the_breusch_pagan_regression(cubic):
    ax, model, x = _axes(cubic["figure"], "spread"), cubic["model"], cubic["x"]
    xs, scaled = _points(ax)
    e2 = model.resid**2
    np.testing.assert_allclose(scaled, e2 / e2.mean(), rtol=1e-7)
    (curve,) = _lines(ax, "Breusch–Pagan auxiliary fit, degree 3")
    # the curve is a cubic in x: recover it exactly from its vertices, evaluate at the data
    coef = np.polyfit(curve.get_xdata(), curve.get_ydata(), 3)
    fitted = np.polyval(coef, x)
    r2 = 1 - np.sum((scaled - fitted) ** 2) / np.sum((scaled - scaled.mean()) ** 2)
    lm, lm_p, _, _ = het_breuschpagan(model.resid, cubic["design"], robust=True)
    np.testing.assert_allclose(x.size * r2, lm, rtol=1e-6)
    assert f"p = {lm_p:.2g}" in _note(ax)
    (flat,) = _lines(ax, "constant spread")
    assert list(flat.get_ydata()) == [1.0, 1.0]


def test_half_normal_positions_points_and_envelope(cubic):
    ax, n = _axes(cubic["figure"], "half_normal"), cubic["x"].size
    xs, ys = _points(ax)
    i = np.arange(1, n + 1)
    np.testing.assert_allclose(xs, stats.halfnorm.ppf((i - 0.375) / (n + 0.25)), rtol=1e-12)
    np.testing.assert_allclose(ys, np.sort(np.abs(cubic["influence"].resid_studentized_external)),
                               rtol=1e-7)
    # the envelope: the same seeded draws, each fitted by statsmodels and studentized there
    sims = envelope.simulation_count(n)
    draws = envelope.normal_draws(np.random.default_rng(envelope.SEED), sims, n)
    simulated = np.sort([np.abs(OLSInfluence(sm.OLS(z, cubic["design"]).fit())
                                .resid_studentized_external) for z in draws], axis=1)
    (band,) = [c for c in ax.collections if c.get_label().startswith("envelope of")]
    assert band.get_label() == f"envelope of {sims} simulated fits"
    vertices = band.get_paths()[0].vertices
    for k in range(n):
        ys_at = vertices[np.isclose(vertices[:, 0], xs[k], rtol=0, atol=1e-12), 1]
        np.testing.assert_allclose([ys_at.min(), ys_at.max()],
                                   [simulated[:, k].min(), simulated[:, k].max()], rtol=1e-7)
    (mean,) = _lines(ax, "mean of the simulated fits")
    np.testing.assert_allclose(mean.get_ydata(), simulated.mean(axis=0), rtol=1e-7)


def test_envelope_draws_do_not_depend_on_the_block_size(cubic, monkeypatch):
    diag = cubic["report"].diagnostics
    basis = residual_basis(cubic["report"].model, cubic["x"], None)
    whole = envelope.envelope(np.asarray(diag.studentized), basis)
    monkeypatch.setattr(envelope, "BLOCK_VALUES", 7 * cubic["x"].size)  # blocks of 7 fits
    blocks = envelope.envelope(np.asarray(diag.studentized), basis)
    for name in ("lower", "upper", "mean", "observed", "positions"):
        np.testing.assert_allclose(getattr(blocks, name), getattr(whole, name), rtol=1e-14)


def test_weighted_transformed_basis_reproduces_the_core_leverages():
    rng = np.random.default_rng(17)
    x = np.sort(rng.uniform(1.0, 30.0, 25))
    y = 1.0 + 2.0 * np.log(x) + rng.normal(0.0, 0.1, x.size)
    w = rng.uniform(0.5, 3.0, x.size)
    report = fit_series(x, y, w, model=ModelSpec(degree=2, transform_x="log", intercept=False))
    q = residual_basis(report.model, x, w)
    np.testing.assert_allclose(np.sum(q * q, axis=1), report.diagnostics.leverage, rtol=1e-9)
    u = np.log(x)
    hat = OLSInfluence(sm.OLS(np.sqrt(w) * y, np.sqrt(w)[:, None] * np.column_stack(
        (u, u**2))).fit()).hat_matrix_diag
    np.testing.assert_allclose(np.sum(q * q, axis=1), hat, rtol=1e-9)


def test_panels_say_so_when_residual_forms_are_undefined():
    x = np.arange(8.0)
    report = fit_series(x, x**2, model=ModelSpec(degree=2))  # exact fit
    figure = build_figure(report, x, x**2, options=PlotOptions(panels=DIAGNOSTIC))
    for name in ("studentized_residuals", "influence", "half_normal"):
        ax = _axes(figure, name)
        assert "not defined" in _note(ax), (name, _note(ax))
        assert not [ln for ln in ax.get_lines() if ln.get_marker() == "o" and
                    np.size(ln.get_xdata())], name
        assert not [ln.get_label() for ln in ax.get_lines()  # no cut-offs of nothing
                    if not ln.get_label().startswith("_")], name
    assert "not computed" in _note(_axes(figure, "spread"))


@pytest.mark.parametrize("x, y, degree", [
    (np.arange(8.0), np.arange(8.0) ** 2, 2),          # exact fit: 5 residual df, all zero
    (np.array([1.0, 2.0, 3.0]), np.array([1.0, 2.5, 2.9]), 1)])  # one residual df
def test_the_undefined_note_gives_the_right_reason(x, y, degree):
    # externally studentized residuals need two residual df (s_(i) divides by df - 1) and a
    # residual that is not rounding noise; the note said "no residual df" in both cases
    report = fit_series(x, y, model=ModelSpec(degree=degree))
    figure = build_figure(report, x, y, options=PlotOptions(panels=DIAGNOSTIC))
    note = _note(_axes(figure, "studentized_residuals"))
    assert "no residual df" not in note and "not defined" in note
    assert ("exact fit" in note) and ("fewer than 2 residual df" in note)
