"""Seeded calibration of the shared trust flags on nonlinear fits: on clean series from
built-in curves (correct model, independent normal errors), no test-based flag fires more
often than its level allows (binomial upper quantile at 1e-4, scipy.stats.binom), and a
6 SD spike is found (`outliers`) at n = 24 on most series.

The rule is that of ``service.core.checks.flags`` (five tests at TEST_ALPHA each,
Bonferroni; FAMILY_ALPHA for any of them). For nonlinear models the tests are
approximate (residuals of a curved model are not exactly normal and independent), so
this is the check that the approximation keeps the stated rates on these designs.
Designs: an invented enzyme run (8 levels, duplicates) and an invented assay plate
(8 doses, triplicates).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from service.core import FitOptions, ModelSpec, fit_series
from service.core.checks.flags import FAMILY_ALPHA, TEST_ALPHA, TESTED

REPS = 300
OPTIONS = FitOptions(grid=None)
CASES = {
    "michaelis_menten": (np.repeat(0.25 * 2.0 ** np.arange(8), 2),
                         lambda x: 12 * x / (2.5 + x), 0.25),
    "logistic4": (np.repeat(0.1 * 3.0 ** np.arange(8), 3),
                  lambda x: 2.4 + (0.05 - 2.4) / (1 + (x / 12.0) ** 1.1), 0.04),
}


def _bound(n: int, p: float) -> float:
    return stats.binom.isf(1e-4, n, p) / n


def _rates(family: str, spike: float = 0.0, seed: int = 0) -> dict[str, float]:
    x, curve, sd = CASES[family]
    rng = np.random.default_rng(seed)
    counts = dict.fromkeys((*TESTED, "any"), 0)
    for _ in range(REPS):
        y = curve(x) + rng.normal(0.0, sd, x.size)
        if spike:
            y[x.size // 2] += spike * sd
        report = fit_series(x, y, model=ModelSpec(family=family), options=OPTIONS)
        codes = {f.code for f in report.flags if f.severity != "info"}
        for code in TESTED:
            counts[code] += code in codes
        counts["any"] += bool(codes & set(TESTED))
    return {k: v / REPS for k, v in counts.items()}


@pytest.mark.slow
@pytest.mark.parametrize("family", list(CASES))
def test_clean_nonlinear_fits_keep_the_flag_levels(family):
    rates = _rates(family, seed=20261204)
    print(f"\n{family} clean, {REPS} series: " + ", ".join(f"{k} {v:.3f}"
                                                       for k, v in rates.items()))
    for code in TESTED:
        assert rates[code] <= _bound(REPS, TEST_ALPHA), (code, rates)
    assert rates["any"] <= _bound(REPS, FAMILY_ALPHA), rates


@pytest.mark.slow
def test_a_spike_is_found_on_a_nonlinear_fit():
    rates = _rates("michaelis_menten", spike=6.0, seed=7)
    print(f"\nmichaelis_menten with a 6 SD spike: outliers {rates['outliers']:.3f}")
    assert rates["outliers"] >= 0.8
