"""The client against the real service: in-process (WSGI transport) and live gunicorn on loopback.

References: NIST StRD Pontius certified values (../shared/reference/nist-strd/pontius.json);
statsmodels OLS ``get_prediction`` as the oracle for predictions; the NIST/SEMATECH
e-Handbook load cell case study (section 4.6.1) for reading a load back from the deflection
1.239722 (about 1,705,106, as quoted in the project's calibration issue; published to ~6-7
digits). Every number checked comes from these, never from our own code.
"""

from __future__ import annotations

import io

import numpy as np
import pytest
import statsmodels.api as sm
from curvewise_client import (
    Estimates,
    FitResult,
    Predictions,
    UnprocessableInput,
)
from PIL import Image

from tests.conftest import load_nist

LIVE_CLIENT_RETRIES = 1  # for the live `api` client (tests/client/conftest.py)


@pytest.fixture(scope="module")
def pontius():
    ref = load_nist("pontius")
    return np.array(ref["data"]["x"], float), np.array(ref["data"]["y"], float), ref


def _rel(a, b):
    return abs(a - b) / abs(b)


def test_fit_reproduces_nist_pontius_certified_values(api, pontius):
    x, y, ref = pontius
    fit = api.fit(x, y, degree=2)
    cert = ref["certified"]
    assert isinstance(fit, FitResult) and fit.chosen_degree == 2
    for got, want in zip(fit.coefficients, cert["coefficients"], strict=True):
        assert _rel(got.estimate, want) < 1e-10, (got.term, got.estimate, want)
    for got, want in zip(fit.coefficients, cert["coefficient_sd"], strict=True):
        assert _rel(got.std_error, want) < 1e-9
    assert _rel(fit.statistics.sigma, cert["residual_sd"]) < 1e-9
    assert _rel(fit.statistics.r_squared, cert["r_squared"]) < 1e-12
    residual = fit.anova[-1]
    assert residual.term == "residual" and residual.df == cert["anova"]["residual"]["df"]
    assert _rel(residual.sum_of_squares, cert["anova"]["residual"]["sum_sq"]) < 1e-8
    assert residual.f is None and residual.p_value is None


def test_predict_with_the_returned_document_matches_statsmodels(api, pontius):
    x, y, _ = pontius
    fit = api.fit(x, y, degree=2, level=0.9)
    new_x = [200_000.0, 1_234_567.0, 3_100_000.0]
    pred = api.predict(fit, new_x, level=0.9)
    assert isinstance(pred, Predictions) and len(pred.predictions) == 3
    # The oracle fits the same model on centred, scaled x (same column space, well conditioned:
    # raw powers of loads up to 3e6 would cost statsmodels' pinv several digits).
    centre, scale = x.mean(), x.std()
    ols = sm.OLS(y, np.vander((x - centre) / scale, 3, increasing=True)).fit()
    frame = ols.get_prediction(np.vander((np.array(new_x) - centre) / scale, 3,
                                         increasing=True)).summary_frame(alpha=0.1)
    for row, (_, want) in zip(pred.predictions, frame.iterrows(), strict=True):
        assert _rel(row.fit, want["mean"]) < 1e-10
        assert _rel(row.mean_lower, want["mean_ci_lower"]) < 1e-9
        assert _rel(row.obs_upper, want["obs_ci_upper"]) < 1e-9
    assert [row.extrapolated for row in pred.predictions] == [False, False, True]


def test_invert_reads_the_load_back_as_in_the_e_handbook(api, pontius):
    x, y, _ = pontius
    fit = api.fit(x, y, degree=2)
    est = api.invert(fit.fitted_model, [1.239722])
    assert isinstance(est, Estimates)
    (one,) = est.estimates
    assert one.ok and _rel(one.x, 1_705_106) < 2e-6
    assert one.lower < one.x < one.upper


def test_api_errors_carry_the_problem_details(api):
    with pytest.raises(UnprocessableInput) as info:
        api.fit([1, 2, 3, 4], [1, 2, 3])
    assert "y" in info.value.field_errors and info.value.status == 422
    with pytest.raises(UnprocessableInput) as info:
        api.fit([1, 2, 3, 4], [1, 2, 3, 4], model={"degree": 1, "colour": "blue"})
    assert "model.colour" in info.value.field_errors
    with pytest.raises(UnprocessableInput) as info:
        api.fit(list(range(30)), list(range(30)), degree=11)
    assert "model.degree" in info.value.field_errors
    assert info.value.problem.type and info.value.problem.title


def test_plot_through_the_client_decodes_at_the_asked_size(api, pontius):
    x, y, _ = pontius
    png = api.plot(x, y, degree=2, panels=["fit", "influence"], width=700, height=620)
    assert png.format == "png" and Image.open(io.BytesIO(png.data)).size == (700, 620)
    svg = api.plot(x, y, degree=2, format="svg")
    assert svg.format == "svg" and b'width="800px"' in svg.data[:600]
    with pytest.raises(UnprocessableInput) as info:
        api.plot(x, y, width=50)
    assert "plot.width" in info.value.field_errors


def test_families_lists_the_polynomial_family_and_limits(api):
    families = api.families()
    names = [f.name for f in families.families]
    assert names[0] == "polynomial" and "expression" in names     # the registry's order
    polynomial = families.families[0]
    assert "sequential_f" in polynomial.select_methods
    select = [o for o in polynomial.options if o.name == "select"][0]
    assert "bic" in select.choices
    assert families.limits.max_degree >= 2 and families["limits"]["max_degree"] >= 2


def test_health_answers(api):
    assert api.health()["status"] == "ok"


def test_the_users_own_equation_comes_back_typed(api):
    # Oracle: scipy.optimize.curve_fit on the same seeded data (estimates to 1e-6).
    from scipy.optimize import curve_fit

    rng = np.random.default_rng(11)
    x = np.repeat([0.25, 0.5, 1, 2, 4, 8, 16, 32], 2).astype(float)
    y = 12 * x / (2.5 + x) + rng.normal(0, 0.25, x.size)
    fit = api.fit(x.tolist(), y.tolist(), model={
        "family": "expression", "expression": "vmax*x/(km + x)",
        "parameters": {"vmax": 10, "km": 1}})
    popt, _ = curve_fit(lambda s, v, k: v * s / (k + s), x, y, p0=[10, 1], xtol=1e-14,
                        ftol=1e-14)
    assert [c.term for c in fit.coefficients] == ["vmax", "km"]
    np.testing.assert_allclose([c.estimate for c in fit.coefficients], popt, rtol=1e-6)
    km = fit.coefficients[1]
    assert km.profile_lower < km.estimate < km.profile_upper
    assert km.profile_lower_status == km.profile_upper_status == "found"
    assert fit.fit_info.converged and fit.fit_info.started_from == "given"
    assert fit.model.expression == "vmax*x/(km + x)" and len(fit.correlation) == 2
