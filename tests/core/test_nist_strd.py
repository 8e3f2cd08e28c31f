"""NIST StRD linear least squares: every certified value to >= 11 significant digits.

Source of every expected value: NIST/ITL Statistical Reference Datasets (StRD),
Linear Least Squares Regression, certified values, as stored in
../shared/reference/nist-strd/<name>.json (the `certified` block). The
`derived.sequential_sum_sq` values (100-digit mpmath, NOT published by NIST) are
a secondary check of the sequential table only.
"""

from __future__ import annotations

import math

import pytest

from service.core import FitOptions, ModelSpec, fit_series
from tests.conftest import load_nist
from tests.core.conftest import NIST_DIGITS, significant_digits

MIN_DIGITS = 11.0  # issue 2 acceptance level
ZERO_ABS = 1e-9    # certified zeros (exact fits): our value must be this small in absolute terms
# Wampler3-5 (notes in the reference files): Wampler1's polynomial plus a disturbance orthogonal
# to it, 100 times larger in each next set (Wampler5: R^2 ~0.002). Their certified coefficients
# are exactly 1 (a 50-digit mpmath fit of the data agrees to 46+ digits), so coefficient digits
# measure our arithmetic alone. Measured on x86-64 (80-bit longdouble): coefficients 11.9+ digits
# (lowest: Wampler5's x coefficient), every other certified value 14.4+. The common floor holds.
DATASETS = ["norris", "pontius", "noint1", "noint2", "filip", "wampler1", "wampler2",
            "wampler3", "wampler4", "wampler5"]


def _fit(ref):
    model = ModelSpec(degree=ref["polynomial_degree"], intercept=ref["intercept"])
    return fit_series(ref["data"]["x"], ref["data"]["y"], model=model,
                      options=FitOptions(include=frozenset({"coefficients", "anova",
                                                            "statistics"})))


def _pairs(ref, report):
    """(label, ours, certified) for every certified number."""
    cert = ref["certified"]
    st = report.statistics
    reg, res = cert["anova"]["regression"], cert["anova"]["residual"]
    out = [(f"coef[{i}]", c.estimate, v) for i, (c, v) in
           enumerate(zip(report.coefficients, cert["coefficients"], strict=True))]
    out += [(f"sd[{i}]", c.std_error, v) for i, (c, v) in
            enumerate(zip(report.coefficients, cert["coefficient_sd"], strict=True))]
    ss_reg = sum(row.sum_of_squares for row in report.anova[:-1])
    resid = report.anova[-1]
    out += [("residual_sd", st.sigma, cert["residual_sd"]), ("r_squared", st.r_squared,
            cert["r_squared"]), ("reg.sum_of_squares", ss_reg, reg["sum_sq"]),
            ("reg.mean_square", ss_reg / st.df_model, reg["mean_sq"]),
            ("res.sum_of_squares", resid.sum_of_squares, res["sum_sq"]),
            ("res.mean_square", resid.mean_square, res["mean_sq"]),
            ("stat.rss", st.rss, res["sum_sq"])]
    if reg["f"] is not None:
        out.append(("reg.f", st.f, reg["f"]))
    return out


@pytest.mark.parametrize("name", DATASETS)
def test_certified_values(name):
    ref = load_nist(name)
    report = _fit(ref)
    cert = ref["certified"]
    st = report.statistics
    # df are exact integers (NIST certified ANOVA df)
    assert st.df_model == cert["anova"]["regression"]["df"]
    assert st.df_residual == cert["anova"]["residual"]["df"]
    assert report.anova[-1].df == cert["anova"]["residual"]["df"]
    worst = math.inf
    for label, ours, certified in _pairs(ref, report):
        if certified == 0:
            assert abs(ours) <= ZERO_ABS, (name, label, ours)
            continue
        digits = significant_digits(ours, certified)
        assert digits >= MIN_DIGITS, (name, label, ours, certified, digits)
        worst = min(worst, digits)
    NIST_DIGITS[name] = worst
    print(f"{name}: minimum {worst:.2f} significant digits")


@pytest.mark.parametrize("name", ["wampler1", "wampler2"])
def test_exact_fit_has_null_f_and_flag(name):
    # NIST publishes F = Infinity and every SD = 0 for these exact fits (certified block).
    report = _fit(load_nist(name))
    assert math.isnan(report.statistics.f)
    assert report.statistics.rss == 0.0
    assert "exact_fit" in {f.code for f in report.flags}


@pytest.mark.parametrize("name", ["norris", "pontius", "filip", "wampler1", "wampler2",
                                  "wampler3", "wampler4", "wampler5"])
def test_sequential_ss_against_derived_values(name):
    # Secondary check: `derived.sequential_sum_sq` (mpmath 100 digits, not certified by NIST).
    ref = load_nist(name)
    report = _fit(ref)
    derived = ref["derived"]["sequential_sum_sq"]
    rows = report.anova[:-1]
    assert [r.term for r in rows] == [d["term"] for d in derived]
    for row, d in zip(rows, derived, strict=True):
        assert significant_digits(row.sum_of_squares, d["sum_sq"]) >= MIN_DIGITS, (row, d)
