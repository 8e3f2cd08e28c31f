"""Seeded calibration of the trust flags: false-positive rates within their levels, power at n = 50.

The scenarios are those of ``benchmarks/bench_flag_calibration.py`` (which prints the
whole table, at more n and with more replicates): invented quadratic series with
independent normal errors on five x designs and n = 8..200, and six faults at n = 50.
Levels: the rule of ``service.core.checks.flags`` (each test at TEST_ALPHA = 0.01,
Bonferroni over five tests, so any test-based flag at most FAMILY_ALPHA = 0.05). A rate
fails when it is above the binomial upper quantile of its nominal level at 1e-4 (about
300 such checks, so a calibrated rule passes all of them with probability ~0.97; the run
is seeded, so the outcome is fixed). Power: the matching flag fires on at least 80% of
the faulty series at n = 50 (observed rate; one binomial SE at 0.9 is under 1%).
"""

from __future__ import annotations

import pytest

from benchmarks.bench_flag_calibration import (
    FAULTS,
    TESTED,
    clean_cells,
    clean_rates,
    fault_rates,
    upper_bound,
)
from service.core.checks.flags import FAMILY_ALPHA, TEST_ALPHA

REPS = 1000
SEED = 20261204


@pytest.fixture(scope="module")
def clean():
    return {label: clean_rates(design, n, degree, REPS, SEED)
            for label, design, n, degree in clean_cells()}


@pytest.mark.slow
def test_no_flag_fires_more_often_than_its_level_on_clean_series(clean):
    single, family = upper_bound(REPS, TEST_ALPHA), upper_bound(REPS, FAMILY_ALPHA)
    over = []
    for label, rates in clean.items():
        over += [(label, code, rates[code]) for code in TESTED if rates[code] > single]
        if rates["any"] > family:
            over.append((label, "any", rates["any"]))
        if rates["facts"] > 0:
            over.append((label, "facts", rates["facts"]))
    assert not over, over
    # pooled over every clean cell: a sharper bound per flag
    cells = len(clean)
    pooled = cells * REPS
    for code in TESTED:
        rate = sum(rates[code] for rates in clean.values()) / cells
        assert rate <= upper_bound(pooled, TEST_ALPHA), (code, rate)
    assert sum(r["any"] for r in clean.values()) / cells <= upper_bound(pooled, FAMILY_ALPHA)


@pytest.mark.slow
@pytest.mark.parametrize("fault", [name for name, (_, match, _) in FAULTS.items() if match])
def test_the_matching_flag_has_power_at_n_50(fault):
    match = FAULTS[fault][1]
    rates = fault_rates(fault, 50, REPS, SEED)
    assert rates[match] >= 0.80, (fault, match, rates)
