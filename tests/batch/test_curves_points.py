"""Per-point helpers of the nonlinear batch kernel (service.core.batch.curves_points).

References: numpy (``np.argsort(kind="stable")``, ``np.sort``, and the Durbin-Watson
design sums written with ``np.diff`` as in ``service.core.checks.durbin_watson
.design_traces``) and ``scipy.stats.shapiro`` (Royston's AS R94 W and p-value). Seeded,
invented data.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from service.core.batch.curves_points import (
    pool,
    read_series,
    shapiro_normals,
    shapiro_w_p,
    sort_order,
    sort_values,
    tangent_basis4,
    tangent_sums,
)
from service.core.checks.kernels import shapiro_p
from service.core.checks.shapiro_tables import shapiro_weights


@pytest.mark.parametrize("n", [1, 2, 7, 24, 65, 200])
def test_orders_and_sorts_like_numpy(n):
    rng = np.random.default_rng(n)
    u = rng.integers(0, 5, n).astype(float)              # many ties: the order must be stable
    order = np.empty(n, dtype=np.int64)
    sort_order(u, order)
    assert np.array_equal(order, np.argsort(u, kind="stable"))
    values, out = np.round(rng.normal(size=n), 1), np.empty(n)     # with ties
    sort_values(values, out)
    assert np.array_equal(out, np.sort(values))


def test_pools_replicates_like_numpy():
    rng = np.random.default_rng(3)
    u = np.repeat(np.log(np.geomspace(1e-3, 10.0, 8)), 3)[rng.permutation(24)]
    y, w = rng.normal(size=24), rng.uniform(0.5, 2.0, 24)
    order = np.argsort(u, kind="stable")
    ul, yl, swl, which = np.empty(24), np.empty(24), np.empty(24), np.empty(24, dtype=np.int64)
    k, pure = pool(u, y, w, order, ul, yl, swl, which)
    levels = np.unique(u)
    assert k == 8 and np.array_equal(ul[:k], levels)
    assert np.array_equal(levels[which], u)
    means = np.array([np.average(y[u == v], weights=w[u == v]) for v in levels])
    np.testing.assert_allclose(yl[:k], means, rtol=1e-14)
    np.testing.assert_allclose(swl[:k] ** 2, [w[u == v].sum() for v in levels], rtol=1e-14)
    np.testing.assert_allclose(pure, np.sum(w * (y - means[np.searchsorted(levels, u)]) ** 2),
                               rtol=1e-13)


@pytest.mark.parametrize(("n", "p"), [(2, 1), (3, 2), (24, 4), (100, 3)])
def test_tangent_sums_equal_the_numpy_design_sums(n, p):
    rng = np.random.default_rng(n + p)
    basis = np.linalg.qr(rng.normal(size=(n, p)))[0]       # orthonormal columns
    dq = np.diff(basis, axis=0)
    g = dq.T @ dq
    aq = np.diff(np.vstack((np.zeros((1, p)), dq, np.zeros((1, p)))), axis=0)
    want = (np.trace(g), np.sum(g * g), np.sum(aq * aq))
    got = tangent_sums(np.ascontiguousarray(basis.T), p, n, np.empty((p, p)), np.empty(p))
    np.testing.assert_allclose(got, want, rtol=1e-12)


@pytest.mark.parametrize("n", [1, 9, 24])
def test_tangent_basis4_is_the_triangular_product(n):
    # reference: numpy's matrix product (to rounding), and the kernel's general loop for
    # other p (each sum from 0.0 in the order j = 0..k, in Python floats: bit for bit)
    rng = np.random.default_rng(n)
    inv, js = np.tril(rng.normal(size=(4, 4))), rng.normal(size=(4, n))
    q = np.full((4, n + 2), np.nan)
    tangent_basis4(inv, js, q, n)
    np.testing.assert_allclose(q[:, :n], inv @ js, rtol=1e-12, atol=1e-14)
    loop = [[sum((float(inv[k, j] * js[j, i]) for j in range(k + 1)), 0.0) for i in range(n)]
            for k in range(4)]
    assert np.array_equal(q[:, :n], np.array(loop).reshape(4, n))
    assert np.isnan(q[:, n:]).all()                          # nothing past n is written


@pytest.mark.parametrize("n", [3, 10, 24, 120])
def test_shapiro_equals_scipy(n):
    e = np.random.default_rng(n).standard_t(5, size=n)
    normal = shapiro_normals(max(n, 12))[n]
    w, p = shapiro_w_p(e, shapiro_weights(n), np.empty(n), normal)
    ref = stats.shapiro(e)
    assert w == pytest.approx(ref.statistic, rel=1e-6)
    assert p == pytest.approx(ref.pvalue, rel=1e-5)
    assert p == shapiro_p(w, n)         # the table's row: the same operations, the same bits
    assert np.isnan(shapiro_w_p(np.full(n, 2.0), shapiro_weights(n), np.empty(n), normal)[0])


def test_read_series_reuses_u_at_the_same_x():
    # the u of a point at the x of the series before is kept: equal to a fresh ln x, bit for bit
    rng = np.random.default_rng(7)
    before = np.repeat(np.geomspace(1e-3, 10.0, 8), 3)
    xs = before.copy()
    xs[[4, 5, 17]] = [0.5, 0.0, 3.0]                # changed points, one at x = 0
    ys, ws = rng.normal(size=24), rng.uniform(0.5, 2.0, 24)
    u, sw = np.full(24, np.nan), np.empty(24)
    assert not read_series(before, ys, ws, True, np.empty(0), u, sw)[4]
    assert read_series(before, ys, ws, True, before, u, sw)[4]       # the same x
    *sums, same_x = read_series(xs, ys, ws, True, before, u, sw)
    assert not same_x
    with np.errstate(divide="ignore"):
        assert np.array_equal(u, np.log(xs))          # ln 0 = -inf
    assert np.array_equal(sw, np.sqrt(ws))
    assert tuple(sums) == pytest.approx((np.sum(ws * ys**2), ws.sum(), np.sum(ws * ys),
                                  np.log(ws).sum()), rel=1e-12)
    read_series(xs, ys, ws, False, before, u, sw)     # linear scale: u is x
    assert np.array_equal(u, xs)
