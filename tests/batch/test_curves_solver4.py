"""The logistic4 solver held in registers (service.core.batch.curves_solver4.solve4).

Reference: the general batch solver ``curves_solver.solve_family`` (the same
Levenberg-Marquardt/Newton steps written with scratch arrays, itself held to the single
fit by test_curves_engine.py), on seeded, invented 4PL series; and the family's curve
and exact gradient (``curves_models.evaluate``) for the values solve4 leaves behind.
"""

from __future__ import annotations

import numpy as np
import pytest

from service.core.batch.curves_models import L4_LINEAR, L4_LOG, evaluate
from service.core.batch.curves_solver import factor_and_norms, scratch_rows, solve_family
from service.core.batch.curves_solver4 import solve4

DOSES = np.geomspace(1e-3, 10.0, 8)


def pooled_series(seed: int, fid: int):
    """A falling 4PL, 8 doses x 3 replicates, pooled: (u, mean y, sqrt counts, pure SS, start)."""
    rng = np.random.default_rng(seed)
    left, right = 100.0 + rng.normal(0, 5), 5.0 + rng.normal(0, 3)
    slope, ec50 = 1.2 * np.exp(rng.normal(0, 0.25)), 0.1 * np.exp(rng.normal(0, 0.8))
    x = DOSES if fid == L4_LOG else np.linspace(0.0, 10.0, 8)
    u = np.log(x) if fid == L4_LOG else x
    centre = np.log(ec50) if fid == L4_LOG else 5.0
    curve = right + (left - right) / (1.0 + np.exp(slope * (u - centre)))
    y = curve[:, None] + rng.normal(0, 3.0, (8, 3))
    pure = float(np.sum((y - y.mean(axis=1, keepdims=True)) ** 2))
    scale = np.exp(rng.normal(0, 0.3, 4))
    start = np.array([left, right, slope * scale[2],
                      ec50 * scale[3] if fid == L4_LOG else 5.0 + rng.normal()])
    start[:2] += rng.normal(0, 4, 2)
    return u, y.mean(axis=1), np.full(8, np.sqrt(3.0)), pure, start


@pytest.mark.parametrize("fid", [L4_LOG, L4_LINEAR])
def test_solve4_takes_the_general_solvers_steps(fid):
    mats_a, mats_b = np.empty((scratch_rows(4), 4)), np.empty((scratch_rows(4), 4))
    fj = np.empty(5 * 8)
    fresh_seen = 0
    for seed in range(40):
        u, y, sw, pure, start = pooled_series(seed, fid)
        theta_a, theta_b = start.copy(), start.copy()
        general = solve_family(fid, theta_a, u, y, sw, mats_a, 200, pure, 24)
        code, rss, offset, iterations, fresh = solve4(fid, theta_b, u, y, sw, mats_b, 200,
                                                      pure, 24, fj)
        assert (code, iterations) == (general[0], general[3]), seed
        np.testing.assert_allclose([rss, offset], [general[1], general[2]], rtol=1e-12)
        np.testing.assert_allclose(theta_b, theta_a, rtol=1e-12, atol=0)
        if code > 1:                        # not converged: the factor is not read
            continue
        low_a, d_a = factor_and_norms(mats_a, 4)
        low_b, d_b = factor_and_norms(mats_b, 4)
        np.testing.assert_allclose(np.tril(low_b), np.tril(low_a), rtol=1e-12, atol=1e-15)
        np.testing.assert_allclose(d_b, d_a, rtol=1e-12)
        if fresh:                           # the curve and gradient at the estimates
            fresh_seen += 1
            f, jac = np.empty(8), np.empty((4, 8))
            assert evaluate(fid, theta_b, u, f, jac)
            np.testing.assert_allclose(fj[:8], f, rtol=1e-13)
            np.testing.assert_allclose(fj[8:].reshape(4, 8), jac, rtol=1e-12, atol=1e-14)
    assert fresh_seen >= 30                 # the usual stop leaves them fresh
