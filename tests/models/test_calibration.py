"""Calibration figures of merit against published formulas, NIST values and statsmodels."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import optimize

from service.core import FitOptions, GridSpec, ModelSpec, fit_series, predict
from service.core.models.calibration import figures_of_merit, sensitivity
from tests.conftest import load_nist


def _data(name):
    ref = load_nist(name)
    return ref, np.asarray(ref["data"]["x"], float), np.asarray(ref["data"]["y"], float)


def _model(x, y, degree, **spec):
    return fit_series(x, y, model=ModelSpec(degree=degree, **spec),
                      options=FitOptions(grid=GridSpec(count=5))).model


@pytest.mark.parametrize("direction", [1.0, -1.0])
def test_straight_line_ich_limits_are_3_3_and_10_sigma_over_slope(direction):
    # Source: ICH Q2(R1), "Detection limit / Quantitation limit based on the standard
    # deviation of the response and the slope": DL = 3.3 sigma / S, QL = 10 sigma / S
    # (from memory). Oracle for sigma and S: statsmodels OLS on NIST StRD Norris (and on
    # its mirror image, a decreasing calibration: the limits use |S|).
    _, x, y = _data("norris")
    y = direction * y
    ols = sm.OLS(y, sm.add_constant(x)).fit()
    s, slope = np.sqrt(ols.scale), ols.params[1]
    figures = figures_of_merit(_model(x, y, 1))
    assert figures.available
    np.testing.assert_allclose(figures.sensitivity_at_blank, slope, rtol=1e-10)
    np.testing.assert_allclose(figures.detection_limit_ich, 3.3 * s / abs(slope), rtol=1e-9)
    np.testing.assert_allclose(figures.quantification_limit_ich, 10 * s / abs(slope),
                               rtol=1e-9)
    assert figures.blank_extrapolated == (x.min() > 0)


def _hubaux_vos_oracle(x, y, degree, alpha):
    """Decision level/limit and detection limit from statsmodels prediction intervals.

    x is divided by max(x) first (an exact reparameterization that leaves prediction
    intervals unchanged) so the raw-power design stays well conditioned.
    """
    unit = x.max()
    design = lambda v: np.vander(np.atleast_1d(np.asarray(v, float)) / unit,  # noqa: E731
                                 degree + 1, increasing=True)
    ols = sm.OLS(y, design(x)).fit()

    def band(v, edge):  # two-sided (1 - 2 alpha) interval = one-sided (1 - alpha) limit
        return ols.get_prediction(design(v)).summary_frame(alpha=2 * alpha)[edge].iloc[0]

    y_c = band(0.0, "obs_ci_upper")
    x_c = optimize.brentq(lambda v: ols.predict(design(v))[0] - y_c, 0.0, x.max())
    x_d = optimize.brentq(lambda v: band(v, "obs_ci_lower") - y_c, 0.0, x.max(), xtol=1e-14)
    return y_c, x_c, x_d


@pytest.mark.parametrize("name, degree", [("norris", 1), ("pontius", 2)])
def test_hubaux_vos_limits_match_statsmodels_prediction_bands(name, degree):
    # Source: Hubaux & Vos (1970), Anal. Chem. 42, 849-855: decision level y_C = upper
    # one-sided prediction limit at the blank; x_C where the curve reaches y_C; x_D where the
    # lower one-sided limit reaches y_C (from memory). Oracle: statsmodels OLS intervals.
    _, x, y = _data(name)
    figures = figures_of_merit(_model(x, y, degree), alpha=0.05, beta=0.05)
    y_c, x_c, x_d = _hubaux_vos_oracle(x, y, degree, 0.05)
    np.testing.assert_allclose(figures.decision_level_y, y_c, rtol=1e-9)
    np.testing.assert_allclose(figures.decision_limit, x_c, rtol=1e-7)
    np.testing.assert_allclose(figures.detection_limit, x_d, rtol=1e-7)
    assert 0 < figures.decision_limit < figures.detection_limit


def test_quadratic_sensitivity_and_limits_agree_with_nist_certified_values():
    # Source: NIST StRD Pontius certified coefficients and residual SD. Sensitivity of a
    # quadratic calibration is dy/dx = B1 + 2 B2 x (common practice); the ICH-style limit
    # read through the curve solves B1 x + B2 x^2 = 3.3 sd.
    ref, x, y = _data("pontius")
    b0, b1, b2 = ref["certified"]["coefficients"]
    sd = ref["certified"]["residual_sd"]
    model = _model(x, y, 2)
    points = np.array([0.0, 1.5e5, 1.705106e6, 3.0e6])
    np.testing.assert_allclose(sensitivity(model, points), b1 + 2 * b2 * points, rtol=1e-9)
    figures = figures_of_merit(model)
    lod, loq = figures.detection_limit_ich, figures.quantification_limit_ich
    np.testing.assert_allclose(b1 * lod + b2 * lod**2, 3.3 * sd, rtol=1e-8)
    np.testing.assert_allclose(b1 * loq + b2 * loq**2, 10 * sd, rtol=1e-8)
    assert figures.blank_extrapolated   # the loads start at 150,000: x = 0 is extrapolated


def test_sensitivity_with_transforms_matches_a_finite_difference_of_predict():
    # Chain rule through both transforms, checked against a central difference of the fitted
    # curve on the original scales (core predict).
    rng = np.random.default_rng(5)
    x = np.geomspace(1.0, 50.0, 12)
    y = np.exp(0.3 + 0.8 * np.log(x) + rng.normal(0, 0.02, x.size))
    model = _model(x, y, 2, transform_x="log", transform_y="log")
    at = np.array([2.0, 10.0, 40.0])
    h = 1e-5 * at
    numeric = (predict(model, at + h).fit - predict(model, at - h).fit) / (2 * h)
    np.testing.assert_allclose(sensitivity(model, at), numeric, rtol=1e-7)


@pytest.mark.parametrize("name, degree, spec, words", [
    ("filip", 10, {}, "straight-line and quadratic"),
    ("noint1", 1, {"intercept": False}, "no intercept"),
    ("norris", 1, {"transform_y": "sqrt"}, "untransformed"),
])
def test_figures_are_withheld_where_the_formulas_do_not_apply(name, degree, spec, words):
    _, x, y = _data(name)
    figures = figures_of_merit(_model(x, y, degree, **spec))
    assert not figures.available and words in figures.reason
    assert np.isnan(figures.detection_limit) and np.isnan(figures.detection_limit_ich)
