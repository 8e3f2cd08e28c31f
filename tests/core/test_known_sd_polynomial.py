"""Polynomial fits with known measurement SDs (weighting "known_sd"), against oracles.

Oracles (each check names its own):
* statsmodels WLS with the scale fixed at 1 (``cov_type="fixed scale"``, normal
  quantiles): coefficient standard errors, p-values and limits;
* ``scipy.stats.norm.logpdf`` summed at the known SDs: the log-likelihood, and
  AIC/BIC from it with k = number of coefficients (the project's convention);
* ``scipy.stats.chi2.sf`` on n - p df: the goodness-of-fit test;
* ``scipy.stats.norm`` and ``scipy.stats.chi2`` quantiles: the pointwise and
  Scheffé whole-curve bands, recomputed here from the statsmodels covariance;
* the expression family fitting the same quadratic with known SDs: an
  independent engine (Levenberg-Marquardt, tangent-plane bands) that must agree.
The data are seeded and invented (a calibration-style rising line with some curvature
with SDs that grow with x).
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from service.core.families import FAMILIES
from service.core.models.document import from_document, to_document
from service.core.models.inverse import invert
from service.core.polynomial.bands import predict
from service.core.polynomial.fit import fit_series
from service.core.spec import FitOptions, GridSpec, ModelSpec

KNOWN = FitOptions(weighting="known_sd")


def _series(sd_factor: float = 1.0, seed: int = 5):
    rng = np.random.default_rng(seed)
    x = np.repeat(np.linspace(0.0, 10.0, 10), 3)
    sd = 0.2 + 0.05 * x
    y = 1.0 + 0.5 * x + 0.02 * x ** 2 + rng.normal(0.0, sd)
    return x, y, 1.0 / (sd_factor * sd) ** 2


def _oracle(x, y, w):
    design = np.vander(x, 3, increasing=True)
    return sm.WLS(y, design, weights=w).fit(cov_type="fixed scale", cov_kwds={"scale": 1.0})


def test_coefficients_equal_statsmodels_with_a_fixed_scale():
    x, y, w = _series()
    report = fit_series(x, y, w, model=ModelSpec(degree=2), options=KNOWN)
    ols = _oracle(x, y, w)
    np.testing.assert_allclose([c.estimate for c in report.coefficients], ols.params, rtol=1e-10)
    np.testing.assert_allclose([c.std_error for c in report.coefficients], ols.bse, rtol=1e-10)
    np.testing.assert_allclose([c.p_value for c in report.coefficients], ols.pvalues, rtol=1e-8)
    np.testing.assert_allclose([(c.lower, c.upper) for c in report.coefficients],
                               ols.conf_int(0.05), rtol=1e-10)
    assert report.model.sigma == 1.0 and report.model.weighting == "known_sd"
    # the reported sigma is still the residual estimate (about 1 when the SDs are right)
    assert report.statistics.sigma == pytest.approx(np.sqrt(ols.ssr / ols.df_resid), rel=1e-10)


def test_likelihood_criteria_and_chi_square_test_use_the_known_variances():
    x, y, w = _series()
    report = fit_series(x, y, w, model=ModelSpec(degree=2), options=KNOWN)
    fitted = _oracle(x, y, w).fittedvalues
    llf = stats.norm.logpdf(y, fitted, 1.0 / np.sqrt(w)).sum()  # scipy oracle
    st = report.statistics
    assert st.log_likelihood == pytest.approx(llf, rel=1e-10)
    assert st.aic == pytest.approx(-2 * llf + 2 * 3, rel=1e-10)
    assert st.bic == pytest.approx(-2 * llf + 3 * np.log(x.size), rel=1e-10)
    chi = next(t for t in report.diagnostics.tests if t.name == "chi_square_fit")
    assert chi.statistic == pytest.approx(st.rss, rel=1e-12)
    assert chi.df == (x.size - 3.0,)
    assert chi.p_value == pytest.approx(stats.chi2.sf(st.rss, x.size - 3), rel=1e-9)
    assert "chi_square_fit_failed" not in {f.code for f in report.flags}


def test_understated_sds_fail_the_chi_square_test_and_raise_a_serious_flag():
    x, y, w = _series(sd_factor=1 / 3)   # SDs stated three times too small
    report = fit_series(x, y, w, model=ModelSpec(degree=2), options=KNOWN)
    flag = next(f for f in report.flags if f.code == "chi_square_fit_failed")
    assert flag.severity == "serious"
    assert flag.evidence["p_value"] < 0.01 and flag.evidence["df"] == x.size - 3


def test_relative_weighting_is_unchanged_and_rescales():
    # the same data read as relative weights: sigma estimated, t quantiles, no chi-square test
    x, y, w = _series()
    report = fit_series(x, y, w, model=ModelSpec(degree=2))
    ols = sm.WLS(y, np.vander(x, 3, increasing=True), weights=w).fit()
    np.testing.assert_allclose([c.std_error for c in report.coefficients], ols.bse, rtol=1e-10)
    assert report.model.weighting == "relative"
    assert "chi_square_fit" not in {t.name for t in report.diagnostics.tests}
    assert "weighting" not in to_document(report.model)  # version-1 documents as before


def test_bands_use_normal_and_scheffe_quantiles():
    x, y, w = _series()
    report = fit_series(x, y, w, model=ModelSpec(degree=2), options=KNOWN)
    xs = np.array([0.5, 4.0, 12.0])
    pred = predict(report.model, xs, level=0.9, m=2)
    ols = _oracle(x, y, w)
    design = np.vander(xs, 3, increasing=True)
    se = np.sqrt(np.einsum("ij,jk,ik->i", design, ols.cov_params(), design))
    z, scheffe = stats.norm.ppf(0.95), np.sqrt(stats.chi2.ppf(0.9, 3))
    fit = design @ ols.params
    np.testing.assert_allclose(pred.se_mean, se, rtol=1e-9)
    np.testing.assert_allclose(pred.mean_upper, fit + z * se, rtol=1e-9)
    np.testing.assert_allclose(pred.obs_upper, fit + z * np.sqrt(se ** 2 + 1.0 / 2), rtol=1e-9)
    np.testing.assert_allclose(pred.band_lower, fit - scheffe * se, rtol=1e-9)
    assert pred.extrapolated.tolist() == [False, False, True]


def test_expression_family_agrees_on_the_same_quadratic():
    # an independent engine on the same model and known SDs: estimates, SEs and bands agree
    x, y, w = _series()
    grid = GridSpec(count=7)
    options = FitOptions(weighting="known_sd", grid=grid)
    poly = fit_series(x, y, w, model=ModelSpec(degree=2), options=options)
    spec = ModelSpec(family="expression", expression="b0 + b1*x + b2*x^2",
                     parameters=(("b0", 1.0), ("b1", 0.4), ("b2", 0.0)))
    curve = FAMILIES["expression"].fit(x, y, w, model=spec, options=options)
    np.testing.assert_allclose([c.estimate for c in poly.coefficients],
                               [r.estimate for r in curve.coefficients], rtol=1e-8)
    np.testing.assert_allclose([c.std_error for c in poly.coefficients],
                               [r.std_error for r in curve.coefficients], rtol=1e-8)
    for name in ("fit", "mean_lower", "obs_upper", "band_upper"):
        np.testing.assert_allclose(getattr(poly.grid, name), getattr(curve.grid, name),
                                   rtol=1e-8, err_msg=name)


def test_document_round_trip_keeps_the_weighting_and_inverts_on_the_normal_band():
    x, y, w = _series()
    report = fit_series(x, y, w, model=ModelSpec(degree=2), options=KNOWN)
    doc = to_document(report.model)
    assert doc["weighting"] == "known_sd" and doc["sigma"] == 1.0
    back = from_document(doc)
    assert back.weighting == "known_sd" and back.sigma == 1.0
    np.testing.assert_array_equal(back.basis_coefficients, report.model.basis_coefficients)
    np.testing.assert_array_equal(predict(back, [2.0, 7.0]).obs_upper,
                                  predict(report.model, [2.0, 7.0]).obs_upper)
    # the calibration interval's ends lie on the new-observation band (normal quantile)
    y0 = float(predict(back, [5.0]).fit[0])
    row = invert(back, [y0]).estimates[0]
    assert row.status == "ok"
    assert predict(back, [row.lower]).obs_upper[0] == pytest.approx(y0, rel=1e-8)
    assert predict(back, [row.upper]).obs_lower[0] == pytest.approx(y0, rel=1e-8)
