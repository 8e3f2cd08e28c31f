"""Known-SD nonlinear batches (weighting "known_sd") through the compiled curve engine.

The least-squares fit is the one of relative weights; only the inference differs
(service/core/batch/curves_post.py). Oracles (each check names its own):

* ``service.core.families.fit_series`` with the same options, series by series (the
  engine of /v1/fit, itself checked against scipy and statsmodels in
  tests/api/test_expression_family.py and tests/core): estimates and standard errors
  to 1e-7 relative (both solvers stop at a Bates & Watts relative offset of 1e-8), the
  whole-fit numbers and the chi-square test to 1e-9, flags with their severities exactly;
* ``scipy.stats.chi2.sf`` on n - p df: the goodness-of-fit p-value;
* the same batch with relative weights: known SDs do not rescale the standard errors by
  the residual SD (common practice), so the ratio of the two is 1/sigma.

The single fit is made to fail inside the batch (monkeypatched), so every row shown here
comes from the compiled engine. The data are seeded and invented (tests/batch/curves_data.py,
whose noise SDs are stated as the known SDs; every third series states them three times too
small, so the chi-square test must fail there).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from service.core.batch.curves import fit_many_curves
from service.core.errors import FitError
from service.core.families import fit_series as family_fit
from service.core.spec import FitOptions, ModelSpec
from tests.batch import curves_data
from tests.batch.conftest import rel

KNOWN = FitOptions(weighting="known_sd", grid=None)
# family -> (generator, the noise SD the generator draws with)
FAMILIES = {"logistic4": (curves_data.logistic4, 3.0),
            "exponential": (curves_data.exponential, 1.0),
            "michaelis_menten": (curves_data.michaelis_menten, 0.3),
            "gompertz": (curves_data.gompertz, 0.5)}


def known_sd_curves(name: str, count: int, seed: int):
    """``count`` seeded series of family ``name`` with weights 1/SD²; every third series
    states its SDs three times too small."""
    make, sd = FAMILIES[name]
    series = make(np.random.default_rng(seed), count)
    return [(x, y, np.full(x.size, (3.0 if i % 3 == 2 else 1.0) ** 2 / sd ** 2))
            for i, (x, y) in enumerate(series)]


def _flat(series):
    return (np.concatenate([s[0] for s in series]), np.concatenate([s[1] for s in series]),
            [s[0].size for s in series], np.concatenate([s[2] for s in series]))


@pytest.mark.parametrize("name", sorted(FAMILIES))
def test_known_sd_curve_batches_are_compiled_and_equal_the_single_fit(name, compiled_only):
    series = known_sd_curves(name, 9, seed=20261205 + len(name))
    model = ModelSpec(family=name)
    x, y, lengths, w = _flat(series)
    result = fit_many_curves(x, y, lengths, w, model=model, options=KNOWN)
    assert result.compiled.all() and result.ok.all(), result.errors
    relative = fit_many_curves(x, y, lengths, w, model=model)
    cols = result.columns
    failed = 0
    for g, (xs, ys, ws) in enumerate(series):
        ref = family_fit(xs, ys, ws, model=model, options=KNOWN)   # oracle: the single fit
        assert rel(result.estimates[g], [c.estimate for c in ref.coefficients]) < 1e-7, g
        assert rel(result.std_errors[g], [c.std_error for c in ref.coefficients]) < 1e-7, g
        for stat in ("rss", "sigma", "aic", "aicc", "bic"):
            assert rel(cols[stat][g], getattr(ref.statistics, stat)) < 1e-9, (g, stat)
        chi = next(t for t in ref.diagnostics.tests if t.name == "chi_square_fit")
        assert rel(cols["chi_square_fit"][g], chi.statistic) < 1e-9
        assert rel(cols["chi_square_fit_p"][g], chi.p_value) < 1e-9
        assert result.flag_severities(g) == tuple((f.code, f.severity) for f in ref.flags), g
        # oracle: scipy's chi-square upper tail of the weighted RSS on n - p df
        df = xs.size - len(result.parameter_names)
        assert cols["chi_square_fit_p"][g] == pytest.approx(stats.chi2.sf(cols["rss"][g], df),
                                                            rel=1e-9)
        failed += "chi_square_fit_failed" in dict(result.flag_severities(g))
    assert failed >= len(series) // 3   # the series with understated SDs are caught
    # relative weights rescale the SEs by the residual SD; known SDs do not
    np.testing.assert_allclose(result.std_errors / relative.std_errors,
                               np.broadcast_to(1.0 / relative.columns["sigma"][:, None],
                                               result.std_errors.shape), rtol=1e-12)
    assert np.isnan(relative.columns["chi_square_fit_p"]).all()
    assert "chi_square_fit_failed" not in {c for g in range(len(series))
                                           for c, _ in relative.flag_severities(g)}


def test_known_sds_without_weights_get_the_single_fit_error():
    x, y, lengths, _ = _flat(known_sd_curves("exponential", 3, seed=5))
    result = fit_many_curves(x, y, lengths, None, model=ModelSpec(family="exponential"),
                             options=KNOWN)
    assert not result.ok.any() and not result.compiled.any()
    with pytest.raises(FitError) as single:   # oracle: the single fit's own refusal
        family_fit(x[:lengths[0]], y[:lengths[0]], None, model=ModelSpec(family="exponential"),
                   options=KNOWN)
    assert {(e.code, e.field, e.message) for e in result.errors.values()} == {
        (single.value.code, "weights", single.value.message)}
