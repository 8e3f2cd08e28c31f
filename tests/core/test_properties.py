"""Property tests (hypothesis): invariances of least squares.

Facts of the trade (common practice): with an intercept, an affine change of x
(shift and non-zero rescale) leaves the column space of (1, x, ..., x^k)
unchanged, so fitted values and every sequential sum of squares are the same;
permuting the points changes nothing either.
"""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from service.core import FitOptions, ModelSpec, fit_series

OPTS = FitOptions(include=frozenset({"diagnostics"}), grid=None)


@st.composite
def series(draw):
    n = draw(st.integers(6, 30))
    xs = draw(st.lists(st.integers(-500, 500), min_size=n, max_size=n, unique=True))
    ys = draw(st.lists(st.integers(-10_000, 10_000).map(lambda k: k / 100.0), min_size=n,
                       max_size=n))  # moderate magnitudes (extremes are refused: test_errors)
    degree = draw(st.integers(1, min(4, n - 2)))
    return np.asarray(xs, float) / 10.0, np.asarray(ys, float), degree


def _fit(x, y, degree):
    rep = fit_series(x, y, model=ModelSpec(degree=degree), options=OPTS)
    fitted = y - rep.diagnostics.residuals
    # Sums of squares carry rounding of order eps^2 * sum(y^2) whatever the data: when y
    # is constant the total SS is itself that noise, so it cannot be the only yardstick.
    ss_scale = rep.statistics.tss + 1e-16 * float(y @ y)
    return fitted, np.array([r.sum_of_squares for r in rep.anova]), ss_scale


def _close(a, b, scale):
    np.testing.assert_allclose(a, b, rtol=0, atol=1e-8 * max(scale, 1e-300))


@settings(max_examples=60, deadline=None)
@given(series(), st.floats(-1e3, 1e3), st.floats(1e-2, 1e2), st.booleans())
def test_affine_x_change_leaves_fit_unchanged(data, shift, scale, flip):
    x, y, degree = data
    f0, ss0, tss = _fit(x, y, degree)
    f1, ss1, _ = _fit(shift + (-scale if flip else scale) * x, y, degree)
    _close(f1, f0, np.sqrt(tss) + np.abs(y).max())
    _close(ss1, ss0, tss)


@settings(max_examples=60, deadline=None)
@given(series(), st.randoms(use_true_random=False))
def test_permuting_points_leaves_fit_unchanged(data, rnd):
    x, y, degree = data
    order = list(range(x.size))
    rnd.shuffle(order)
    f0, ss0, tss = _fit(x, y, degree)
    f1, ss1, _ = _fit(x[order], y[order], degree)
    _close(f1, f0[order], np.sqrt(tss) + np.abs(y).max())
    _close(ss1, ss0, tss)
