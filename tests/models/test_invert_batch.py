"""The batched nonlinear inversion equals the per-reading (scalar) search it replaced.

Oracles: ``CurveReader.read`` (the per-reading Brent search the service ran before the
batched path; kept as its fallback) on every reading, and ``scipy.optimize.brentq`` for
the batched Brent iteration itself. Estimates and interval ends must agree to 1e-10
relative (the scalar search's own tolerance is 4 eps relative, finer), statuses and
other roots exactly. The calibration series are seeded invented designs (demo data);
the readings cover the curve, its plateaus exactly, beyond both asymptotes, exact grid
values, and mixed replicate counts; the curves are log-x and linear-x logistic4 (one
with a zero-dose blank, one decreasing, one with no residual df: no band), logistic5
and a peak (several roots; a disjoint band set).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import optimize

from service.core import ModelSpec, fit_series
from service.core.models import curve_batch
from service.core.models.brent_batch import brent_many
from service.core.models.curve_inverse import invert_curve
from service.core.models.curve_reader import CurveReader

RTOL = 1e-10


def _logistic(x, left, right, slope, mid, g=1.0, log=True):
    z = (x / mid) ** slope if log else np.exp(slope * (x - mid))
    return right + (left - right) / (1 + (2 ** (1 / g) - 1) * z) ** g if g != 1.0 else (
        right + (left - right) / (1 + z))


def _series(name: str, rng):
    doses = np.repeat(np.geomspace(1e-2, 1e2, 9), 3)
    if name == "log4":
        x, y, spec = doses, _logistic(doses, 0.1, 2.0, 1.2, 1.0), ModelSpec(
            family="logistic4", scale="log")
    elif name == "log4_blank":  # a zero-dose blank on a log-dose logistic
        x = np.concatenate([np.zeros(3), doses])
        y, spec = _logistic(x, 0.2, 3.0, 1.5, 0.5), ModelSpec(family="logistic4", scale="log")
    elif name == "linear4":
        x = np.repeat(np.linspace(0, 10, 11), 2)
        y, spec = _logistic(x, 0.0, 4.0, 1.1, 5.0, log=False), ModelSpec(
            family="logistic4", scale="linear")
    elif name == "log5":
        x, y, spec = doses, _logistic(doses, 0.3, 2.5, 1.0, 2.0, g=0.6), ModelSpec(
            family="logistic5")
    elif name == "no_df":  # as many points as parameters: no residual df, no band
        x = np.array([0.01, 0.3, 3.0, 100.0])
        y, spec = _logistic(x, 0.1, 2.0, 1.2, 1.0), ModelSpec(family="logistic4", scale="log")
    elif name == "decreasing":
        x, y, spec = doses, _logistic(doses, 3.0, 0.4, 0.9, 3.0), ModelSpec(
            family="logistic4", scale="log")
    else:  # a peak: not monotone, two roots for most readings
        x = np.linspace(0, 10, 25)
        y, spec = 0.5 + 2.0 * np.exp(-0.5 * ((x - 5.0) / 1.5) ** 2), ModelSpec(
            family="gaussian_peak")
    y = y + rng.normal(0, 0.03, y.size)
    return fit_series(x, y, model=spec).model


def _readings(fitted, rng, count: int):
    reader = CurveReader(fitted, fitted.level)
    ends = reader.values[[0, -1]]
    lo, hi = float(np.min(reader.values)), float(np.max(reader.values))
    reach = hi - lo
    spread = rng.uniform(lo - 0.3 * reach, hi + 0.3 * reach, count)
    plateaus = [float(v) for v in fitted.estimates[:2]]  # y_left, y_right (logistics)
    exact = reader.values[rng.integers(0, reader.values.size, 6)]
    y = np.concatenate([spread, ends, plateaus, exact, [lo - 5 * reach, hi + 5 * reach]])
    return y, rng.integers(1, 5, y.size)


def _same(a: float, b: float) -> bool:
    if math.isnan(a) or math.isnan(b):
        return math.isnan(a) and math.isnan(b)
    return abs(a - b) <= RTOL * max(abs(a), abs(b), 1e-300)


@pytest.mark.parametrize("name", ["log4", "log4_blank", "linear4", "log5", "decreasing",
                                  "peak", "no_df"])
def test_batched_inversion_equals_the_scalar_search(name, monkeypatch):
    monkeypatch.setattr(curve_batch, "CHUNK", 64)  # several blocks per request
    rng = np.random.default_rng([2026, len(name)])
    fitted = _series(name, rng)
    y, m = _readings(fitted, rng, 150)
    batched = invert_curve(fitted, y, replicates=m)
    reader = CurveReader(fitted, fitted.level)
    with np.errstate(all="ignore"):
        scalar = [reader.read(float(v), int(k)) for v, k in zip(y, m, strict=True)]
    statuses = set()
    for new, old in zip(batched.estimates, scalar, strict=True):
        assert new.status == old.status, (new, old)
        assert new.replicates == old.replicates and new.y == old.y
        for field in ("x", "lower", "upper"):
            assert _same(getattr(new, field), getattr(old, field)), (field, new, old)
        assert len(new.other_roots) == len(old.other_roots)
        assert all(_same(p, q) for p, q in zip(new.other_roots, old.other_roots, strict=True))
        statuses.add(new.status)
    # the readings reach the cases they are meant to (the comparison covers them)
    if name == "peak":
        assert "not_monotone" in statuses and "multiple_roots_in_range" in statuses
    elif name == "no_df":
        assert {"interval_undefined", "no_real_root"} <= statuses
    else:  # an open lower side of a log-dose curve is cut at x = 0 (interval_at_domain_edge)
        assert {"ok", "no_real_root"} <= statuses
        assert statuses & {"interval_unbounded", "interval_at_domain_edge"}
    if name in ("log4", "log5", "decreasing"):
        assert {"outside_range", "interval_exceeds_range"} <= statuses


def test_batched_brent_takes_the_steps_of_scipys_brentq():
    # oracle: scipy.optimize.brentq with the service's tolerances, bracket by bracket
    rng = np.random.default_rng(715)
    centre, rate = rng.uniform(-3, 3, 300), rng.uniform(0.1, 5, 300)

    def fn(x, rows):
        return np.tanh(rate[rows] * (x - centre[rows])) ** 3 + 1e-3 * (x - centre[rows])

    a, b = np.full(300, -5.0), np.full(300, 5.0)
    roots, resolved = brent_many(fn, a, b)
    assert resolved.all()
    eps = np.finfo(float).eps
    for i in range(300):
        expected = optimize.brentq(lambda t, i=i: float(fn(np.array([t]), np.array([i]))[0]),
                                   -5.0, 5.0, xtol=4 * eps * 5.0, rtol=4 * eps, maxiter=200)
        assert abs(roots[i] - expected) <= RTOL * max(abs(expected), 1e-300)


def test_batched_brent_hands_back_brackets_without_a_sign_change_or_with_a_nan():
    # a bracket with no sign change gives the end nearer zero (as the scalar search);
    # one whose function turns NaN inside is left unresolved for the scalar path
    def fn(x, rows):
        out = np.where(rows == 0, x + 3.0, x - 0.25)
        return np.where((rows % 2 == 1) & (x > 0.2) & (x < 0.8), np.nan, out)

    roots, resolved = brent_many(fn, np.array([-1.0, -1.0, 0.0, 0.5]),
                                 np.array([1.0, 1.0, 1.0, 1.0]))
    assert roots[0] == -1.0 and resolved[0]
    assert not resolved[1]
    assert resolved[2] and abs(roots[2] - 0.25) <= 1e-15
    assert not resolved[3]  # NaN at an end: the scalar search decides


@pytest.mark.parametrize("name", ["log4", "decreasing"])
def test_binary_search_finds_the_grid_crossings_of_the_full_table(name):
    # oracle: the table of signs of values - y over every grid point (the general path)
    rng = np.random.default_rng([77, len(name)])
    fitted = _series(name, rng)
    values = CurveReader(fitted, fitted.level).values
    assert np.all(np.diff(values) > 0) or np.all(np.diff(values) < 0)  # the fast path
    y, _ = _readings(fitted, rng, 400)
    fast = curve_batch._grid_crossings(values, y)
    table = curve_batch._grid_crossings(values, y, table=True)
    zero_at, change_at, n_zero, n_change = (np.asarray(v) for v in fast)
    np.testing.assert_array_equal(n_zero, table[2])
    np.testing.assert_array_equal(n_change, table[3])
    np.testing.assert_array_equal(zero_at[n_zero == 1], table[0][n_zero == 1])
    np.testing.assert_array_equal(change_at[n_change == 1], table[1][n_change == 1])
    assert n_zero.sum() > 0 and n_change.sum() > 0


def test_batched_intervals_equal_the_scalar_ones_where_the_band_set_is_disjoint():
    # oracle: CurveReader._interval, the one-reading interval search. On a peak, the
    # band around the left root of a reading also contains it around the right root,
    # so the statuses include interval_disjoint (hidden by not_monotone in /v1/invert)
    rng = np.random.default_rng(3101)
    fitted = _series("peak", rng)
    reader = CurveReader(fitted, fitted.level)
    top = int(np.argmax(reader.values))
    y = rng.uniform(reader.values[0] + 0.05, reader.values[top] - 0.05, 60)
    m = rng.integers(1, 4, y.size)
    x_hat = np.array([optimize.brentq(lambda t, v=v: float(reader.f([t])[0] - v),
                                      reader.lo, float(reader.grid[top])) for v in y])
    with np.errstate(all="ignore"):
        lower, upper, status, fallback = curve_batch._intervals(reader, x_hat, y, m)
        scalar = [reader._interval(float(x), float(v), int(k))
                  for x, v, k in zip(x_hat, y, m, strict=True)]
    assert not fallback.any()
    for k, (lo, hi, st) in enumerate(scalar):
        assert status[k] == st and _same(lower[k], lo) and _same(upper[k], hi)
    assert "interval_disjoint" in set(status)
