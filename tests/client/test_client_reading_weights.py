"""Client.predict and Client.invert send the weight of each new reading.

Oracle: the textbook observation band fit +- t_{0.975, df} sqrt(se_mean^2 + sigma^2 / w)
(inverse-variance weights, common practice) with scipy's t quantile, from the se_mean and
sigma the service reports. Data: seeded invented assay (demo data).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats


def _fit(client):
    rng = np.random.default_rng(11)
    x = np.repeat([0.5, 1.0, 2.0, 5.0, 10.0, 20.0], 3)
    y = (0.05 + 0.1 * x) * (1 + 0.05 * rng.standard_normal(x.size))
    return client.fit(x, y, weights=1 / y**2, model={"degree": 1})


def test_predict_and_invert_take_weights(inprocess_client):
    fit = _fit(inprocess_client)
    weights = np.array([16.0, 0.25])
    result = inprocess_client.predict(fit.fitted_model, [1.0, 10.0], weights=weights)
    rows = result.predictions
    se = np.array([r.se_mean for r in rows])
    half = stats.t.ppf(0.975, fit.raw["statistics"]["df_residual"]) * np.sqrt(
        se**2 + fit.raw["statistics"]["sigma"] ** 2 / weights)
    np.testing.assert_allclose([r.obs_upper - r.fit for r in rows], half, rtol=1e-9)
    plain = inprocess_client.invert(fit.fitted_model, [0.25, 0.25])
    weighted = inprocess_client.invert(fit.fitted_model, [0.25, 0.25], weights=[16.0, 1.0])
    narrow, same = weighted.estimates
    assert same.lower == plain.estimates[1].lower and same.upper == plain.estimates[1].upper
    assert narrow.upper - narrow.lower < 0.3 * (same.upper - same.lower)


def test_bad_weights_come_back_as_a_named_error(inprocess_client):
    from curvewise_client.errors import UnprocessableInput

    fit = _fit(inprocess_client)
    with pytest.raises(UnprocessableInput) as caught:
        inprocess_client.invert(fit.fitted_model, [0.25, 0.5], weights=[1.0, -1.0])
    assert "weights[1]" in caught.value.field_errors


def test_an_exact_fit_predicts_without_limits_and_says_why(inprocess_client):
    # y = 1 + 2x through five points: sigma = 0; the fitted value by hand is 1 + 2 * 1.5
    fit = inprocess_client.fit([0, 1, 2, 3, 4], [1, 3, 5, 7, 9], model={"degree": 1})
    result = inprocess_client.predict(fit.fitted_model, [1.5])
    (row,) = result.predictions
    assert row.fit == pytest.approx(4.0, rel=1e-12)
    assert row.obs_lower is None and row.se_mean is None
    assert result.intervals_withheld.code == "no_residual_variance"
    (estimate,) = inprocess_client.invert(fit.fitted_model, [4.0]).estimates
    assert estimate.status == "no_residual_variance" and estimate.lower is None
