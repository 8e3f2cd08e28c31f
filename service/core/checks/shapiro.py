"""Shapiro-Wilk weights from scipy's routine (Royston's algorithm AS R94), cached per length.

``scipy.stats.shapiro`` wraps Royston's (1995) AS R94 routine behind a
generic array-API layer that costs far more than the test itself on short
series. Both fit paths compute W and its p-value in compiled code
(``kernels_checks``) from the weights the routine's init step gives
(:func:`royston_weights`); tests/core and tests/batch check the results
against ``scipy.stats.shapiro``. Royston's approximation is valid for
3 <= n <= 5000; outside that the test is not computed.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

try:  # scipy >= 1.11 keeps the routine here
    from scipy.stats._ansari_swilk_statistics import swilk as _swilk
except ImportError:  # pragma: no cover - older/newer scipy layout
    _swilk = None

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
