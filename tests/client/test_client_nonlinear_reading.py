"""The client's typed results for nonlinear fits: comparison, working range, family reading.

Oracles: scipy.stats.f for the extra-sum-of-squares F test between the nested 4PL and 5PL
(Bates & Watts 1988, §3.10: F = ((RSS_4 - RSS_5) / 1) / (RSS_5 / df_5)), computed from
the residual sums of squares the comparison reports; the closed-form inverse of the
four-parameter logistic for the readings; the raw JSON the service sent for every typed
member. Data: the invented assay and plate of scripts/demo_data.py (demo data).
"""

from __future__ import annotations

import pytest
from curvewise_client.results import ComparedModel, Reading, WorkingRange
from scipy import stats

from scripts.demo_data import assay, plate


def test_a_comparison_comes_back_typed_with_its_f_test(inprocess_client):
    body = assay()
    fit = inprocess_client.fit(body["x"], body["y"], model=body["model"])
    comparison = fit.comparison
    assert comparison.select == "f_test" and comparison.chosen == "logistic5"
    four, five = comparison.candidates
    assert isinstance(four, ComparedModel) and (four.family, five.family) == ("logistic4",
                                                                              "logistic5")
    (test,) = comparison.nested_tests
    f = (four.rss - five.rss) / (five.rss / five.df_residual)
    assert test.f == pytest.approx(f, rel=1e-12)
    assert test.p_value == pytest.approx(stats.f.sf(f, 1, five.df_residual), rel=1e-9)
    assert comparison.reason == fit.raw["comparison"]["reason"]


def test_invert_returns_the_working_range_typed(inprocess_client):
    body = plate()
    fit = inprocess_client.fit(body["x"], body["y"], model=body["model"],
                               include=body["include"])
    result = inprocess_client.invert(fit.fitted_model, [0.6, 1.4, 3.2], replicates=2)
    span = result.working_range
    assert isinstance(span, WorkingRange) and span.cv_limit == 0.2 and span.replicates == 2
    assert (span.lower, span.upper) == (result.raw["working_range"]["lower"],
                                        result.raw["working_range"]["upper"])
    y_left, y_right, slope, ec50 = (c.estimate for c in fit.coefficients)
    for e in result.estimates[:2]:
        closed = ec50 * ((y_left - e.y) / (e.y - y_right)) ** (1 / slope)
        assert e.ok and e.x == pytest.approx(closed, rel=1e-9)
    assert result.estimates[2].x is None and result.estimates[2].status == "no_real_root"


def test_families_say_what_invert_answers(inprocess_client):
    families = {f.name: f for f in inprocess_client.families().families}
    reading = families["logistic4"].reading
    assert isinstance(reading, Reading) and reading.invertible and reading.working_range
    assert families["exponential"].reading.working_range is False
    assert [p.name for p in families["logistic4"].parameters] == ["y_left", "y_right", "slope",
                                                                  "ec50"]
    assert families["logistic4"].equation
