"""What a fit reports about a parameter held by a bound the caller set, and about a derived
quantity its estimate leaves undefined.

A 4PL standard curve with zero-dose blanks (invented data, seeded) is fitted
with a lower bound on y_left, once where the bound binds (the estimate sits on
it) and once where it does not but lies inside the unconstrained confidence
interval. Oracle for the estimates: scipy.optimize.curve_fit with the same
bounds (trust-region reflective). The profile-likelihood limits are checked
against their definition: the constrained confidence set is
{b >= bound : S~(b) - S(est) <= (c s)^2}, so on the bound's side it ends at
the bound (Bates & Watts 1988, sec. 6.1, the profile t statistic; the
truncation by the parameter space is common practice).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import curve_fit

from service.core.nonlinear.builtin.catalogue import BUILTINS
from service.core.nonlinear.builtin.fit import fit_series
from service.core.spec import FitOptions, ModelSpec

OPTIONS = FitOptions(grid=None)
DOSES = np.repeat([0.0, 0.1, 0.3, 1.0, 3.0, 10.0, 30.0, 100.0], 2)


def _four_pl(x, y_left, y_right, slope, ec50):
    return y_right + (y_left - y_right) / (1.0 + (x / ec50) ** slope)


def _plate():
    rng = np.random.default_rng(11)
    return DOSES, _four_pl(DOSES, 0.05, 2.5, 1.2, 5.0) + rng.normal(0.0, 0.03, DOSES.size)


def _fit(lower_y_left: float):
    x, y = _plate()
    spec = ModelSpec(family="logistic4", lower=(("y_left", lower_y_left),))
    return fit_series(BUILTINS["logistic4"], x, y, model=spec, options=OPTIONS)


def _scipy(lower_y_left: float):
    x, y = _plate()
    start = [lower_y_left + 0.01, 2.5, 1.0, 5.0]
    low = [lower_y_left, -np.inf, 0.0, 0.0]
    est, _ = curve_fit(_four_pl, x, y, p0=start, bounds=(low, np.inf))
    return est


def test_a_binding_bound_is_not_reported_as_unidentifiable_parameters():
    # The unconstrained y_left is about 0.065 (well determined, SE ~0.013); a lower
    # bound of 0.07 binds. The other three columns of the Jacobian stay independent,
    # so nothing is rank deficient: the only honest flag is parameter_at_bound.
    report = _fit(0.07)
    rows = {r.term: r for r in report.coefficients}
    np.testing.assert_allclose([rows[n].estimate for n in ("y_left", "y_right", "slope",
                                                           "ec50")],
                               _scipy(0.07), rtol=1e-5)   # oracle: scipy curve_fit, bounds
    assert report.fit_info.bound_status == ("lower", "free", "free", "free")
    codes = {f.code for f in report.flags}
    assert "parameter_at_bound" in codes
    assert "parameters_not_identifiable" not in codes


def test_a_profile_stopped_by_the_bound_ends_at_the_bound():
    # Bound 0.06 does not bind (estimate 0.0646), but the unconstrained lower profile
    # limit (about 0.037) lies beyond it: the confidence set ends at the bound, which is
    # a limit (status "bound"), not a sign that the data fail to bound y_left.
    report = _fit(0.06)
    y_left = report.coefficients[0]
    assert report.fit_info.bound_status[0] == "free"
    assert y_left.estimate == pytest.approx(_scipy(0.06)[0], rel=1e-5)  # oracle: scipy
    assert y_left.profile_lower_status == "bound"
    assert y_left.profile_lower == 0.06
    assert y_left.profile_upper_status == "found"
    assert "poorly_determined_parameter" not in {f.code for f in report.flags}
    assert any(n.code == "profile_at_bound" and "y_left" in n.message
               for n in report.warnings)


def test_an_estimate_on_its_bound_has_the_bound_as_its_profile_limit():
    report = _fit(0.07)
    y_left = report.coefficients[0]
    assert y_left.estimate == 0.07
    assert (y_left.profile_lower, y_left.profile_lower_status) == (0.07, "bound")
    assert y_left.profile_upper_status == "found" and y_left.profile_upper > 0.07


def test_a_derived_quantity_outside_its_domain_says_why_it_is_null():
    # Falling straight-line data (seeded demo): the exponential fit has k < 0 (the distance
    # to the plateau grows), where ln 2 / k is no half-life (oracle: the definition, a
    # half-life needs k > 0). The null row must come with a warning naming it and k.
    rng = np.random.default_rng(4)
    rng.normal(0.0, 1.0, 14)
    t = np.linspace(0.0, 10.0, 12)
    y = 50.0 - 0.5 * t + rng.normal(0.0, 0.3, t.size)
    report = fit_series(BUILTINS["exponential"], t, y, model=ModelSpec(family="exponential"),
                        options=OPTIONS)
    k = next(r for r in report.coefficients if r.term == "k")
    (half_life,) = report.derived
    assert k.estimate < 0 and np.isnan(half_life.estimate)
    notes = [n for n in report.warnings if n.code == "derived_not_computed"]
    assert len(notes) == 1
    assert "half_life" in notes[0].message and "k = -" in notes[0].message


def test_an_unfinished_fit_suggests_what_the_caller_can_change():
    # Seven doses with one step between 1 and 10 (seeded demo): the 4PL slope can grow
    # without end, so the solver stops on its iteration limit. The advice must name
    # things a request can change (start values, model.fixed, bounds): the HTTP API has
    # no iteration budget to raise.
    x = np.array([0.0, 0.01, 0.1, 1.0, 10.0, 100.0, 1000.0])
    y = np.array([0.6388, 0.5819, 0.6507, 0.6189, 1.1056, 1.3209, 1.319])
    report = fit_series(BUILTINS["logistic4"], x, y, model=ModelSpec(family="logistic4"),
                        options=OPTIONS)
    info = report.fit_info
    assert not info.converged and info.termination == "iteration_limit"
    assert "iteration budget" not in info.message
    assert "model.fixed" in info.message and "bound" in info.message



def test_high_leverage_of_a_curve_is_not_explained_by_distant_x():
    # A gaussian peak on 41 evenly spaced x (seeded demo): the tangent-plane leverage is
    # high where the curve's parameters act most (around the peak's flanks), not at x far
    # from the rest, so the message must not give that as the reason (Cook & Weisberg 1982 define
    # nonlinear leverage on the tangent plane; no x here is far from the others).
    rng = np.random.default_rng(3)
    x = np.linspace(400.0, 600.0, 41)
    y = 10.0 + 80.0 * np.exp(-(x - 512.0) ** 2 / (2 * 15.0 ** 2)) + rng.normal(0.0, 2.0, x.size)
    report = fit_series(BUILTINS["gaussian_peak"], x, y,
                        model=ModelSpec(family="gaussian_peak"), options=OPTIONS)
    (flag,) = [f for f in report.flags if f.code == "high_leverage"]
    inner = [i for i in flag.evidence["indices"] if 5 <= i <= 35]
    assert inner, flag.evidence   # the premise: leverage is high well inside the x range
    assert "(x far from the rest)" not in flag.message
    assert "where a curve's parameters act most" in flag.message


def test_an_estimate_that_breaks_its_documented_constraint_is_warned_about():
    # Falling readings with a zero blank (invented): the Michaelis-Menten least-squares
    # optimum has km < 0, which GET /v1/families documents as "> 0": the curve
    # vmax*x/(km + x) then has a pole at x = -km, here between the blank and 0.5
    # (oracle: the algebra of the equation). The fit must say so.
    x = np.array([0.0, 0.5, 1.0, 2.0, 4.0, 8.0])
    y = np.array([9.0, 7.1, 5.0, 3.5, 2.5, 1.8])
    report = fit_series(BUILTINS["michaelis_menten"], x, y,
                        model=ModelSpec(family="michaelis_menten"), options=OPTIONS)
    km = next(r for r in report.coefficients if r.term == "km").estimate
    assert km < 0
    (note,) = [n for n in report.warnings if n.code == "parameter_outside_constraint"]
    assert "km" in note.message and "> 0" in note.message
    assert f"pole at x = {-km:.6g}" in note.message
