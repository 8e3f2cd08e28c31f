"""The polynomial batch engine with known measurement SDs (weighting "known_sd").

Oracles (each check names its own):
* ``service.core.fit_series`` with the same options, series by series (itself checked
  against statsmodels and scipy in tests/core/test_known_sd_polynomial.py): every number
  of the summary to 1e-10 relative, flags with their severities exactly;
* statsmodels WLS with the scale fixed at 1 (``cov_type="fixed scale"``): the standard
  errors of the chosen degree;
* ``scipy.stats.norm.logpdf`` summed at the known SDs: AIC with k = number of coefficients
  (the project's convention, service/core/polynomial/summary.py);
* ``scipy.stats.chi2.sf`` on n - p df: the goodness-of-fit p-value.
The data are seeded and invented (calibration-style curves with SDs growing with x; every
third series states its SDs three times too small, so the chi-square test must fail there).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy import stats

from service.core import FitOptions, ModelSpec, fit_series
from service.core.batch.driver import fit_batch, fit_many
from service.core.batch.frames import fit_frame
from service.core.errors import FitError
from service.core.families import fit_series as family_fit
from tests.batch.conftest import rel

KNOWN = FitOptions(weighting="known_sd", grid=None)
TOL = 1e-10


def known_sd_series(count: int, seed: int = 20261205):
    """``count`` seeded series (x, y, weights = 1/SD²); every third understates its SDs."""
    rng = np.random.default_rng(seed)
    out = []
    for i in range(count):
        n = int(rng.integers(8, 16))
        x = np.repeat(np.sort(rng.uniform(0.0, 10.0, n)), 2)
        sd = 0.2 + 0.05 * x
        y = 1.0 + 0.5 * x + 0.03 * (i % 3) * x ** 2 + rng.normal(0.0, sd)
        stated = sd / 3 if i % 3 == 2 else sd
        out.append((x, y, 1.0 / stated ** 2))
    return out


@pytest.mark.parametrize("model", [
    ModelSpec(max_degree=3),                                  # sequential F (unchanged)
    ModelSpec(max_degree=4, select="aic"),                    # AIC at the known variances
    ModelSpec(max_degree=3, select="bic", intercept=False),
    ModelSpec(degree=2)])
def test_known_sd_batch_equals_the_single_fit(model):
    series = known_sd_series(24)
    result = fit_batch(series, model=model, options=KNOWN)
    assert not result.reports   # all fitted by the compiled engine, none by the single fit
    worst, failed = 0.0, 0
    for g, (x, y, w) in enumerate(series):
        ref = fit_series(x, y, w, model=model, options=KNOWN)   # oracle: the single fit
        assert result.ok[g], result.errors.get(g)
        assert result.columns["degree"][g] == ref.selection.chosen_degree, g
        k = len(ref.coefficients)
        worst = max(worst, rel(result.coefficients[g, :k], [c.estimate for c in ref.coefficients]),
                    rel(result.std_errors[g, :k], [c.std_error for c in ref.coefficients]))
        st = ref.statistics
        for name in ("rss", "sigma", "aic", "aicc", "bic"):
            worst = max(worst, rel(result.columns[name][g], getattr(st, name)))
        for j, cand in enumerate(ref.selection.candidates):
            for name in ("aic", "aicc", "bic"):
                worst = max(worst, rel(result.candidates[name][g, j], getattr(cand, name)))
        chi = next(t for t in ref.diagnostics.tests if t.name == "chi_square_fit")
        worst = max(worst, rel(result.columns["chi_square_fit"][g], chi.statistic),
                    rel(result.columns["chi_square_fit_p"][g], chi.p_value))
        assert result.flag_severities(g) == tuple((f.code, f.severity) for f in ref.flags), g
        failed += "chi_square_fit_failed" in result.flag_codes(g)
    assert worst < TOL, worst
    assert failed >= len(series) // 3   # the series with understated SDs are caught


def test_standard_errors_equal_statsmodels_with_the_scale_fixed_at_one():
    series = known_sd_series(12, seed=7)
    result = fit_batch(series, model=ModelSpec(max_degree=3, select="aic"), options=KNOWN)
    for g, (x, y, w) in enumerate(series):
        degree = int(result.columns["degree"][g])
        # oracle: statsmodels WLS, covariance (X'WX)^-1 with the scale fixed at 1
        ols = sm.WLS(y, np.vander(x, degree + 1, increasing=True), weights=w).fit(
            cov_type="fixed scale", cov_kwds={"scale": 1.0})
        np.testing.assert_allclose(result.coefficients[g, :degree + 1], ols.params, rtol=1e-9)
        np.testing.assert_allclose(result.std_errors[g, :degree + 1], ols.bse, rtol=1e-9)
        # oracle: scipy's normal log-density at the known SDs; AIC = -2 llf + 2 k
        llf = stats.norm.logpdf(y, ols.fittedvalues, 1.0 / np.sqrt(w)).sum()
        assert result.columns["aic"][g] == pytest.approx(-2 * llf + 2 * (degree + 1), rel=1e-10)
        # oracle: scipy's chi-square upper tail of the weighted RSS on n - p df
        assert result.columns["chi_square_fit_p"][g] == pytest.approx(
            stats.chi2.sf(ols.ssr, x.size - degree - 1), rel=1e-9)


def test_relative_weighting_reports_no_chi_square_test():
    series = known_sd_series(6, seed=3)
    result = fit_batch(series, model=ModelSpec(max_degree=3))
    assert np.isnan(result.columns["chi_square_fit_p"]).all()
    known = fit_batch(series, model=ModelSpec(max_degree=3), options=KNOWN)
    # relative weights rescale the SEs by the residual SD; known SDs do not (common practice)
    same = result.columns["degree"] == known.columns["degree"]
    ratio = known.std_errors[same, 1] / result.std_errors[same, 1]
    np.testing.assert_allclose(ratio, 1.0 / result.columns["sigma"][same], rtol=1e-10)


def test_series_without_weights_get_the_single_fit_error_naming_weights():
    series = known_sd_series(4, seed=9)
    mixed = [series[0], series[1][:2], series[2], series[3][:2]]   # two without weights
    result = fit_batch(mixed, model=ModelSpec(degree=1), options=KNOWN)
    assert result.ok.tolist() == [True, False, True, False]
    with pytest.raises(FitError) as single:   # oracle: the single fit's own refusal
        fit_series(*series[1][:2], model=ModelSpec(degree=1), options=KNOWN)
    for row in (1, 3):
        error = result.errors[row]
        assert (error.code, error.field, error.message) == (
            single.value.code, "weights", single.value.message)
    flat = np.concatenate
    none = fit_many(flat([s[0] for s in series]), flat([s[1] for s in series]),
                    [s[0].size for s in series], None, model=ModelSpec(degree=1), options=KNOWN)
    assert not none.ok.any() and {e.field for e in none.errors.values()} == {"weights"}


def test_frames_fill_the_chi_square_columns_for_every_family():
    series = known_sd_series(5, seed=21)
    frame = pd.DataFrame({"id": np.repeat(np.arange(5), [s[0].size for s in series]),
                          "x": np.concatenate([s[0] for s in series]),
                          "y": np.concatenate([s[1] for s in series]),
                          "w": np.concatenate([s[2] for s in series])})
    tidy = fit_frame(frame, weight="w", model=ModelSpec(degree=1), options=KNOWN)
    batch = fit_batch(series, model=ModelSpec(degree=1), options=KNOWN)   # oracle: the engine
    np.testing.assert_array_equal(tidy["chi_square_fit_p"], batch.columns["chi_square_fit_p"])
    np.testing.assert_array_equal(tidy["se_1"], batch.std_errors[:, 1])
    # a nonlinear family with known SDs: the compiled curve engine (oracle: fit_series of
    # the family, to 1e-7 relative, as tests/batch/test_known_sd_curves.py), its chi-square
    # test in the tidy columns
    curve = ModelSpec(family="exponential")
    rng = np.random.default_rng(22)
    decays = [(x, 8.0 + 40.0 * np.exp(-0.4 * x) + rng.normal(0.0, 1.0 / np.sqrt(w)), w)
              for x, _, w in series]
    frame = pd.DataFrame({"id": np.repeat(np.arange(len(decays)),
                                          [s[0].size for s in decays]),
                          "x": np.concatenate([s[0] for s in decays]),
                          "y": np.concatenate([s[1] for s in decays]),
                          "w": np.concatenate([s[2] for s in decays])})
    tidy = fit_frame(frame, weight="w", model=curve, options=KNOWN)
    assert (tidy["status"] == "ok").all()
    for g, (x, y, w) in enumerate(decays):
        ref = family_fit(x, y, w, model=curve, options=KNOWN)
        chi = next(t for t in ref.diagnostics.tests if t.name == "chi_square_fit")
        assert rel(tidy["chi_square_fit"][g], chi.statistic) < 1e-7
        assert rel(tidy["chi_square_fit_p"][g], chi.p_value) < 1e-7
        assert rel(tidy.filter(like="se_").iloc[g], [c.std_error for c in ref.coefficients]) \
            < 1e-7
