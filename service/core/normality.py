"""Shapiro-Wilk normality test of the residuals (Royston's algorithm, via scipy).

``scipy.stats.shapiro`` wraps Royston's (1995) AS R94 routine behind a
generic array-API layer that costs far more than the test itself on short
series. The routine is called directly when scipy exposes it (the result is
the same numbers; tests/core checks it against ``scipy.stats.shapiro``),
otherwise the public function is used. Royston's approximation is valid for
3 <= n <= 5000; outside that the test is not computed.
"""

from __future__ import annotations

import warnings
from functools import lru_cache

import numpy as np
from scipy import stats

from service.core.results import TestResult

try:  # scipy >= 1.11 keeps the routine here
    from scipy.stats._ansari_swilk_statistics import swilk as _swilk
except ImportError:  # pragma: no cover - older/newer scipy layout
    _swilk = None

NAN = float("nan")
MAX_N = 5000  # upper limit of Royston's approximation
NOTE = "normality of the weighted residuals (Royston's algorithm)"


@lru_cache(maxsize=512)
def royston_weights(n: int) -> np.ndarray | None:
    """Royston's weights for ``n`` points, computed once per n by scipy's routine (its init
    step; None where scipy does not expose it). Half of them: ``a[i]`` pairs the i-th
    smallest and largest order statistics.

    Passed back with ``init=1`` the routine only reads them (the batch engine builds its
    antisymmetric weight vector from the same numbers).
    """
    if _swilk is None:  # pragma: no cover - older/newer scipy layout
        return None
    a = np.zeros(n // 2)
    _swilk(np.arange(n, dtype=float), a, 0)
    return a


def shapiro_wilk(e: np.ndarray) -> TestResult:
    """Shapiro-Wilk W and p-value of ``e``; nan with a note outside 3..5000 points."""
    n = e.size
    if n < 3 or n > MAX_N:
        return TestResult("shapiro_wilk", NAN, NAN, None,
                          f"not computed: the test is defined for 3 to {MAX_N} points, got {n}")
    y = np.sort(e)
    if y[0] == y[-1]:
        return TestResult("shapiro_wilk", NAN, NAN, None, "not computed: residuals are constant")
    if _swilk is not None:
        y -= e[n // 2]  # as scipy does (gh-15777)
        w, pw, fault = _swilk(y, royston_weights(n), 1)
        if fault in (0, 2):
            return TestResult("shapiro_wilk", float(w), float(pw), None, NOTE)
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        res = stats.shapiro(e)
    return TestResult("shapiro_wilk", float(res.statistic), float(res.pvalue), None, NOTE)
