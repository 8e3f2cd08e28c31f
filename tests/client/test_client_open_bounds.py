"""Infinite bounds in the client mean "no bound", as in scipy.optimize.curve_fit.

A Python user passes ``upper={"km": np.inf}`` the way scipy takes ``bounds=(-inf, inf)``;
JSON has no infinity, so the client leaves such a bound out (the service's "no bound")
instead of refusing the request with advice to drop a data point. Oracle:
scipy.optimize.curve_fit without bounds on the same seeded demo data.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from curvewise_client import InputError
from scipy.optimize import curve_fit

RNG = np.random.default_rng(31)
S = np.array([0.5, 1.0, 2.0, 4.0, 8.0, 16.0, 32.0])
V = 12.0 * S / (3.5 + S) + RNG.normal(0.0, 0.15, S.size)


def _michaelis_menten(x, vmax, km):
    return vmax * x / (km + x)


def test_infinite_bounds_are_no_bounds(inprocess_client):
    fit = inprocess_client.fit(S, V, model={"family": "michaelis_menten",
                                            "lower": {"km": -math.inf, "vmax": 0.0},
                                            "upper": {"km": np.inf}})
    expected, _ = curve_fit(_michaelis_menten, S, V, p0=[10.0, 3.0])  # oracle: scipy
    np.testing.assert_allclose([c.estimate for c in fit.coefficients], expected, rtol=1e-5)
    assert fit.fit_info.bound_status == ("free", "free")


def test_candidates_take_infinite_bounds_too(inprocess_client):
    fit = inprocess_client.fit(S, V, model={"candidates": [
        {"family": "michaelis_menten", "upper": {"km": math.inf}},
        {"family": "power", "lower": {"exponent": -math.inf}}]})
    assert fit.comparison.chosen == "michaelis_menten"


@pytest.mark.parametrize(("side", "value"), [("lower", math.inf), ("upper", -math.inf)])
def test_an_infinite_bound_on_the_wrong_side_is_refused_naming_it(inprocess_client, side,
                                                                   value):
    with pytest.raises(InputError, match=rf"model\.{side}\.km is {value}") as err:
        inprocess_client.fit(S, V, model={"family": "michaelis_menten", side: {"km": value}})
    assert "point" not in str(err.value)


def test_the_arrow_options_take_infinite_bounds_as_none_too():
    import json
    from urllib.parse import unquote

    from curvewise_client.arrow import options_query

    query = options_query({"family": "michaelis_menten", "upper": {"km": math.inf},
                           "lower": {"vmax": 0.0}}, None)
    sent = json.loads(unquote(query.removeprefix("?options=")))
    assert sent == {"model": {"family": "michaelis_menten", "lower": {"vmax": 0.0}}}
