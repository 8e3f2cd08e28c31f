"""Reading x back from y, edge cases: any reading gets a status or a typed error, the fallback
root finder, precision, weights and an exact fit."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from service.core import DataError, ModelSpec, fit_series
from service.core.models.inverse import STATUSES, invert
from tests.conftest import load_nist
from tests.models.calibration_helpers import LEAN, fieller_interval, fit_model, nist_fit

# --- robustness: any finite reading gets an answer or a typed error, never a crash -------------

_MODELS = [(2, {}), (3, {}), (1, {"intercept": False}), (2, {"transform_x": "log"}),
           (2, {"transform_y": "reciprocal"}), (1, {"transform_y": "log"})]


@pytest.fixture(scope="module")
def pontius_models():
    ref = load_nist("pontius")
    x, y = np.asarray(ref["data"]["x"]), np.asarray(ref["data"]["y"])
    return [fit_model(x, y, degree, **spec) for degree, spec in _MODELS]


@settings(max_examples=150, deadline=None, database=None, derandomize=True,
          suppress_health_check=list(HealthCheck))
@given(which=st.integers(0, len(_MODELS) - 1),
       reading=st.one_of(st.floats(-1e300, 1e300), st.floats(0.0, 3.0)),
       m=st.integers(1, 10**6), level=st.floats(0.5, 0.999))
def test_any_reading_gets_a_status_or_a_typed_error(pontius_models, which, reading, m, level):
    model = pontius_models[which]
    try:
        result = invert(model, [reading], replicates=m, level=level)
    except DataError as error:   # TransformError is a DataError: names the reading
        assert error.field == "y[0]"
        return
    estimate = result.estimates[0]
    assert estimate.status in STATUSES
    if estimate.status in ("no_real_root", "roots_unresolved", "outside_range",
                           "multiple_roots_in_range"):
        assert np.isnan(estimate.x)
    else:
        assert model.x_min * (1 - 1e-9) <= estimate.x <= model.x_max * (1 + 1e-9)
    if estimate.status == "ok":
        assert model.x_min <= estimate.lower * (1 + 1e-9) and estimate.lower <= estimate.x
        assert estimate.x <= estimate.upper <= model.x_max * (1 + 1e-9)


def test_bracketing_fallback_gives_the_same_fieller_interval(monkeypatch):
    # Force the fallback path (as if Newton failed): it must reproduce the closed form too.
    from service.core.models import inverse_band

    monkeypatch.setattr(inverse_band.CalibrationCurve, "_newton",
                        lambda self, t, y0, m, sign: np.full_like(t, np.nan))
    x, y, model = nist_fit("norris", 1)
    estimate = invert(model, [400.0], replicates=2).estimates[0]
    x0, lo, hi = fieller_interval(x, y, 400.0, 2, 0.95)
    assert estimate.status == "ok"
    np.testing.assert_allclose([estimate.x, estimate.lower, estimate.upper], [x0, lo, hi],
                               rtol=1e-10)


def test_precise_calibration_keeps_its_interval_digits():
    # Seeded line with tiny noise (sd 1e-9 on y ~ 1): the interval is ~1e-8 wide in x and must
    # still match the closed form with statsmodels estimates (whose own precision here is
    # about 1e-7 relative).
    rng = np.random.default_rng(19)
    x = np.linspace(0.0, 1.0, 12)
    y = 0.5 + 0.3 * x + rng.normal(0, 1e-9, x.size)
    model = fit_model(x, y, 1)
    estimate = invert(model, [0.65]).estimates[0]
    x0, lo, hi = fieller_interval(x, y, 0.65, 1, 0.95)
    assert estimate.status == "ok"
    np.testing.assert_allclose(estimate.upper - estimate.lower, hi - lo, rtol=1e-6)
    np.testing.assert_allclose(estimate.x, x0, rtol=1e-12)


def test_weighted_calibration_interval_matches_statsmodels_wls_bands():
    # Oracle: statsmodels WLS; a new reading has unit weight (variance sigma^2), as documented.
    # Data: NIST StRD Pontius with seeded inverse-variance weights.
    ref = load_nist("pontius")
    x, y = np.asarray(ref["data"]["x"]), np.asarray(ref["data"]["y"])
    w = np.random.default_rng(23).uniform(0.5, 2.0, x.size)
    model = fit_series(x, y, w, model=ModelSpec(degree=2), options=LEAN).model
    y0 = 1.239722
    estimate = invert(model, [y0]).estimates[0]
    assert estimate.status == "ok"
    unit = x.max()
    design = np.vander(x / unit, 3, increasing=True)
    wls = sm.WLS(y, design, weights=w).fit()
    at = np.vander(np.array([estimate.lower, estimate.upper]) / unit, 3, increasing=True)
    frame = wls.get_prediction(at, weights=1.0).summary_frame(alpha=0.05)
    np.testing.assert_allclose(frame["obs_ci_upper"].iloc[0], y0, rtol=1e-9)
    np.testing.assert_allclose(frame["obs_ci_lower"].iloc[1], y0, rtol=1e-9)


def test_exact_fit_without_residual_df_gives_x_but_no_interval():
    # Three points, quadratic: no residual df, sigma undefined (null in the document). The
    # estimate is still the root of the interpolating parabola (oracle: numpy.polyfit/roots).
    from service.core.models.document import from_document, to_document

    x, y = np.array([1.0, 2.0, 4.0]), np.array([1.0, 3.0, 6.0])  # vertex at 7.5
    doc = to_document(fit_model(x, y, 2))
    assert doc["sigma"] is None and doc["df_residual"] == 0
    estimate = invert(from_document(doc), [2.5]).estimates[0]
    roots = np.roots(np.polyfit(x, y, 2) - [0, 0, 2.5]).real
    np.testing.assert_allclose(estimate.x, roots[(roots >= 1) & (roots <= 4)][0], rtol=1e-12)
    assert estimate.status == "interval_undefined" and np.isnan(estimate.lower)


def test_a_reading_outside_a_stored_transform_says_what_to_send():
    # The transform of a stored model is fixed: the fix may not tell the caller to "choose
    # transform_y" (a /v1/fit option) but what readings the model can take (invented data).
    from service.core import TransformError, predict

    x = np.linspace(1.0, 8.0, 8)
    model = fit_model(x, np.exp(0.5 * x) * (1 + 0.01 * np.sin(7 * x)), 1,
                      transform_x="log", transform_y="log")
    with pytest.raises(TransformError) as caught:
        invert(model, [5.0, -1.0])
    assert caught.value.field == "y[1]"
    assert "transform_y" not in caught.value.fix and "log" in caught.value.fix
    with pytest.raises(TransformError) as caught:
        predict(model, [2.0, 0.0])
    assert caught.value.field == "x[1]"
    assert "transform_x" not in caught.value.fix and "log" in caught.value.fix
