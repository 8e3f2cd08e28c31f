"""F quantiles at vanishing probabilities (a confidence level near 0) stay finite.

Oracle: mpmath's regularized incomplete beta function at 40 digits; the F distribution
function is I_{x}(dfn/2, dfd/2) with x = dfn F / (dfn F + dfd) (Abramowitz & Stegun
26.6.2), so the quantile returned for q must give back q.
"""

from __future__ import annotations

import math

import mpmath
import pytest

from service.core.checks.quantiles import f_quantile


@pytest.mark.parametrize(("dfn", "dfd", "q"), [(4, 20, 1e-300), (5, 3, 1e-200), (3, 1, 1e-120),
                                               (2, 7, 1e-300), (4, 20, 1e-17), (6, 40, 0.5)])
def test_f_quantile_gives_back_its_probability(dfn, dfd, q):
    value = f_quantile(dfn, dfd, q)
    assert math.isfinite(value) and value > 0.0
    with mpmath.workdps(40):
        x = mpmath.mpf(dfn) * value / (mpmath.mpf(dfn) * value + dfd)
        back = mpmath.betainc(mpmath.mpf(dfn) / 2, mpmath.mpf(dfd) / 2, 0, x, regularized=True)
    assert float(back / q) == pytest.approx(1.0, rel=1e-9)
