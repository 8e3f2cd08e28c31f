"""Transform edges: back-transformed bands never turn inside out, and a grid outside the x
transform's domain is blamed on the grid.

Oracle for the bands: the same fit on the fitting scale (z = transform(y), transform "none"),
whose limits are mapped back by hand: an interval [lo, hi] of z holds the fit; under
1/z it maps to [1/hi, 1/lo] when it stays on one side of the pole z = 0, and to the half-line
on the fit's side when it reaches the pole (the other side is unbounded, null, marked).
Data are invented and seeded.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from service.core import FitOptions, GridSpec, ModelSpec, TransformError, fit_series

LIMITS = (("mean_lower", "mean_upper"), ("obs_lower", "obs_upper"),
          ("band_lower", "band_upper"))


def _data(seed: int, n: int, noise: float):
    rng = np.random.default_rng(seed)
    x = np.sort(rng.uniform(1.0, 5.0, n))
    z = 0.25 - 0.05 * x + noise * rng.standard_normal(n)  # crosses small values near x = 5
    z = np.where(np.abs(z) < 1e-3, 1e-3, z)
    return x, 1.0 / z


@settings(max_examples=40, deadline=None, database=None, derandomize=True,
          suppress_health_check=list(HealthCheck))
@given(seed=st.integers(0, 2**16), n=st.integers(5, 15), noise=st.floats(0.001, 0.05),
       degree=st.integers(1, 2))
def test_reciprocal_bands_hold_the_fit_and_mark_the_pole(seed, n, noise, degree):
    x, y = _data(seed, n, noise)
    grid = GridSpec(start=0.5, stop=6.0, count=45)
    model = ModelSpec(degree=degree, transform_y="reciprocal")
    report = fit_series(x, y, model=model, options=FitOptions(grid=grid))
    plain = fit_series(x, 1.0 / y, model=ModelSpec(degree=degree), options=FitOptions(grid=grid))
    g, z = report.grid, plain.grid
    for lower, upper in LIMITS:
        lo_z, hi_z = getattr(z, lower), getattr(z, upper)
        lo, hi = getattr(g, lower), getattr(g, upper)
        crosses = (lo_z <= 0) & (hi_z >= 0)
        above, below = crosses & (z.fit > 0), crosses & (z.fit < 0)
        np.testing.assert_allclose(g.fit, 1.0 / z.fit, rtol=1e-12)
        # one side of the pole: an ordinary interval, swapped by the decreasing 1/z
        side = ~crosses
        np.testing.assert_allclose(lo[side], 1.0 / hi_z[side], rtol=1e-12)
        np.testing.assert_allclose(hi[side], 1.0 / lo_z[side], rtol=1e-12)
        # the pole reached: the half-line on the fit's side, the open end null
        np.testing.assert_allclose(lo[above], 1.0 / hi_z[above], rtol=1e-12)
        assert np.isnan(hi[above]).all() and np.isnan(lo[below]).all()
        np.testing.assert_allclose(hi[below], 1.0 / lo_z[below], rtol=1e-12)
        assert g.unbounded[crosses].all()
        # never inside out
        both = np.isfinite(lo) & np.isfinite(hi)
        assert (lo[both] <= g.fit[both]).all() and (g.fit[both] <= hi[both]).all()
    crossing_any = np.zeros(g.x.size, dtype=bool)
    for lower, upper in LIMITS:
        crossing_any |= (getattr(z, lower) <= 0) & (getattr(z, upper) >= 0)
    assert (g.unbounded == crossing_any).all()


@pytest.mark.parametrize("transform_y", ["log", "log10", "sqrt"])
def test_other_transforms_keep_ordered_finite_limits(transform_y):
    rng = np.random.default_rng(11)
    x = np.linspace(1.0, 5.0, 12)
    y = np.exp(0.3 * x) + 0.1 * rng.standard_normal(12)
    report = fit_series(x, y, model=ModelSpec(degree=2, transform_y=transform_y),
                        options=FitOptions(grid=GridSpec(count=30)))
    g = report.grid
    assert not g.unbounded.any()
    for lower, upper in LIMITS:
        assert (getattr(g, lower) <= g.fit).all() and (g.fit <= getattr(g, upper)).all()


@settings(max_examples=40, deadline=None, database=None, derandomize=True,
          suppress_health_check=list(HealthCheck))
@given(transform=st.sampled_from(["log", "log10", "sqrt", "reciprocal"]),
       form=st.sampled_from(["x", "start", "stop", "inside"]), at=st.integers(0, 4))
def test_a_grid_outside_the_transform_domain_names_the_grid(transform, form, at):
    x = np.linspace(1.0, 5.0, 8)
    y = 2.0 + 0.5 * x + np.random.default_rng(at).normal(0.0, 0.1, 8)
    outside = -1.0 if transform != "reciprocal" else 0.0
    points = [1.0, 2.0, 3.0, 4.0, 5.0]
    if form == "x":
        points[at] = outside
        grid, field = GridSpec(x=tuple(points)), f"grid.x[{at}]"
    elif form == "start":
        grid, field = GridSpec(start=outside, stop=4.0, count=5), "grid.start"
    elif form == "stop":
        grid, field = GridSpec(start=-4.0, stop=outside, count=5), "grid.stop"
        if transform == "reciprocal":
            grid = GridSpec(start=-4.0, stop=0.0, count=5)
    else:  # an inner point: only the reciprocal's pole can sit there
        if transform != "reciprocal":
            return
        grid, field = GridSpec(start=-2.0, stop=2.0, count=5), "grid"
    if form == "stop" and transform != "reciprocal":
        field = "grid.start"  # the first point outside is the start
    with pytest.raises(TransformError) as caught:
        fit_series(x, y, model=ModelSpec(degree=1, transform_x=transform),
                   options=FitOptions(grid=grid))
    assert caught.value.field == field, caught.value.message


def test_over_http_the_grid_field_is_named(client):
    answer = client.post("/v1/fit", json={"x": [1, 2, 3, 4], "y": [1, 2, 2.9, 4.2],
                                          "model": {"degree": 1, "transform_x": "log"},
                                          "grid": {"start": -1, "stop": 4, "count": 6}})
    assert answer.status_code == 422
    assert list(answer.get_json()["errors"]) == ["grid.start"]
