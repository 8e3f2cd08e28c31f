"""Weights spread: right up to the supported ratio, refused beyond it naming ``weights``.

Weighted least squares is checked against an independent 60-digit solution of the normal
equations (mpmath, seeded data): up to MAX_WEIGHT_RATIO (1e16) the residual SS and every
standard error agree to 1e-8 relative. Beyond it float64 cannot see the light points'
residuals next to the rounding of the heavy ones (the hostile example, weights 1e-20 .. 1e20,
reported RSS 0 and standard errors 0 where the 80-digit answer is RSS ~5e-10); those are
refused on /v1/fit, in batches (compiled path and NDJSON) with the same 422.
"""

from __future__ import annotations

import mpmath as mp
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from service.core import DataError, ModelSpec, fit_series
from service.core.batch.driver import fit_many
from service.core.data.inputs import MAX_WEIGHT_RATIO

HOSTILE_WEIGHTS = [1e-20, 1e-10, 1.0, 1e5, 1e10, 1e20]


def _reference(x, y, w, degree):
    """RSS and coefficient standard errors from the normal equations in 60 digits (mpmath)."""
    with mp.workdps(60):
        cols = degree + 1
        xs, ys, ws = ([mp.mpf(float(v)) for v in a] for a in (x, y, w))
        gram = mp.matrix(cols, cols)
        rhs = mp.matrix(cols, 1)
        for xi, yi, wi in zip(xs, ys, ws, strict=True):
            powers = [xi**k for k in range(cols)]
            for j in range(cols):
                rhs[j] += powers[j] * wi * yi
                for k in range(cols):
                    gram[j, k] += powers[j] * wi * powers[k]
        beta = mp.lu_solve(gram, rhs)
        rss = sum(wi * (yi - sum(beta[k] * xi**k for k in range(cols)))**2
                  for xi, yi, wi in zip(xs, ys, ws, strict=True))
        covariance = mp.inverse(gram) * rss / (len(xs) - cols)
        return float(rss), [float(mp.sqrt(covariance[k, k])) for k in range(cols)]


@settings(max_examples=25, deadline=None, database=None, derandomize=True,
          suppress_health_check=list(HealthCheck))
@given(seed=st.integers(0, 2**16), n=st.integers(5, 12), degree=st.integers(1, 3),
       log_ratio=st.floats(0.0, 16.0))
def test_weighted_fits_up_to_the_supported_ratio_match_a_60_digit_reference(
        seed, n, degree, log_ratio):
    rng = np.random.default_rng(seed)
    x = np.sort(rng.uniform(0.0, 10.0, n))
    y = 1.0 + x - 0.1 * x**2 + rng.normal(0.0, 0.3, n)  # invented data
    w = 10.0 ** rng.uniform(-log_ratio / 2, log_ratio / 2, n)
    w[0], w[-1] = 10.0 ** (-log_ratio / 2), 10.0 ** (log_ratio / 2)
    rng.shuffle(w)
    report = fit_series(x, y, w, model=ModelSpec(degree=degree))
    rss, se = _reference(x, y, w, degree)
    assert report.statistics.rss == pytest.approx(rss, rel=1e-8)
    assert [c.std_error for c in report.coefficients] == pytest.approx(se, rel=1e-8)


def test_the_hostile_weights_are_refused_naming_weights_and_the_ratio():
    x = np.arange(1.0, 7.0)
    y = np.array([1.2, 1.9, 3.2, 3.8, 5.3, 5.9])
    with pytest.raises(DataError) as caught:
        fit_series(x, y, HOSTILE_WEIGHTS, model=ModelSpec(degree=3))
    assert caught.value.field == "weights"
    assert f"{MAX_WEIGHT_RATIO:.0e}" in caught.value.message


def test_batch_refuses_the_same_series_and_fits_the_others():
    rng = np.random.default_rng(7)
    x = np.tile(np.arange(1.0, 7.0), 3)
    y = x + rng.normal(0.0, 0.2, x.size)
    w = np.concatenate([np.ones(6), HOSTILE_WEIGHTS, np.logspace(-8, 8, 6)])
    result = fit_many(x, y, [6, 6, 6], w, model=ModelSpec(degree=2))
    assert result.ok.tolist() == [True, False, True]
    assert result.errors[1].field == "weights"
    _, se = _reference(x[12:], y[12:], w[12:], 2)  # the compiled path at the full ratio
    assert np.asarray(result.std_errors)[2, :3] == pytest.approx(se, rel=1e-8)


def test_over_http_fit_batch_and_stream_answer_the_same_422(client):
    body = {"x": list(range(1, 7)), "y": [1.2, 1.9, 3.2, 3.8, 5.3, 5.9],
            "weights": HOSTILE_WEIGHTS, "model": {"degree": 3}}
    answer = client.post("/v1/fit", json=body)
    assert answer.status_code == 422 and "weights" in answer.get_json()["errors"]
    answer = client.post("/v1/batch", json={"series": [body]})
    result = answer.get_json()["results"][0]
    assert result["status"] == "error" and "weights" in result["error"]["errors"]
    line = b'{"x": [1, 2, 3, 4, 5, 6], "y": [1.2, 1.9, 3.2, 3.8, 5.3, 5.9], ' \
           b'"weights": [1e-20, 1e-10, 1, 1e5, 1e10, 1e20], "model": {"degree": 3}}\n'
    answer = client.post("/v1/batch", data=line, content_type="application/x-ndjson")
    first = answer.get_data().split(b"\n")[0]
    assert b'"status":"error"' in first and b'"weights"' in first
