"""Typed errors: every bad input names its field (with the caller's index) and a fix.

The expected behaviour is the core's documented contract (service/core/errors.py, issue 2);
the checks are about classification and naming, not numbers.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest

from service.core import (
    DataError,
    DesignError,
    FitOptions,
    GridSpec,
    ModelSpec,
    SpecError,
    TransformError,
    fit_series,
    predict,
)

X = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0]
Y = [1.1, 1.9, 3.2, 3.9, 5.1, 6.2]


def _raises(exc, field, *args, **kwargs):
    with pytest.raises(exc) as info:
        fit_series(*args, **kwargs)
    assert info.value.field == field
    assert info.value.fix  # always says what to do
    return info.value


def test_missing_value_error_names_first_bad_index():
    y = list(Y)
    y[3] = None
    err = _raises(DataError, "y[3]", X, y)
    assert "missing" in err.message


def test_missing_value_drop_reports_original_indices():
    x, y = list(X), list(Y)
    x[1] = float("nan")
    y[4] = None
    rep = fit_series(x, y, model=ModelSpec(degree=1), options=FitOptions(missing="drop"))
    assert rep.dropped == (1, 4)
    assert rep.n_input == 6 and rep.statistics.n == 4
    assert rep.diagnostics.index.tolist() == [0, 2, 3, 5]
    # same numbers as fitting the complete pairs directly
    direct = fit_series([X[i] for i in (0, 2, 3, 5)], [Y[i] for i in (0, 2, 3, 5)],
                        model=ModelSpec(degree=1))
    assert [c.estimate for c in rep.coefficients] == [c.estimate for c in direct.coefficients]


@pytest.mark.parametrize("field,kwargs", [
    ("x[2]", {"x": [1, 2, float("inf"), 4, 5, 6]}),
    ("y", {"y": Y[:5]}),
    ("weights", {"weights": [1.0] * 5}),
    ("weights[4]", {"weights": [1, 1, 1, 1, 0, 1]}),
    ("weights[0]", {"weights": [-2, 1, 1, 1, 1, 1]}),
])
def test_bad_arrays(field, kwargs):
    args = {"x": X, "y": Y, "weights": None} | kwargs
    _raises(DataError, field, args["x"], args["y"], args["weights"], model=ModelSpec(degree=1))


def test_empty_input():
    _raises(DataError, "x", [], [])


@pytest.mark.parametrize("model,field", [
    (ModelSpec(degree=1, transform_x="log"), "x[0]"),
    (ModelSpec(degree=1, transform_y="sqrt"), "y[2]"),
    (ModelSpec(degree=1, transform_x="reciprocal"), "x[0]"),
])
def test_transform_domain(model, field):
    x = [0.0, 1, 2, 3, 4, 5]
    y = [1.0, 2, -3, 4, 5, 6]
    err = _raises(TransformError, field, x, y, model=model)
    assert isinstance(err, DataError)  # hierarchy: TransformError is a DataError
    value = x[0] if field == "x[0]" else y[2]
    assert f"{field} = {float(value)!r} is outside" in err.message  # not np.float64(...)


def test_bad_weight_message_shows_a_plain_number():
    err = _raises(DataError, "weights[1]", np.arange(4.0), np.arange(4.0),
                  np.array([1.0, -2.0, 1.0, 1.0]), model=ModelSpec(degree=1))
    assert "weights[1] = -2.0 is not positive" in err.message


def test_too_few_distinct_x_for_degree():
    err = _raises(DesignError, "model.degree", [1, 1, 2, 2, 3, 3], Y, model=ModelSpec(degree=3))
    assert "the data have 3" in err.message


def test_selection_caps_max_degree_with_notice():
    rep = fit_series([1, 1, 2, 2, 3, 3], Y, model=ModelSpec(max_degree=5))
    assert [c.degree for c in rep.selection.candidates] == [1, 2]
    assert "max_degree_reduced" in {n.code for n in rep.warnings}


@pytest.mark.parametrize("model,field", [
    (ModelSpec(degree=13), "model.degree"),
    (ModelSpec(degree=0, intercept=False), "model.degree"),
    (ModelSpec(degree=2, max_degree=3), "model.max_degree"),
    (ModelSpec(max_degree=3, select="best"), "model.select"),
    (ModelSpec(max_degree=3, alpha=1.5), "model.alpha"),
    (ModelSpec(max_degree=2, min_degree=3), "model.max_degree"),
    (ModelSpec(family="spline"), "model.family"),
    (ModelSpec(degree=1, transform_y="cube"), "model.transform_y"),
])
def test_bad_model_spec(model, field):
    _raises(SpecError, field, X, Y, model=model)


@pytest.mark.parametrize("options,field", [
    (FitOptions(level=1.0), "level"),
    (FitOptions(missing="skip"), "missing"),
    (FitOptions(grid=GridSpec(count=10_001), max_grid_points=10_000), "grid.count"),
    (FitOptions(grid=GridSpec(start=0, stop=1, step=1e-6)), "grid.step"),
    (FitOptions(grid=GridSpec(start=2, stop=1)), "grid.stop"),
    (FitOptions(grid=GridSpec(x=(1.0, float("nan")))), "grid.x"),
])
def test_bad_options(options, field):
    _raises(SpecError, field, X, Y, model=ModelSpec(degree=1), options=options)


def test_grid_forms():
    m = ModelSpec(degree=1)
    g = fit_series(X, Y, model=m, options=FitOptions(grid=GridSpec(start=0, stop=2,
                                                                   step=0.5))).grid
    assert g.x.tolist() == [0.0, 0.5, 1.0, 1.5, 2.0]
    g = fit_series(X, Y, model=m, options=FitOptions(grid=GridSpec(count=11))).grid
    assert g.x[0] == 1.0 and g.x[-1] == 6.0 and g.x.size == 11 and not g.extrapolated.any()
    g = fit_series(X, Y, model=m, options=FitOptions(grid=GridSpec(x=(0.0, 7.0)))).grid
    assert g.extrapolated.tolist() == [True, True]
    assert fit_series(X, Y, model=m, options=FitOptions(grid=None)).grid is None


def test_predict_errors_name_fields():
    model = fit_series([1.0, 2, 3, 4, 5], [1.0, 2.1, 2.9, 4.2, 5.0],
                       model=ModelSpec(degree=1, transform_x="log")).model
    with pytest.raises(TransformError) as info:
        predict(model, [1.0, -1.0])
    assert info.value.field == "x[1]"
    with pytest.raises(SpecError) as info:
        predict(model, [1.0], m=0)
    assert info.value.field == "m"
    with pytest.raises(DataError) as info:
        predict(model, [float("inf")])
    assert info.value.field == "x[0]"


def test_include_skips_costly_sections():
    rep = fit_series(X, Y, model=ModelSpec(degree=1),
                     options=FitOptions(include=frozenset({"coefficients", "anova"})))
    assert rep.diagnostics is None and rep.grid is None
    assert len(rep.coefficients) == 2


def test_degenerate_inputs_raise_no_runtime_warning():
    # numerical trouble must become data (Notice/flags/NaN), never a stray RuntimeWarning
    cases = [
        ([1.0, 2.0], [3.0, 5.0], ModelSpec(degree=1)),                 # n == p: no residual df
        ([1.0, 2, 3, 4], [2.0, 2, 2, 2], ModelSpec(degree=1)),         # constant y
        ([5.0, 5, 5], [1.0, 2, 3], ModelSpec(degree=0)),               # one distinct x
        (list(range(21)), [1.0 + k + k**2 for k in range(21)], ModelSpec(max_degree=4)),
        ([0.0, 1, 2, 3], [0.0, 0, 0, 0], ModelSpec(degree=1, intercept=False)),
    ]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        for x, y, model in cases:
            rep = fit_series(x, y, model=model)
            assert rep.statistics.n == len(x)
    n_eq_p = fit_series([1.0, 2.0], [3.0, 5.0], model=ModelSpec(degree=1))
    assert math.isnan(n_eq_p.statistics.sigma) and math.isnan(n_eq_p.coefficients[0].std_error)
    assert "no_residual_df" in {f.code for f in n_eq_p.flags}
    exact = fit_series(list(range(21)), [1.0 + k + k**2 for k in range(21)],
                       model=ModelSpec(max_degree=4))
    assert exact.selection.chosen_degree == 2 and "exactly" in exact.selection.reason
    assert np.all(np.isnan(exact.diagnostics.studentized))


def test_numerically_rank_deficient_design_is_a_design_error():
    # 12 points within 1e-7 of each other plus one far away: distinct, but numerically only
    # two support points for the powers (rank deficiency is a fact of the trade).
    x = np.concatenate([np.linspace(0.0, 1e-7, 12), [1.0]])
    err = _raises(DesignError, "model.degree", x, np.sin(x), model=ModelSpec(degree=6))
    assert "rank deficient" in err.message


def test_ill_conditioned_design_is_flagged():
    # clustered x: condition number of the scaled basis far above 1e6 (common practice cut-off)
    x = np.concatenate([np.linspace(0.0, 1e-2, 30), [2.0]])
    rep = fit_series(x, np.cos(x), model=ModelSpec(degree=4))
    assert rep.statistics.condition_number > 1e6
    assert "ill_conditioned_design" in {f.code for f in rep.flags}


def test_leverage_one_makes_press_undefined_with_notice():
    # the lone point at x = 5 is the only support of the x^2 column beyond two levels:
    # its leverage is 1 (fact of the trade), so its leave-one-out residual is undefined
    x = [0.0, 0.0, 0.0, 1.0, 1.0, 1.0, 5.0]
    y = [0.1, -0.1, 0.0, 1.1, 0.9, 1.0, 20.0]
    rep = fit_series(x, y, model=ModelSpec(degree=2))
    assert math.isnan(rep.statistics.press) and math.isnan(rep.statistics.press_r_squared)
    assert "press_undefined" in {n.code for n in rep.warnings}
    assert rep.diagnostics.leverage[-1] == pytest.approx(1.0)


@pytest.mark.parametrize("x_scale,y_scale,field", [
    (1e200, 1.0, "x[1]"), (1.0, 1e200, "y[0]"), (1.0, 1e-200, "y"), (1e-200, 1.0, "x"),
])
def test_extreme_magnitudes_are_refused_with_a_units_fix(x_scale, y_scale, field):
    x = np.linspace(0, 1, 12)
    err = _raises(DataError, field, x * x_scale, (1 + x) * y_scale, model=ModelSpec(degree=1))
    assert "Rescale" in err.fix


def test_large_but_representable_magnitudes_fit_without_warnings():
    x = np.linspace(0, 1, 30)
    y = (1 + x + np.random.default_rng(2).normal(0, 0.1, 30)) * 1e120
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        rep = fit_series(x * 1e-120, y, model=ModelSpec(degree=1))
    assert rep.statistics.sigma > 0
    # the slope's variance (~1e480) does not fit in a double: reported as NaN with a notice
    assert "raw_coefficients_overflow" in {n.code for n in rep.warnings}
    assert math.isnan(rep.coefficients[1].std_error)


@pytest.mark.parametrize("exponent,degree", [(26, 12), (40, 10), (103, 3), (-20, 12), (-40, 6)])
def test_x_whose_powers_leave_the_double_range_is_fitted_with_a_notice(exponent, degree):
    # (spread of x)**degree outside the double range: the scaled basis still fits; the raw-power
    # coefficients that do not fit a double become NaN with a notice (no crash, no warning)
    x = np.linspace(-1.0, 1.0, 30) * 10.0 ** exponent
    y = np.sin(np.linspace(0.0, 3.0, 30))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        rep = fit_series(x, y, model=ModelSpec(degree=degree))
        grid = predict(rep.model, x[:5])
    assert np.all(np.isfinite(grid.fit))
    codes = {n.code for n in rep.warnings}
    assert "raw_coefficients_sensitive" in codes
    lost = bool(np.isnan(rep.model.raw_coefficients).any()
                or np.isnan(rep.model.raw_covariance).any())
    assert ("raw_coefficients_overflow" in codes) == lost
