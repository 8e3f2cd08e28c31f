"""The batch kernel's orthonormal basis against a 30-digit QR (mpmath) as oracle.

Designs are seeded and deliberately lopsided (an outlying x, two far clusters,
cubed exponential spacing), the cases where a bare three-term recurrence
loses orthogonality, with and without weights. A float64 Householder QR of the
monomial design is no oracle here: it loses up to 1e-7 on these designs.
"""

from __future__ import annotations

import mpmath
import numpy as np
import pytest

from service.core.batch.basis import basis


def _design(kind: int, rng):
    n = int(rng.integers(10, 80))
    u = rng.uniform(0.0, 10.0, n)
    if kind == 1:
        u[rng.integers(n)] = rng.uniform(50.0, 1000.0)   # one outlying x
    elif kind == 2:
        u = np.sort(rng.exponential(1.0, n) ** 3)
    elif kind == 3:
        u = np.r_[rng.uniform(0.0, 1.0, n - 2), 100.0, 101.0]
    return u


@pytest.mark.parametrize("weighted", [False, True])
@pytest.mark.parametrize("kind", [0, 1, 2, 3])
def test_basis_is_orthonormal_and_spans_the_design_like_numpy_qr(kind, weighted):
    rng = np.random.default_rng(100 + kind + 10 * weighted)
    for _ in range(8):
        u = _design(kind, rng)
        n = u.size
        P = int(rng.integers(2, 7))
        s = np.sqrt(rng.uniform(0.1, 5.0, n)) if weighted else np.ones(n)
        t = (u - (0.5 * u.min() + 0.5 * u.max())) / (0.5 * u.max() - 0.5 * u.min())
        q, ck = np.empty((P, n)), np.zeros((P, P))
        basis(t, s, n, P, True, not weighted, q, ck)
        assert np.abs(q @ q.T - np.eye(P)).max() < 1e-13
        with mpmath.workdps(30):
            # powers formed in 30 digits from the float64 t and s (a float64 design
            # would carry rounding that these conditions amplify)
            design = mpmath.matrix([[mpmath.mpf(si) * mpmath.mpf(ti) ** k for k in range(P)]
                                    for ti, si in zip(t.tolist(), s.tolist(), strict=True)])
            ref = np.array(mpmath.qr(design)[0].tolist(), dtype=float)[:, :P]
        # same column space: the projections onto it agree
        assert np.abs(q.T @ q - ref @ ref.T).max() < 1e-12
